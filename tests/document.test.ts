// Incremental re-parsing of a PythonDocument: after any edit (or batch of edits), the syntax copy must equal a fresh parse of the new text.
import { beforeAll, describe, expect, it } from 'vitest';
import type { Parser } from 'web-tree-sitter';
import { getParser } from '../server/src/engine/check';
import { PythonDocument, type TextChange } from '../server/src/parse/document';
import type { SyntaxFile } from '../server/src/parse/syntax';

let parser: Parser;
beforeAll(async () => {
  parser = await getParser();
});

/** Every node as `type[field]@start-end`, in preorder, plus the error count: what "the same syntax" means here. */
function shape(syntax: SyntaxFile): string[] {
  return [...syntax.nodes.map((n) => `${n.type}${n.field ? `[${n.field}]` : ''}${n.missing ? '!' : ''}@${n.start}-${n.end}`), `errors:${syntax.errors.length}`];
}

/** Applies edits the way `PythonDocument.edit` documents them (each in offsets of the text left by the previous one). */
function applyAll(text: string, changes: TextChange[]): string {
  let out = text;
  for (const c of changes) out = out.slice(0, c.start) + c.newText + out.slice(c.end);
  return out;
}

/** Edits incrementally and checks text and syntax against a fresh parse; returns the edited document. */
function editAndCompare(doc: PythonDocument, changes: TextChange[]): PythonDocument {
  const expectedText = applyAll(doc.text, changes);
  const next = doc.edit(parser, changes);
  expect(next.text).toBe(expectedText);
  const fresh = PythonDocument.parse(parser, expectedText);
  expect(shape(next.syntax)).toEqual(shape(fresh.syntax));
  return next;
}

/** The offset just after the first occurrence of `needle` (fails loudly when absent). */
function after(text: string, needle: string): number {
  const at = text.indexOf(needle);
  if (at < 0) throw new Error(`\`${needle}\` not found`);
  return at + needle.length;
}

const STAGE = [
  '# Pegel-Vorhersage für die Station Köln 🌧 (river stage)',
  'import torch',
  'from torch import nn',
  '',
  '',
  'class StageHead(nn.Module):',
  '    def __init__(self, σ0=0.05):',
  '        super().__init__()',
  '        self.label = "Durchfluss 🌊 m³/s"',
  '        self.sigma = nn.Parameter(torch.full((3,), σ0))',
  '',
  '    def forward(self, x):',
  '        return x + self.sigma * torch.randn_like(x)',
  '',
].join('\n');

