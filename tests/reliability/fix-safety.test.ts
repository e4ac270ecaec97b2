// The fix safety harness: every fix (safe and review) of every rule on every fixture, and on mutated fixtures, is
// applied through the same rewrite `--fix` uses. The fixed code parses under CPython's ast (whenever the original
// did; all files in one python3 process), the finding it targets is gone, nothing outside the fix's ranges changes
// (for notebooks: nothing outside the changed cells' sources, byte for byte), and the safe fixes applied in rounds, as
// `--fix` applies them, converge within the round limit, after which applying again changes nothing.
import { execFileSync } from 'node:child_process';
import * as fs from 'node:fs';
import * as os from 'node:os';
import * as path from 'node:path';
import fc from 'fast-check';
import { afterAll, describe, expect, it } from 'vitest';
import { detectLineEnding } from '../../server/src/cli/files';
import { MAX_FIX_ROUNDS, planFixes, rewriteFile, runFixLoop } from '../../server/src/cli/fix';
import { checkSources } from '../../server/src/engine/check';
import type { Finding, Fix, TextEdit } from '../../server/src/engine/finding';
import type { CheckInput, FileReport } from '../../server/src/engine/types';
import { readNotebook } from '../../server/src/parse/notebook';
import { checkInOrder, type MemoryFile, VIRTUAL_ROOT } from './engine-checks';
import { allFixtures, type Fixture, recordCount, runs, seed } from './fixtures';
import { applyMutations, mutateNotebook, mutatedInput } from './mutations';
import { sourceValueSpans } from './notebook-bytes';

const fixtures = allFixtures();

/** Pairs of (original, fixed) Python texts for CPython's ast, checked together at the end. */
const astPairs: { label: string; before: string; after: string }[] = [];
let fixesChecked = 0;
let loopsChecked = 0;

/** The Python text CPython should parse: the file itself, or a notebook's code cells (magics made comments). */
function pythonOf(rel: string, raw: string): string | null {
  if (!rel.endsWith('.ipynb')) return raw.replace(/^\ufeff/, '');
  try {
    return readNotebook(raw).text;
  } catch {
    return null;
  }
}

/** An edit's offsets carried over to the text after a set of edits (inside a replaced range: to its start or end). */
function mapOffset(offset: number, edits: readonly TextEdit[], side: 'start' | 'end'): number {
  let shift = 0;
  for (const e of [...edits].sort((a, b) => a.start - b.start)) {
    if (e.end <= offset && !(e.start === e.end && e.start === offset && side === 'start')) shift += e.newText.length - (e.end - e.start);
    else if (e.start < offset) return side === 'start' ? e.start + shift : e.start + shift + e.newText.length;
  }
  return offset + shift;
}

/**
 * Asserts that a rewritten file changed nothing outside the edits: a Python file is exactly the edits applied (their
 * line breaks in the file's own style); a notebook keeps every byte outside the changed cells' `source` values and
 * every JSON field but those sources.
 */
function expectOnlyEdited(report: FileReport, raw: string, edits: readonly TextEdit[], after: string, where: string): void {
  if (report.kind !== 'notebook') {
    const eol = detectLineEnding(raw);
    let expected = raw;
    for (const e of [...edits].sort((a, b) => b.start - a.start)) expected = expected.slice(0, e.start) + (eol === '\n' ? e.newText : e.newText.replace(/\r\n|\r|\n/g, eol)) + expected.slice(e.end);
    expect(after, where).toBe(expected);
    return;
  }
  const model = report.notebook!;
  const changed = new Set<number>();
  for (const e of edits) {
    const cell = model.cells.find((c, i) => e.start >= c.start && (i === model.cells.length - 1 || e.start < model.cells[i + 1]!.start));
    if (cell) changed.add(cell.index);
  }
  const before = JSON.parse(raw.replace(/^\ufeff/, '')) as { cells: Record<string, unknown>[] };
  const now = JSON.parse(after.replace(/^\ufeff/, '')) as { cells: Record<string, unknown>[] };
  for (const index of changed) {
    delete before.cells[index]!.source;
    delete now.cells[index]!.source;
  }
  expect(now, `${where}: a notebook field other than the changed cells' sources changed`).toEqual(before);
  const spansBefore = sourceValueSpans(raw);
  const spansAfter = sourceValueSpans(after);
  const first = Math.min(...changed);
  const last = Math.max(...changed);
  expect(after.slice(0, spansAfter[first]!.start), `${where}: bytes before the first changed cell's source`).toBe(raw.slice(0, spansBefore[first]!.start));
  expect(after.slice(spansAfter[last]!.end), `${where}: bytes after the last changed cell's source`).toBe(raw.slice(spansBefore[last]!.end));
  for (let i = first + 1; i < last; i++) {
    if (changed.has(i)) continue;
    expect(after.slice(spansAfter[i - 1]!.end, spansAfter[i]!.end), `${where}: cell ${i}`).toBe(raw.slice(spansBefore[i - 1]!.end, spansBefore[i]!.end));
  }
}

