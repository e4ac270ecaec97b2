// Pathological files, each with its own test, all in one tree beside an ordinary flagged file: 3,000-deep nesting,
// 300-deep blocks, a 5 MB file, a 1 MB line, binary data and NUL bytes, invalid UTF-8, a Latin-1 coding cookie, empty
// files, broken notebooks, symbolic-link loops, links out of the tree, a FIFO, a folder named like a file and files the
// user may not read. The CLI explains each on stderr and as a JSON note and SARIF notification, the server in its log
// (or an information diagnostic), and the rest of the run goes on: the flagged file is still reported.
import { type ChildProcess, spawn, spawnSync } from 'node:child_process';
import * as fs from 'node:fs';
import * as os from 'node:os';
import * as path from 'node:path';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { BIN, requireBundle } from '../helpers/cli-run';
import { editorCapabilities, LspSession, startSession, uriOf } from '../lsp/lsp-client';
import { deepShapes } from './deep-shapes';
import { allPythonTexts, recordCount } from './fixtures';
import { unconstrainedStdModule } from '../helpers/snippets';

/** A flagged layer (unconstrained-std), the file that must still be reported whatever sits beside it. */
const GOOD = unconstrainedStdModule('StageNoise');

/** A per-rule budget that keeps the 5 MB file's run short (its note is part of what is tested). */
const BUDGET_MS = '1000';

/** Runs the built CLI with a timeout long enough for a loaded machine (the helper's 30 s is not). */
function runNoisewise(args: string[], cwd: string, env: Record<string, string> = {}): { code: number | null; stdout: string; stderr: string } {
  const result = spawnSync(process.execPath, [BIN, ...args], { cwd, env: { ...process.env, NO_COLOR: '1', ...env }, encoding: 'utf8', timeout: 240_000, maxBuffer: 64 * 1024 * 1024 });
  if (result.error) throw result.error;
  return { code: result.status, stdout: result.stdout, stderr: result.stderr };
}

const notebook = (doc: unknown): string => `${JSON.stringify(doc, null, 1)}\n`;
const codeCell = (source: unknown, extra: Record<string, unknown> = {}) => ({ cell_type: 'code', execution_count: null, metadata: {}, outputs: [], source, ...extra });

/** The 5 MB file: every single-file Python case of the rules, again and again, with classes renamed per copy. */
function fiveMegabytes(): string {
  const sources = allPythonTexts().filter((t) => t.label.startsWith('rules/'));
  const base = sources.map((s) => s.text).join('\n');
  const parts: string[] = [];
  let size = 0;
  for (let copy = 0; size < 5 * 1024 * 1024; copy++) {
    const part = base.replace(/\bclass (\w+)/g, `class $1_v${copy}`);
    parts.push(part);
    size += part.length;
  }
  return parts.join('\n');
}

let tree: string;
let outside: string;
let text: { code: number | null; stdout: string; stderr: string };
let json: { findings: { path: string; rule: string; line: number }[]; notes: { path: string; level: string; message: string }[]; summary: { files: number } };
let sarif: { runs: { results: { locations: { physicalLocation: { artifactLocation: { uri: string } } }[] }[]; invocations: { toolExecutionNotifications: { message: { text: string }; properties: { kind: string } }[] }[] }[] };
let cliMs = 0;

