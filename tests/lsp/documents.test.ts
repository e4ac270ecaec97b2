// The server's open documents: random sequences of editor changes (LSP ranges in UTF-16 units, several per
// notification, some with non-BMP text) applied through the deferred incremental re-parse give exactly the text and
// the syntax tree of a fresh parse; notebook cell edits do the same for the virtual module.
import fc from 'fast-check';
import { beforeAll, describe, expect, it } from 'vitest';
import type { Parser } from 'web-tree-sitter';
import { getParser } from '../../server/src/engine/check';
import { LineIndex } from '../../server/src/parse/positions';
import { PythonDocument } from '../../server/src/parse/document';
import { readNotebook } from '../../server/src/parse/notebook';
import type { SyntaxFile } from '../../server/src/parse/syntax';
import { OpenDocuments, spanChange } from '../../server/src/lsp/documents';

const BASE = [
  'import torch',
  'from torch import nn',
  '',
  'class Gauge(nn.Module):',
  '    def __init__(self):',
  '        super().__init__()',
  '        self.sigma = nn.Parameter(torch.full((6,), 0.2))  # 🌧 Pegel',
  '',
  '    def forward(self, x):',
  '        return x + self.sigma * torch.randn_like(x)',
  '',
].join('\n');

const PIECES = ['x', ' ', '\n', '(', ')', ':', 'self.', '🌊', 'ü', '    ', 'def f():\n    pass\n', '"""', '#', 'torch.exp(', '1.5', ','];

function shape(syntax: SyntaxFile): string[] {
  return syntax.nodes.map((n) => `${n.type}@${n.start}-${n.end}${n.field ? `:${n.field}` : ''}`);
}

describe('open documents', () => {
  let parser: Parser;
  beforeAll(async () => {
    parser = await getParser();
  });

  it('re-parses incrementally to the same tree as a fresh parse, for random edit sequences', () => {
    fc.assert(
      fc.property(
        fc.array(
          fc.array(fc.record({ a: fc.nat(), b: fc.nat(), piece: fc.constantFrom(...PIECES), del: fc.boolean() }), { minLength: 1, maxLength: 3 }),
          { minLength: 1, maxLength: 8 },
        ),
        (batches) => {
          const docs = new OpenDocuments(() => parser);
          const open = docs.openText({ uri: 'file:///gauge.py', languageId: 'python', version: 1, text: BASE }, '/gauge.py');
          let expected = BASE;
          let version = 1;
          for (const batch of batches) {
            const changes = batch.map((edit) => {
              // Each change is relative to the text left by the previous one, as LSP defines.
              const index = new LineIndex(expected);
              let start = edit.a % (expected.length + 1);
              let end = edit.del ? Math.min(expected.length, start + (edit.b % 6)) : start;
              // Keep surrogate pairs whole, as an editor does.
              const isLow = (o: number): boolean => o > 0 && o < expected.length && expected.charCodeAt(o) >= 0xdc00 && expected.charCodeAt(o) <= 0xdfff;
              if (isLow(start)) start--;
              if (isLow(end)) end++;
              const range = { start: index.toLsp(start), end: index.toLsp(end) };
              expected = expected.slice(0, start) + edit.piece + expected.slice(end);
              return { range, text: edit.piece };
            });
            docs.changeText('file:///gauge.py', ++version, changes);
            expect(open.text).toBe(expected);
          }
          const fresh = PythonDocument.parse(parser, expected);
          expect(open.doc.text).toBe(expected);
          expect(shape(open.doc.syntax)).toEqual(shape(fresh.syntax));
          docs.disposeAll();
        },
      ),
      { numRuns: 60 },
    );
  });

  it('keeps a notebook virtual module equal to the one read from its cells after cell edits', () => {
    const docs = new OpenDocuments(() => parser);
    const cells: { kind: 1 | 2; document: string }[] = [
      { kind: 2, document: 'cell:a' },
      { kind: 1, document: 'cell:b' },
      { kind: 2, document: 'cell:c' },
    ];
    const notebook = docs.openNotebook(
      {
        notebookDocument: { uri: 'file:///nb.ipynb', notebookType: 'jupyter-notebook', version: 1, cells },
        cellTextDocuments: [
          { uri: 'cell:a', languageId: 'python', version: 1, text: '%matplotlib inline\nimport torch\n' },
          { uri: 'cell:c', languageId: 'python', version: 1, text: 'sigma = torch.ones(3)\n' },
        ],
      },
      '/nb.ipynb',
    );
    docs.changeNotebook({
      notebookDocument: { uri: 'file:///nb.ipynb', version: 2 },
      change: {
        cells: {
          textContent: [{ document: { uri: 'cell:c', version: 2 }, changes: [{ range: { start: { line: 0, character: 8 }, end: { line: 0, character: 8 } }, text: '0.1 * ' }] }],
          structure: { array: { start: 1, deleteCount: 1 }, didClose: [{ uri: 'cell:b' }] },
        },
      },
    });
    expect(notebook.cells.map((c) => c.uri)).toEqual(['cell:a', 'cell:c']);
    const model = readNotebook(notebook.raw);
    expect(model.cells.map((c) => c.source)).toEqual(['%matplotlib inline\nimport torch\n', 'sigma = 0.1 * torch.ones(3)\n']);
    expect(notebook.virtual.text).toBe(model.text);
    expect(shape(notebook.virtual.syntax)).toEqual(shape(PythonDocument.parse(parser, model.text).syntax));
    docs.disposeAll();
  });

  it('describes a change between two texts as one replacement that never splits a surrogate pair', () => {
    expect(spanChange('a🌧b', 'a🌊b')).toEqual({ start: 1, end: 3, newText: '🌊' });
    expect(spanChange('x = 1\n', 'x = 12\n')).toEqual({ start: 5, end: 5, newText: '2' });
    const before = 'sigma = 1\n';
    const after = 'log_sigma = 1\n';
    const change = spanChange(before, after);
    expect(before.slice(0, change.start) + change.newText + before.slice(change.end)).toBe(after);
  });

  it('does not re-parse when a batch of changes leaves the text as it was, so the syntax the engine holds stays whole', () => {
    const docs = new OpenDocuments(() => parser);
    const open = docs.openText({ uri: 'file:///gauge.py', languageId: 'python', version: 1, text: BASE }, '/gauge.py');
    const held = open.doc;
    const at = new LineIndex(BASE).toLsp(BASE.indexOf('forward'));
    // A character typed and deleted again in one notification.
    docs.changeText('file:///gauge.py', 2, [
      { range: { start: at, end: at }, text: 'x' },
      { range: { start: at, end: { line: at.line, character: at.character + 1 } }, text: '' },
    ]);
    expect(open.text).toBe(BASE);
    // The same document and syntax: a re-parse would have moved its nodes into a new copy.
    expect(open.doc).toBe(held);
    expect(held.syntax.nodes.every((n) => n.file === held.syntax)).toBe(true);
    // A real change still re-parses, taking the untouched nodes over.
    docs.changeText('file:///gauge.py', 3, [{ range: { start: at, end: at }, text: 'y' }]);
    expect(open.doc).not.toBe(held);
    expect(open.doc.syntax.reusedNodes).toBeGreaterThan(0);
    expect(shape(open.doc.syntax)).toEqual(shape(PythonDocument.parse(parser, open.text).syntax));
    docs.disposeAll();
  });
});
