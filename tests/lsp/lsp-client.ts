// A real JSON-RPC client for the language server tests: spawns `noisewise server --stdio` (the built bundle), speaks
// LSP with vscode-languageserver-protocol, records what the server pushes and keeps every byte of its stdout so a test
// can check that nothing but protocol messages was written there.
import { type ChildProcess, spawn } from 'node:child_process';
import * as fs from 'node:fs';
import * as os from 'node:os';
import * as path from 'node:path';
import { pathToFileURL } from 'node:url';
import {
  type ClientCapabilities,
  createProtocolConnection,
  type InitializeResult,
  type ProtocolConnection,
  type PublishDiagnosticsParams,
  StreamMessageReader,
  StreamMessageWriter,
} from 'vscode-languageserver-protocol/node';

/** The repository root. */
export const REPO = path.resolve(__dirname, '..', '..');
/** The launcher of the `noisewise` command. */
export const BIN = path.join(REPO, 'server', 'bin', 'noisewise.js');

/** Throws with the build command when the bundle has not been built (npm test builds it first). */
export function requireBundle(): void {
  if (!fs.existsSync(path.join(REPO, 'server', 'dist', 'noisewise.js'))) {
    throw new Error('server/dist/noisewise.js is missing: run `npm run build` (npm test does it in pretest)');
  }
}

/** The `file:` URI of a path. */
export function uriOf(p: string): string {
  return pathToFileURL(p).href;
}

/** Client capabilities of a full-featured editor; `pull` adds pull diagnostics. */
export function editorCapabilities(options: { pull?: boolean; markdown?: boolean } = {}): ClientCapabilities {
  const capabilities: ClientCapabilities = {
    general: { positionEncodings: ['utf-16'] },
    window: { workDoneProgress: true, showMessage: {} },
    workspace: {
      configuration: true,
      workspaceFolders: true,
      didChangeConfiguration: { dynamicRegistration: true },
      didChangeWatchedFiles: { dynamicRegistration: true },
      workspaceEdit: { documentChanges: true },
      executeCommand: {},
    },
    textDocument: {
      synchronization: { dynamicRegistration: false, didSave: true },
      publishDiagnostics: { relatedInformation: true, codeDescriptionSupport: true, tagSupport: { valueSet: [1, 2] }, versionSupport: true },
      hover: { contentFormat: options.markdown === false ? ['plaintext'] : ['markdown', 'plaintext'] },
      codeAction: { codeActionLiteralSupport: { codeActionKind: { valueSet: ['quickfix', 'source', 'source.fixAll'] } }, isPreferredSupport: true },
    },
    notebookDocument: { synchronization: { dynamicRegistration: false } },
  };
  if (options.pull) {
    capabilities.textDocument!.diagnostic = { relatedDocumentSupport: false };
    capabilities.workspace!.diagnostics = { refreshSupport: true };
  }
  return capabilities;
}

/** Options of a test session. */
export interface SessionOptions {
  /** Workspace folder (absolute). */
  root: string | null;
  capabilities?: ClientCapabilities;
  initializationOptions?: Record<string, unknown>;
  /** The `noisewise` section answered to workspace/configuration requests. */
  settings?: Record<string, unknown>;
  /** Extra command-line arguments after `server`. */
  args?: string[];
  /** The script to run instead of the repository's launcher (e.g. the server bundle unpacked from the .vsix). */
  script?: string;
}

/** A running server and the client connected to it. */
export class LspSession {
  readonly connection: ProtocolConnection;
  readonly pushed: PublishDiagnosticsParams[] = [];
  readonly logs: { type: number; message: string }[] = [];
  readonly progress: { token: unknown; value: { kind: string; message?: string; percentage?: number; cancellable?: boolean } }[] = [];
  readonly registrations: { method: string; registerOptions?: unknown }[] = [];
  readonly refreshes: number[] = [];
  readonly shownMessages: string[] = [];
  readonly stdout: Buffer[] = [];
  readonly stderr: Buffer[] = [];
  settings: Record<string, unknown>;
  initializeResult!: InitializeResult;
  readonly exited: Promise<number | null>;
  private listeners: (() => void)[] = [];

