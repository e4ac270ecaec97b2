// Node types and field names in the copied tree are internalized strings (server/src/parse/syntax.ts): the engine
// compares them with literals millions of times per check, and V8 compares internalized strings by address. Checked
// in a separate Node process with V8's natives syntax, on a probe bundled like the real bundle.
import { execFileSync } from 'node:child_process';
import * as fs from 'node:fs';
import * as os from 'node:os';
import * as path from 'node:path';
import * as esbuild from 'esbuild';
import { describe, expect, it } from 'vitest';
// @ts-expect-error: a plain ES module without type declarations
import { exposeTreeSitterInternals, importMetaBanner } from '../scripts/bundle.mjs';

const REPO = path.resolve(__dirname, '..');

describe('syntax copy', () => {
  it('holds node types and field names as internalized strings, in both walks', async () => {
    const dir = fs.mkdtempSync(path.join(os.tmpdir(), 'noisewise-names-'));
    try {
      const probe = path.join(dir, 'probe.ts');
      fs.writeFileSync(
        probe,
        `import { initParser, createParser } from ${JSON.stringify(path.join(REPO, 'server/src/parse/parser'))};
import { toSyntaxFileDirect, toSyntaxFileWithCursor, fastWalkAvailable } from ${JSON.stringify(path.join(REPO, 'server/src/parse/syntax'))};
import * as treeSitter from 'web-tree-sitter';
const interned = new Function('s', 'return %IsInternalizedString(s)') as (s: string) => boolean;
async function main() {
  await initParser();
  const text = 'import torch\\n\\ndef f(x, scale=2.0):\\n    return torch.exp(x) * scale  # spread\\n';
  const tree = createParser().parse(text)!;
  const internals = (treeSitter as any).__noisewiseInternals();
  const out: Record<string, unknown> = { fast: fastWalkAvailable() };
  for (const [name, file] of [['direct', toSyntaxFileDirect(tree, text, internals)], ['cursor', toSyntaxFileWithCursor(tree, text)]] as const) {
    const notInterned = file.nodes.filter((n) => !interned(n.type) || (n.field !== null && !interned(n.field))).map((n) => n.type + '/' + n.field);
    out[name] = { nodes: file.nodes.length, fields: file.nodes.filter((n) => n.field !== null).length, notInterned };
  }
  // A string built at run time is not internalized: the probe itself can tell the difference.
  out.control = interned(['ca', 'll'].join(''));
  process.stdout.write(JSON.stringify(out));
}
main();
`,
      );
      const bundle = path.join(dir, 'probe.js');
      await esbuild.build({
        entryPoints: [probe],
        outfile: bundle,
        bundle: true,
        platform: 'node',
        format: 'cjs',
        logLevel: 'error',
        nodePaths: [path.join(REPO, 'node_modules')],
        // The bundle's own banner and define (import.meta.url and the patched dynamic import read what it sets).
        define: { 'import.meta.url': '__noisewise_import_meta_url' },
        banner: { js: importMetaBanner as string },
        plugins: [{ name: 'internals', setup: (b) => b.onLoad({ filter: /web-tree-sitter[\\/]web-tree-sitter\.js$/ }, (a) => ({ contents: exposeTreeSitterInternals(fs.readFileSync(a.path, 'utf8')), loader: 'js' })) }],
      });
      for (const wasm of ['web-tree-sitter.wasm', 'tree-sitter-python.wasm']) fs.copyFileSync(path.join(REPO, 'server', 'dist', wasm), path.join(dir, wasm));
      const result = JSON.parse(execFileSync(process.execPath, ['--allow-natives-syntax', bundle], { encoding: 'utf8' }));
      expect(result.fast).toBe(true);
      expect(result.control).toBe(false);
      for (const walk of ['direct', 'cursor']) {
        expect(result[walk].nodes).toBeGreaterThan(20);
        expect(result[walk].fields).toBeGreaterThan(5);
        expect(result[walk].notInterned).toEqual([]);
      }
    } finally {
      fs.rmSync(dir, { recursive: true, force: true });
    }
  });
});