describe('PythonDocument.edit', () => {
  it('parses from scratch with the same syntax whether or not the tree is kept', () => {
    const kept = PythonDocument.parse(parser, STAGE, true);
    const dropped = PythonDocument.parse(parser, STAGE);
    expect(shape(kept.syntax)).toEqual(shape(dropped.syntax));
    expect(kept.syntax.errors).toEqual([]);
    kept.dispose();
  });

  it('re-parses a one-character insertion, deletion and replacement', () => {
    let doc = PythonDocument.parse(parser, STAGE, true);
    // Insert a character into an identifier: `x` becomes `xs` in the signature only.
    doc = editAndCompare(doc, [{ start: after(doc.text, 'def forward(self, x'), end: after(doc.text, 'def forward(self, x'), newText: 's' }]);
    // Delete it again.
    const s = after(doc.text, 'def forward(self, xs') - 1;
    doc = editAndCompare(doc, [{ start: s, end: s + 1, newText: '' }]);
    // Replace `+` by `*`, which changes no node boundaries but the operator.
    const plus = doc.text.indexOf('x + self.sigma') + 2;
    doc = editAndCompare(doc, [{ start: plus, end: plus + 1, newText: '*' }]);
    doc.dispose();
  });

  it('re-parses edits that break the syntax and then repair it', () => {
    let doc = PythonDocument.parse(parser, STAGE, true);
    const colon = after(doc.text, 'def forward(self, x)');
    doc = editAndCompare(doc, [{ start: colon, end: colon + 1, newText: '' }]);
    expect(doc.syntax.errors.length).toBeGreaterThan(0);
    doc = editAndCompare(doc, [{ start: colon, end: colon, newText: ':' }]);
    expect(doc.syntax.errors).toEqual([]);
    doc.dispose();
  });

  it('re-parses edits placed after non-ASCII and emoji text on the same line', () => {
    let doc = PythonDocument.parse(parser, STAGE, true);
    // After `σ0` (σ is one UTF-16 unit, two UTF-8 bytes): change the default value.
    const value = after(doc.text, 'σ0=');
    doc = editAndCompare(doc, [{ start: value, end: value + 4, newText: '0.125' }]);
    // After the emoji inside the string (two UTF-16 units, four UTF-8 bytes): close the string early, which changes
    // the nodes that follow on this line.
    const inString = after(doc.text, 'Durchfluss 🌊');
    doc = editAndCompare(doc, [{ start: inString, end: inString, newText: '" + "' }]);
    // After the emoji of the comment on the first line: turn the comment's tail into code on a new line.
    const inComment = after(doc.text, 'Köln 🌧');
    doc = editAndCompare(doc, [{ start: inComment, end: inComment, newText: '\nrate = 0.5  #' }]);
    // Replace a non-ASCII identifier by an emoji-free one of a different length.
    const sigmaUse = doc.text.lastIndexOf('σ0');
    doc = editAndCompare(doc, [{ start: sigmaUse, end: sigmaUse + 2, newText: 'init_sigma' }]);
    doc.dispose();
  });

  it('re-parses a batch of edits given in successive offsets', () => {
    const doc = PythonDocument.parse(parser, STAGE, true);
    const first = after(STAGE, 'import torch');
    const changes: TextChange[] = [
      // Append `.nn` to the import (the text grows by 3).
      { start: first, end: first, newText: '.nn' },
      // Then, in the text left by the first edit, rename `forward` to `sample` (offsets already moved by 3).
      { start: STAGE.indexOf('forward') + 3, end: STAGE.indexOf('forward') + 3 + 'forward'.length, newText: 'sample' },
      // Then insert a docstring with non-ASCII text at the very start, moving everything after it.
      { start: 0, end: 0, newText: '"""Module docstring 🌦 with ünïcödé."""\n' },
    ];
    const text1 = applyAll(STAGE, changes);
    const next = editAndCompare(doc, changes);
    const tail: TextChange = { start: text1.length, end: text1.length, newText: '\n    def kl(self):\n        return (self.sigma ** 2).sum()\n' };
    const last = editAndCompare(next, [tail]);
    expect(last.syntax.errors).toEqual([]);
    expect(last.text.endsWith('.sum()\n')).toBe(true);
    last.dispose();
  });

  it('stays consistent over many random single-character edits', () => {
    // A fixed pseudo-random sequence (linear congruential generator) keeps the test deterministic.
    let seed = 20260401;
    const random = (n: number) => {
      seed = (seed * 1103515245 + 12345) % 2147483648;
      return seed % n;
    };
    const alphabet = ['a', '(', ')', ':', ' ', '\n', '"', 'σ', '🌧', '#', '=', '1', '.', ','];
    let doc = PythonDocument.parse(parser, STAGE, true);
    for (let i = 0; i < 60; i++) {
      const text = doc.text;
      let at = random(text.length + 1);
      // Never split a surrogate pair: move to the pair's start.
      if (at > 0 && at < text.length && /[\uDC00-\uDFFF]/.test(text[at]!)) at--;
      const remove = random(3) === 0 && at < text.length ? (/[\uD800-\uDBFF]/.test(text[at]!) ? 2 : 1) : 0;
      doc = editAndCompare(doc, [{ start: at, end: at + remove, newText: remove && random(2) === 0 ? '' : alphabet[random(alphabet.length)]! }]);
    }
    doc.dispose();
  });

  it('frees the tree on dispose and keeps the syntax copy usable', () => {
    const doc = PythonDocument.parse(parser, STAGE, true);
    const held = (d: PythonDocument) => (d as unknown as { tree: { delete(): void } | null }).tree;
    expect(held(doc)).not.toBeNull();
    doc.dispose();
    expect(held(doc)).toBeNull();
    // Disposing twice is harmless, and the syntax copy does not live in WASM memory.
    doc.dispose();
    expect(doc.syntax.nodes.find((n) => n.type === 'class_definition')?.child('name')?.text).toBe('StageHead');
    // An edit after dispose re-parses from scratch and is still right.
    const next = editAndCompare(doc, [{ start: 0, end: 0, newText: '# header\n' }]);
    expect(held(next)).not.toBeNull();
    next.dispose();
  });

  it('hands the tree over on edit, so the old document can no longer touch it', () => {
    const doc = PythonDocument.parse(parser, STAGE, true);
    const held = (d: PythonDocument) => (d as unknown as { tree: unknown }).tree;
    const next = doc.edit(parser, [{ start: 0, end: 0, newText: '# header\n' }]);
    expect(held(doc)).toBeNull();
    expect(held(next)).not.toBeNull();
    // Disposing or editing the old document must not free or edit the new document's tree.
    doc.dispose();
    const again = editAndCompare(doc, [{ start: 0, end: 0, newText: 'x = 1\n' }]);
    const further = editAndCompare(next, [{ start: next.text.length, end: next.text.length, newText: 'y = 2\n' }]);
    again.dispose();
    further.dispose();
    next.dispose();
  });

  it('counts a token inserted to recover (MISSING ")") as a syntax error', () => {
    const doc = PythonDocument.parse(parser, 'import torch\ndef broken(:\n    pass\n');
    expect(doc.syntax.errors.map((e) => [e.type, e.start, e.end, e.missing])).toEqual([[')', 24, 24, true]]);
    const missing = doc.syntax.errors[0]!;
    const fn = doc.syntax.nodes.find((n) => n.type === 'function_definition')!;
    expect(fn.contains(missing)).toBe(true);
    expect(doc.syntax.nodes.includes(missing)).toBe(false);
  });

  it('keeps no tree when parsed without keepTree, and still edits correctly', () => {
    const doc = PythonDocument.parse(parser, STAGE);
    expect((doc as unknown as { tree: unknown }).tree).toBeNull();
    const next = editAndCompare(doc, [{ start: STAGE.length, end: STAGE.length, newText: 'z = 3\n' }]);
    next.dispose();
  });
});