/** The workspace's files as check inputs under the virtual root. */
function inputsOf(files: readonly MemoryFile[]): CheckInput[] {
  return files.map((f) => ({ path: f.rel, absPath: path.join(VIRTUAL_ROOT, f.rel), text: f.text }));
}

/** Applies one fix through the `--fix` rewrite and checks it; returns the fixed files. */
async function checkOneFix(files: readonly MemoryFile[], reports: readonly FileReport[], report: FileReport, finding: Finding, fix: Fix, label: string): Promise<void> {
  const where = `${label}: ${finding.rule} at ${report.path}:${finding.start} — ${fix.title} (${fix.safety})`;
  const byFile = new Map<FileReport, TextEdit[]>();
  for (const e of fix.edits) {
    const target = e.path === undefined ? report : reports.find((r) => r.path === e.path || r.absPath === e.path);
    expect(target, `${where}: edits a file outside the workspace (${e.path})`).toBeDefined();
    byFile.set(target!, [...(byFile.get(target!) ?? []), e]);
  }
  const fixed = files.map((f) => ({ ...f }));
  for (const [target, edits] of byFile) {
    const file = fixed.find((f) => f.rel === target.path)!;
    let after: string;
    try {
      after = rewriteFile(target, edits, { lineEnding: detectLineEnding(file.text) });
    } catch (error) {
      // A fix `--fix` cannot write (one spanning two notebook cells) is never applied; it must not be a safe one.
      expect(fix.safety, `${where}: ${(error as Error).message}`).toBe('review');
      return;
    }
    expectOnlyEdited(target, file.text, edits, after, where);
    const before = pythonOf(file.rel, file.text);
    const afterPython = pythonOf(file.rel, after);
    if (before !== null) {
      expect(afterPython, `${where}: the fixed notebook can no longer be read`).not.toBeNull();
      astPairs.push({ label: `${where} → ${file.rel}`, before, after: afterPython! });
    }
    file.text = after;
  }
  // The finding the fix targets is gone: no finding of the rule with the same message id over its mapped range.
  const own = byFile.get(report) ?? [];
  const start = mapOffset(finding.start, own, 'start');
  const end = mapOffset(finding.end, own, 'end');
  const recheck = await checkInOrder(fixed, fixed.map((_, i) => i));
  const again = recheck.find((r) => r.path === report.path)!;
  const remaining = again.findings.filter((f) => f.rule === finding.rule && f.messageId === finding.messageId && f.start < end && start < f.end && f.message === finding.message);
  expect(remaining.map((f) => `${f.start}-${f.end}: ${f.message}`), `${where}: the targeted finding is still there`).toEqual([]);
  fixesChecked++;
}

/** Applies the safe fixes in rounds as `--fix` does and checks convergence and that another round changes nothing. */
async function checkFixLoop(files: readonly MemoryFile[], label: string): Promise<void> {
  const check = (inputs: CheckInput[]): Promise<FileReport[]> => checkSources(inputs, { workspaceRoot: VIRTUAL_ROOT, settingsFor: () => ({ severity: {}, datasetSizeNames: [] }) });
  let rounds = 0;
  const loop = await runFixLoop({
    files: inputsOf(files).map((input) => ({ input, writable: true, style: { lineEnding: detectLineEnding(input.text) } })),
    check,
    onRound: (round) => {
      rounds = round;
    },
  });
  expect(loop.notes.filter((n) => /still being offered|fixing stopped/.test(n.message)), `${label}: the safe fixes do not converge`).toEqual([]);
  expect(rounds).toBeLessThanOrEqual(MAX_FIX_ROUNDS);
  // Applying again changes nothing: no safe fix is left to plan.
  const final = await check(loop.inputs);
  expect(planFixes(final, () => true).map((p) => `${p.finding.rule}: ${p.fix.title}`), `${label}: fixes still offered after --fix`).toEqual([]);
  for (const input of loop.inputs) {
    if (!loop.changed.has(input.path)) continue;
    const original = files.find((f) => f.rel === input.path)!;
    const before = pythonOf(original.rel, original.text);
    const after = pythonOf(input.path, input.text);
    if (before !== null) astPairs.push({ label: `${label}: --fix rounds → ${input.path}`, before, after: after ?? '(unreadable notebook)' });
  }
  loopsChecked++;
}