  constructor(
    readonly child: ChildProcess,
    readonly options: SessionOptions,
  ) {
    this.settings = options.settings ?? {};
    child.stdout!.on('data', (chunk: Buffer) => this.stdout.push(chunk));
    child.stderr!.on('data', (chunk: Buffer) => this.stderr.push(chunk));
    this.exited = new Promise((resolve) => child.on('exit', (code) => resolve(code)));
    this.connection = createProtocolConnection(new StreamMessageReader(child.stdout!), new StreamMessageWriter(child.stdin!));
    const c = this.connection;
    c.onNotification('textDocument/publishDiagnostics', (params: PublishDiagnosticsParams) => {
      this.pushed.push(params);
      this.notify();
    });
    c.onNotification('window/logMessage', (params: { type: number; message: string }) => {
      this.logs.push(params);
      this.notify();
    });
    c.onNotification('window/showMessage', (params: { message: string }) => {
      this.shownMessages.push(params.message);
      this.notify();
    });
    c.onNotification('$/progress', (params: { token: unknown; value: LspSession['progress'][number]['value'] }) => {
      this.progress.push(params);
      this.notify();
    });
    c.onRequest('workspace/configuration', (params: { items: { section?: string }[] }) => params.items.map(() => this.settings));
    c.onRequest('client/registerCapability', (params: { registrations: { method: string; registerOptions?: unknown }[] }) => {
      this.registrations.push(...params.registrations);
      return null;
    });
    c.onRequest('window/workDoneProgress/create', () => null);
    c.onRequest('workspace/diagnostic/refresh', () => {
      this.refreshes.push(Date.now());
      this.notify();
      return null;
    });
    c.onRequest('window/showMessageRequest', (params: { message: string }) => {
      this.shownMessages.push(params.message);
      this.notify();
      return null;
    });
    c.listen();
  }

  private notify(): void {
    for (const listener of [...this.listeners]) listener();
  }

  /** Waits until `predicate` holds (checked after every message from the server), failing after `timeoutMs`. */
  waitFor<T>(what: string, predicate: () => T | undefined | null | false, timeoutMs = 15_000): Promise<T> {
    return new Promise((resolve, reject) => {
      const check = (): boolean => {
        const value = predicate();
        if (value) {
          cleanup();
          resolve(value);
          return true;
        }
        return false;
      };
      const timer = setTimeout(() => {
        cleanup();
        reject(new Error(`timed out after ${timeoutMs} ms waiting for ${what}; server log:\n${this.logs.map((l) => l.message).join('\n')}`));
      }, timeoutMs);
      const cleanup = (): void => {
        clearTimeout(timer);
        this.listeners = this.listeners.filter((l) => l !== listener);
      };
      const listener = (): void => void check();
      this.listeners.push(listener);
      check();
    });
  }

  /** The latest diagnostics pushed for a URI (undefined when none arrived yet). */
  latest(uri: string): PublishDiagnosticsParams | undefined {
    for (let i = this.pushed.length - 1; i >= 0; i--) if (this.pushed[i]!.uri === uri) return this.pushed[i];
    return undefined;
  }

  /** Waits for diagnostics for a URI pushed at the given document version (or any, when omitted) after `since` pushes. */
  diagnosticsFor(uri: string, options: { version?: number; since?: number; timeoutMs?: number } = {}): Promise<PublishDiagnosticsParams> {
    const since = options.since ?? 0;
    return this.waitFor(`diagnostics for ${uri}${options.version !== undefined ? ` at version ${options.version}` : ''}`, () => {
      for (let i = this.pushed.length - 1; i >= since; i--) {
        const p = this.pushed[i]!;
        if (p.uri === uri && (options.version === undefined || p.version === options.version)) return p;
      }
      return undefined;
    }, options.timeoutMs);
  }

  /** Opens a Python document. */
  open(uri: string, text: string, version = 1): void {
    void this.connection.sendNotification('textDocument/didOpen', { textDocument: { uri, languageId: 'python', version, text } });
  }

  /** Sends incremental changes. */
  change(uri: string, version: number, contentChanges: unknown[]): void {
    void this.connection.sendNotification('textDocument/didChange', { textDocument: { uri, version }, contentChanges });
  }

  /** Sends `shutdown` then `exit` and waits for the process to end; returns its exit code. */
  async stop(): Promise<number | null> {
    if (this.child.exitCode !== null) return this.child.exitCode;
    try {
      await Promise.race([this.connection.sendRequest('shutdown'), new Promise((_, reject) => setTimeout(() => reject(new Error('shutdown timed out')), 10_000))]);
      void this.connection.sendNotification('exit');
    } catch {
      this.child.kill('SIGKILL');
    }
    const code = await this.exited;
    this.connection.dispose();
    return code;
  }

