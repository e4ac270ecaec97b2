// The SARIF output is checked by two outside judges: the official SARIF 2.1.0 JSON schema (ajv) and the SARIF SDK's
// own validator (Sarif.Multitool validate), on hand-made reports and on real CLI runs; broken logs prove both judges bite.
import { spawnSync } from 'node:child_process';
import * as fs from 'node:fs';
import * as os from 'node:os';
import * as path from 'node:path';
import Ajv2020 from 'ajv/dist/2020';
import addFormats from 'ajv-formats';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { sarifLog } from '../server/src/cli/format/sarif';
import { notebookJson, notebookReport, outcomeOf, pythonReport } from './helpers/cli-reports';
import { addMessyBinaries, copyFixture, REPO, removeCopy, requireBundle, runNoisewise } from './helpers/cli-run';

const PACKAGE_DIR = path.join(REPO, 'node_modules', '@microsoft', 'sarif-multitool-linux');
const SCHEMA_PATH = path.join(PACKAGE_DIR, 'sarif-2.1.0.json');
const MULTITOOL = path.join(PACKAGE_DIR, 'Sarif.Multitool');

const work = fs.mkdtempSync(path.join(os.tmpdir(), 'noisewise-sarif-'));
const copies: string[] = [];
afterAll(() => {
  fs.rmSync(work, { recursive: true, force: true });
  for (const copy of copies) removeCopy(copy);
});

const ajv = new Ajv2020({ allErrors: true, strict: false });
addFormats(ajv);
const validateSchema = ajv.compile(JSON.parse(fs.readFileSync(SCHEMA_PATH, 'utf8')));

function schemaErrors(log: unknown): string[] {
  if (validateSchema(log)) return [];
  return (validateSchema.errors ?? []).map((e) => `${e.instancePath} ${e.message}`);
}

interface MultitoolResult {
  ruleId: string;
  level?: string;
  message: { id?: string; text?: string; arguments?: string[] };
}

/**
 * Runs `Sarif.Multitool validate` once on several logs (one process start is most of its cost) and returns what it
 * reported for each, split into errors and warnings.
 */
function multitool(logs: Record<string, unknown>): Record<string, { errors: MultitoolResult[]; warnings: MultitoolResult[] }> {
  const inputs = Object.entries(logs).map(([name, log]) => {
    const file = path.join(work, `${name}.sarif`);
    fs.writeFileSync(file, JSON.stringify(log, null, 2));
    return { name, file };
  });
  const output = path.join(work, 'validation.sarif');
  const run = spawnSync(MULTITOOL, ['validate', ...inputs.map((i) => i.file), '--output', output, '--log', 'ForceOverwrite', '--level', 'Error;Warning;Note'], {
    env: { ...process.env, DOTNET_SYSTEM_GLOBALIZATION_INVARIANT: '1', DOTNET_CLI_TELEMETRY_OPTOUT: '1' },
    encoding: 'utf8',
    timeout: 60_000,
  });
  if (run.error) throw run.error;
  expect(run.status, run.stdout + run.stderr).toBe(0);
  const validation = JSON.parse(fs.readFileSync(output, 'utf8'));
  expect(validation.runs[0].invocations[0].executionSuccessful).toBe(true);
  const all = (validation.runs[0].results ?? []) as (MultitoolResult & { locations?: { physicalLocation?: { artifactLocation?: { uri?: string } } }[] })[];
  const out: Record<string, { errors: MultitoolResult[]; warnings: MultitoolResult[] }> = {};
  for (const { name, file } of inputs) {
    const mine = all.filter((r) => decodeURIComponent(r.locations?.[0]?.physicalLocation?.artifactLocation?.uri ?? '').endsWith(file));
    // Notes (such as the advice to record version-control provenance) always come back: none at all means the log was not read.
    expect(mine.length, `no validation results for ${name}`).toBeGreaterThan(0);
    out[name] = { errors: mine.filter((r) => r.level === 'error'), warnings: mine.filter((r) => (r.level ?? 'warning') === 'warning') };
  }
  return out;
}

function describeResults(results: MultitoolResult[]): string {
  return results.map((r) => `${r.ruleId} ${r.message.id ?? ''} ${(r.message.arguments ?? []).join(' | ')}`).join('\n');
}

