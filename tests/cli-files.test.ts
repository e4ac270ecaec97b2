// File discovery and reading for `noisewise check`: .gitignore layers, skipped folders, excludes, symbolic links, binary, huge and oddly encoded files.
import * as fs from 'node:fs';
import * as os from 'node:os';
import * as path from 'node:path';
import { afterEach, beforeEach, describe, expect, it } from 'vitest';
import { clearConfigCache, ConfigError } from '../server/src/engine/config';
import { codingDeclaration, collectFiles, decodeSource, detectLineEnding, encodeSource, readSourceFile, writeFileAtomic } from '../server/src/cli/files';
import { UsageError } from '../server/src/cli/io';

const IDS = ['unconstrained-std'];
let root: string;

beforeEach(() => {
  root = fs.realpathSync(fs.mkdtempSync(path.join(os.tmpdir(), 'noisewise-files-')));
  clearConfigCache();
});
afterEach(() => fs.rmSync(root, { recursive: true, force: true }));

function write(rel: string, content: string | Buffer): string {
  const file = path.join(root, rel);
  fs.mkdirSync(path.dirname(file), { recursive: true });
  fs.writeFileSync(file, content);
  return file;
}

function collect(args: string[] = ['.']) {
  return collectFiles(args, { cwd: root, knownRuleIds: IDS });
}

describe('walking folders', () => {
  it('finds .py and .ipynb files in sorted order and ignores other files', () => {
    write('b.py', 'x = 1\n');
    write('a/z.ipynb', '{"cells": [], "nbformat": 4}');
    write('a/m.py', '');
    write('README.md', '# x\n');
    write('a/data.csv', '1,2\n');
    expect(collect().files.map((f) => f.path)).toEqual(['a/m.py', 'a/z.ipynb', 'b.py']);
  });

  it('always skips version-control, dependency, cache, virtual-env and checkpoint folders', () => {
    for (const dir of ['.git', 'node_modules', '__pycache__', '.venv', 'venv', '.ipynb_checkpoints']) write(`${dir}/x.py`, '');
    write('src/.ipynb_checkpoints/nb-checkpoint.ipynb', '{}');
    write('src/keep.py', '');
    expect(collect().files.map((f) => f.path)).toEqual(['src/keep.py']);
  });

  it('walks a skipped folder when it is named on the command line', () => {
    write('venv/tool.py', '');
    expect(collect(['venv']).files.map((f) => f.path)).toEqual(['venv/tool.py']);
  });

  it('honours .gitignore files, nested ones for their subtree, with negation', () => {
    write('.gitignore', 'build/\n*.gen.py\n');
    write('build/out.py', '');
    write('model.gen.py', '');
    write('model.py', '');
    write('pkg/.gitignore', 'scratch*.py\n!model.gen.py\n');
    write('pkg/scratch1.py', '');
    write('pkg/model.gen.py', '');
    write('pkg/ok.py', '');
    write('other/scratch2.py', '');
    expect(collect().files.map((f) => f.path)).toEqual(['model.py', 'other/scratch2.py', 'pkg/model.gen.py', 'pkg/ok.py']);
  });

  it('applies the .gitignore files of the repository above a folder named on the command line', () => {
    fs.mkdirSync(path.join(root, '.git'));
    write('.gitignore', 'generated/\n');
    write('.git/info/exclude', 'local_*.py\n');
    write('src/generated/a.py', '');
    write('src/local_try.py', '');
    write('src/b.py', '');
    const found = collectFiles(['src'], { cwd: root, knownRuleIds: IDS });
    expect(found.files.map((f) => f.path)).toEqual(['src/b.py']);
  });

  it('outside a repository, applies the .gitignore files between the working directory and a named subfolder', () => {
    write('.gitignore', 'scratch/\n');
    write('pkg/.gitignore', '*_tmp.py\n');
    write('pkg/sub/a_tmp.py', '');
    write('pkg/sub/scratch/b.py', '');
    write('pkg/sub/c.py', '');
    expect(collect(['pkg/sub']).files.map((f) => f.path)).toEqual(['pkg/sub/c.py']);
    expect(collect(['pkg/sub', '.']).files.map((f) => f.path)).toEqual(['pkg/sub/c.py']);
  });

  it('skips what the nearest pyproject.toml excludes, relative to its folder', () => {
    write('pyproject.toml', '[tool.noisewise]\nexclude = ["legacy", "**/*_draft.py"]\n');
    write('legacy/old.py', '');
    write('src/a_draft.py', '');
    write('src/a.py', '');
    write('sub/pyproject.toml', '[tool.noisewise]\nexclude = ["gen/**"]\n');
    write('sub/gen/x.py', '');
    write('sub/legacy/kept.py', '');
    expect(collect().files.map((f) => f.path)).toEqual(['src/a.py', 'sub/legacy/kept.py']);
  });

  it('still checks a file named on the command line even when the configuration excludes it', () => {
    write('pyproject.toml', '[tool.noisewise]\nexclude = ["legacy/**"]\n');
    write('legacy/old.py', '');
    expect(collect(['legacy/old.py']).files.map((f) => f.path)).toEqual(['legacy/old.py']);
  });

  it('stops with a ConfigError on a broken pyproject.toml met on the way', () => {
    write('pyproject.toml', '[tool.noisewise]\nexclude = 3\n');
    write('a.py', '');
    expect(() => collect()).toThrow(ConfigError);
  });

  it('ends symbolic-link loops and reports them', () => {
    write('pkg/a.py', '');
    fs.symlinkSync(path.join(root, 'pkg'), path.join(root, 'pkg', 'again'));
    fs.symlinkSync('self', path.join(root, 'self'));
    const found = collect();
    expect(found.files.map((f) => f.path)).toEqual(['pkg/a.py']);
    expect(found.notes.map((n) => [n.path, n.message])).toEqual([
      ['pkg/again', 'symbolic link to a folder that is already searched (pkg)'],
      ['self', 'symbolic link loop'],
    ]);
  });

  it('checks a file reached twice through a link once, and reports broken links to Python files', () => {
    write('real/m.py', '');
    fs.symlinkSync(path.join(root, 'real', 'm.py'), path.join(root, 'alias.py'));
    fs.symlinkSync(path.join(root, 'missing.py'), path.join(root, 'dangling.py'));
    const found = collect();
    expect(found.files.map((f) => f.path)).toEqual(['alias.py']);
    expect(found.notes).toEqual([{ path: 'dangling.py', level: 'warning', kind: 'skipped', message: 'broken symbolic link' }]);
  });

  it('searches folders named twice, or nested in each other, once and without a note', () => {
    write('pkg/a.py', '');
    write('pkg/sub/b.py', '');
    const found = collect(['.', 'pkg/sub', 'pkg', 'pkg/a.py']);
    expect(found.files.map((f) => f.path)).toEqual(['pkg/a.py', 'pkg/sub/b.py']);
    expect(found.notes).toEqual([]);
  });

  it('notes a named file that is not Python and refuses a path that does not exist', () => {
    write('notes.txt', 'x');
    expect(collect(['notes.txt']).notes).toEqual([{ path: 'notes.txt', level: 'info', kind: 'skipped', message: 'not a Python file (.py) or notebook (.ipynb)' }]);
    expect(() => collect(['nope'])).toThrow(UsageError);
    expect(() => collect(['nope'])).toThrow(/no such file or folder: nope/);
  });

  it('uses paths relative to the working directory, also for paths outside it', () => {
    write('lab/a.py', '');
    write('other/b.py', '');
    const found = collectFiles(['.', '../other'], { cwd: path.join(root, 'lab'), knownRuleIds: IDS });
    expect(found.files.map((f) => f.path)).toEqual(['../other/b.py', 'a.py']);
  });
});