  /** Every byte written to stdout, parsed as LSP frames; throws when anything else is found. */
  stdoutFrames(): unknown[] {
    const data = Buffer.concat(this.stdout);
    const out: unknown[] = [];
    let at = 0;
    while (at < data.length) {
      const headerEnd = data.indexOf('\r\n\r\n', at);
      if (headerEnd < 0) throw new Error(`stdout has bytes that are not an LSP frame at ${at}: ${JSON.stringify(data.subarray(at, at + 80).toString())}`);
      const header = data.subarray(at, headerEnd).toString('ascii');
      const match = /^Content-Length: (\d+)(\r\nContent-Type: [^\r\n]+)?$/.exec(header);
      if (!match) throw new Error(`stdout has a header that is not LSP's: ${JSON.stringify(header.slice(0, 80))}`);
      const length = Number(match[1]);
      const body = data.subarray(headerEnd + 4, headerEnd + 4 + length);
      if (body.length !== length) throw new Error('stdout ends inside a frame');
      out.push(JSON.parse(body.toString('utf8')));
      at = headerEnd + 4 + length;
    }
    return out;
  }
}

/** Spawns the server, initializes it with a workspace folder and waits for the `initialized` handshake to be sent. */
export async function startSession(options: SessionOptions): Promise<LspSession> {
  if (!options.script) requireBundle();
  const home = fs.mkdtempSync(path.join(os.tmpdir(), 'noisewise-lsp-home-'));
  const child = spawn(process.execPath, [options.script ?? BIN, 'server', '--stdio', ...(options.args ?? [])], {
    cwd: options.root ?? REPO,
    env: { ...process.env, HOME: home, XDG_CACHE_HOME: path.join(home, '.cache') },
    stdio: ['pipe', 'pipe', 'pipe'],
  });
  const session = new LspSession(child, options);
  session.initializeResult = await session.connection.sendRequest('initialize', {
    processId: process.pid,
    rootUri: options.root ? uriOf(options.root) : null,
    workspaceFolders: options.root ? [{ uri: uriOf(options.root), name: path.basename(options.root) }] : null,
    capabilities: options.capabilities ?? editorCapabilities(),
    initializationOptions: options.initializationOptions,
  });
  await session.connection.sendNotification('initialized', {});
  return session;
}

/** Copies a folder into a fresh temporary folder (real path) and returns the copy. */
export function copyToTemp(source: string, prefix = 'noisewise-lsp-'): string {
  const parent = fs.realpathSync(fs.mkdtempSync(path.join(os.tmpdir(), prefix)));
  const target = path.join(parent, path.basename(source));
  fs.cpSync(source, target, { recursive: true });
  return target;
}

/** A fresh temporary folder with the given files (relative path → text). */
export function tempWorkspace(files: Record<string, string>, prefix = 'noisewise-lsp-ws-'): string {
  const root = path.join(fs.realpathSync(fs.mkdtempSync(path.join(os.tmpdir(), prefix))), 'project');
  for (const [rel, text] of Object.entries(files)) {
    const file = path.join(root, rel);
    fs.mkdirSync(path.dirname(file), { recursive: true });
    fs.writeFileSync(file, text);
  }
  fs.mkdirSync(root, { recursive: true });
  return root;
}

/** The text a range covers in a text (0-based lines, UTF-16 characters, as LSP counts). */
export function textInRange(text: string, range: { start: { line: number; character: number }; end: { line: number; character: number } }): string {
  const lines = text.split(/\r\n|\n|\r/);
  const offset = (p: { line: number; character: number }): number => {
    let o = 0;
    const sep = /\r\n/.test(text) ? 2 : 1;
    for (let i = 0; i < p.line; i++) o += lines[i]!.length + sep;
    return o + p.character;
  };
  return text.slice(offset(range.start), offset(range.end));
}

/** An LSP text edit as the tests read it. */
export interface PlainEdit {
  range: { start: { line: number; character: number }; end: { line: number; character: number } };
  newText: string;
}

/** The edits of a workspace edit's document changes as plain text edits (the server sends no snippets). */
export function plainEdits(edits: readonly object[]): PlainEdit[] {
  return edits.map((e) => {
    const edit = e as Partial<PlainEdit>;
    if (typeof edit.newText !== 'string' || !edit.range) throw new Error(`not a plain text edit: ${JSON.stringify(e)}`);
    return { range: edit.range, newText: edit.newText };
  });
}

/** Applies LSP text edits (ranges into `text`) and returns the new text. */
export function applyLspEdits(text: string, anyEdits: readonly object[]): string {
  const edits = plainEdits(anyEdits);
  const lines = text.split('\n');
  const offset = (p: { line: number; character: number }): number => {
    let o = 0;
    for (let i = 0; i < p.line; i++) o += lines[i]!.length + 1;
    return o + Math.min(p.character, (lines[p.line] ?? '').length);
  };
  const resolved = edits.map((e) => ({ start: offset(e.range.start), end: offset(e.range.end), newText: e.newText })).sort((a, b) => b.start - a.start);
  let out = text;
  for (const e of resolved) out = out.slice(0, e.start) + e.newText + out.slice(e.end);
  return out;
}
