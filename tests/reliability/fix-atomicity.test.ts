// `--fix` never damages a file: on a tree of a few hundred fixable files (Python with LF and CRLF, notebooks, odd
// permission bits) the process is killed with SIGKILL at random moments, and afterwards every file is either wholly
// as it was or wholly as a complete run writes it, with its permission bits; a complete run leaves no temporary file
// behind, follows symbolic links instead of replacing them, keeps the owner and leaves read-only files alone.
import { spawn, spawnSync } from 'node:child_process';
import * as fs from 'node:fs';
import * as os from 'node:os';
import * as path from 'node:path';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { BIN, requireBundle } from '../helpers/cli-run';
import { recordCount, REPO, runs, STRESS } from './fixtures';

/** The fix cases of every rule (single files), the sources of the tree. */
function fixSources(): { name: string; text: string }[] {
  const out: { name: string; text: string }[] = [];
  for (const rule of fs.readdirSync(path.join(REPO, 'rules')).sort()) {
    const cases = path.join(REPO, 'rules', rule, 'cases');
    if (!fs.existsSync(cases)) continue;
    for (const name of fs.readdirSync(cases).sort()) {
      if (/^fix-.*\.(py|ipynb)$/.test(name) && !/\.fixed(\.\d+)?\.(py|ipynb)$/.test(name)) out.push({ name, text: fs.readFileSync(path.join(cases, name), 'utf8') });
    }
  }
  return out;
}

const FILE_COUNT = 240;
let scratch: string;
/** The tree before any fix: relative path → bytes and mode. */
const original = new Map<string, { bytes: Buffer; mode: number }>();
/** What a complete `--fix` run writes: relative path → bytes. */
const fixed = new Map<string, Buffer>();
let fullRunMs = 0;

function writeTree(root: string): void {
  for (const [rel, { bytes, mode }] of original) {
    const file = path.join(root, rel);
    fs.mkdirSync(path.dirname(file), { recursive: true });
    fs.writeFileSync(file, bytes);
    fs.chmodSync(file, mode);
  }
}

function runFix(cwd: string): { code: number | null; stderr: string; stdout: string } {
  const result = spawnSync(process.execPath, [BIN, 'check', '.', '--fix', '--format', 'json'], { cwd, encoding: 'utf8', timeout: 300_000, maxBuffer: 64 * 1024 * 1024 });
  if (result.error) throw result.error;
  return { code: result.status, stderr: result.stderr, stdout: result.stdout };
}

/** Temporary files a run left next to the files it wrote. */
function tempFiles(root: string): string[] {
  const out: string[] = [];
  const stack = [root];
  while (stack.length > 0) {
    const dir = stack.pop()!;
    for (const entry of fs.readdirSync(dir, { withFileTypes: true })) {
      if (entry.isDirectory()) stack.push(path.join(dir, entry.name));
      else if (/\.noisewise-\d+-\w+\.tmp$/.test(entry.name)) out.push(path.relative(root, path.join(dir, entry.name)));
    }
  }
  return out;
}

/** Calls `then` once, as soon as a temporary file of a `--fix` run appears in a folder of the tree; returns a stop. */
function onFirstTempFile(root: string, then: () => void): () => void {
  let fired = false;
  const watchers: fs.FSWatcher[] = [];
  const stop = (): void => {
    for (const w of watchers.splice(0)) w.close();
  };
  const folders = [...new Set([...original.keys()].map((rel) => path.dirname(rel)))];
  for (const folder of folders) {
    watchers.push(
      fs.watch(path.join(root, folder), (_event, name) => {
        if (fired || name === null || !/\.noisewise-\d+-\w+\.tmp$/.test(String(name))) return;
        fired = true;
        then();
        stop();
      }),
    );
  }
  return stop;
}

beforeAll(() => {
  requireBundle();
  scratch = fs.realpathSync(fs.mkdtempSync(path.join(os.tmpdir(), 'noisewise-atomic-')));
  const sources = fixSources();
  for (let i = 0; i < FILE_COUNT; i++) {
    const source = sources[i % sources.length]!;
    const ext = path.extname(source.name);
    const crlf = ext === '.py' && i % 3 === 1;
    const text = crlf ? source.text.replace(/\r?\n/g, '\r\n') : source.text;
    original.set(`lab${i % 8}/case_${i}${ext}`, { bytes: Buffer.from(text, 'utf8'), mode: i % 5 === 0 ? 0o751 : 0o644 });
  }
  const reference = path.join(scratch, 'reference');
  writeTree(reference);
  const started = Date.now();
  const run = runFix(reference);
  fullRunMs = Date.now() - started;
  expect([0, 1], run.stderr).toContain(run.code);
  for (const rel of original.keys()) fixed.set(rel, fs.readFileSync(path.join(reference, rel)));
}, 600_000);