beforeAll(() => {
  requireBundle();
  const parent = fs.realpathSync(fs.mkdtempSync(path.join(os.tmpdir(), 'noisewise-patho-')));
  tree = path.join(parent, 'lab');
  outside = path.join(parent, 'elsewhere');
  fs.mkdirSync(tree);
  fs.mkdirSync(outside);
  const write = (rel: string, content: string | Buffer) => {
    fs.mkdirSync(path.dirname(path.join(tree, rel)), { recursive: true });
    fs.writeFileSync(path.join(tree, rel), content);
  };
  const shapes = new Map(deepShapes().map((s) => [s.name, s.text]));
  write('good.py', GOOD);
  write('deep_parens.py', shapes.get('nested parentheses')!);
  write('deep_calls.py', shapes.get('nested calls of a library function')!);
  write('deep_blocks.py', shapes.get('300-deep blocks (if, for, def)')!);
  // The 5 MB file sits in a folder of its own, checked by its own runs (its parse alone takes seconds).
  fs.mkdirSync(path.join(parent, 'big'));
  fs.writeFileSync(path.join(parent, 'big', 'five_mb.py'), fiveMegabytes());
  fs.writeFileSync(path.join(parent, 'big', 'good.py'), GOOD);
  write('one_line.py', `import torch\nweights = [${Array.from({ length: 130_000 }, (_, i) => (i * 0.5).toFixed(1)).join(', ')}]\n`);
  write('binary.py', Buffer.from([0x89, 0x50, 0x4e, 0x47, 0x0d, 0x0a, 0x1a, 0x0a, 0x00, 0x00, 0x00, 0x0d, 0x49, 0x48, 0x44, 0x52]));
  write('nul_late.py', Buffer.concat([Buffer.from(`${'# padding line for the probe\n'.repeat(400)}x = 1\n`), Buffer.from([0x00]), Buffer.from('\ny = 2\n')]));
  write('invalid_utf8.py', Buffer.concat([Buffer.from(GOOD.replace('StageNoise', 'Jauge')), Buffer.from([0x23, 0x20, 0xff, 0xfe, 0xc3, 0x0a])]));
  write('latin1.py', Buffer.from(`# -*- coding: latin-1 -*-\n# Débit de la rivière\n${GOOD}`, 'latin1'));
  write('empty.py', '');
  write('empty.ipynb', '');
  write('nb_invalid_json.ipynb', '{"cells": [{"cell_type": "code", "source": ["x = 1"');
  write('nb_top_array.ipynb', '[]\n');
  write('nb_cells_object.ipynb', notebook({ cells: { first: 1 }, metadata: {}, nbformat: 4, nbformat_minor: 5 }));
  write('nb_cell_number.ipynb', notebook({ cells: [7], metadata: {}, nbformat: 4, nbformat_minor: 5 }));
  write('nb_source_number.ipynb', notebook({ cells: [codeCell(42)], metadata: {}, nbformat: 4, nbformat_minor: 5 }));
  write('nb_source_mixed.ipynb', notebook({ cells: [codeCell(['x = 1\n', 2])], metadata: {}, nbformat: 4, nbformat_minor: 5 }));
  write('nb_nbformat3.ipynb', notebook({ worksheets: [], metadata: {}, nbformat: 3, nbformat_minor: 0 }));
  write('nb_julia.ipynb', notebook({ cells: [codeCell('x = 1')], metadata: { language_info: { name: 'julia' } }, nbformat: 4, nbformat_minor: 5 }));
  write('nb_odd_fields.ipynb', notebook({ cells: [{ cell_type: 5, source: 'x' }, codeCell(GOOD, { metadata: 'oops', outputs: 'none', execution_count: 'seven' })], metadata: [1, 2], nbformat: 4, nbformat_minor: 5 }));
  // Outputs nested 100,000 deep: JSON.parse copes, recursive writers would not.
  write('nb_deep_outputs.ipynb', `{"cells": [{"cell_type": "code", "execution_count": 1, "metadata": {}, "outputs": [${'['.repeat(100_000)}${']'.repeat(100_000)}], "source": ${JSON.stringify(GOOD)}}], "metadata": {}, "nbformat": 4, "nbformat_minor": 5}\n`);
  fs.symlinkSync('.', path.join(tree, 'loop'));
  fs.symlinkSync('selfloop', path.join(tree, 'selfloop'));
  fs.writeFileSync(path.join(outside, 'shared.py'), GOOD);
  fs.symlinkSync(path.join(outside, 'shared.py'), path.join(tree, 'outside_link.py'));
  fs.symlinkSync(outside, path.join(tree, 'outside_dir'));
  spawnSync('mkfifo', [path.join(tree, 'fifo.py')]);
  write('dir_as_file.py/inner.py', 'x = 1\n');
  const started = Date.now();
  text = runNoisewise(['check', '.'], tree);
  cliMs = Date.now() - started;
  json = JSON.parse(runNoisewise(['check', '.', '--format', 'json'], tree).stdout) as typeof json;
  sarif = JSON.parse(runNoisewise(['check', '.', '--format', 'sarif'], tree).stdout) as typeof sarif;
  recordCount('pathological files', 27);
}, 300_000);

