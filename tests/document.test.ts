// Incremental re-parsing of a PythonDocument: after any edit (or batch of edits), the syntax copy must equal a fresh parse of the new text.
import * as fs from 'node:fs';
import * as path from 'node:path';
import { beforeAll, describe, expect, it } from 'vitest';
import type { Parser } from 'web-tree-sitter';
import { getParser } from '../server/src/engine/check';
import { PythonDocument, type TextChange } from '../server/src/parse/document';
import type { SyntaxFile } from '../server/src/parse/syntax';
import { sourceFiles } from './helpers/engine';

let parser: Parser;
beforeAll(async () => {
  parser = await getParser();
});

/** Every node as `type[field]@start-end`, in preorder, plus the error count: what "the same syntax" means here. */
function shape(syntax: SyntaxFile): string[] {
  return [...syntax.nodes.map((n) => `${n.type}${n.field ? `[${n.field}]` : ''}${n.missing ? '!' : ''}@${n.start}-${n.end}`), `errors:${syntax.errors.length}`];
}

/**
 * Everything a rule can read of the tree: per node its id, type, field, range, text, parent and children (by id), the
 * named children, and that it belongs to this file and sits at its id; then the errors. Subtrees taken over from the
 * previous version must be indistinguishable from freshly copied ones.
 */
function fullShape(syntax: SyntaxFile): string[] {
  const out = syntax.nodes.map((n, i) => {
    const ids = (list: readonly { id: number }[]) => list.map((c) => c.id).join(',');
    const home = n.file === syntax && syntax.nodes[n.id] === n && n.id === i ? '' : ' MISPLACED';
    return `${n.id} ${n.type}[${n.field ?? ''}]${n.missing ? '!' : ''}@${n.start}-${n.end} ^${n.parent?.id ?? -1} (${ids(n.children)}) (${ids(n.namedChildren)}) ${JSON.stringify(n.text)}${home}`;
  });
  out.push(`root ${syntax.root === syntax.nodes[0]}`, ...syntax.errors.map((e) => `error ${e.type}@${e.start}-${e.end} ${e.missing} ${e.file === syntax}`));
  return out;
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

  it('takes unchanged subtrees over from the previous copy, and the result equals a fresh parse in every detail', () => {
    // Every Python source of the repository, each edited at pseudo-random places: a character typed or deleted,
    // an identifier renamed, a line broken or joined, brackets and quotes opened (which re-parses the rest of the
    // file differently), a comment typed. Each result must equal a fresh parse node by node.
    const root = path.resolve(__dirname, '..');
    const files = ['rules', 'test-workspaces'].flatMap((dir) => sourceFiles(path.join(root, dir))).filter((f) => f.endsWith('.py'));
    expect(files.length).toBeGreaterThan(100);
    let seed = 20261202;
    const random = (n: number) => {
      seed = (seed * 1103515245 + 12345) % 2147483648;
      return seed % n;
    };
    const inserts = ['x', 's', '_', '(', ')', '[', '"', "'''", '\n', '\n    ', ':', '#', ' ', 'σ', '0', '.', ', ', 'lambda', 'def '];
    let edits = 0;
    let reusedEdits = 0;
    let reusedNodes = 0;
    let totalNodes = 0;
    for (const file of files.filter((_, i) => i % 3 === 0)) {
      let doc = PythonDocument.parse(parser, fs.readFileSync(file, 'utf8'), true);
      for (let k = 0; k < 4; k++) {
        const text = doc.text;
        let at = random(text.length + 1);
        if (at > 0 && at < text.length && /[\uDC00-\uDFFF]/.test(text[at]!)) at--;
        let end = at;
        if (random(3) === 0) {
          end = Math.min(text.length, at + 1 + random(8));
          if (end < text.length && /[\uDC00-\uDFFF]/.test(text[end]!)) end++;
        }
        const change: TextChange = { start: at, end, newText: random(4) === 0 ? '' : inserts[random(inserts.length)]! };
        const expectedText = applyAll(text, [change]);
        const next = doc.edit(parser, [change]);
        const fresh = PythonDocument.parse(parser, expectedText);
        expect(fullShape(next.syntax), `${path.relative(root, file)} edit ${JSON.stringify(change)}`).toEqual(fullShape(fresh.syntax));
        edits++;
        if (next.syntax.reusedNodes > 0) reusedEdits++;
        reusedNodes += next.syntax.reusedNodes;
        totalNodes += next.syntax.nodes.length;
        doc = next;
      }
      doc.dispose();
    }
    expect(edits).toBeGreaterThan(100);
    // Most edits leave most of the file alone: the copy must really take those parts over.
    expect(reusedEdits / edits).toBeGreaterThan(0.8);
    expect(reusedNodes / totalNodes).toBeGreaterThan(0.5);
  });

  it('copies everything afresh when there is no previous tree, and takes nothing over across a parse error', () => {
    const broken = 'import torch\n\ndef f(:\n    return torch.zeros(3)\n\n\ndef g():\n    return 1\n';
    const doc = PythonDocument.parse(parser, broken, true);
    // Typing at the very end: `f` (with its error) lies in the unchanged prefix but must be copied again.
    const next = editAndCompare(doc, [{ start: broken.length, end: broken.length, newText: 'y = 2\n' }]);
    const f = next.syntax.nodes.find((n) => n.type === 'function_definition')!;
    expect(next.syntax.errors.length).toBeGreaterThan(0);
    expect(next.syntax.errors.every((e) => e.file === next.syntax)).toBe(true);
    expect(f.file).toBe(next.syntax);
    expect(next.syntax.reusedNodes).toBeGreaterThan(0);
    // A document without a tree re-parses from scratch: nothing to take over.
    const plain = PythonDocument.parse(parser, STAGE);
    const edited = editAndCompare(plain, [{ start: 0, end: 0, newText: '# a\n' }]);
    expect(edited.syntax.reusedNodes).toBe(0);
    next.dispose();
    edited.dispose();
  });

  it('takes over the right nodes when a line is inserted above lines of the same length', () => {
    // Every statement moves by exactly one line, so each new offset is some other statement's old offset: matching
    // must go by the offsets the previous copy had before any node moved.
    const line = (i: number) => `w${i % 10} = torch.zeros(${i % 10})\n`;
    const text = ['import torch\n', ...Array.from({ length: 40 }, (_, i) => line(i))].join('');
    let doc = PythonDocument.parse(parser, text, true);
    const at = 'import torch\n'.length;
    for (let k = 0; k < 3; k++) {
      const next = doc.edit(parser, [{ start: at, end: at, newText: line(7 + k) }]);
      expect(fullShape(next.syntax)).toEqual(fullShape(PythonDocument.parse(parser, next.text).syntax));
      expect(next.syntax.reusedNodes).toBeGreaterThan(next.syntax.nodes.length / 2);
      doc = next;
    }
    // And removed again, from the middle.
    const middle = doc.text.indexOf(line(20));
    const last = doc.edit(parser, [{ start: middle, end: middle + line(20).length, newText: '' }]);
    expect(fullShape(last.syntax)).toEqual(fullShape(PythonDocument.parse(parser, last.text).syntax));
    last.dispose();
  });
});
