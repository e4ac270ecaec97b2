// Each output format (text, JSON, SARIF, GitHub) on hand-made reports: contract keys, positions, cells, escaping, fixes and notes.
import { describe, expect, it } from 'vitest';
import type { Fix } from '../server/src/engine/finding';
import { formatGithub } from '../server/src/cli/format/github';
import { jsonReport } from '../server/src/cli/format/json';
import { friendlyName, relativeUri, sarifLog } from '../server/src/cli/format/sarif';
import { formatFigureValue, formatText, formatTextNotes, useColor } from '../server/src/cli/format/text';
import { formatExplain, formatRulesTable } from '../server/src/cli/rules-command';
import { cliLocation, cliRange } from '../server/src/parse/locations';
import { notebookJson, notebookReport, outcomeOf, pythonReport, TEST_RULES } from './helpers/cli-reports';

const PY = ['import torch', 'débit_σ = torch.nn.Parameter(torch.ones(3))  # 😀 gauge', 'noise = débit_σ * torch.randn(3)', ''].join('\n');

const safeFix: Fix = { title: 'Store log σ and use .exp()', safety: 'safe', edits: [] };
const reviewFix: Fix = { title: 'Use softplus', safety: 'review', edits: [] };

function pyReport() {
  const noiseLine = PY.indexOf('noise');
  return pythonReport('river/model.py', PY, [
    {
      covers: 'débit_σ',
      from: noiseLine,
      figures: [
        { label: 'initial σ', value: 1 },
        { label: 'log σ₀', value: 0.123456789, source: 'σ = exp(s)' },
      ],
      fixes: [{ ...safeFix, edits: [{ start: PY.indexOf('débit_σ', noiseLine), end: PY.indexOf('débit_σ', noiseLine) + 7, newText: 'débit_σ.exp()' }] }],
    },
    { covers: 'torch.randn(3)', rule: 'frozen-dropout-samples', severity: 'information', message: 'Samples are identical.', fixes: [reviewFix] },
    { covers: '😀 gauge', severity: 'hint', message: 'A hint after an emoji.' },
  ]);
}

const NB = notebookJson([
  { type: 'markdown', source: '# Pump bearings\n' },
  { type: 'code', source: 'import torch\n' },
  { type: 'code', source: '%matplotlib inline\nsigma = torch.ones(2)\nz = sigma * torch.randn(2)\n' },
]);

function nbReport() {
  return notebookReport('notebooks/pump.ipynb', NB, [{ covers: 'sigma', from: readSigmaUse(), severity: 'error', message: 'Raw sigma, "quoted".' }]);
}

function readSigmaUse(): number {
  // Offset of the second `sigma` in the virtual module: module text is cell 1, newline, cell 2 (magic commented).
  const moduleText = 'import torch\n\n#matplotlib inline\nsigma = torch.ones(2)\nz = sigma * torch.randn(2)\n';
  return moduleText.indexOf('z = ');
}

