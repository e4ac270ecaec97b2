// Builds the bundles with esbuild: server/dist/noisewise.js (CLI + language server) and, when present,
// client/dist/extension.js with a copy of the server bundle as client/dist/server-bundle.js (started by
// client/dist/server.js, a copy of server/bin/run-bundle.js); puts both wasm files and the
// rule pages (rules/<id>.md, rendered from the rules) beside each bundle, and records the wasm files' provenance.
// Run directly (`node scripts/bundle.mjs [--production]`) or import `buildBundles` to build into other folders.
import * as esbuild from 'esbuild';
import { execFileSync } from 'node:child_process';
import * as fs from 'node:fs';
import * as path from 'node:path';
import { fileURLToPath } from 'node:url';

/** The repository root. */
export const root = path.resolve(path.dirname(fileURLToPath(import.meta.url)), '..');

// NOTE: web-tree-sitter's ESM build reads import.meta.url; in a CommonJS bundle it must come from __filename.
export const importMetaBanner = 'var __noisewise_import_meta_url = require("url").pathToFileURL(__filename).href; var __noisewise_node_module = require("module");';

/** Appends an export of web-tree-sitter's module-level WASM binding (`C`) and transfer buffer. */
export function exposeTreeSitterInternals(source) {
  if (!/^var C;$/m.test(source) || !/^var TRANSFER_BUFFER;$/m.test(source)) throw new Error('web-tree-sitter changed: update the internals patch in scripts/bundle.mjs');
  // The one dynamic import (Node's `module`, for createRequire) reads the module the banner required instead: a script
  // loaded from V8's code cache (see server/bin/run-bundle.js) cannot run dynamic imports, and the bundle is CommonJS
  // anyway. (A plain `require` would not do: the function declares its own `var require`.)
  const dynamicImport = 'const { createRequire } = await import("module");';
  if (!source.includes(dynamicImport)) throw new Error('web-tree-sitter changed: update the dynamic-import patch in scripts/bundle.mjs');
  const patched = source.replace(dynamicImport, 'const { createRequire } = __noisewise_node_module;');
  return `${patched}\nexport function __noisewiseInternals() { return { C, TRANSFER_BUFFER }; }\n`;
}

function commonOptions(production) {
  return {
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
        // NOTE: exposes web-tree-sitter's WASM module and transfer buffer so that server/src/parse/syntax.ts can walk
      // trees without the public cursor's per-call copying (the same patch is applied under vitest; see
      // vitest.config.mts). Without it the code falls back to the public API.
      name: 'tree-sitter-internals',
      setup(build) {
        build.onLoad({ filter: /web-tree-sitter[\\/]web-tree-sitter\.js$/ }, (args) => ({ contents: exposeTreeSitterInternals(fs.readFileSync(args.path, 'utf8')), loader: 'js' }));
      },
    },
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
}

const wasmFiles = [
  ['web-tree-sitter', 'web-tree-sitter.wasm'],
  ['tree-sitter-python', 'tree-sitter-python.wasm'],
];

/**
 * Writes every rule page (`<id>.md`, as `renderRulePage` renders it, and `index.md`) into `<dir>/rules`, replacing
 * what was there. The pages come from the rules themselves, so they match the bundle even before docs/rules/ is
 * regenerated (tests/docs.test.ts keeps docs/rules/ equal to the same rendering).
 */