afterAll(() => process.env.KEEP_TREE ? undefined : fs.rmSync(path.dirname(tree), { recursive: true, force: true }));

/** The note about a path in every CLI form: stderr of the text format, the JSON notes, the SARIF notifications. */
function expectNote(rel: string, message: RegExp): void {
  const stderr = text.stderr.split('\n').filter((l) => l.startsWith(`${rel}: `));
  expect(stderr.some((l) => message.test(l)), `stderr for ${rel}:\n${text.stderr}`).toBe(true);
  expect(json.notes.some((n) => n.path === rel && message.test(n.message)), JSON.stringify(json.notes, null, 1)).toBe(true);
  const notifications = sarif.runs[0]!.invocations[0]!.toolExecutionNotifications;
  expect(notifications.some((n) => n.message.text.startsWith(`${rel}: `) && message.test(n.message.text))).toBe(true);
}

function findingsIn(rel: string): { rule: string; line: number }[] {
  return json.findings.filter((f) => f.path === rel);
}

describe('the CLI on a tree of pathological files', () => {
  it('finishes (exit 1 for the findings, never 2) and still reports the ordinary flagged file', () => {
    expect(text.code, text.stderr).toBe(1);
    expect(findingsIn('good.py').map((f) => [f.rule, f.line])).toEqual([['unconstrained-std', 11]]);
    expect(text.stderr).not.toMatch(/internal error|Maximum call stack/);
    expect(json.findings.filter((f) => f.rule === 'internal-error')).toEqual([]);
    expect(cliMs).toBeLessThan(120_000);
  });

  it('analyses 3,000-deep parentheses and calls without an error note', () => {
    for (const rel of ['deep_parens.py', 'deep_calls.py']) expect(json.notes.filter((n) => n.path === rel && n.level === 'error')).toEqual([]);
  });

  it('analyses 300-deep blocks without an error note', () => {
    expect(json.notes.filter((n) => n.path === 'deep_blocks.py' && n.level === 'error')).toEqual([]);
  });

  it('analyses the 5 MB file within the budget: findings, or the ones before the budget ran out and a note saying so', () => {
    const big = path.join(path.dirname(tree), 'big');
    const env = { NOISEWISE_FILE_BUDGET_MS: BUDGET_MS };
    const started = Date.now();
    // One run: the text report goes to a file, the notes to stderr.
    const bigText = runNoisewise(['check', '.', '--output', 'report.txt'], big, env);
    const elapsed = Date.now() - started;
    expect(bigText.code, bigText.stderr).toBe(1);
    const report = fs.readFileSync(path.join(big, 'report.txt'), 'utf8').split('\n');
    expect(report.filter((l) => l.startsWith('good.py:'))).toHaveLength(1);
    const findings = report.filter((l) => /^five_mb\.py:\d+:\d+: /.test(l));
    const budget = bigText.stderr.split('\n').filter((l) => /^five_mb\.py: budget: analysis cut short: /.test(l));
    expect(findings.length > 0 || budget.length === 1, bigText.stderr).toBe(true);
    if (budget.length === 1) expect(budget[0]).toMatch(/time budget of 1 s per rule|time limit of 1.5 s/);
    // Parsing 5 MB takes seconds; the budget bounds everything after it.
    expect(elapsed).toBeLessThan(120_000);
  }, 300_000);

  it('analyses a 1 MB single line', () => {
    expect(json.notes.filter((n) => n.path === 'one_line.py')).toEqual([]);
  });

  it('skips binary data with a note', () => expectNote('binary.py', /skipped: binary file \(it contains NUL bytes\)/));

  it('analyses a text file with a NUL byte past the binary probe, as text', () => {
    expect(json.notes.filter((n) => n.path === 'nul_late.py' && n.level === 'error')).toEqual([]);
    expect(json.summary.files).toBeGreaterThan(5);
  });

  it('analyses invalid UTF-8 with the bytes replaced, says so, and still reports its finding', () => {
    expectNote('invalid_utf8.py', /not valid UTF-8 and no coding declaration/);
    expect(findingsIn('invalid_utf8.py').map((f) => f.rule)).toEqual(['unconstrained-std']);
  });

  it('decodes a Latin-1 coding cookie and reports the finding on the right line', () => {
    expect(findingsIn('latin1.py').map((f) => [f.rule, f.line])).toEqual([['unconstrained-std', 13]]);
    expect(json.notes.filter((n) => n.path === 'latin1.py')).toEqual([]);
  });

  it('checks an empty Python file quietly and skips an empty notebook with a note', () => {
    expect(findingsIn('empty.py')).toEqual([]);
    expect(json.notes.filter((n) => n.path === 'empty.py')).toEqual([]);
    expectNote('empty.ipynb', /not a valid notebook: the file is not valid JSON/);
  });

  const brokenNotebooks: [string, RegExp][] = [
    ['nb_invalid_json.ipynb', /not a valid notebook: the file is not valid JSON/],
    ['nb_top_array.ipynb', /not a valid notebook: the top level is not a JSON object/],
    ['nb_cells_object.ipynb', /"cells" is missing or is not a list/],
    ['nb_cell_number.ipynb', /cell 0 is not an object/],
    ['nb_source_number.ipynb', /cell 0 has a "source" that is neither a string nor a list of strings/],
    ['nb_source_mixed.ipynb', /cell 0 has a "source" that is neither a string nor a list of strings/],
    ['nb_nbformat3.ipynb', /unsupported notebook format 3/],
    ['nb_julia.ipynb', /notebook language is julia, not Python/],
  ];
  for (const [rel, message] of brokenNotebooks) {
    it(`skips ${rel} with a clear note`, () => {
      expectNote(rel, message);
      expect(findingsIn(rel)).toEqual([]);
    });
  }

  it('reads a notebook whose other fields have the wrong types, and one with outputs nested 100,000 deep', () => {
    expect(findingsIn('nb_odd_fields.ipynb').map((f) => f.rule)).toEqual(['unconstrained-std']);
    expect(findingsIn('nb_deep_outputs.ipynb').map((f) => f.rule)).toEqual(['unconstrained-std']);
  });

  it('ends directory symbolic-link loops with a note', () => {
    expectNote('selfloop', /symbolic link loop/);
    expectNote('loop', /symbolic link to a folder that is already searched/);
  });

  it('does not follow links out of the checked folder, and says so', () => {
    expectNote('outside_link.py', /outside the checked folders; not followed/);
    expectNote('outside_dir', /outside the checked folders; not followed/);
    expect(json.findings.some((f) => f.path.includes('shared.py') || f.path === 'outside_link.py')).toBe(false);
  });

  it('never opens a FIFO named like a Python file (it would block) and says why', () => expectNote('fifo.py', /not a regular file/));

  it('walks a folder named like a Python file', () => {
    expect(json.notes.filter((n) => n.path.startsWith('dir_as_file.py'))).toEqual([]);
    expect(runNoisewise(['check', 'dir_as_file.py', '--format', 'json'], tree).code).toBe(0);
  });
});