describe('JSON format', () => {
  const report = jsonReport(outcomeOf([nbReport(), pyReport()].sort((a, b) => (a.path < b.path ? -1 : 1)), { notes: [{ path: 'data/raw.py', level: 'warning', kind: 'skipped', message: 'binary file' }] }));

  it('has exactly the contract keys (plus figures, and cell for notebooks)', () => {
    const contract = ['rule', 'severity', 'path', 'line', 'column', 'endLine', 'endColumn', 'message', 'fixable'];
    for (const f of report.findings) {
      const keys = Object.keys(f).filter((k) => k !== 'figures' && k !== 'cell');
      expect(keys.sort()).toEqual([...contract].sort());
      expect(Array.isArray(f.figures)).toBe(true);
    }
  });

  it('gives 1-based lines and code-point columns', () => {
    const py = report.findings.filter((f) => f.path === 'river/model.py');
    expect(py.map((f) => f.severity)).toEqual(['hint', 'warning', 'info']);
    const warning = py[1]!;
    expect(warning).toMatchObject({ rule: 'trainable-scale-raw', severity: 'warning', line: 3, column: 9, endLine: 3, endColumn: 16, fixable: true });
    // The emoji is one column: "débit_σ = torch.nn.Parameter(torch.ones(3))  # " is 47 code points.
    const hint = py[0]!;
    expect(hint).toMatchObject({ line: 2, column: 48, endLine: 2, endColumn: 55 });
    expect(py.find((f) => f.rule === 'frozen-dropout-samples')).toMatchObject({ severity: 'info', fixable: false, line: 3, column: 19 });
    expect(warning.figures).toEqual([
      { label: 'initial σ', value: 1 },
      { label: 'log σ₀', value: 0.123456789, source: 'σ = exp(s)' },
    ]);
  });

  it('places notebook findings by cell index (markdown counted) and line inside the cell', () => {
    const nb = report.findings.find((f) => f.path === 'notebooks/pump.ipynb')!;
    expect(nb).toMatchObject({ cell: 2, line: 3, column: 5, endLine: 3, endColumn: 10, severity: 'error', fixable: false });
  });

  it('lists notes and a summary', () => {
    expect(report.notes).toEqual([{ path: 'data/raw.py', level: 'warning', message: 'skipped: binary file' }]);
    expect(report.summary).toEqual({ files: 2, findings: 4, bySeverity: { error: 1, warning: 1, info: 1, hint: 1 }, fixable: 1, fixed: 0 });
  });

  it('writes paths with forward slashes', () => {
    const r = pythonReport('river\\win\\model.py', 'x = 1\n', [{ covers: 'x' }]);
    expect(jsonReport(outcomeOf([r])).findings[0]!.path).toBe('river/win/model.py');
  });
});

describe('text format', () => {
  const outcome = outcomeOf([nbReport(), pyReport()], { filesChecked: 5 });

  it('prints path:line:col, severity, rule and message, then figures and a summary', () => {
    const text = formatText(outcome, { color: false });
    const lines = text.split('\n');
    expect(lines[0]).toBe('notebooks/pump.ipynb:cell 2:3:5: error [trainable-scale-raw] Raw sigma, "quoted".');
    expect(lines[1]).toBe('river/model.py:2:48: hint [trainable-scale-raw] A hint after an emoji.');
    expect(lines[2]).toBe('river/model.py:3:9: warning [trainable-scale-raw] The scale is trainable and unconstrained.');
    expect(lines[3]).toBe('    · initial σ: 1');
    expect(lines[4]).toBe('    · log σ₀: 0.123457 (σ = exp(s))');
    expect(lines[5]).toBe('river/model.py:3:19: info [frozen-dropout-samples] Samples are identical.');
    expect(lines[7]).toBe('4 findings (1 error, 1 warning, 1 info, 1 hint) in 2 files; 5 files checked; 1 can be fixed with --fix.');
    expect(text).not.toContain('\u001b[');
  });

  it('adds ANSI colour only when asked', () => {
    const text = formatText(outcome, { color: true });
    expect(text).toContain('\u001b[31;1merror\u001b[0m');
    expect(text).toContain('\u001b[33;1mwarning\u001b[0m');
  });

  it('says so when there is nothing to report, and reports fixes', () => {
    expect(formatText(outcomeOf([pythonReport('a.py', 'x = 1\n')]), { color: false })).toBe('No findings; 1 file checked.\n');
    expect(formatText(outcomeOf([]), { color: false })).toBe('No Python files or notebooks were checked.\n');
    const fixed = formatText(outcomeOf([pythonReport('a.py', 'x = 1\n')], { fixMode: 'fix', fixesApplied: 3, filesFixed: 2 }), { color: false });
    expect(fixed).toBe('Fixed 3 findings in 2 files.\nNo findings remain; 1 file checked.\n');
    const diff = formatText(outcomeOf([pythonReport('a.py', 'x = 1\n', [{ covers: 'x' }])], { fixMode: 'diff', fixesApplied: 1, filesFixed: 1 }), { color: false });
    expect(diff).toContain('Would fix 1 finding in 1 file (nothing was written).');
    expect(diff).toContain('1 finding would remain (1 warning) in 1 file; 1 file checked.');
  });

  it('prints notes as path: kind: message', () => {
    expect(
      formatTextNotes([
        { path: 'a/b.py', level: 'warning', kind: 'skipped', message: 'binary file (it contains NUL bytes)' },
        { path: 'c.py', level: 'warning', kind: 'encoding', message: 'not valid UTF-8' },
      ]),
    ).toBe('a/b.py: skipped: binary file (it contains NUL bytes)\nc.py: encoding: not valid UTF-8\n');
  });

  it('colours only a terminal without NO_COLOR and without --no-color', () => {
    expect(useColor({ isTTY: true, env: {}, noColorFlag: false })).toBe(true);
    expect(useColor({ isTTY: true, env: { NO_COLOR: '' }, noColorFlag: false })).toBe(true);
    expect(useColor({ isTTY: true, env: { NO_COLOR: '1' }, noColorFlag: false })).toBe(false);
    expect(useColor({ isTTY: false, env: {}, noColorFlag: false })).toBe(false);
    expect(useColor({ isTTY: true, env: {}, noColorFlag: true })).toBe(false);
  });

  it('formats figure values for reading', () => {
    expect(formatFigureValue(60000)).toBe('60000');
    expect(formatFigureValue(1 / 3)).toBe('0.333333');
    expect(formatFigureValue('×60 000')).toBe('×60 000');
    expect(formatFigureValue(Number.POSITIVE_INFINITY)).toBe('Infinity');
  });
});