async function writeRulePages(dir, common) {
  const target = path.join(dir, 'rules');
  fs.rmSync(target, { recursive: true, force: true });
  fs.mkdirSync(target, { recursive: true });
  const script = [
    "import * as fs from 'node:fs';",
    "import * as path from 'node:path';",
    "import { allRules } from './rules/index';",
    "import { renderRuleIndex, renderRulePage } from './server/src/engine/docs';",
    'const out = process.argv[2];',
    "for (const rule of allRules) fs.writeFileSync(path.join(out, `${rule.meta.id}.md`), renderRulePage(rule));",
    "fs.writeFileSync(path.join(out, 'index.md'), renderRuleIndex(allRules));",
  ].join('\n');
  const built = await esbuild.build({
    ...common,
    minify: false,
    sourcemap: false,
    banner: undefined,
    define: undefined,
    write: false,
    stdin: { contents: script, resolveDir: root, loader: 'ts', sourcefile: 'write-rule-pages.ts' },
  });
  const runner = path.join(dir, `.write-rule-pages-${process.pid}.cjs`);
  fs.writeFileSync(runner, built.outputFiles[0].text);
  try {
    execFileSync(process.execPath, [runner, target], { stdio: 'inherit' });
  } finally {
    fs.rmSync(runner, { force: true });
  }
}

/**
 * Builds the server bundle into `serverOut` and, when client/src/extension.ts exists, the extension into `clientOut`
 * (with the server bundle copied in as server-bundle.js, started by server.js). Each output folder gets both wasm files and the rule pages.
 */
export async function buildBundles({ production = false, serverOut = path.join(root, 'server', 'dist'), clientOut = path.join(root, 'client', 'dist') } = {}) {
  const common = commonOptions(production);
  fs.mkdirSync(serverOut, { recursive: true });
  await esbuild.build({
    ...common,
    entryPoints: [path.join(root, 'server', 'src', 'cli', 'main.ts')],
    outfile: path.join(serverOut, 'noisewise.js'),
  });
  if (production) fs.rmSync(path.join(serverOut, 'noisewise.js.map'), { force: true });
  const provenance = {};
  for (const [pkg, file] of wasmFiles) {
    const pkgDir = path.join(root, 'node_modules', pkg);
    fs.copyFileSync(path.join(pkgDir, file), path.join(serverOut, file));
    provenance[file] = `${pkg}@${JSON.parse(fs.readFileSync(path.join(pkgDir, 'package.json'), 'utf8')).version}`;
  }
  fs.writeFileSync(path.join(serverOut, 'parser.info.json'), JSON.stringify(provenance, null, 2) + '\n');
  await writeRulePages(serverOut, common);

  const clientEntry = path.join(root, 'client', 'src', 'extension.ts');
  if (!fs.existsSync(clientEntry)) return;
  fs.mkdirSync(clientOut, { recursive: true });
  await esbuild.build({ ...common, entryPoints: [clientEntry], outfile: path.join(clientOut, 'extension.js'), external: ['vscode'] });
  if (production) fs.rmSync(path.join(clientOut, 'extension.js.map'), { force: true });
  for (const file of ['noisewise.js', ...wasmFiles.map(([, f]) => f)]) {
    fs.copyFileSync(path.join(serverOut, file), path.join(clientOut, file === 'noisewise.js' ? 'server-bundle.js' : file));
  }
  // The extension starts dist/server.js: the bundle runner of the CLI (server/bin/run-bundle.js, V8 settings and code
  // cache), run on the copied bundle.
  const runner = fs.readFileSync(path.join(root, 'server', 'bin', 'run-bundle.js'), 'utf8');
  fs.writeFileSync(path.join(clientOut, 'server.js'), `${runner}\nmodule.exports.runBundle(require('node:path').join(__dirname, 'server-bundle.js'));\n`);
  fs.rmSync(path.join(clientOut, 'server-bundle.js.v8cache'), { force: true });
  // server-bundle.js points at its source map by the server bundle's name.
  if (!production) fs.copyFileSync(path.join(serverOut, 'noisewise.js.map'), path.join(clientOut, 'noisewise.js.map'));
  fs.rmSync(path.join(clientOut, 'rules'), { recursive: true, force: true });
  fs.cpSync(path.join(serverOut, 'rules'), path.join(clientOut, 'rules'), { recursive: true });
}

if (process.argv[1] && path.resolve(process.argv[1]) === fileURLToPath(import.meta.url)) {
  await buildBundles({ production: process.argv.includes('--production') });
}
