// Packages the VS Code extension as client/noisewise-<version>.vsix: builds production bundles into a staging folder
// (the development bundles in server/dist and client/dist are left alone, so running tests are not disturbed), adds the
// manifest, README, LICENSE and .vscodeignore, and runs @vscode/vsce there. Prints the .vsix path on the last line.
import { execFileSync } from 'node:child_process';
import * as fs from 'node:fs';
import * as os from 'node:os';
import * as path from 'node:path';
import { buildBundles, root } from './bundle.mjs';

const client = path.join(root, 'client');
const manifest = JSON.parse(fs.readFileSync(path.join(client, 'package.json'), 'utf8'));
const outFile = path.resolve(process.argv[2] ?? path.join(client, `${manifest.name}-${manifest.version}.vsix`));
const stage = fs.mkdtempSync(path.join(os.tmpdir(), 'noisewise-vsix-'));
try {
  await buildBundles({ production: true, serverOut: path.join(stage, 'server-dist'), clientOut: path.join(stage, 'extension', 'dist') });
  const ext = path.join(stage, 'extension');
  for (const [from, to] of [
    [path.join(client, 'package.json'), 'package.json'],
    [path.join(client, 'README.md'), 'README.md'],
    [path.join(client, '.vscodeignore'), '.vscodeignore'],
    [path.join(root, 'LICENSE'), 'LICENSE'],
  ]) {
    fs.copyFileSync(from, path.join(ext, to));
  }
  fs.rmSync(outFile, { force: true });
  const vsce = path.join(root, 'node_modules', '@vscode', 'vsce', 'vsce');
  execFileSync(process.execPath, [vsce, 'package', '--no-dependencies', '--out', outFile], { cwd: ext, stdio: ['ignore', 'inherit', 'inherit'] });
  process.stdout.write(`${outFile}\n`);
} finally {
  fs.rmSync(stage, { recursive: true, force: true });
}