/** Every fix of every finding of a workspace, then the safe-fix loop. */
async function checkAllFixes(files: MemoryFile[], label: string): Promise<void> {
  const reports = await checkInOrder(files, files.map((_, i) => i));
  for (const report of reports) {
    for (const finding of report.findings) for (const fix of finding.fixes) await checkOneFix(files, reports, report, finding, fix, label);
  }
  if (reports.some((r) => r.findings.some((f) => f.fixes.some((x) => x.safety === 'safe')))) await checkFixLoop(files, label);
}

describe('every fix of every rule', () => {
  it('on every fixture: parses, removes its finding, changes nothing else, and the safe ones converge', async () => {
    const withFixes = fixtures.filter((f: Fixture) => f.files.length > 0);
    for (const fixture of withFixes) await checkAllFixes(fixture.files.map((f) => ({ ...f })), fixture.label);
    expect(fixesChecked).toBeGreaterThan(20);
  }, 600_000);

  it('on mutated fixtures likewise', async () => {
    // Only fixtures that offer fixes are worth mutating here.
    const fixable: number[] = [];
    for (let i = 0; i < fixtures.length; i++) {
      const reports = await checkInOrder(fixtures[i]!.files, fixtures[i]!.files.map((_, j) => j));
      if (reports.some((r) => r.findings.some((f) => f.fixes.length > 0))) fixable.push(i);
    }
    expect(fixable.length).toBeGreaterThan(5);
    await fc.assert(
      fc.asyncProperty(mutatedInput(fixable.length), async (input) => {
        const fixture = fixtures[fixable[input.fixture]!]!;
        const target = input.file % fixture.files.length;
        const files = fixture.files.map((f, i) => ({
          rel: f.rel,
          text: i !== target ? f.text : f.rel.endsWith('.ipynb') ? mutateNotebook(f.text, input.mutations, input.notebookCell) : applyMutations(f.text, input.mutations),
        }));
        await checkAllFixes(files, `${fixture.label} mutated ${JSON.stringify(input.mutations)}`);
      }),
      { numRuns: runs(40, 1200), seed: seed(), endOnFailure: true },
    );
  }, 900_000);

  it('every fixed text parses under CPython ast whenever its original did (one python3 process)', () => {
    expect(astPairs.length).toBeGreaterThan(20);
    const dir = fs.mkdtempSync(path.join(os.tmpdir(), 'noisewise-fix-ast-'));
    try {
      const list = path.join(dir, 'pairs.json');
      fs.writeFileSync(list, JSON.stringify(astPairs));
      const script = [
        'import ast, json, sys, warnings',
        'warnings.simplefilter("ignore")',
        'bad = []',
        'for pair in json.load(open(sys.argv[1], encoding="utf-8")):',
        '    try:',
        '        ast.parse(pair["before"])',
        '    except (SyntaxError, ValueError):',
        '        continue',
        '    try:',
        '        ast.parse(pair["after"])',
        '    except (SyntaxError, ValueError) as e:',
        '        bad.append(pair["label"] + ": " + str(e))',
        'print(json.dumps(bad))',
      ].join('\n');
      const out = execFileSync('python3', ['-c', script, list], { encoding: 'utf8', maxBuffer: 64 * 1024 * 1024 });
      expect(JSON.parse(out) as string[]).toEqual([]);
    } finally {
      fs.rmSync(dir, { recursive: true, force: true });
    }
  }, 300_000);
});

afterAll(() => {
  recordCount('fixes checked (applied, re-checked, compared outside their ranges)', fixesChecked);
  recordCount('fix loops checked for convergence', loopsChecked);
  recordCount('fixed texts parsed by CPython ast', astPairs.length);
});
