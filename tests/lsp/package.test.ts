// The packaged extension: `npm run package` (scripts/package-extension.mjs) produces a .vsix holding the manifest,
// README, LICENSE, both bundles, both wasm files and every rule page — nothing else — and the server unpacked from
// it runs on its own (wasm found beside it, rule pages linked from there).
import { execFileSync } from 'node:child_process';
import * as fs from 'node:fs';
import * as os from 'node:os';
import * as path from 'node:path';
import * as zlib from 'node:zlib';
import { fileURLToPath } from 'node:url';
import { beforeAll, describe, expect, it } from 'vitest';
import { allRules } from '../../rules/index';
import { renderRulePage } from '../../server/src/engine/docs';
import { REPO, startSession, tempWorkspace, uriOf } from './lsp-client';

/** The entries of a zip archive (names and contents), read from its central directory. */
function readZip(file: string): Map<string, Buffer> {
  const data = fs.readFileSync(file);
  let end = data.length - 22;
  while (end >= 0 && data.readUInt32LE(end) !== 0x06054b50) end--;
  if (end < 0) throw new Error(`${file} is not a zip archive`);
  const count = data.readUInt16LE(end + 10);
  let at = data.readUInt32LE(end + 16);
  const out = new Map<string, Buffer>();
  for (let i = 0; i < count; i++) {
    if (data.readUInt32LE(at) !== 0x02014b50) throw new Error('broken central directory');
    const method = data.readUInt16LE(at + 10);
    const compressed = data.readUInt32LE(at + 20);
    const nameLength = data.readUInt16LE(at + 28);
    const extraLength = data.readUInt16LE(at + 30);
    const commentLength = data.readUInt16LE(at + 32);
    const local = data.readUInt32LE(at + 42);
    const name = data.subarray(at + 46, at + 46 + nameLength).toString('utf8');
    const start = local + 30 + data.readUInt16LE(local + 26) + data.readUInt16LE(local + 28);
    const raw = data.subarray(start, start + compressed);
    out.set(name, method === 8 ? zlib.inflateRawSync(raw) : Buffer.from(raw));
    at += 46 + nameLength + extraLength + commentLength;
  }
  return out;
}

describe('the .vsix', () => {
  let entries: Map<string, Buffer>;
  let unpacked: string;

  beforeAll(() => {
    const out = path.join(fs.mkdtempSync(path.join(os.tmpdir(), 'noisewise-vsix-test-')), 'noisewise.vsix');
    execFileSync(process.execPath, [path.join(REPO, 'scripts', 'package-extension.mjs'), out], { cwd: REPO, stdio: 'pipe' });
    entries = readZip(out);
    unpacked = path.dirname(out);
    for (const [name, content] of entries) {
      if (!name.startsWith('extension/')) continue;
      const target = path.join(unpacked, name);
      fs.mkdirSync(path.dirname(target), { recursive: true });
      fs.writeFileSync(target, content);
    }
  }, 120_000);

  it('contains the bundles, both wasm files, the rule pages and nothing else', () => {
    const pages = [...allRules.map((r) => `${r.meta.id}.md`), 'index.md'].sort().map((p) => `extension/dist/rules/${p}`);
    expect([...entries.keys()].sort()).toEqual(
      [
        '[Content_Types].xml',
        'extension.vsixmanifest',
        'extension/LICENSE.txt',
        'extension/package.json',
        'extension/readme.md',
        'extension/dist/extension.js',
        'extension/dist/server.js',
        'extension/dist/server-bundle.js',
        'extension/dist/tree-sitter-python.wasm',
        'extension/dist/web-tree-sitter.wasm',
        ...pages,
      ].sort(),
    );
  });

  it('ships the manifest of client/package.json and every rule page as the rules render it', () => {
    const manifest = JSON.parse(entries.get('extension/package.json')!.toString('utf8'));
    expect(manifest.contributes).toEqual(JSON.parse(fs.readFileSync(path.join(REPO, 'client', 'package.json'), 'utf8')).contributes);
    for (const rule of allRules) {
      expect(entries.get(`extension/dist/rules/${rule.meta.id}.md`)!.toString('utf8')).toBe(renderRulePage(rule));
    }
    // The extension bundle leaves only `vscode` to the host.
    const extension = entries.get('extension/dist/extension.js')!.toString('utf8');
    expect(extension).toMatch(/require\("vscode"\)/);
    expect(extension).not.toMatch(/require\("vscode-languageclient/);
  });

  it('runs the packaged server on its own, linking diagnostics to the rule pages shipped beside it', async () => {
    const text = fs.readFileSync(path.join(REPO, 'rules', 'unconstrained-std', 'cases', 'fix-basic.py'), 'utf8');
    const root = tempWorkspace({ 'layers.py': text });
    const session = await startSession({ root, script: path.join(unpacked, 'extension', 'dist', 'server.js') });
    try {
      const uri = uriOf(path.join(root, 'layers.py'));
      session.open(uri, text);
      const published = await session.diagnosticsFor(uri, { version: 1 });
      const finding = published.diagnostics.find((d) => d.code === 'unconstrained-std')!;
      expect(fileURLToPath(finding.codeDescription!.href)).toBe(path.join(unpacked, 'extension', 'dist', 'rules', 'unconstrained-std.md'));
    } finally {
      await session.stop();
    }
  });
});