afterAll(() => fs.rmSync(scratch, { recursive: true, force: true }));

describe('--fix on a tree of a few hundred fixable files', () => {
  it('rewrites most files, keeps their permission bits and line breaks, and leaves no temporary file', () => {
    const reference = path.join(scratch, 'reference');
    const changed = [...original.keys()].filter((rel) => !fixed.get(rel)!.equals(original.get(rel)!.bytes));
    expect(changed.length).toBeGreaterThan(FILE_COUNT / 2);
    for (const rel of changed) {
      expect(fs.statSync(path.join(reference, rel)).mode & 0o777, rel).toBe(original.get(rel)!.mode);
      const before = original.get(rel)!.bytes.toString('utf8');
      const after = fixed.get(rel)!.toString('utf8');
      if (rel.endsWith('.py') && before.includes('\r\n')) expect(after.replace(/\r\n/g, ''), `${rel} mixes line breaks after the fix`).not.toMatch(/[\r\n]/);
    }
    expect(tempFiles(reference)).toEqual([]);
    recordCount('--fix tree files', FILE_COUNT);
  });

  it('leaves every file wholly old or wholly new when the process is killed at random moments', async () => {
    // Half the kills come at a random moment of the whole run, steered towards the writing phase; the other half a
    // random few milliseconds after the first temporary file appears, so that some kill lands among the writes even
    // on a machine that writes the whole tree in a few milliseconds.
    const kills = runs(12, 20);
    let killed = 0;
    let lo = 0;
    let hi = fullRunMs * 1.3;
    let afterFirstWriteMs = 8;
    let partial = 0;
    const report: string[] = [];
    const changedTotal = [...original.keys()].filter((rel) => !fixed.get(rel)!.equals(original.get(rel)!.bytes)).length;
    for (let k = 0; k < kills && (STRESS || partial < 2); k++) {
      killed++;
      const root = path.join(scratch, `kill-${k}`);
      writeTree(root);
      const watched = k % 2 === 1;
      const delay = watched ? Math.random() * afterFirstWriteMs : lo + Math.random() * (hi - lo);
      const child = spawn(process.execPath, [BIN, 'check', '.', '--fix', '--format', 'json'], { cwd: root, stdio: 'ignore' });
      const exited = new Promise<void>((resolve) => child.on('exit', () => resolve()));
      if (watched) {
        const stop = onFirstTempFile(root, () => {
          if (delay < 1) child.kill('SIGKILL');
          else setTimeout(() => child.kill('SIGKILL'), delay);
        });
        await exited;
        stop();
      } else {
        await new Promise((resolve) => setTimeout(resolve, delay));
        child.kill('SIGKILL');
        await exited;
      }
      let news = 0;
      for (const [rel, { bytes, mode }] of original) {
        const now = fs.readFileSync(path.join(root, rel));
        const isOld = now.equals(bytes);
        const isNew = now.equals(fixed.get(rel)!);
        expect(isOld || isNew, `${rel} is neither the old nor the new text after a kill at ${Math.round(delay)} ms`).toBe(true);
        expect(fs.statSync(path.join(root, rel)).mode & 0o777, rel).toBe(mode);
        if (isNew && !isOld) news++;
      }
      report.push(`${watched ? 'first write + ' : ''}${Math.round(delay)} ms: ${news}/${changedTotal} written`);
      if (news > 0 && news < changedTotal) partial++;
      // Steer the next kill into the writing phase: after an all-old kill wait longer, after an all-new one less.
      else if (watched) afterFirstWriteMs = news === changedTotal ? afterFirstWriteMs / 2 : afterFirstWriteMs * 2;
      else if (news === 0) lo = delay;
      else hi = delay;
      if (news > 0 && news < changedTotal && partial <= (STRESS ? 3 : 1)) {
        // A complete run after a kill in the writing phase finishes the job and leaves no temporary file of its own
        // (the killed run's may stay: nothing can remove them).
        const leftover = new Set(tempFiles(root));
        const again = runFix(root);
        expect([0, 1], again.stderr).toContain(again.code);
        for (const [rel] of original) expect(fs.readFileSync(path.join(root, rel)).equals(fixed.get(rel)!), `${rel} after the run that followed the kill`).toBe(true);
        expect(tempFiles(root).filter((t) => !leftover.has(t))).toEqual([]);
      }
      fs.rmSync(root, { recursive: true, force: true });
    }
    process.stdout.write(`kills: ${report.join('; ')}\n`);
    recordCount('--fix runs killed', killed);
    recordCount('--fix runs killed while writing', partial);
    // The steering finds the writing phase; a run of kills that never hit it would test nothing.
    expect(partial, report.join('; ')).toBeGreaterThan(0);
  }, 900_000);
});