describe('GitHub format', () => {
  it('writes one workflow command per finding with escaped properties and message', () => {
    const text = 'x = sigma\n';
    const r = pythonReport('odd,dir/a:b.py', text, [{ covers: 'sigma', message: '100% wrong\nsecond line', severity: 'error' }]);
    expect(formatGithub(outcomeOf([r]))).toBe('::error file=odd%2Cdir/a%3Ab.py,line=1,col=5,endLine=1,endColumn=10,title=noisewise trainable-scale-raw::100%25 wrong%0Asecond line\n');
  });

  it('maps warning to warning and info/hint to notice, and puts notebook positions in the message', () => {
    const out = formatGithub(outcomeOf([nbReport(), pyReport()], { notes: [{ path: 'big.py', level: 'warning', kind: 'skipped', message: 'larger than 10 MB' }, { path: 'x.py', level: 'info', kind: 'syntax', message: 'syntax error' }] }));
    const lines = out.trimEnd().split('\n');
    expect(lines[0]).toBe('::error file=notebooks/pump.ipynb,title=noisewise trainable-scale-raw::cell 2, line 3, column 5: Raw sigma, "quoted".');
    expect(lines.filter((l) => l.startsWith('::notice file=river/model.py,line='))).toHaveLength(2);
    expect(lines.filter((l) => l.startsWith('::warning file=river/model.py,line=3,col=9,'))).toHaveLength(1);
    expect(lines).toContain('::warning file=big.py,title=noisewise::skipped: larger than 10 MB');
    expect(lines).toContain('::notice file=x.py,title=noisewise::syntax error');
  });

  it('prints nothing when there is nothing to say', () => {
    expect(formatGithub(outcomeOf([pythonReport('a.py', 'x = 1\n')]))).toBe('');
  });
});

