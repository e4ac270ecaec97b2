// Random edit sequences over the real protocol (`noisewise server --stdio`): fixture documents are opened and edited
// with incremental changes (single and batched, breaking and repairing the syntax, CRLF, tabs, odd characters) and
// full replacements. After every sequence the server is alive, answers for the final version only, places every
// diagnostic inside the document, reports no internal error, and says exactly what a fresh open of the final text says.
import * as path from 'node:path';
import fc from 'fast-check';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { LineIndex } from '../../server/src/parse/positions';
import { type LspSession, startSession, tempWorkspace, uriOf } from '../lsp/lsp-client';
import { allPythonTexts, recordCount, runs, seed } from './fixtures';

const texts = allPythonTexts();

/** One edit as the test describes it: a replaced span (fractions of the text) or a whole new text. */
type Edit = { kind: 'range'; at: number; length: number; text: string } | { kind: 'full'; cut: number };

const fraction = fc.double({ min: 0, max: 1, noNaN: true, maxExcluded: true });
const inserted = fc.oneof(
  fc.constantFrom('', '(', ')', '[', ']', ':', '"', "'''", '\n', '\r\n', '\r', '\t', '    ', 'self.sigma', ' * torch.randn_like(x)', 'model.eval()\n', 'def f(:\n', 'é', '😀', '\ud800'),
  fc.string({ maxLength: 10 }),
);
const edit: fc.Arbitrary<Edit> = fc.oneof(
  { weight: 9, arbitrary: fc.record({ kind: fc.constant('range' as const), at: fraction, length: fc.nat({ max: 30 }), text: inserted }) },
  { weight: 1, arbitrary: fc.record({ kind: fc.constant('full' as const), cut: fraction }) },
);
/** A sequence: edits grouped into notifications (a group is one didChange with several content changes). */
const sequence = fc.record({
  text: fc.nat({ max: texts.length - 1 }),
  groups: fc.array(fc.array(edit, { minLength: 1, maxLength: 3 }), { minLength: 1, maxLength: 8 }),
});

interface Diagnostic {
  range: { start: { line: number; character: number }; end: { line: number; character: number } };
  code?: string | number;
  message: string;
  severity?: number;
}

let session: LspSession;
let root: string;

beforeAll(async () => {
  root = tempWorkspace({ 'README.md': 'scratch workspace\n' });
  session = await startSession({ root, initializationOptions: { indexWorkspace: false } });
});
afterAll(async () => {
  await session?.stop();
});

/** Applies an edit to the client's copy of the text and returns the LSP content change for it. */
function toChange(text: string, e: Edit, base: string): { change: object; text: string } {
  if (e.kind === 'full') {
    const next = base.slice(0, Math.floor(e.cut * base.length));
    return { change: { text: next }, text: next };
  }
  const start = Math.min(text.length, Math.floor(e.at * (text.length + 1)));
  const end = Math.min(text.length, start + e.length);
  const index = new LineIndex(text);
  const change = { range: { start: index.toLsp(start), end: index.toLsp(end) }, text: e.text };
  return { change, text: text.slice(0, start) + e.text + text.slice(end) };
}

/** Asserts that diagnostics lie inside a text and that none reports an internal error. */
function expectInside(text: string, diagnostics: readonly Diagnostic[], where: string): void {
  const index = new LineIndex(text);
  for (const d of diagnostics) {
    for (const p of [d.range.start, d.range.end]) {
      expect(p.line >= 0 && p.line < index.lineCount, `${where}: line ${p.line} of ${index.lineCount}`).toBe(true);
      const length = index.lineEnd(p.line) - index.lineStarts[p.line]!;
      expect(p.character >= 0 && p.character <= length, `${where}: character ${p.character} of ${length} on line ${p.line}`).toBe(true);
    }
    expect(d.code, `${where}: ${d.message}`).not.toBe('internal-error');
    expect(d.message, where).not.toMatch(/internal error/);
  }
}

function comparable(diagnostics: readonly Diagnostic[]): string {
  return JSON.stringify(diagnostics.map((d) => ({ range: d.range, code: d.code, message: d.message, severity: d.severity })));
}

describe('random edit sequences over the protocol', () => {
  it('keeps the server alive and its diagnostics inside the document and equal to a fresh open', async () => {
    let sequences = 0;
    let edits = 0;
    let n = 0;
    await fc.assert(
      fc.asyncProperty(sequence, async (seq) => {
        const uri = uriOf(path.join(root, `doc_${n++}.py`));
        const base = texts[seq.text]!.text;
        let text = base;
        let version = 1;
        session.open(uri, text, version);
        for (const group of seq.groups) {
          const changes: object[] = [];
          for (const e of group) {
            const step = toChange(text, e, base);
            changes.push(step.change);
            text = step.text;
            edits++;
          }
          session.change(uri, ++version, changes);
        }
        const since = session.pushed.length;
        // The server may skip superseded versions, but it must answer for the last one.
        const edited = await session.diagnosticsFor(uri, { version, since: 0 });
        expectInside(text, edited.diagnostics as Diagnostic[], `${texts[seq.text]!.label} after ${version - 1} changes`);
        // Closing and opening the final text again (a fresh parse, no incremental state) says exactly the same.
        void session.connection.sendNotification('textDocument/didClose', { textDocument: { uri } });
        session.open(uri, text, version + 1);
        const fresh = await session.diagnosticsFor(uri, { version: version + 1, since });
        expect(comparable(edited.diagnostics as Diagnostic[]), texts[seq.text]!.label).toBe(comparable(fresh.diagnostics as Diagnostic[]));
        void session.connection.sendNotification('textDocument/didClose', { textDocument: { uri } });
        expect(session.child.exitCode).toBeNull();
        sequences++;
      }),
      { numRuns: runs(30, 500), seed: seed(), endOnFailure: true },
    );
    // Nothing but protocol frames went to stdout, and nothing was logged as a failure.
    expect(session.stdoutFrames().length).toBeGreaterThan(0);
    expect(session.logs.filter((l) => l.type === 1).map((l) => l.message)).toEqual([]);
    recordCount('lsp: edit sequences', sequences);
    recordCount('lsp: edits', edits);
  }, 900_000);

  it('answers only the latest of a burst of edits to one document (superseded versions are not published)', async () => {
    const uri = uriOf(path.join(root, 'burst.py'));
    const text = texts.find((t) => t.text.includes('nn.Parameter'))!.text;
    session.open(uri, text, 1);
    await session.diagnosticsFor(uri, { version: 1 });
    const since = session.pushed.length;
    const burst = 60;
    for (let v = 2; v <= burst + 1; v++) session.change(uri, v, [{ range: { start: { line: 0, character: 0 }, end: { line: 0, character: 0 } }, text: v % 2 === 0 ? '#' : '' }]);
    await session.diagnosticsFor(uri, { version: burst + 1, since });
    const published = session.pushed.slice(since).filter((p) => p.uri === uri).map((p) => p.version);
    // Every edit invalidates the result; the queue checks an open document only once its version stops changing.
    expect(published.length).toBeLessThan(burst / 4);
    expect(published[published.length - 1]).toBe(burst + 1);
    void session.connection.sendNotification('textDocument/didClose', { textDocument: { uri } });
  });
});
