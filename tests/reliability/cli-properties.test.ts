// Property tests of the real CLI (`noisewise check` from the built bundle) on trees of mutated fixtures, written as
// bytes (invalid UTF-8, NUL bytes and byte-order marks included): it never fails (exit 0 or 1, never 2), every
// finding lies inside its file (or its notebook cell), every file is either checked or explained in a note, and two
// runs print exactly the same report.
import * as fs from 'node:fs';
import * as os from 'node:os';
import * as path from 'node:path';
import fc from 'fast-check';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { decodeSource } from '../../server/src/cli/files';
import { LineIndex, codePointsBetween } from '../../server/src/parse/positions';
import { requireBundle, runNoisewise } from '../helpers/cli-run';
import { allFixtures, recordCount, runs, seed } from './fixtures';
import { applyMutations, mutateNotebook, mutatedInput } from './mutations';

const fixtures = allFixtures();
let scratch: string;

beforeAll(() => {
  requireBundle();
  scratch = fs.realpathSync(fs.mkdtempSync(path.join(os.tmpdir(), 'noisewise-cli-props-')));
});
afterAll(() => fs.rmSync(scratch, { recursive: true, force: true }));

/** Bytes that no text editor should write but files arrive with: invalid UTF-8, a NUL, a byte-order mark. */
const byteDamage = fc.option(
  fc.record({ at: fc.double({ min: 0, max: 1, noNaN: true, maxExcluded: true }), bytes: fc.constantFrom([0xff], [0xc3], [0xe2, 0x82], [0xed, 0xa0, 0x80], [0x00], [0xef, 0xbb, 0xbf], [0x80, 0x80], [0xf8, 0x88, 0x80, 0x80, 0x80]) }),
  { freq: 3 },
);

/** A case of a batch: a mutated fixture, with byte damage on top of the mutated file. */
const caseArbitrary = fc.record({ input: mutatedInput(fixtures.length), damage: byteDamage });

function damage(bytes: Buffer, d: { at: number; bytes: readonly number[] } | null): Buffer {
  if (!d) return bytes;
  const at = Math.min(bytes.length, Math.floor(d.at * (bytes.length + 1)));
  return Buffer.concat([bytes.subarray(0, at), Buffer.from(d.bytes), bytes.subarray(at)]);
}

interface JsonFinding {
  path: string;
  line: number;
  column: number;
  endLine: number;
  endColumn: number;
  cell?: number;
  rule: string;
}

/** The lines of a text as the CLI counts them (\n, \r\n and \r all end a line). */
function lineLengths(text: string): number[] {
  const index = new LineIndex(text);
  return index.lineStarts.map((start, i) => codePointsBetween(text, start, index.lineEnd(i)));
}

/** Asserts that a printed range lies inside the text it refers to. */
function expectInside(text: string, f: JsonFinding, where: string): void {
  const lengths = lineLengths(text);
  expect(f.line >= 1 && f.line <= lengths.length, `${where}: line ${f.line} of ${lengths.length}`).toBe(true);
  expect(f.endLine >= f.line && f.endLine <= lengths.length, `${where}: end line ${f.endLine} of ${lengths.length}`).toBe(true);
  expect(f.column >= 1 && f.column <= lengths[f.line - 1]! + 1, `${where}: column ${f.column} of ${lengths[f.line - 1]! + 1}`).toBe(true);
  expect(f.endColumn >= 1 && f.endColumn <= lengths[f.endLine - 1]! + 1, `${where}: end column ${f.endColumn}`).toBe(true);
  if (f.endLine === f.line) expect(f.endColumn >= f.column, `${where}: end before start`).toBe(true);
}

describe('noisewise check on trees of mutated fixtures', () => {
  it('never fails, places every finding inside its file and prints the same report twice', async () => {
    let batches = 0;
    let files = 0;
    await fc.assert(
      fc.asyncProperty(fc.array(caseArbitrary, { minLength: 5, maxLength: runs(25, 60) }), async (cases) => {
        const batch = fs.mkdtempSync(path.join(scratch, 'batch-'));
        const written = new Map<string, Buffer>();
        cases.forEach((c, i) => {
          const fixture = fixtures[c.input.fixture]!;
          const target = c.input.file % fixture.files.length;
          fixture.files.forEach((f, j) => {
            let text = f.text;
            if (j === target) text = f.rel.endsWith('.ipynb') ? mutateNotebook(f.text, c.input.mutations, c.input.notebookCell) : applyMutations(f.text, c.input.mutations);
            let bytes: Buffer = Buffer.from(text, 'utf8');
            if (j === target) bytes = damage(bytes, c.damage);
            const rel = `case-${i}/${f.rel}`;
            fs.mkdirSync(path.dirname(path.join(batch, rel)), { recursive: true });
            fs.writeFileSync(path.join(batch, rel), bytes);
            written.set(rel, bytes);
          });
        });
        const first = runNoisewise(['check', '.', '--format', 'json'], batch);
        expect([0, 1], `exit ${first.code}; stderr: ${first.stderr}`).toContain(first.code);
        const report = JSON.parse(first.stdout) as { findings: JsonFinding[]; notes: { path: string; message: string }[]; summary: { files: number } };
        for (const f of report.findings) {
          const bytes = written.get(f.path);
          expect(bytes, `a finding in ${f.path}, which was not written`).toBeDefined();
          const kind = f.path.endsWith('.ipynb') ? 'notebook' : 'python';
          const text = decodeSource(bytes!, kind).text;
          const where = `${f.path}:${f.line}:${f.column} [${f.rule}]`;
          if (kind === 'python') expectInside(text, f, where);
          else {
            const cells = (JSON.parse(text) as { cells: { source?: string | string[] }[] }).cells;
            expect(f.cell !== undefined && f.cell >= 0 && f.cell < cells.length, `${where}: cell ${f.cell}`).toBe(true);
            const source = cells[f.cell!]!.source;
            expectInside(Array.isArray(source) ? source.join('') : (source ?? ''), f, `${where} in cell ${f.cell}`);
          }
        }
        // Every file is either checked or explained: the summary counts the checked ones, the notes name the others.
        const skipped = new Set(report.notes.filter((n) => n.message.startsWith('skipped')).map((n) => n.path));
        expect(report.summary.files + skipped.size, JSON.stringify(report.notes)).toBe(written.size);
        // The same tree gives the same report, byte for byte; and SARIF carries the same notes as notifications.
        expect(runNoisewise(['check', '.', '--format', 'json'], batch).stdout).toBe(first.stdout);
        const sarif = runNoisewise(['check', '.', '--format', 'sarif'], batch);
        expect([0, 1]).toContain(sarif.code);
        const log = JSON.parse(sarif.stdout) as { runs: { results: unknown[]; invocations: { toolExecutionNotifications: unknown[] }[] }[] };
        expect(log.runs[0]!.results).toHaveLength(report.findings.length);
        expect(log.runs[0]!.invocations[0]!.toolExecutionNotifications).toHaveLength(report.notes.length);
        batches++;
        files += written.size;
        fs.rmSync(batch, { recursive: true, force: true });
      }),
      { numRuns: runs(2, 24), seed: seed(), endOnFailure: true },
    );
    recordCount('cli: mutated files checked (3 runs each)', files);
    recordCount('cli: batches', batches);
  }, 900_000);
});
