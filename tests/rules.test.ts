// The data-driven rule harness: for every registered rule, its flagged cases must match their inline markers
// exactly, its clean cases must stay quiet, its fix cases must produce the expected output that re-parses (here
// and under CPython's ast), re-checks quiet and converges, its page must be complete, and its golden current.
import { execFileSync } from 'node:child_process';
import * as fs from 'node:fs';
import * as os from 'node:os';
import * as path from 'node:path';
import { describe, expect, it } from 'vitest';
import { allRules } from '../rules/index';
import { getParser } from '../server/src/engine/check';
import { pageSections, pythonBlocks, RULE_PAGE_HEADINGS } from '../server/src/engine/docs';
import type { Finding } from '../server/src/engine/finding';
import type { FileReport } from '../server/src/engine/types';
import { PythonDocument } from '../server/src/parse/document';
import { readNotebook } from '../server/src/parse/notebook';
import { LineIndex } from '../server/src/parse/positions';
import { applyFixes, checkPath, checkTexts } from './helpers/engine';

const rulesDir = path.resolve(__dirname, '..', 'rules');
const updateGolden = process.env.NOISEWISE_UPDATE_GOLDEN === '1';
/** Every fixed text produced by any fix case, checked by CPython's ast at the end. */
const fixedOutputs: { label: string; text: string; notebook: boolean }[] = [];

interface Expectation {
  path: string;
  line: number;
  rule: string;
  columns?: [number, number];
}