describe('reading files', () => {
  it('skips binary files, files over 10 MB and unreadable files with a note', () => {
    write('bin.py', Buffer.from([0x69, 0x6d, 0x70, 0x00, 0x01]));
    const big = write('big.py', '');
    fs.truncateSync(big, 10 * 1024 * 1024 + 1);
    write('fine.py', 'x = 1\n');
    const found = collect();
    expect(found.files.map((f) => f.path)).toEqual(['fine.py']);
    expect(found.notes).toEqual([
      { path: 'big.py', level: 'warning', kind: 'skipped', message: 'larger than 10 MB (10.0 MB)' },
      { path: 'bin.py', level: 'warning', kind: 'skipped', message: 'binary file (it contains NUL bytes)' },
    ]);
  });

  it.skipIf(process.getuid?.() === 0)('skips a file it may not read (not testable as root, who may read anything)', () => {
    const file = write('secret.py', 'x = 1\n');
    fs.chmodSync(file, 0o000);
    const result = readSourceFile(file, 'secret.py');
    expect(result).toEqual({ path: 'secret.py', level: 'warning', kind: 'skipped', message: 'cannot read the file (permission denied)' });
  });

  it.runIf(fs.existsSync('/proc/self/mem'))('turns a read error into a note (a Linux file that exists but cannot be read)', () => {
    expect(readSourceFile('/proc/self/mem', 'mem.py')).toEqual({ path: 'mem.py', level: 'warning', kind: 'skipped', message: 'cannot read the file (EIO)' });
  });

  it('strips and remembers a UTF-8 byte-order mark, and remembers line endings and mode', () => {
    const file = write('bom.py', Buffer.concat([Buffer.from([0xef, 0xbb, 0xbf]), Buffer.from('x = "é"\r\ny = 2\r\n')]));
    fs.chmodSync(file, 0o640);
    const result = readSourceFile(file, 'bom.py');
    if (!('file' in result)) throw new Error(result.message);
    expect(result.file).toMatchObject({ text: 'x = "é"\r\ny = 2\r\n', bom: true, encoding: 'utf-8', writable: true, lineEnding: '\r\n', mode: 0o640, kind: 'python' });
    expect(result.notes).toEqual([]);
  });

  it('decodes a latin-1 file through its coding declaration', () => {
    const bytes = Buffer.from('# -*- coding: latin-1 -*-\nriviere = "d\xe9bit \xb5"\n', 'latin1');
    const decoded = decodeSource(bytes, 'python');
    expect(decoded).toEqual({ text: '# -*- coding: latin-1 -*-\nriviere = "débit µ"\n', bom: false, encoding: 'latin-1', writable: true });
    expect(encodeSource({ bom: false, encoding: 'latin-1', writable: true }, decoded.text)).toEqual(bytes);
    expect(encodeSource({ bom: false, encoding: 'latin-1', writable: true }, 'σ = 1')).toBeNull();
  });

  it('decodes other declared encodings it knows, and refuses to write them back', () => {
    const bytes = Buffer.concat([Buffer.from('#!/usr/bin/env python\n# vim: set fileencoding=shift_jis :\nname = "'), Buffer.from([0x90, 0x85, 0x88, 0xca]), Buffer.from('"\n')]);
    const decoded = decodeSource(bytes, 'python');
    expect(decoded.text).toContain('name = "水位"');
    expect(decoded).toMatchObject({ encoding: 'shift_jis', writable: false });
  });

  it('replaces invalid UTF-8 without a declaration and says so', () => {
    const decoded = decodeSource(Buffer.from([0x78, 0x20, 0x3d, 0x20, 0xff, 0x0a]), 'python');
    expect(decoded.text).toBe('x = \ufffd\n');
    expect(decoded.writable).toBe(false);
    expect(decoded.note).toMatch(/not valid UTF-8 and no coding declaration/);
  });

  it('notes an unknown declared encoding and reads the file as UTF-8', () => {
    const decoded = decodeSource(Buffer.from('# coding: klingon-8\nx = 1\n'), 'python');
    expect(decoded.text).toBe('# coding: klingon-8\nx = 1\n');
    expect(decoded.note).toMatch(/unknown encoding "klingon-8"/);
    expect(decoded.writable).toBe(false);
  });

  it('finds coding declarations only where Python looks for them', () => {
    expect(codingDeclaration(Buffer.from('# -*- coding: latin-1 -*-\n'))).toBe('latin-1');
    expect(codingDeclaration(Buffer.from('#!/usr/bin/python\n# coding=cp1252\n'))).toBe('cp1252');
    expect(codingDeclaration(Buffer.from('import os\n# coding: latin-1\n'))).toBeNull();
    expect(codingDeclaration(Buffer.from('\n\n# coding: latin-1\n'))).toBeNull();
    expect(codingDeclaration(Buffer.from('x = 1\n'))).toBeNull();
  });

  it('ignores a coding declaration in a notebook (always UTF-8 JSON)', () => {
    const decoded = decodeSource(Buffer.from('# coding: latin-1\n{}'), 'notebook');
    expect(decoded.encoding).toBe('utf-8');
  });

  it('detects line endings', () => {
    expect(detectLineEnding('a\r\nb\n')).toBe('\r\n');
    expect(detectLineEnding('a\nb\r\n')).toBe('\n');
    expect(detectLineEnding('a\rb')).toBe('\r');
    expect(detectLineEnding('a')).toBe('\n');
  });
});

describe('writing files', () => {
  it('replaces a file atomically, keeping its mode and leaving no temporary file', () => {
    const file = write('m.py', 'old\n');
    fs.chmodSync(file, 0o751);
    writeFileAtomic(file, { bytes: Buffer.from('new\n'), mode: 0o751 });
    expect(fs.readFileSync(file, 'utf8')).toBe('new\n');
    expect(fs.statSync(file).mode & 0o777).toBe(0o751);
    expect(fs.readdirSync(root)).toEqual(['m.py']);
  });

  it('writes the byte-order mark back', () => {
    expect(encodeSource({ bom: true, encoding: 'utf-8', writable: true }, 'x')).toEqual(Buffer.from([0xef, 0xbb, 0xbf, 0x78]));
    expect(encodeSource({ bom: false, encoding: 'utf-8', writable: false }, 'x')).toBeNull();
  });
});
