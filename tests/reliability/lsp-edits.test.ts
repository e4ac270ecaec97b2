// Random edit sequences over the real protocol (`noisewise server --stdio`): fixture documents are opened and edited
// with incremental changes (single and batched, breaking and repairing the syntax, CRLF, tabs, odd characters) and
// full replacements. After every sequence the server is alive, answers for the final version only, places every
// diagnostic inside the document, reports no internal error, and says exactly what a fresh open of the final text says.
import * as path from 'node:path';
import fc from 'fast-check';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { CancellationTokenSource } from 'vscode-languageserver-protocol/node';
import { LineIndex } from '../../server/src/parse/positions';
import { editorCapabilities, type LspSession, startSession, tempWorkspace, uriOf } from '../lsp/lsp-client';
import { allFixtures, allPythonTexts, recordCount, runs, seed } from './fixtures';

const texts = allPythonTexts();

/** The cells of every fixture notebook (kind 2 = code, 1 = markdown), as an editor would open them. */
const notebooks = allFixtures()
  .flatMap((f) => f.files.filter((x) => x.rel.endsWith('.ipynb')).map((x) => ({ label: `${f.label}/${x.rel}`, raw: x.text })))
  .map(({ label, raw }) => {
    const doc = JSON.parse(raw) as { cells: { cell_type: string; source: string | string[] }[] };
    return { label, cells: doc.cells.map((c) => ({ kind: c.cell_type === 'code' ? 2 : 1, text: Array.isArray(c.source) ? c.source.join('') : c.source })) };
  });

/** One notebook action: edit a cell's text, insert a code cell, delete a cell. */
type NotebookAction = { kind: 'edit'; cell: number; edit: Edit } | { kind: 'insert'; at: number; text: number } | { kind: 'delete'; cell: number };

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

const notebookAction: fc.Arbitrary<NotebookAction> = fc.oneof(
  { weight: 6, arbitrary: fc.record({ kind: fc.constant('edit' as const), cell: fc.nat(), edit }) },
  { weight: 2, arbitrary: fc.record({ kind: fc.constant('insert' as const), at: fc.nat(), text: fc.nat({ max: texts.length - 1 }) }) },
  { weight: 1, arbitrary: fc.record({ kind: fc.constant('delete' as const), cell: fc.nat() }) },
);
const notebookSequence = fc.record({
  notebook: fc.nat({ max: Math.max(0, notebooks.length - 1) }),
  actions: fc.array(notebookAction, { minLength: 1, maxLength: 8 }),
  last: fc.record({ cell: fc.nat(), edit }),
});

let session: LspSession;
let root: string;

beforeAll(async () => {
  root = tempWorkspace({ 'README.md': 'scratch workspace\n' });
  session = await startSession({ root, initializationOptions: { indexWorkspace: false } });
});
afterAll(async () => {
  await session?.stop();
});