/** The command prefix that runs a program as an unprivileged user (nobody), or null when this process is not root. */
function dropPrivileges(): string[] | null {
  if (process.getuid?.() !== 0) return [];
  const setpriv = spawnSync('setpriv', ['--help'], { encoding: 'utf8' });
  if (setpriv.status === 0) return ['setpriv', '--reuid=65534', '--regid=65534', '--clear-groups', '--'];
  return null;
}

describe('files the user may not read', () => {
  const prefix = dropPrivileges();
  if (prefix === null) {
    it('needs setpriv (util-linux) to test permissions as root', () => {
      if (process.env.CI) throw new Error('root without setpriv cannot test unreadable files: apt-get install util-linux');
      console.warn('skipping the permission tests: running as root without setpriv (apt-get install util-linux)');
    });
    return;
  }
  let dir: string;
  /** A copy of the built program the unprivileged user can reach (the checkout may sit in a folder only root may enter). */
  let program: string;
  let bin: string;
  beforeAll(() => {
    program = fs.realpathSync(fs.mkdtempSync(path.join(os.tmpdir(), 'noisewise-perm-program-')));
    fs.chmodSync(program, 0o755);
    fs.cpSync(path.join(path.dirname(BIN), '..', 'dist'), path.join(program, 'dist'), { recursive: true });
    fs.cpSync(path.dirname(BIN), path.join(program, 'bin'), { recursive: true });
    bin = path.join(program, 'bin', path.basename(BIN));
    dir = fs.realpathSync(fs.mkdtempSync(path.join(os.tmpdir(), 'noisewise-perm-')));
    fs.chmodSync(dir, 0o755);
    fs.writeFileSync(path.join(dir, 'good.py'), GOOD);
    fs.writeFileSync(path.join(dir, 'secret.py'), GOOD);
    fs.chmodSync(path.join(dir, 'secret.py'), 0o000);
    fs.mkdirSync(path.join(dir, 'locked'));
    fs.writeFileSync(path.join(dir, 'locked', 'inner.py'), GOOD);
    fs.chmodSync(path.join(dir, 'locked'), 0o000);
  });
  afterAll(() => {
    fs.chmodSync(path.join(dir, 'locked'), 0o755);
    fs.rmSync(dir, { recursive: true, force: true });
    fs.rmSync(program, { recursive: true, force: true });
  });

  const run = (args: string[]) => {
    const [command, ...rest] = [...prefix, process.execPath, bin, ...args];
    const result = spawnSync(command!, rest, { cwd: dir, encoding: 'utf8', env: { ...process.env, NO_COLOR: '1' }, timeout: 60_000 });
    return { code: result.status, stdout: result.stdout, stderr: result.stderr };
  };

  it('skips an unreadable file and an unreadable folder with notes and checks the rest (CLI, as an unprivileged user)', () => {
    const out = run(['check', '.']);
    expect(out.code, out.stderr).toBe(1);
    expect(out.stderr).toContain('secret.py: skipped: cannot read the file (permission denied)');
    expect(out.stderr).toContain('locked: skipped: cannot read the folder (permission denied)');
    const report = JSON.parse(run(['check', '.', '--format', 'json']).stdout) as typeof json;
    expect(report.findings.map((f) => f.path)).toEqual(['good.py']);
    expect(report.notes.map((n) => [n.path, n.message])).toEqual([
      ['locked', 'skipped: cannot read the folder (permission denied)'],
      ['secret.py', 'skipped: cannot read the file (permission denied)'],
    ]);
  });

  it('logs the unreadable file and folder while indexing and serves the rest (server, as an unprivileged user)', async () => {
    const [command, ...rest] = [...prefix, process.execPath, bin, 'server', '--stdio'];
    const child: ChildProcess = spawn(command!, rest, { cwd: dir, stdio: ['pipe', 'pipe', 'pipe'], env: { ...process.env, HOME: dir, XDG_CACHE_HOME: path.join(os.tmpdir(), 'noisewise-perm-cache') } });
    const session = new LspSession(child, { root: dir });
    try {
      await session.connection.sendRequest('initialize', { processId: process.pid, rootUri: uriOf(dir), workspaceFolders: [{ uri: uriOf(dir), name: 'perm' }], capabilities: editorCapabilities() });
      await session.connection.sendNotification('initialized', {});
      await session.waitFor('indexing to finish', () => session.logs.find((l) => l.message.includes('indexing (start-up) finished')), 60_000);
      expect(session.logs.some((l) => /secret\.py: skipped, cannot read the file \(permission denied\)/.test(l.message))).toBe(true);
      expect(session.logs.some((l) => /locked: skipped, cannot read the folder \(permission denied\)/.test(l.message))).toBe(true);
      const good = await session.diagnosticsFor(uriOf(path.join(dir, 'good.py')));
      expect(good.diagnostics.map((d) => d.code)).toEqual(['unconstrained-std']);
    } finally {
      await session.stop();
    }
  });
});