/** Reads `# expect[rule]` line markers and `#   ^^^ expect[rule]` caret markers from an analysed text. */
function expectations(report: FileReport): Expectation[] {
  const out: Expectation[] = [];
  const lines = report.text.split(/\r?\n/);
  let lastCode = -1;
  lines.forEach((line, i) => {
    const caret = /^(\s*#\s*)(\^+)\s+expect\[([\w-]+)\]\s*$/.exec(line);
    if (caret) {
      const start = caret[1]!.length;
      out.push({ path: report.path, line: lastCode, rule: caret[3]!, columns: [start, start + caret[2]!.length] });
      return;
    }
    lastCode = i;
    for (const m of line.matchAll(/#.*?\bexpect\[([\w-]+)\]/g)) out.push({ path: report.path, line: i, rule: m[1]! });
  });
  return out;
}

function actual(report: FileReport, rule: string): { key: string; finding: Finding; line: number; columns: [number, number] }[] {
  const index = new LineIndex(report.text);
  return report.findings
    .filter((f) => f.rule === rule)
    .map((finding) => {
      const start = index.toLsp(finding.start);
      const end = index.toLsp(finding.end);
      return { key: `${report.path}:${start.line + 1}:${rule}`, finding, line: start.line, columns: [start.character, end.line === start.line ? end.character : Number.POSITIVE_INFINITY] as [number, number] };
    });
}

function caseEntries(ruleId: string): string[] {
  const dir = path.join(rulesDir, ruleId, 'cases');
  if (!fs.existsSync(dir)) return [];
  return fs
    .readdirSync(dir)
    .filter((name) => !/\.fixed(\.\d+)?(\.(py|ipynb))?$/.test(name) && (/\.(py|ipynb)$/.test(name) || fs.statSync(path.join(dir, name)).isDirectory()))
    .sort();
}

function renderGolden(reports: FileReport[], rule: string): string {
  const lines: string[] = [];
  for (const report of reports) {
    for (const a of actual(report, rule)) {
      lines.push(`${report.path}:${a.line + 1}:${a.columns[0] + 1} [${a.finding.messageId}] ${a.finding.message}`);
      for (const f of a.finding.figures) lines.push(`    figure: ${f.label} = ${f.value}${f.source ? ` (${f.source})` : ''}`);
      for (const f of a.finding.fixes) lines.push(`    fix (${f.safety}): ${f.title}`);
    }
  }
  return lines.join('\n');
}

function readTree(target: string): Map<string, string> {
  const out = new Map<string, string>();
  if (fs.statSync(target).isFile()) out.set(path.basename(target), fs.readFileSync(target, 'utf8'));
  else {
    const walk = (dir: string) => {
      for (const name of fs.readdirSync(dir).sort()) {
        const full = path.join(dir, name);
        if (fs.statSync(full).isDirectory()) walk(full);
        else out.set(path.relative(target, full).split(path.sep).join('/'), fs.readFileSync(full, 'utf8'));
      }
    };
    walk(target);
  }
  return out;
}

describe('rule registry', () => {
  it('has exactly one registered rule per rules/ folder, sorted by id', () => {
    const folders = fs
      .readdirSync(rulesDir)
      .filter((n) => fs.statSync(path.join(rulesDir, n)).isDirectory())
      .sort();
    const ids = allRules.map((r) => r.meta.id);
    expect(ids).toEqual(folders);
    expect([...ids].sort()).toEqual(ids);
  });
});

for (const rule of allRules) {
  const id = rule.meta.id;
  describe(`rule ${id}`, () => {
    const entries = caseEntries(id);
    const goldenParts: string[] = [];

    it('has flagged and clean cases', () => {
      expect(entries.some((e) => e.startsWith('flagged'))).toBe(true);
      expect(entries.some((e) => e.startsWith('clean'))).toBe(true);
    });

    for (const entry of entries.filter((e) => e.startsWith('flagged') || e.startsWith('clean'))) {
      it(`${entry}: findings match the markers exactly`, async () => {
        const target = path.join(rulesDir, id, 'cases', entry);
        const reports = await checkPath(target, { only: [id] });
        const expected = reports.flatMap(expectations).filter((e) => e.rule === id);
        const got = reports.flatMap((r) => actual(r, id));
        expect(got.map((g) => g.key).sort()).toEqual(expected.map((e) => `${e.path}:${e.line + 1}:${e.rule}`).sort());
        for (const e of expected.filter((x) => x.columns)) {
          const match = got.find((g) => g.key === `${e.path}:${e.line + 1}:${e.rule}`);
          expect(match?.columns, `${e.path}:${e.line + 1} columns`).toEqual(e.columns);
        }
        if (entry.startsWith('clean')) expect(got).toEqual([]);
        else expect(got.length).toBeGreaterThan(0);
        for (const r of reports) expect(r.notes.filter((n) => n.kind === 'internal')).toEqual([]);
        goldenParts.push(renderGolden(reports, id));
      });
    }

    for (const entry of entries.filter((e) => e.startsWith('fix-'))) {
      const base = entry.replace(/\.(py|ipynb)$/, '');
      const ext = entry.match(/\.(py|ipynb)$/)?.[0] ?? '';
      const dir = path.join(rulesDir, id, 'cases');
      const expectedFiles = fs.readdirSync(dir).filter((n) => n.startsWith(`${base}.fixed`) && n.endsWith(ext) && (ext !== '' || fs.statSync(path.join(dir, n)).isDirectory()));
      for (const expectedName of expectedFiles) {
        const which = Number(/\.fixed\.(\d+)/.exec(expectedName)?.[1] ?? '1') - 1;
        it(`${entry} → ${expectedName}: fix ${which + 1} gives the expected output, re-checks quiet and converges`, async () => {
          const target = path.join(dir, entry);
          const isDir = fs.statSync(target).isDirectory();
          const reports = await checkPath(target, { only: [id] });
          const got = reports.flatMap((r) => actual(r, id));
          expect(got.length).toBeGreaterThan(0);
          for (const g of got) expect(g.finding.fixes.length, `${g.key} offers a fix`).toBeGreaterThan(which);
          const fixed = applyFixes(reports, (f) => (f.rule === id ? f.fixes[which] : undefined));
          const before = readTree(target);
          const after = new Map(before);
          for (const [p, text] of fixed) after.set(isDir ? p : path.basename(target), text);
          const expectedTree = readTree(path.join(dir, expectedName));
          const renamed = isDir ? after : new Map([[path.basename(path.join(dir, expectedName)), after.get(path.basename(target))!]]);
          expect(Object.fromEntries(renamed)).toEqual(Object.fromEntries(expectedTree));
          // Re-parse: no new syntax errors; collect for CPython.
          const parser = await getParser();
          for (const [p, text] of after) {
            const isNotebook = p.endsWith('.ipynb');
            const python = isNotebook ? readNotebook(text).text : text;
            const beforeText = before.get(p)!;
            const beforeErrors = PythonDocument.parse(parser, isNotebook ? readNotebook(beforeText).text : beforeText).syntax.errors.length;
            expect(PythonDocument.parse(parser, python).syntax.errors.length, `${p} parses after the fix`).toBeLessThanOrEqual(beforeErrors);
            if (fixed.has(p) || fixed.has(path.basename(target))) fixedOutputs.push({ label: `${id}/${expectedName}/${p}`, text: python, notebook: isNotebook });
          }
          // Re-check the fixed workspace: the rule's findings addressed by the fix are gone.
          const recheck = await checkTexts(Object.fromEntries(after), [id]);
          expect(recheck.flatMap((r) => actual(r, id)).map((a) => a.key)).toEqual([]);
          // Applying again changes nothing (convergence within one more round).
          const again = applyFixes(recheck, (f) => (f.rule === id ? f.fixes[which] : undefined));
          expect(again.size).toBe(0);
          if (which === 0) goldenParts.push(renderGolden(reports, id));
        });
      }
    }

    it('declares fix availability that matches what it offers', async () => {
      const reports = (await Promise.all(entries.filter((e) => !e.startsWith('clean')).map((e) => checkPath(path.join(rulesDir, id, 'cases', e), { only: [id] })))).flat();
      const findings = reports.flatMap((r) => r.findings.filter((f) => f.rule === id));
      const withFix = findings.filter((f) => f.fixes.length > 0).length;
      if (rule.meta.fix === 'none') expect(withFix).toBe(0);
      if (rule.meta.fix === 'always') expect(withFix).toBe(findings.length);
      if (rule.meta.fix === 'sometimes') expect(withFix).toBeGreaterThan(0);
      for (const f of findings) for (const x of f.fixes) expect(x.title.length).toBeGreaterThan(0);
    });

    it('has a complete rule page whose examples behave as labelled', async () => {
      const firstLine = rule.doc.split('\n')[0];
      expect(firstLine).toBe(`# ${id}: ${rule.meta.title}`);
      const sections = pageSections(rule.doc);
      expect([...sections.keys()]).toEqual(RULE_PAGE_HEADINGS);
      for (const [name, expectFindings] of [
        ['Flagged', true],
        ['Preferred', false],
      ] as const) {
        for (const block of pythonBlocks(sections.get(name)!)) {
          const reports = await checkTexts({ 'example.py': block }, [id]);
          const n = reports[0]!.findings.filter((f) => f.rule === id).length;
          if (expectFindings) expect(n, `${name} example is flagged`).toBeGreaterThan(0);
          else expect(n, `${name} example is quiet`).toBe(0);
        }
      }
    });

    it('matches its findings.golden (NOISEWISE_UPDATE_GOLDEN=1 rewrites it)', () => {
      const file = path.join(rulesDir, id, 'findings.golden');
      const text = goldenParts.filter(Boolean).join('\n') + '\n';
      if (updateGolden || !fs.existsSync(file)) fs.writeFileSync(file, text);
      expect(text).toBe(fs.readFileSync(file, 'utf8'));
    });
  });
}

describe('fixed code under CPython', () => {
  it('every fixed output parses with CPython ast', () => {
    expect(fixedOutputs.length).toBeGreaterThan(0);
    const dir = fs.mkdtempSync(path.join(os.tmpdir(), 'noisewise-ast-'));
    const list = fixedOutputs.map((o, i) => {
      const file = path.join(dir, `${i}.py`);
      // Notebook virtual modules keep magics as comments, so they are plain Python too.
      fs.writeFileSync(file, o.text);
      return { file, label: o.label };
    });
    const script = 'import ast, json, sys\nbad = []\nfor f, label in json.load(open(sys.argv[1])):\n    try:\n        ast.parse(open(f, encoding="utf-8").read(), f)\n    except SyntaxError as e:\n        bad.append(f"{label}: {e}")\nprint(json.dumps(bad))\n';
    fs.writeFileSync(path.join(dir, 'list.json'), JSON.stringify(list.map((l) => [l.file, l.label])));
    const out = execFileSync('python3', ['-c', script, path.join(dir, 'list.json')], { encoding: 'utf8' });
    expect(JSON.parse(out)).toEqual([]);
  });
});