describe('SARIF format', () => {
  type Json = Record<string, any>;
  const py = pyReport();
  const nbText = notebookJson([
    { type: 'markdown', source: '# Soil moisture\n' },
    { type: 'code', source: 'sigma = pyro.param("sigma", torch.ones(1))\ny = sigma * eps\n' },
  ]);
  const nb = notebookReport('notebooks/soil.ipynb', nbText, [{ covers: 'sigma', from: 40, severity: 'warning' }]);
  const use = nb.findings[0]!.start;
  nb.findings[0]!.fixes = [{ title: 'exp', safety: 'safe', edits: [{ start: use, end: use + 5, newText: 'sigma.exp()' }] }];
  nb.findings[0]!.related = [{ start: nb.text.indexOf('sigma'), end: nb.text.indexOf('sigma') + 5, message: 'declared here' }];
  const outcome = outcomeOf([nb, py], {
    notes: [{ path: 'weird name/x.py', level: 'warning', kind: 'skipped', message: 'binary file' }],
    cwd: '/srv/gauge-lab',
  });
  const log = sarifLog(outcome) as Json;
  const run = log.runs[0] as Json;

  it('declares the schema, the version, the tool and the column unit', () => {
    expect(log.$schema).toMatch(/sarif-2\.1\.0/);
    expect(log.version).toBe('2.1.0');
    expect(run.tool.driver.name).toBe('noisewise');
    expect(run.tool.driver.version).toBe('0.1.0');
    expect(run.columnKind).toBe('unicodeCodePoints');
    expect(run.originalUriBaseIds).toEqual({ '%SRCROOT%': { uri: 'file:///srv/gauge-lab/' } });
  });

  it('lists the rules with descriptions, help and default levels', () => {
    const rules = run.tool.driver.rules as Json[];
    expect(rules.map((r) => r.id)).toEqual(['trainable-scale-raw', 'frozen-dropout-samples']);
    expect(rules[0]).toMatchObject({
      name: 'TrainableScaleRaw',
      shortDescription: { text: 'A trainable scale used without a positivity transform' },
      helpUri: expect.stringMatching(/docs\/rules\/trainable-scale-raw\.md$/),
      defaultConfiguration: { level: 'warning' },
    });
    expect(rules[0]!.help.markdown).toBe(TEST_RULES[0]!.doc);
    expect(rules[1]!.defaultConfiguration.level).toBe('note');
  });

  it('gives each result its rule index, level, message and region', () => {
    const results = run.results as Json[];
    expect(results).toHaveLength(4);
    const warning = results.find((r) => r.locations[0].physicalLocation.artifactLocation.uri === 'river/model.py' && r.level === 'warning')!;
    expect(warning).toMatchObject({
      ruleId: 'trainable-scale-raw',
      ruleIndex: 0,
      message: { text: 'The scale is trainable and unconstrained.' },
      locations: [{ physicalLocation: { artifactLocation: { uri: 'river/model.py', uriBaseId: '%SRCROOT%' }, region: { startLine: 3, startColumn: 9, endLine: 3, endColumn: 16 } } }],
    });
    expect(warning.properties.figures).toHaveLength(2);
    expect(results.filter((r) => r.level === 'note')).toHaveLength(2);
    expect(results.find((r) => r.ruleId === 'frozen-dropout-samples')!.ruleIndex).toBe(1);
  });

  it('turns a Python fix into a line/column replacement', () => {
    const warning = (run.results as Json[]).find((r) => r.ruleId === 'trainable-scale-raw' && r.level === 'warning' && r.locations[0].physicalLocation.artifactLocation.uri === 'river/model.py')!;
    expect(warning.fixes).toEqual([
      {
        description: { text: 'Store log σ and use .exp()' },
        artifactChanges: [
          {
            artifactLocation: { uri: 'river/model.py', uriBaseId: '%SRCROOT%' },
            replacements: [{ deletedRegion: { startLine: 3, startColumn: 9, endLine: 3, endColumn: 16 }, insertedContent: { text: 'débit_σ.exp()' } }],
          },
        ],
        properties: { safety: 'safe' },
      },
    ]);
  });

  it('describes notebook results inside the cell and expresses their fixes against the .ipynb text', () => {
    const result = (run.results as Json[]).find((r) => r.locations[0].physicalLocation.artifactLocation.uri === 'notebooks/soil.ipynb')!;
    expect(result.properties.cell).toBe(1);
    expect(result.locations[0].physicalLocation.region).toEqual({ startLine: 2, startColumn: 5, endLine: 2, endColumn: 10 });
    expect(result.relatedLocations).toEqual([
      {
        id: 1,
        message: { text: 'declared here' },
        physicalLocation: { artifactLocation: { uri: 'notebooks/soil.ipynb', uriBaseId: '%SRCROOT%' }, region: { startLine: 1, startColumn: 1, endLine: 1, endColumn: 6 } },
        properties: { cell: 1 },
      },
    ]);
    const replacement = result.fixes[0].artifactChanges[0].replacements[0];
    const { charOffset, charLength } = replacement.deletedRegion;
    const chars = [...nbText];
    const applied = chars.slice(0, charOffset).join('') + replacement.insertedContent.text + chars.slice(charOffset + charLength).join('');
    expect(JSON.parse(applied).cells[1].source).toEqual(['sigma = pyro.param("sigma", torch.ones(1))\n', 'y = sigma.exp() * eps\n']);
    expect(JSON.parse(applied).cells[0]).toEqual(JSON.parse(nbText).cells[0]);
  });

  it('reports notes as tool execution notifications with encoded URIs', () => {
    const invocation = run.invocations[0];
    expect(invocation.executionSuccessful).toBe(true);
    expect(invocation.toolExecutionNotifications).toEqual([
      {
        level: 'warning',
        message: { text: 'weird name/x.py: skipped: binary file' },
        locations: [{ physicalLocation: { artifactLocation: { uri: 'weird%20name/x.py', uriBaseId: '%SRCROOT%' } } }],
        properties: { kind: 'skipped' },
      },
    ]);
  });

  it('leaves out a fix whose other file was not checked', () => {
    const r = pythonReport('a.py', 'x = s\n', [{ covers: 's', fixes: [{ title: 't', safety: 'safe', edits: [{ path: 'missing.py', start: 0, end: 1, newText: 'y' }] }] }]);
    const result = (sarifLog(outcomeOf([r])) as Json).runs[0].results[0];
    expect(result.fixes).toBeUndefined();
  });

  it('encodes relative URIs and friendly names', () => {
    expect(relativeUri('../up/a b#c.py')).toBe('../up/a%20b%23c.py');
    expect(friendlyName('kl-weight-scale')).toBe('KlWeightScale');
  });
});