describe('the server on the same tree', () => {
  let session: Awaited<ReturnType<typeof startSession>>;
  beforeAll(async () => {
    process.env.NOISEWISE_FILE_BUDGET_MS = BUDGET_MS;
    try {
      session = await startSession({ root: tree });
    } finally {
      delete process.env.NOISEWISE_FILE_BUDGET_MS;
    }
    await session.waitFor('indexing to finish', () => session.logs.find((l) => l.message.includes('indexing (start-up) finished')), 180_000);
  }, 200_000);
  afterAll(async () => {
    await session?.stop();
  });

  it('indexes it to the end, logs what it skipped, and publishes the flagged file', async () => {
    const logged = session.logs.map((l) => l.message).join('\n');
    for (const expected of [/binary\.py: skipped, binary file/, /selfloop: skipped, symbolic link loop/, /fifo\.py: skipped, not a regular file/, /outside_link\.py: skipped, symbolic link to .* not followed/, /nb_julia\.ipynb: skipped, notebook language is julia/, /empty\.ipynb: skipped, not a valid notebook/, /invalid_utf8\.py: not valid UTF-8/]) {
      expect(logged, String(expected)).toMatch(expected);
    }
    expect(logged).not.toMatch(/failed:|uncaught error|Maximum call stack/);
    const good = await session.diagnosticsFor(uriOf(path.join(tree, 'good.py')));
    expect(good.diagnostics.map((d) => d.code)).toEqual(['unconstrained-std']);
  });

  it('serves deep, long and damaged documents opened in the editor without an internal error', async () => {
    const opened: Record<string, string> = {
      'deep_parens.py': fs.readFileSync(path.join(tree, 'deep_parens.py'), 'utf8'),
      'deep_calls.py': fs.readFileSync(path.join(tree, 'deep_calls.py'), 'utf8'),
      'deep_blocks.py': fs.readFileSync(path.join(tree, 'deep_blocks.py'), 'utf8'),
      'one_line.py': fs.readFileSync(path.join(tree, 'one_line.py'), 'utf8'),
      'nul_text.py': `${GOOD}\0\0\ud800 binary \u0001 tail\n`,
      'empty.py': '',
    };
    for (const [rel, content] of Object.entries(opened)) {
      const uri = uriOf(path.join(tree, rel));
      session.open(uri, content, 7);
      const published = await session.diagnosticsFor(uri, { version: 7, timeoutMs: 60_000 });
      expect(published.diagnostics.filter((d) => d.code === 'internal-error' || /internal error/.test(String(d.message))), rel).toEqual([]);
    }
    expect(session.child.exitCode).toBeNull();
  }, 120_000);

  it('serves the 5 MB file with its findings or, when the budget runs out, an information diagnostic saying so', async () => {
    const uri = uriOf(path.join(tree, 'five_mb.py'));
    session.open(uri, fs.readFileSync(path.join(path.dirname(tree), 'big', 'five_mb.py'), 'utf8'), 3);
    const published = await session.diagnosticsFor(uri, { version: 3, timeoutMs: 120_000 });
    const cut = published.diagnostics.filter((d) => d.code === 'noisewise' && /analysis cut short/.test(String(d.message)));
    expect(published.diagnostics.length).toBeGreaterThan(0);
    if (cut.length > 0) {
      expect(cut).toHaveLength(1);
      expect(cut[0]!.severity).toBe(3);
    }
    // The editor stays responsive afterwards: a hover is answered.
    expect(await session.connection.sendRequest('textDocument/hover', { textDocument: { uri }, position: { line: 0, character: 0 } })).toBeDefined();
  }, 180_000);
});
