// The direct WASM walk and the public-cursor walk must build identical syntax trees (types, ranges, fields,
// parents, errors) on every Python source in the repository and on broken inputs.
import * as fs from 'node:fs';
import * as path from 'node:path';
import { describe, expect, it } from 'vitest';
import { getParser } from '../server/src/engine/check';
import { readNotebook } from '../server/src/parse/notebook';
import { fastWalkAvailable, type SyntaxFile, toSyntaxFile, toSyntaxFileWithCursor } from '../server/src/parse/syntax';
import { sourceFiles } from './helpers/engine';

function shape(file: SyntaxFile): string[] {
  return [
    ...file.nodes.map((n) => `${n.id} ${n.type} ${n.start}-${n.end} ${n.field ?? ''} ${n.parent?.id ?? -1} ${n.missing}`),
    ...file.errors.map((n) => `error ${n.type} ${n.start}-${n.end} ${n.missing}`),
  ];
}

describe('syntax tree copy', () => {
  it('uses the direct WASM walk under test, as in the bundle', async () => {
    await getParser();
    expect(fastWalkAvailable()).toBe(true);
  });

  it('builds the same tree with both walks on every source file and on broken code', async () => {
    const parser = await getParser();
    const root = path.resolve(__dirname, '..');
    const texts: string[] = [];
    for (const dir of ['rules', 'test-workspaces', 'tests/corpus', 'tests/fixtures']) {
      if (!fs.existsSync(path.join(root, dir))) continue;
      for (const f of sourceFiles(path.join(root, dir))) {
        const raw = fs.readFileSync(f, 'utf8');
        if (f.endsWith('.ipynb')) {
          try {
            texts.push(readNotebook(raw).text);
          } catch {
            // Broken notebooks are fixtures of the CLI tests.
          }
        } else texts.push(raw);
      }
    }
    texts.push('def f(:\n    pass\n', 'x = (1 +\n', 'class C(\n  def g(self) return\n', 'σ = "😀" + f(é, ', '\0\0\xff', '');
    expect(texts.length).toBeGreaterThan(40);
    for (const text of texts) {
      const tree = parser.parse(text)!;
      try {
        expect(shape(toSyntaxFile(tree, text)), text.slice(0, 200)).toEqual(shape(toSyntaxFileWithCursor(tree, text)));
      } finally {
        tree.delete();
      }
    }
  });
});