describe('--fix and files edited while it runs', () => {
  it('never overwrites a file that changed on disk after it was read, and says so', async () => {
    const root = path.join(scratch, 'edited');
    writeTree(root);
    const child = spawn(process.execPath, [BIN, 'check', '.', '--fix', '--format', 'json'], { cwd: root, stdio: ['ignore', 'pipe', 'pipe'] });
    let stdout = '';
    child.stdout!.on('data', (chunk: Buffer) => (stdout += chunk.toString()));
    const exited = new Promise<void>((resolve) => child.on('exit', () => resolve()));
    const suffix = (rel: string): string => (rel.endsWith('.py') ? '# saved by the user\n' : ' ');
    // Every file has been read once the first fixed file is being written (writes come last, in path order). The
    // process is paused there and the user saves the ten files it would write last.
    let edited: string[] = [];
    const stop = onFirstTempFile(root, () => {
      child.kill('SIGSTOP');
      edited = [...original.keys()]
        .filter((rel) => !fixed.get(rel)!.equals(original.get(rel)!.bytes))
        .sort((a, b) => (a < b ? -1 : a > b ? 1 : 0))
        .slice(-10);
      for (const rel of edited) fs.appendFileSync(path.join(root, rel), suffix(rel));
      child.kill('SIGCONT');
    });
    await exited;
    stop();
    expect(edited).toHaveLength(10);
    for (const rel of edited) {
      const now = fs.readFileSync(path.join(root, rel));
      expect(now.equals(Buffer.concat([original.get(rel)!.bytes, Buffer.from(suffix(rel))])), `${rel} was overwritten`).toBe(true);
    }
    const notes = (JSON.parse(stdout) as { notes: { path: string; message: string }[] }).notes.filter((n) => /changed on disk while it was being checked/.test(n.message)).map((n) => n.path);
    expect(notes.sort()).toEqual([...edited].sort());
    fs.rmSync(root, { recursive: true, force: true });
  });
});

describe('--fix and the files it writes', () => {
  const GOOD = fs.readFileSync(path.join(REPO, 'rules', 'unconstrained-std', 'cases', 'fix-basic.py'), 'utf8');
  let dir: string;
  beforeAll(() => {
    dir = path.join(scratch, 'links');
    fs.mkdirSync(path.join(dir, 'real'), { recursive: true });
    fs.writeFileSync(path.join(dir, 'real', 'layer.py'), GOOD);
    fs.symlinkSync(path.join('real', 'layer.py'), path.join(dir, 'layer_link.py'));
    fs.writeFileSync(path.join(dir, 'frozen.py'), GOOD);
    fs.chmodSync(path.join(dir, 'frozen.py'), 0o444);
    fs.writeFileSync(path.join(dir, 'theirs.py'), GOOD);
    if (process.getuid?.() === 0) fs.chownSync(path.join(dir, 'theirs.py'), 65534, 65534);
  });

  it('fixes the file a symbolic link points to and keeps the link a link', () => {
    // Only the link is checked here: the real file is reached through it.
    const out = spawnSync(process.execPath, [BIN, 'check', 'layer_link.py', '--fix'], { cwd: dir, encoding: 'utf8' });
    expect([0, 1], out.stderr).toContain(out.status);
    expect(fs.lstatSync(path.join(dir, 'layer_link.py')).isSymbolicLink()).toBe(true);
    expect(fs.readFileSync(path.join(dir, 'real', 'layer.py'), 'utf8')).not.toBe(GOOD);
    expect(tempFiles(dir)).toEqual([]);
  });

  it('leaves a read-only file alone and says so', () => {
    const out = spawnSync(process.execPath, [BIN, 'check', 'frozen.py', '--fix'], { cwd: dir, encoding: 'utf8' });
    expect(out.stderr).toContain('frozen.py: fix: not written: the file is read-only');
    expect(fs.readFileSync(path.join(dir, 'frozen.py'), 'utf8')).toBe(GOOD);
  });

  it.runIf(process.getuid?.() === 0)('keeps the owner of a file it rewrites as root', () => {
    const out = spawnSync(process.execPath, [BIN, 'check', 'theirs.py', '--fix'], { cwd: dir, encoding: 'utf8' });
    expect([0, 1], out.stderr).toContain(out.status);
    expect(fs.readFileSync(path.join(dir, 'theirs.py'), 'utf8')).not.toBe(GOOD);
    const stat = fs.statSync(path.join(dir, 'theirs.py'));
    expect([stat.uid, stat.gid]).toEqual([65534, 65534]);
  });
});