/** Waits for an answer from the server: it comes after every notification the server sent before it. */
async function barrier(uri: string): Promise<void> {
  await session.connection.sendRequest('textDocument/hover', { textDocument: { uri }, position: { line: 0, character: 0 } });
}

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
      { numRuns: runs(30, 1200), seed: seed(), endOnFailure: true },
    );
    // Nothing but protocol frames went to stdout, and nothing was logged as a failure.
    expect(session.stdoutFrames().length).toBeGreaterThan(0);
    expect(session.logs.filter((l) => l.type === 1).map((l) => l.message)).toEqual([]);
    recordCount('lsp: edit sequences', sequences);
    recordCount('lsp: edits', edits);
  }, 900_000);

  it('keeps notebook cells consistent under random cell edits, insertions and deletions', async () => {
    expect(notebooks.length).toBeGreaterThan(3);
    let sequences = 0;
    let n = 0;
    await fc.assert(
      fc.asyncProperty(notebookSequence, async (seq) => {
        const source = notebooks[seq.notebook]!;
        const id = n++;
        const notebookUri = uriOf(path.join(root, `book_${id}.ipynb`));
        let cellCounter = 0;
        const cells = source.cells.map((c) => ({ ...c, uri: `${notebookUri.replace('file:', 'vscode-notebook-cell:')}#c${cellCounter++}`, version: 1 }));
        let version = 1;
        const open = (uri: string, list: typeof cells) =>
          session.connection.sendNotification('notebookDocument/didOpen', {
            notebookDocument: { uri, notebookType: 'jupyter-notebook', version: 1, cells: list.map((c) => ({ kind: c.kind, document: c.uri })) },
            cellTextDocuments: list.map((c) => ({ uri: c.uri, languageId: c.kind === 2 ? 'python' : 'markdown', version: c.version, text: c.text })),
          });
        void open(notebookUri, cells);
        const codeCells = () => cells.filter((c) => c.kind === 2);
        const editCell = (index: number, e: Edit) => {
          const code = codeCells();
          if (code.length === 0) return;
          const cell = code[index % code.length]!;
          const step = toChange(cell.text, e, cell.text);
          cell.text = step.text;
          cell.version++;
          void session.connection.sendNotification('notebookDocument/didChange', {
            notebookDocument: { uri: notebookUri, version: ++version },
            change: { cells: { textContent: [{ document: { uri: cell.uri, version: cell.version }, changes: [step.change] }] } },
          });
        };
        for (const action of seq.actions) {
          if (action.kind === 'edit') editCell(action.cell, action.edit);
          else if (action.kind === 'insert') {
            const at = action.at % (cells.length + 1);
            const cell = { kind: 2, text: texts[action.text]!.text.slice(0, 400), uri: `${notebookUri.replace('file:', 'vscode-notebook-cell:')}#c${cellCounter++}`, version: 1 };
            cells.splice(at, 0, cell);
            void session.connection.sendNotification('notebookDocument/didChange', {
              notebookDocument: { uri: notebookUri, version: ++version },
              change: { cells: { structure: { array: { start: at, deleteCount: 0, cells: [{ kind: 2, document: cell.uri }] }, didOpen: [{ uri: cell.uri, languageId: 'python', version: 1, text: cell.text }] } } },
            });
          } else if (cells.length > 1) {
            const at = action.cell % cells.length;
            const [removed] = cells.splice(at, 1);
            void session.connection.sendNotification('notebookDocument/didChange', {
              notebookDocument: { uri: notebookUri, version: ++version },
              change: { cells: { structure: { array: { start: at, deleteCount: 1 }, didClose: [{ uri: removed!.uri }] } } },
            });
          }
        }
        editCell(seq.last.cell, seq.last.edit);
        const code = codeCells();
        if (code.length > 0) {
          // Every code cell ends up with diagnostics for its final text (one publication covers the whole notebook).
          const last = code[seq.last.cell % code.length]!;
          await session.diagnosticsFor(last.uri, { version: last.version });
          // A request answered after that publication: its answer comes behind every notification the server wrote
          // before it, so the rest of the notebook's cells have arrived too.
          await barrier(last.uri);
          for (const cell of code) {
            const latest = session.latest(cell.uri);
            expect(latest?.version, `${source.label}: cell ${cell.uri}`).toBe(cell.version);
            expectInside(cell.text, latest!.diagnostics as Diagnostic[], `${source.label}: ${cell.uri}`);
          }
          // A fresh open of the same cells says the same, cell by cell.
          const freshUri = uriOf(path.join(root, `book_${id}_fresh.ipynb`));
          const fresh = code.map((c, i) => ({ ...c, uri: `${freshUri.replace('file:', 'vscode-notebook-cell:')}#f${i}`, version: 1 }));
          void open(freshUri, [...fresh]);
          await session.diagnosticsFor(fresh[fresh.length - 1]!.uri, { version: 1 });
          await barrier(fresh[0]!.uri);
          for (const [i, cell] of fresh.entries()) {
            const published = session.latest(cell.uri)!;
            const edited = session.latest(code[i]!.uri)!;
            expect(comparable(published.diagnostics as Diagnostic[]), `${source.label}: cell ${i}`).toBe(comparable(edited.diagnostics as Diagnostic[]));
          }
          void session.connection.sendNotification('notebookDocument/didClose', { notebookDocument: { uri: freshUri }, cellTextDocuments: fresh.map((c) => ({ uri: c.uri })) });
        }
        void session.connection.sendNotification('notebookDocument/didClose', { notebookDocument: { uri: notebookUri }, cellTextDocuments: cells.map((c) => ({ uri: c.uri })) });
        expect(session.child.exitCode).toBeNull();
        sequences++;
      }),
      { numRuns: runs(10, 300), seed: seed(), endOnFailure: true },
    );
    recordCount('lsp: notebook edit sequences', sequences);
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

  it('cancels the pulls an editor supersedes with every edit, and answers the last one for the final text', async () => {
    const pull = await startSession({ root, capabilities: editorCapabilities({ pull: true }), initializationOptions: { indexWorkspace: false } });
    try {
      const uri = uriOf(path.join(root, 'pulled.py'));
      let text = texts.find((t) => t.text.includes('nn.Parameter'))!.text;
      pull.open(uri, text, 1);
      let source = new CancellationTokenSource();
      const answers: Promise<{ items?: Diagnostic[]; cancelled?: boolean }>[] = [];
      for (let v = 2; v <= 31; v++) {
        const insert = v % 3 === 0 ? '\n' : '# x\n';
        pull.change(uri, v, [{ range: { start: { line: 0, character: 0 }, end: { line: 0, character: 0 } }, text: insert }]);
        text = insert + text;
        // As an editor does: the pull for the previous version is cancelled when the next edit arrives.
        source.cancel();
        source = new CancellationTokenSource();
        answers.push(
          pull.connection.sendRequest('textDocument/diagnostic', { textDocument: { uri } }, source.token).then(
            (r) => ({ items: (r as { items?: Diagnostic[] }).items }),
            (e: { code?: number }) => {
              expect(e.code).toBe(-32800);
              return { cancelled: true };
            },
          ),
        );
      }
      const results = await Promise.all(answers);
      const last = results[results.length - 1]!;
      expect(last.cancelled).toBeUndefined();
      expectInside(text, last.items!, 'the last pull');
      expect(results.filter((r) => r.cancelled).length).toBeGreaterThan(results.length / 2);
      // The last answer is the final text's: a fresh pull, with nothing pending, says the same.
      const settled = (await pull.connection.sendRequest('textDocument/diagnostic', { textDocument: { uri } })) as { items: Diagnostic[] };
      expect(comparable(settled.items)).toBe(comparable(last.items!));
      recordCount('lsp: superseded pulls cancelled', results.filter((r) => r.cancelled).length);
    } finally {
      await pull.stop();
    }
  });
});
