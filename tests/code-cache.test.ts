// server/bin/run-bundle.js runs the bundle through V8's code cache. The cache must speed up only: used for the exact
// bundle text it was made from, ignored (and replaced) when stale or damaged, never needed.
import { execFileSync } from 'node:child_process';
import * as crypto from 'node:crypto';
import * as fs from 'node:fs';
import * as os from 'node:os';
import * as path from 'node:path';
import { afterEach, describe, expect, it } from 'vitest';

const RUNNER = path.resolve(__dirname, '..', 'server', 'bin', 'run-bundle.js');
const folders: string[] = [];

afterEach(() => {
  for (const f of folders.splice(0)) fs.rmSync(f, { recursive: true, force: true });
});

/** A small CommonJS "bundle" that uses what the real one uses: require, __filename, module.exports. */
function fakeBundle(marker: string): string {
  const dir = fs.mkdtempSync(path.join(os.tmpdir(), 'noisewise-cache-'));
  folders.push(dir);
  const file = path.join(dir, 'bundle.js');
  fs.writeFileSync(file, `const p = require('node:path');\nfunction work(n) { let s = 0; for (let i = 0; i < n; i++) s += i; return s; }\nmodule.exports = { marker: ${JSON.stringify(marker)} };\nprocess.stdout.write(p.basename(__filename) + ' ${marker} ' + work(1000) + '\\n');\n`);
  return file;
}

/** Runs the bundle through the runner in a fresh process; returns its output and the cache state the runner saw. */
function run(bundle: string, env: Record<string, string> = {}): { out: string; cache: string } {
  const script = `const r = require(${JSON.stringify(RUNNER)}).runBundle(${JSON.stringify(bundle)}); process.stdout.write('cache ' + r.cache + '\\n');`;
  const out = execFileSync(process.execPath, ['-e', script], { encoding: 'utf8', env: { ...process.env, NOISEWISE_CODE_CACHE: '', NOISEWISE_V8_DEFAULTS: '', ...env } });
  const cache = /cache (\w+)/.exec(out)?.[1] ?? '?';
  return { out: out.replace(/cache \w+\n/, ''), cache };
}

describe('code cache of the bundle', () => {
  it('is written after a run, named by the bundle text, and used by the next run', () => {
    const bundle = fakeBundle('a');
    expect(run(bundle)).toEqual({ out: 'bundle.js a 499500\n', cache: 'none' });
    const bytes = fs.readFileSync(`${bundle}.v8cache`);
    const digest = crypto.createHash('sha256').update(fs.readFileSync(bundle, 'utf8')).digest();
    expect(bytes.subarray(0, 32).equals(digest)).toBe(true);
    expect(bytes.length).toBeGreaterThan(36);
    expect(run(bundle)).toEqual({ out: 'bundle.js a 499500\n', cache: 'used' });
  });

  it('is not used for another bundle text, even of the same length', () => {
    const bundle = fakeBundle('a');
    run(bundle);
    fs.writeFileSync(bundle, fs.readFileSync(bundle, 'utf8').replace(" a '", " b '").replace('"a"', '"b"'));
    expect(run(bundle)).toEqual({ out: 'bundle.js b 499500\n', cache: 'none' });
    expect(run(bundle).cache).toBe('used');
  });

  it('is rejected by V8 when damaged or made under other V8 flags, and then replaced', () => {
    const bundle = fakeBundle('a');
    run(bundle);
    const bytes = fs.readFileSync(`${bundle}.v8cache`);
    for (let i = 40; i < bytes.length; i += 7) bytes[i] = bytes[i]! ^ 0x5a;
    fs.writeFileSync(`${bundle}.v8cache`, bytes);
    expect(run(bundle)).toEqual({ out: 'bundle.js a 499500\n', cache: 'rejected' });
    expect(run(bundle).cache).toBe('used');
    // Made with V8's default flags, read with the tuned ones.
    fs.rmSync(`${bundle}.v8cache`);
    expect(run(bundle, { NOISEWISE_V8_DEFAULTS: '1' }).cache).toBe('none');
    expect(run(bundle).cache).toBe('rejected');
    expect(run(bundle).cache).toBe('used');
  });

  it('is not needed: NOISEWISE_CODE_CACHE=0 neither reads nor writes it', () => {
    const bundle = fakeBundle('a');
    expect(run(bundle, { NOISEWISE_CODE_CACHE: '0' })).toEqual({ out: 'bundle.js a 499500\n', cache: 'off' });
    expect(fs.existsSync(`${bundle}.v8cache`)).toBe(false);
  });

  it('runs without one when it can be neither read nor written, and leaves no temporary file', () => {
    // A folder in the cache's place makes both the read and the final rename fail, even for root (for whom a
    // read-only folder would still be writable).
    const bundle = fakeBundle('a');
    fs.mkdirSync(`${bundle}.v8cache`);
    expect(run(bundle)).toEqual({ out: 'bundle.js a 499500\n', cache: 'none' });
    expect(run(bundle)).toEqual({ out: 'bundle.js a 499500\n', cache: 'none' });
    expect(fs.readdirSync(path.dirname(bundle)).sort()).toEqual(['bundle.js', 'bundle.js.v8cache']);
    expect(fs.statSync(`${bundle}.v8cache`).isDirectory()).toBe(true);
  });
});