describe('rules and explain', () => {
  it('prints an aligned table sorted by id with info for information', () => {
    const table = formatRulesTable(TEST_RULES, { color: false });
    const lines = table.split('\n');
    expect(lines[0]).toMatch(/^RULE\s+FAMILY\s+SEVERITY\s+FIX\s+TITLE$/);
    expect(lines[1]).toMatch(/^frozen-dropout-samples\s+mc-dropout\s+info\s+none\s+MC samples drawn with dropout switched off$/);
    expect(lines[2]).toMatch(/^trainable-scale-raw\s+variational\s+warning\s+always\s+A trainable scale/);
    expect(lines[1]!.indexOf('mc-dropout')).toBe(lines[2]!.indexOf('variational'));
  });

  it('prints the page as written, with bold headings only in colour', () => {
    expect(formatExplain(TEST_RULES[0]!, { color: false })).toBe(TEST_RULES[0]!.doc);
    expect(formatExplain(TEST_RULES[0]!, { color: true })).toContain('\u001b[1m## What it catches\u001b[22m');
  });
});

describe('cliLocation and cliRange', () => {
  it('count code points on the line of a Python file', () => {
    const r = pythonReport('a.py', 'x = "😀é"; sd = 1\r\ny = sd\n');
    expect(cliLocation(r, r.text.indexOf('sd'))).toEqual({ line: 1, column: 11 });
    expect(cliRange(r, r.text.indexOf('y'), r.text.length)).toEqual({ line: 2, column: 1, endLine: 3, endColumn: 1 });
  });

  it('count lines inside the cell of a notebook and give the cell index', () => {
    const raw = notebookJson([
      { type: 'markdown', source: '# Title\n' },
      { type: 'code', source: 'a = 1\n' },
      { type: 'markdown', source: 'More\n' },
      { type: 'code', source: 'import torch\nσ = torch.ones(1)\nz = σ * 2\n' },
    ]);
    const r = notebookReport('n.ipynb', raw);
    const at = r.text.lastIndexOf('σ');
    expect(cliLocation(r, at)).toEqual({ line: 3, column: 5, cell: 3 });
    expect(cliLocation(r, 0)).toEqual({ line: 1, column: 1, cell: 1 });
    expect(cliRange(r, at, at + 1)).toEqual({ line: 3, column: 5, endLine: 3, endColumn: 6, cell: 3 });
  });

  it('clamp a notebook range that runs past its cell to the end of that cell', () => {
    const raw = notebookJson([
      { type: 'code', source: 'a = 1\n' },
      { type: 'code', source: 'b = 2\n' },
    ]);
    const r = notebookReport('n.ipynb', raw);
    expect(cliRange(r, 0, r.text.length)).toEqual({ line: 1, column: 1, endLine: 2, endColumn: 1, cell: 0 });
  });
});