/** A log built from hand-made reports that uses every part of our SARIF: notebook cells, fixes, related locations, notes. */
function handMadeLog(): unknown {
  const pyText = 'import torch\nsd = torch.nn.Parameter(torch.ones(1))  # débit 😀\ny = sd * torch.randn(1)\n';
  const use = pyText.indexOf('sd *');
  const py = pythonReport('river/stage.py', pyText, [
    {
      covers: 'sd',
      from: use,
      figures: [{ label: 'initial σ', value: 1 }],
      fixes: [{ title: 'Use exp', safety: 'safe', edits: [{ start: use, end: use + 2, newText: 'sd.exp()' }] }],
      related: [{ start: pyText.indexOf('sd ='), end: pyText.indexOf('sd =') + 2, message: 'declared here' }],
    },
    { covers: 'torch.randn(1)', severity: 'hint', rule: 'frozen-dropout-samples', message: 'A hint.' },
  ]);
  const nbText = notebookJson([
    { type: 'markdown', source: '# Leaf spectra\n' },
    { type: 'code', source: '%matplotlib inline\nscale = tf.Variable(1.0)\ny = scale * z\n' },
  ]);
  const nb = notebookReport('notebooks/leaf.ipynb', nbText, [{ covers: 'scale', from: '#matplotlib inline\nscale = tf.Variable(1.0)\n'.length, severity: 'error' }]);
  const at = nb.findings[0]!.start;
  nb.findings[0]!.fixes = [{ title: 'Use exp', safety: 'safe', edits: [{ start: at, end: at + 5, newText: 'tf.exp(scale)' }] }];
  return sarifLog(
    outcomeOf([nb, py], {
      notes: [
        { path: 'data/blob.py', level: 'warning', kind: 'skipped', message: 'binary file (it contains NUL bytes)' },
        { path: 'old/latin.py', level: 'info', kind: 'syntax', message: 'one syntax error' },
      ],
      cwd: '/srv/river lab',
    }),
  );
}

const logs: Record<string, Record<string, any>> = {};
let verdicts: ReturnType<typeof multitool>;

beforeAll(() => {
  requireBundle();
  logs.handMade = handMadeLog() as Record<string, any>;
  const lab = copyFixture('gauge-lab');
  const messy = copyFixture('messy');
  addMessyBinaries(messy);
  copies.push(lab, messy);
  const labRun = runNoisewise(['check', '--rule', 'unconstrained-std', '--format', 'sarif'], lab);
  expect(labRun.code).toBe(1);
  logs.lab = JSON.parse(labRun.stdout);
  logs.messy = JSON.parse(runNoisewise(['check', '--rule', 'unconstrained-std', '--format', 'sarif'], messy).stdout);
  const broken = JSON.parse(JSON.stringify(logs.handMade));
  broken.runs[0].results[0].locations[0].physicalLocation.region.startLine = 0;
  broken.runs[0].results[0].ruleIndex = 99;
  logs.broken = broken;
  verdicts = multitool(logs);
});

describe('SARIF of hand-made reports', () => {
  it('matches the SARIF 2.1.0 JSON schema', () => {
    expect(schemaErrors(logs.handMade)).toEqual([]);
  });

  it('passes the SARIF SDK validator with no errors or warnings', () => {
    expect(describeResults(verdicts.handMade!.errors)).toBe('');
    expect(describeResults(verdicts.handMade!.warnings)).toBe('');
  });
});

describe('SARIF of real CLI runs', () => {
  it('is valid for a lab with Python files and a notebook, fixes included', () => {
    const log = logs.lab!;
    expect(log.runs[0].results.length).toBeGreaterThan(0);
    expect(log.runs[0].results.some((r: { fixes?: unknown[] }) => (r.fixes ?? []).length > 0)).toBe(true);
    expect(log.runs[0].results.some((r: { properties: { cell?: number } }) => r.properties.cell !== undefined)).toBe(true);
    expect(schemaErrors(log)).toEqual([]);
    expect(describeResults(verdicts.lab!.errors)).toBe('');
    expect(describeResults(verdicts.lab!.warnings)).toBe('');
  });

  it('is valid for a folder with skipped and damaged files', () => {
    const log = logs.messy!;
    expect(log.runs[0].invocations[0].toolExecutionNotifications.length).toBeGreaterThan(0);
    expect(schemaErrors(log)).toEqual([]);
    expect(describeResults(verdicts.messy!.errors)).toBe('');
  });
});

describe('the judges are not lenient', () => {
  it('both reject a log with a zero line and an out-of-range rule index', () => {
    expect(schemaErrors(logs.broken).join('\n')).toMatch(/startLine must be >= 1/);
    expect(verdicts.broken!.errors.map((e) => e.ruleId)).toEqual(expect.arrayContaining(['SARIF1007']));
  });
});
