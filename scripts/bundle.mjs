// Builds the bundles with esbuild: server/dist/noisewise.js (CLI + language server) and, when present,
// client/dist/extension.js; copies both wasm files beside the server bundle, and records their provenance.
import * as esbuild from 'esbuild';
import * as fs from 'node:fs';
import * as path from 'node:path';
import { fileURLToPath } from 'node:url';

const root = path.resolve(path.dirname(fileURLToPath(import.meta.url)), '..');
const production = process.argv.includes('--production');

// NOTE: web-tree-sitter's ESM build reads import.meta.url; in a CommonJS bundle it must come from __filename.
const importMetaBanner = 'var __noisewise_import_meta_url = require("url").pathToFileURL(__filename).href;';

const common = {
  bundle: true,
  platform: 'node',
  format: 'cjs',
  target: 'node20',
  sourcemap: !production,
  minify: production,
  logLevel: 'warning',
  loader: { '.md': 'text' },
  define: { 'import.meta.url': '__noisewise_import_meta_url' },
  plugins: [
    {
      // Rule pages are imported as `./doc.md?raw` (the form vitest understands); load them as text.
      name: 'raw-text',
      setup(build) {
        build.onResolve({ filter: /\?raw$/ }, (args) => ({ path: path.resolve(args.resolveDir, args.path.replace(/\?raw$/, '')), namespace: 'raw-text' }));
        build.onLoad({ filter: /.*/, namespace: 'raw-text' }, (args) => ({ contents: fs.readFileSync(args.path, 'utf8'), loader: 'text' }));
      },
    },
  ],
  banner: { js: importMetaBanner },
};

const serverOut = path.join(root, 'server', 'dist');
fs.mkdirSync(serverOut, { recursive: true });
await esbuild.build({
  ...common,
  entryPoints: [path.join(root, 'server', 'src', 'cli', 'main.ts')],
  outfile: path.join(serverOut, 'noisewise.js'),
});

const wasmFiles = [
  ['web-tree-sitter', 'web-tree-sitter.wasm'],
  ['tree-sitter-python', 'tree-sitter-python.wasm'],
];
const provenance = {};
for (const [pkg, file] of wasmFiles) {
  const pkgDir = path.join(root, 'node_modules', pkg);
  fs.copyFileSync(path.join(pkgDir, file), path.join(serverOut, file));
  provenance[file] = `${pkg}@${JSON.parse(fs.readFileSync(path.join(pkgDir, 'package.json'), 'utf8')).version}`;
}
fs.writeFileSync(path.join(serverOut, 'parser.info.json'), JSON.stringify(provenance, null, 2) + '\n');

const clientEntry = path.join(root, 'client', 'src', 'extension.ts');
if (fs.existsSync(clientEntry)) {
  const clientOut = path.join(root, 'client', 'dist');
  fs.mkdirSync(clientOut, { recursive: true });
  await esbuild.build({ ...common, entryPoints: [clientEntry], outfile: path.join(clientOut, 'extension.js'), external: ['vscode'] });
  for (const file of ['noisewise.js', ...wasmFiles.map(([, f]) => f)]) {
    fs.copyFileSync(path.join(serverOut, file), path.join(clientOut, file === 'noisewise.js' ? 'server.js' : file));
  }
}
