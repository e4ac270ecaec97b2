// The language server (`noisewise server --stdio`): capabilities and the handler table, wiring the editor's open
// documents and the workspace on disk into one long-lived engine workspace per folder, with findings served as
// pushed or pulled diagnostics, hovers and code actions.
import { createHash } from 'node:crypto';
import * as path from 'node:path';
import type { Parser } from 'web-tree-sitter';
import {
  type CancellationToken,
  type ClientCapabilities,
  type CodeAction,
  type CodeActionParams,
  CodeActionKind,
  type Connection,
  createConnection,
  type Diagnostic,
  DiagnosticTag,
  DidChangeWatchedFilesNotification,
  type DidChangeWatchedFilesParams,
  type DocumentDiagnosticParams,
  type DocumentDiagnosticReport,
  DocumentDiagnosticReportKind,
  FileChangeType,
  type Hover,
  type HoverParams,
  type InitializeParams,
  type InitializeResult,
  LSPErrorCodes,
  ProposedFeatures,
  ResponseError,
  type ServerCapabilities,
  TextDocumentSyncKind,
  type WorkspaceDiagnosticParams,
  type WorkspaceDiagnosticReport,
  type WorkspaceDocumentDiagnosticReport,
  type WorkspaceFolder,
} from 'vscode-languageserver/node';
import { allRules, type RegisteredRule } from '../../../rules/index';
import { collectFiles, readSourceFile, sourceKind } from '../cli/files';
import { ruleHelpUri, VERSION } from '../cli/product';
import { budgetFromEnv } from '../engine/budget';
import { checkFile, getParser, summaryKinds } from '../engine/check';
import { prepareSummaries } from '../engine/summaries';
import { ConfigError, clearConfigCache, isExcluded, loadConfigFor, type ResolvedConfig } from '../engine/config';
import type { Finding } from '../engine/finding';
import type { EngineSettings, FileReport } from '../engine/types';
import { readNotebook } from '../parse/notebook';
import { type SyntaxFile, wasmMemoryBytes } from '../parse/syntax';
import { Workspace } from '../semantic/workspace';
import { FIX_ALL_KIND, type EditContext, fixAllRaw, kindWanted, minimalEdit, quickFixes, toWorkspaceEdit, type FileEdit } from './code-actions';
import { toDiagnostics, type DiagnosticContext } from './diagnostics';
import { OpenDocuments, StaleChangeError } from './documents';
import { hoverFor } from './hover';
import { type DocumentRef, FileView } from './ranges';
import { defaultRulePagesCache, RulePages } from './rule-pages';
import { defaultEditorSettings, type EditorSettings, isExcludedByEditor, mergeSettings, parseEditorSettings } from './settings';
import { documentPath, fileUriToPath, isInside, pathToUri } from './uris';

/**
 * Time one file's check may block the server (in milliseconds) before its partial findings are served with a note;
 * `NOISEWISE_FILE_BUDGET_MS` overrides it.
 */
export const SERVER_FILE_BUDGET_MS = 5_000;

/** The command (workspace/executeCommand) that re-reads and re-checks every workspace folder. */
export const CHECK_WORKSPACE_COMMAND = 'noisewise.server.checkWorkspace';

/** Options the client may pass in `initializationOptions`. */
export interface InitializationOptions {
  /** Folder holding the rule pages (`<rule-id>.md`); used when it holds this build's pages. */
  rulePagesDir?: string;
  /** `push`, `pull`, or `auto` (pull when the client supports it, else push). */
  diagnosticMode?: 'auto' | 'push' | 'pull';
  /** Whether to read and check the workspace folders in the background on start (default true). */
  indexWorkspace?: boolean;
}

/** One workspace folder. */
interface Folder {
  uri: string;
  path: string;
}

/** The diagnostics of one analysed file, per document, with a result id per document for pull requests. */
interface FileResult {
  report: FileReport | null;
  byUri: Map<string, Diagnostic[]>;
  resultIds: Map<string, string>;
}

/** The client features the server adapts to. */
interface ClientFeatures {
  pull: boolean;
  refresh: boolean;
  configuration: boolean;
  watchRegistration: boolean;
  folderChanges: boolean;
  documentChanges: boolean;
  markdownHover: boolean;
  relatedInformation: boolean;
  codeDescription: boolean;
  tags: DiagnosticTag[];
}

const yieldNow = (): Promise<void> => new Promise((resolve) => setImmediate(resolve));

function cancelled(): ResponseError<void> {
  return new ResponseError(LSPErrorCodes.RequestCancelled, 'request cancelled');
}

function resultId(diagnostics: readonly Diagnostic[]): string {
  return createHash('sha1').update(JSON.stringify(diagnostics)).digest('base64url').slice(0, 20);
}

/** The capabilities this server announces, given what the client supports. */
export function serverCapabilities(features: Pick<ClientFeatures, 'pull'>): ServerCapabilities {
  const capabilities: ServerCapabilities = {
    positionEncoding: 'utf-16',
    textDocumentSync: { openClose: true, change: TextDocumentSyncKind.Incremental },
    notebookDocumentSync: { notebookSelector: [{ notebook: '*', cells: [{ language: 'python' }] }] },
    hoverProvider: true,
    codeActionProvider: { codeActionKinds: [CodeActionKind.QuickFix, FIX_ALL_KIND], resolveProvider: false },
    executeCommandProvider: { commands: [CHECK_WORKSPACE_COMMAND] },
    workspace: { workspaceFolders: { supported: true, changeNotifications: true } },
  };
  if (features.pull) capabilities.diagnosticProvider = { identifier: 'noisewise', interFileDependencies: true, workspaceDiagnostics: true };
  return capabilities;
}

function clientFeatures(capabilities: ClientCapabilities, options: InitializationOptions): ClientFeatures {
  const text = capabilities.textDocument;
  const publish = text?.publishDiagnostics;
  const mode = options.diagnosticMode ?? 'auto';
  return {
    pull: mode === 'pull' || (mode === 'auto' && text?.diagnostic !== undefined),
    refresh: capabilities.workspace?.diagnostics?.refreshSupport === true,
    configuration: capabilities.workspace?.configuration === true,
    watchRegistration: capabilities.workspace?.didChangeWatchedFiles?.dynamicRegistration === true,
    folderChanges: capabilities.workspace?.workspaceFolders === true,
    documentChanges: capabilities.workspace?.workspaceEdit?.documentChanges === true,
    markdownHover: (text?.hover?.contentFormat ?? []).includes('markdown'),
    relatedInformation: publish?.relatedInformation === true || text?.diagnostic?.relatedInformation === true,
    codeDescription: publish?.codeDescriptionSupport === true || text?.diagnostic?.codeDescriptionSupport === true,
    tags: [...(publish?.tagSupport?.valueSet ?? text?.diagnostic?.tagSupport?.valueSet ?? [])],
  };
}

/** The language server's state and handlers. */
export class NoisewiseServer {
  private parser!: Parser;
  private readonly docs: OpenDocuments;
  private folders: Folder[] = [];
  private readonly workspaces = new Map<string, Workspace>();
  /** Files read from disk by the last indexing pass (absolute paths). */
  private indexed = new Set<string>();
  private readonly results = new Map<string, FileResult>();
  /** URIs diagnostics were last pushed to, per file. */
  private readonly published = new Map<string, Set<string>>();
  /** Version and result id last pushed per URI, so an unchanged push is not repeated. */
  private readonly lastSent = new Map<string, string>();
  private readonly editorSettings = new Map<string, EditorSettings>();
  private features!: ClientFeatures;
  private options: InitializationOptions = {};
  private readonly rulePages: RulePages;
  private readonly ruleIds: string[];
  private readonly urgent = new Set<string>();
  private readonly background = new Set<string>();
  private pumping = false;
  private settleTurns = 0;
  private indexRun: { cancelled: boolean; done: Promise<void> } | null = null;
  private reindexTimer: NodeJS.Timeout | null = null;
  private refreshTimer: NodeJS.Timeout | null = null;
  private readonly shownConfigErrors = new Set<string>();
  /** Notes about files (skipped, partly analysed, a rule failed) already written to the log, so each is logged once. */
  private readonly loggedNotes = new Set<string>();
  private readonly budgetMs = budgetFromEnv(process.env, SERVER_FILE_BUDGET_MS);
  /** Files edited since their dependents were last invalidated (see `syncFile`). */
  private readonly pendingDependents = new Set<string>();
  private shuttingDown = false;
  /** Resolves once the first indexing pass has loaded the workspace files (findings before that would miss imports). */
  private readonly loaded: Promise<void>;
  private markLoaded!: () => void;

  constructor(
    private readonly connection: Connection,
    private readonly rules: readonly RegisteredRule[] = allRules,
  ) {
    this.docs = new OpenDocuments(() => this.parser);
    this.loaded = new Promise((resolve) => (this.markLoaded = resolve));
    this.ruleIds = rules.map((r) => r.meta.id);
    this.rulePages = new RulePages(rules, ruleHelpUri);
    this.register();
  }

  // ---- Handler table -------------------------------------------------------------------------------------------

  private register(): void {
    const c = this.connection;
    c.onInitialize((params) => this.initialize(params));
    c.onInitialized(() => void this.guard('initialized', () => this.initialized()));
    c.onShutdown(() => this.shutdown());
    // Memory figures for the benchmark and for bug reports: the JavaScript heap (after a full collection when the
    // process runs with --expose-gc) and the parser's WASM memory, which only grows and so shows any syntax tree
    // that is never freed.
    c.onRequest('noisewise/memoryStats', () => {
      const gc = (globalThis as { gc?: () => void }).gc;
      if (typeof gc === 'function') gc();
      const usage = process.memoryUsage();
      return { collected: typeof gc === 'function', heapUsedBytes: usage.heapUsed, externalBytes: usage.external, rssBytes: usage.rss, wasmMemoryBytes: wasmMemoryBytes() };
    });
    c.onDidOpenTextDocument((p) => this.guardSync('didOpen', () => this.openText(p.textDocument)));
    c.onDidChangeTextDocument((p) => this.guardSync('didChange', () => this.changeText(p.textDocument.uri, p.textDocument.version, p.contentChanges)));
    c.onDidCloseTextDocument((p) => this.guardSync('didClose', () => this.closeText(p.textDocument.uri)));
    c.notebooks.synchronization.onDidOpenNotebookDocument((p) => this.guardSync('notebookDocument/didOpen', () => this.openNotebook(p)));
    c.notebooks.synchronization.onDidChangeNotebookDocument((p) => this.guardSync('notebookDocument/didChange', () => this.changeNotebook(p)));
    c.notebooks.synchronization.onDidCloseNotebookDocument((p) => this.guardSync('notebookDocument/didClose', () => this.closeNotebook(p.notebookDocument.uri)));
    c.notebooks.synchronization.onDidSaveNotebookDocument(() => undefined);
    c.onDidSaveTextDocument(() => undefined);
    c.onDidChangeConfiguration((p) => void this.guard('didChangeConfiguration', () => this.configurationChanged(p.settings)));
    c.onDidChangeWatchedFiles((p) => this.guardSync('didChangeWatchedFiles', () => this.watchedFilesChanged(p)));
    c.onHover((p, token) => this.hover(p, token));
    c.onCodeAction((p, token) => this.codeActions(p, token));
    c.onExecuteCommand(async (p) => {
      if (p.command !== CHECK_WORKSPACE_COMMAND) throw new ResponseError(-32602, `unknown command ${p.command}`);
      return this.indexWorkspace('the check-workspace command');
    });
    c.languages.diagnostics.on((p, token) => this.documentDiagnostics(p, token));
    c.languages.diagnostics.onWorkspace((p, token) => this.workspaceDiagnostics(p, token));
  }

  /** Runs a notification handler, logging (never throwing) its failure so one bad message cannot stop the server. */
  private guardSync(what: string, fn: () => void): void {
    try {
      fn();
    } catch (error) {
      this.logFailure(what, error);
    }
  }

  private async guard(what: string, fn: () => Promise<unknown>): Promise<void> {
    try {
      await fn();
    } catch (error) {
      this.logFailure(what, error);
    }
  }

  private logFailure(what: string, error: unknown): void {
    if (error instanceof StaleChangeError) this.connection.console.warn(`${what}: ${error.message}; ignored`);
    else this.connection.console.error(`${what} failed: ${(error as Error)?.stack ?? String(error)}`);
  }

  // ---- Life cycle ----------------------------------------------------------------------------------------------

  private async initialize(params: InitializeParams): Promise<InitializeResult> {
    this.parser = await getParser();
    const options = params.initializationOptions;
    this.options = options && typeof options === 'object' ? (options as InitializationOptions) : {};
    this.features = clientFeatures(params.capabilities, this.options);
    this.folders = foldersOf(params);
    const here = typeof __dirname === 'string' ? path.join(__dirname, 'rules') : undefined;
    const pages = this.rulePages.locate([this.options.rulePagesDir, here], defaultRulePagesCache(VERSION));
    this.connection.console.info(`noisewise ${VERSION}: ${this.features.pull ? 'pull' : 'push'} diagnostics; ${pages}`);
    return { capabilities: serverCapabilities(this.features), serverInfo: { name: 'noisewise', version: VERSION } };
  }

  private async initialized(): Promise<void> {
    if (this.features.watchRegistration) {
      this.connection.client
        .register(DidChangeWatchedFilesNotification.type, {
          watchers: [{ globPattern: '**/*.py' }, { globPattern: '**/*.ipynb' }, { globPattern: '**/pyproject.toml' }, { globPattern: '**/.gitignore' }],
        })
        .catch((error: unknown) => this.logFailure('registering file watchers', error));
    }
    if (this.features.folderChanges) {
      this.connection.workspace.onDidChangeWorkspaceFolders((event) =>
        this.guardSync('didChangeWorkspaceFolders', () => {
          const removed = new Set(event.removed.map((f) => f.uri));
          this.folders = [...this.folders.filter((f) => !removed.has(f.uri)), ...event.added.map(folderOf).filter((f): f is Folder => f !== null)];
          this.scheduleReindex(0);
        }),
      );
    }
    try {
      await this.loadEditorSettings();
    } catch (error) {
      this.logFailure('reading the editor settings', error);
    }
    if (this.options.indexWorkspace === false) this.markLoaded();
    else await this.indexWorkspace('start-up');
  }

  private shutdown(): void {
    this.shuttingDown = true;
    if (this.indexRun) this.indexRun.cancelled = true;
    if (this.reindexTimer) clearTimeout(this.reindexTimer);
    if (this.refreshTimer) clearTimeout(this.refreshTimer);
    this.urgent.clear();
    this.background.clear();
    this.docs.disposeAll();
  }

  // ---- Workspaces, settings, files --------------------------------------------------------------------------

  private folderOf(absPath: string): Folder | undefined {
    let best: Folder | undefined;
    for (const folder of this.folders) if (isInside(folder.path, absPath) && (!best || folder.path.length > best.path.length)) best = folder;
    return best;
  }

  /** The engine workspace a file belongs to: its workspace folder's, or one per folder on disk for loose files. */
  private workspaceFor(absPath: string): Workspace {
    const root = this.folderOf(absPath)?.path ?? path.dirname(absPath);
    let workspace = this.workspaces.get(root);
    if (!workspace) {
      workspace = new Workspace(root, () => this.parser);
      this.workspaces.set(root, workspace);
    }
    return workspace;
  }

  private editorSettingsFor(absPath: string): EditorSettings {
    const folder = this.folderOf(absPath);
    return (folder && this.editorSettings.get(folder.path)) ?? this.editorSettings.get('') ?? defaultEditorSettings();
  }

  private projectConfig(absPath: string): ResolvedConfig | null {
    try {
      return loadConfigFor(absPath, this.ruleIds);
    } catch (error) {
      if (!(error instanceof ConfigError)) throw error;
      if (!this.shownConfigErrors.has(error.message)) {
        this.shownConfigErrors.add(error.message);
        this.connection.console.error(`configuration error: ${error.message}`);
        void this.connection.window.showWarningMessage(`noisewise: ${error.message} — the editor settings alone apply until it is fixed.`);
      }
      return null;
    }
  }

  /** The engine settings of a file: `[tool.noisewise]` of its pyproject.toml with the editor's `noisewise.*` over it. */
  settingsFor(absPath: string): EngineSettings {
    return mergeSettings(this.projectConfig(absPath), this.editorSettingsFor(absPath));
  }

  private isExcludedFile(absPath: string): boolean {
    const project = this.projectConfig(absPath);
    if (project && isExcluded(project, absPath)) return true;
    const folder = this.folderOf(absPath);
    return folder !== undefined && isExcludedByEditor(this.editorSettingsFor(absPath), folder.path, absPath);
  }

  private async loadEditorSettings(pushed?: unknown): Promise<void> {
    // The new settings are collected first and swapped in at once: checks that run while the client answers
    // keep using the old settings instead of the defaults.
    const next = new Map<string, EditorSettings>();
    const apply = (key: string, raw: unknown): void => {
      const { settings, problems } = parseEditorSettings(raw, this.ruleIds);
      for (const problem of problems) this.connection.console.warn(`settings: ${problem}`);
      next.set(key, settings);
    };
    if (!this.features.configuration) {
      const section = pushed && typeof pushed === 'object' ? (pushed as Record<string, unknown>).noisewise : undefined;
      apply('', section);
    } else {
      const scopes: { key: string; scopeUri?: string }[] = [{ key: '' }, ...this.folders.map((f) => ({ key: f.path, scopeUri: f.uri }))];
      const values = (await this.connection.workspace.getConfiguration(scopes.map((s) => ({ section: 'noisewise', scopeUri: s.scopeUri })))) as unknown[];
      scopes.forEach((scope, i) => apply(scope.key, values[i]));
    }
    this.editorSettings.clear();
    for (const [key, settings] of next) this.editorSettings.set(key, settings);
    // Results computed with the old settings are stale from here on.
    this.results.clear();
  }

  private isOpen(absPath: string): boolean {
    return this.docs.byPath(absPath) !== undefined;
  }

  /**
   * Puts a file's current text into its workspace (or takes it out when it is excluded) and forgets the results of
   * every file whose findings may change: the file and, through imports, its dependents. Returns the files known to
   * be affected now. For an edit, finding the dependents needs the edited file's analysis, so it is deferred to the
   * next time a result is needed (`flushDependents`): a burst of keystrokes then costs one parse and one analysis.
   */
  private syncFile(absPath: string, text: string | null, parsed?: SyntaxFile | (() => SyntaxFile)): Set<string> {
    const workspace = this.workspaceFor(absPath);
    let affected: Set<string>;
    if (text === null || this.isExcludedFile(absPath)) {
      this.flushDependents();
      affected = workspace.file(absPath) ? workspace.dependentsOf(absPath) : new Set([absPath]);
      workspace.removeFile(absPath);
    } else {
      const changed = workspace.setFile({ path: absPath, absPath, text, parsed });
      affected = new Set([absPath]);
      if (changed) this.pendingDependents.add(absPath);
    }
    for (const file of affected) this.results.delete(file);
    return affected;
  }

  /** Forgets the results of the dependents of files edited since the last call, and queues them for publication. */
  private flushDependents(): void {
    if (this.pendingDependents.size === 0) return;
    const edited = [...this.pendingDependents];
    this.pendingDependents.clear();
    const affected = new Set<string>();
    for (const absPath of edited) {
      const workspace = this.workspaceFor(absPath);
      if (!workspace.file(absPath)) continue;
      for (const file of workspace.dependentsOf(absPath)) if (file !== absPath) affected.add(file);
    }
    for (const file of affected) this.results.delete(file);
    this.enqueue(affected);
  }

  // ---- Open documents ----------------------------------------------------------------------------------------

  private openText(item: { uri: string; languageId: string; version: number; text: string }): void {
    if (item.languageId !== 'python' && !/\.pyi?$/.test(item.uri)) return;
    const absPath = documentPath(item.uri, 'python', this.folders[0]?.path ?? null);
    const open = this.docs.openText(item, absPath);
    this.enqueue(this.syncFile(absPath, open.text, () => open.doc.syntax));
  }

  private changeText(uri: string, version: number, changes: Parameters<OpenDocuments['changeText']>[2]): void {
    if (!this.docs.text(uri)) return;
    const open = this.docs.changeText(uri, version, changes);
    this.enqueue(this.syncFile(open.absPath, open.text, () => open.doc.syntax));
  }

  private closeText(uri: string): void {
    const closed = this.docs.closeText(uri);
    if (!closed) return;
    this.afterClose(closed.absPath, [uri]);
  }

  private openNotebook(params: Parameters<OpenDocuments['openNotebook']>[0]): void {
    const absPath = documentPath(params.notebookDocument.uri, 'notebook', this.folders[0]?.path ?? null);
    const notebook = this.docs.openNotebook(params, absPath);
    this.enqueue(this.syncFile(absPath, notebook.raw, notebook.virtual.syntax));
  }

  private changeNotebook(params: Parameters<OpenDocuments['changeNotebook']>[0]): void {
    const { notebook, removedCells } = this.docs.changeNotebook(params);
    this.clearUris(notebook.absPath, removedCells);
    this.enqueue(this.syncFile(notebook.absPath, notebook.raw, notebook.virtual.syntax));
  }

  private closeNotebook(uri: string): void {
    const closed = this.docs.closeNotebook(uri);
    if (!closed) return;
    this.afterClose(closed.absPath, closed.cells.map((c) => c.uri));
  }

  /** After a document closes, the file on disk takes its place (when it is part of the indexed workspace). */
  private afterClose(absPath: string, uris: string[]): void {
    let text: string | null = null;
    if (this.indexed.has(absPath)) {
      const read = readSourceFile(absPath, absPath);
      text = 'file' in read ? read.file.text : null;
    }
    this.clearUris(absPath, uris);
    this.enqueue(this.syncFile(absPath, text));
  }

  /** Pushes empty diagnostics to documents that no longer belong to a file (closed or removed cells). */
  private clearUris(absPath: string, uris: readonly string[]): void {
    const published = this.published.get(absPath);
    for (const uri of uris) {
      if (!this.features.pull) this.connection.sendDiagnostics({ uri, diagnostics: [] });
      published?.delete(uri);
      this.lastSent.delete(uri);
    }
  }

  // ---- Results and publication ---------------------------------------------------------------------------

  /** How the editor sees a file: its document (or cells) and versions, for the given analysed text. */
  private view(absPath: string, text: string, notebook: FileReport['notebook']): FileView {
    const open = this.docs.byPath(absPath);
    if (open?.text) return new FileView(absPath, text, null, { uri: open.text.uri, version: open.text.version }, null);
    if (open?.notebook) {
      const cells: DocumentRef[] = open.notebook.cells.map((c) => ({ uri: c.uri, version: c.version }));
      return new FileView(absPath, text, notebook, null, cells);
    }
    if (notebook || absPath.endsWith('.ipynb')) return new FileView(absPath, text, notebook, null, null);
    return new FileView(absPath, text, null, { uri: pathToUri(absPath), version: null }, null);
  }

  /** The view of any workspace file (for related locations and edits in other files). */
  private viewOf(absPath: string): FileView | null {
    const analysis = this.workspaceFor(absPath).analysis(absPath);
    if (!analysis) return null;
    return this.view(absPath, analysis.text, analysis.notebook);
  }

  private diagnosticContext(): DiagnosticContext {
    return {
      href: (id) => this.rulePages.href(id),
      viewOf: (p) => this.viewOf(p),
      relatedInformation: this.features.relatedInformation,
      codeDescription: this.features.codeDescription,
      tags: this.features.tags,
    };
  }

  /** The current findings of a file as diagnostics (computed when its cached result was invalidated). */
  private result(absPath: string): FileResult {
    this.flushDependents();
    const cached = this.results.get(absPath);
    if (cached) return cached;
    const workspace = this.workspaceFor(absPath);
    let result: FileResult;
    if (!workspace.file(absPath)) {
      const empty = this.view(absPath, '', null);
      const byUri = new Map<string, Diagnostic[]>();
      if (empty.document) byUri.set(empty.document.uri, []);
      for (const cell of empty.cells ?? []) byUri.set(cell.uri, []);
      result = { report: null, byUri, resultIds: new Map([...byUri.keys()].map((u) => [u, resultId([])])) };
    } else {
      let report: FileReport;
      try {
        report = checkFile(workspace, absPath, this.settingsFor(absPath), undefined, { budgetMs: this.budgetMs });
      } catch (error) {
        // An engine failure outside the rules (which are contained by the engine) is contained to this file.
        this.connection.console.error(`checking ${absPath} failed: ${(error as Error)?.stack ?? String(error)}`);
        const analysis = workspace.analysis(absPath);
        const internal: Finding = {
          rule: 'internal-error',
          severity: 'information',
          path: absPath,
          start: 0,
          end: 0,
          message: `noisewise could not analyse this file (${(error as Error)?.message ?? String(error)}); other files are still checked. The server log has the details.`,
          messageId: 'internal-error',
          figures: [],
          fixes: [],
          related: [],
        };
        report = { path: absPath, absPath, kind: absPath.endsWith('.ipynb') ? 'notebook' : 'python', text: analysis?.text ?? '', notebook: analysis?.notebook ?? null, findings: [internal], notes: [] };
      }
      const byUri = toDiagnostics(this.withNotes(absPath, report), this.view(absPath, report.text, report.notebook), this.diagnosticContext());
      result = { report, byUri, resultIds: new Map([...byUri].map(([uri, list]) => [uri, resultId(list)])) };
    }
    this.results.set(absPath, result);
    return result;
  }

  /**
   * The findings to show for a report: its own, plus one information diagnostic at the top of the file when the
   * analysis ran out of time (its findings are partial). Notes about skipped files, partial analyses and failed rules
   * also go to the log, once each.
   */
  private withNotes(absPath: string, report: FileReport): Finding[] {
    const extra: Finding[] = [];
    for (const note of report.notes) {
      if (note.kind === 'syntax') continue;
      const key = `${absPath}\0${note.kind}\0${note.message}`;
      if (!this.loggedNotes.has(key)) {
        this.loggedNotes.add(key);
        const line = `${absPath}: ${note.kind === 'skipped' ? 'skipped, ' : ''}${note.message}`;
        if (note.level === 'info') this.connection.console.info(line);
        else if (note.level === 'warning') this.connection.console.warn(line);
        else this.connection.console.error(line);
      }
      if (note.kind === 'budget' || note.kind === 'skipped') {
        extra.push({ rule: 'noisewise', severity: 'information', path: absPath, start: 0, end: 0, message: `noisewise: ${note.message}`, messageId: note.kind, figures: [], fixes: [], related: [] });
      }
    }
    return extra.length === 0 ? report.findings : [...extra, ...report.findings];
  }

  /** Pushes a file's diagnostics (push mode), clearing documents of the file that no longer have any. */
  private publish(absPath: string): void {
    if (this.features.pull || this.shuttingDown) return;
    const result = this.result(absPath);
    const previous = this.published.get(absPath) ?? new Set<string>();
    const now = new Set<string>();
    const open = this.docs.byPath(absPath);
    const versions = new Map<string, number>();
    if (open?.text) versions.set(open.text.uri, open.text.version);
    for (const cell of open?.notebook?.cells ?? []) versions.set(cell.uri, cell.version);
    for (const [uri, diagnostics] of result.byUri) {
      if (diagnostics.length === 0 && !previous.has(uri) && !versions.has(uri)) continue;
      const version = versions.get(uri);
      if (diagnostics.length > 0 || versions.has(uri)) now.add(uri);
      // The same diagnostics for the same version were sent already (e.g. by the indexing pass).
      const stamp = `${version ?? ''}:${result.resultIds.get(uri)}`;
      if (this.lastSent.get(uri) === stamp) continue;
      this.lastSent.set(uri, stamp);
      this.connection.sendDiagnostics(version === undefined ? { uri, diagnostics } : { uri, version, diagnostics });
    }
    for (const uri of previous) {
      if (result.byUri.has(uri)) continue;
      this.lastSent.delete(uri);
      this.connection.sendDiagnostics({ uri, diagnostics: [] });
    }
    this.published.set(absPath, now);
  }

  /** Queues files for (re)publication: open documents first, then closed files of the indexed workspace. */
  private enqueue(files: Iterable<string>): void {
    if (this.features.pull) {
      // The client re-pulls the edited document itself and, with inter-file dependencies declared, the other
      // open ones; closed files come back through the workspace pull.
      return;
    }
    for (const file of files) {
      if (this.isOpen(file)) this.urgent.add(file);
      else if (this.indexed.has(file) || this.published.has(file)) this.background.add(file);
    }
    this.pump();
  }

  private pump(): void {
    if (this.pumping || this.shuttingDown) return;
    if (this.urgent.size === 0 && this.background.size === 0) return;
    this.pumping = true;
    setImmediate(() => void this.drain());
  }

  private async drain(): Promise<void> {
    try {
      await this.loaded;
      while (!this.shuttingDown) {
        const queue = this.urgent.size > 0 ? this.urgent : this.background;
        const next = queue.values().next();
        if (next.done) break;
        if (queue === this.urgent && (await this.settle(next.value))) continue;
        queue.delete(next.value);
        try {
          this.publish(next.value);
        } catch (error) {
          this.logFailure(`publishing diagnostics for ${next.value}`, error);
        }
        await yieldNow();
      }
    } finally {
      this.pumping = false;
    }
  }

  /**
   * Lets edits that are already queued behind the current one arrive before an open document is checked: the
   * connection handles one message per event-loop turn, so while the document's version keeps changing from one turn
   * to the next, checking waits (at most a few turns). Returns true when the caller should look at the queue again.
   */
  private async settle(absPath: string): Promise<boolean> {
    const version = (): string => {
      const open = this.docs.byPath(absPath);
      return open?.text ? String(open.text.version) : open?.notebook ? String(open.notebook.version) : '';
    };
    const before = version();
    await yieldNow();
    return version() !== before && ++this.settleTurns < 20 ? true : ((this.settleTurns = 0), false);
  }

  /** Asks a pull client to pull again (debounced). */
  private requestRefresh(): void {
    if (!this.features.pull || !this.features.refresh || this.shuttingDown) return;
    if (this.refreshTimer) return;
    this.refreshTimer = setTimeout(() => {
      this.refreshTimer = null;
      this.connection.languages.diagnostics.refresh().catch((error: unknown) => this.logFailure('workspace/diagnostic/refresh', error));
    }, 50);
  }

  // ---- Workspace indexing --------------------------------------------------------------------------------

  /**
   * Reads every workspace folder (honouring .gitignore, `exclude` and skipping huge or binary files), updates the
   * engine workspaces and checks every file, with `$/progress` and cancellation. A new run cancels the previous one.
   */
  async indexWorkspace(reason: string): Promise<{ files: number; findings: number; cancelled: boolean }> {
    if (this.indexRun) {
      this.indexRun.cancelled = true;
      await this.indexRun.done;
    }
    const run = { cancelled: false, done: Promise.resolve() };
    let finish!: () => void;
    run.done = new Promise<void>((resolve) => (finish = resolve));
    this.indexRun = run;
    const started = Date.now();
    const progress = await this.connection.window.createWorkDoneProgress();
    const stop = (): boolean => run.cancelled || progress.token.isCancellationRequested || this.shuttingDown;
    let findings = 0;
    let checked = 0;
    try {
      progress.begin('noisewise', 0, 'finding Python files and notebooks', true);
      const found = new Map<string, string>();
      for (const folder of this.folders) {
        let collected: ReturnType<typeof collectFiles>;
        try {
          collected = collectFiles([folder.path], { cwd: folder.path, knownRuleIds: this.ruleIds });
        } catch (error) {
          this.connection.console.error(`indexing ${folder.path}: ${(error as Error).message}`);
          if (error instanceof ConfigError) this.projectConfig(path.join(folder.path, 'x.py'));
          continue;
        }
        for (const note of collected.notes) this.connection.console.info(`indexing: ${note.path}: ${note.kind === 'skipped' ? 'skipped, ' : ''}${note.message}`);
        for (const file of collected.files) {
          if (isExcludedByEditor(this.editorSettingsFor(file.absPath), folder.path, file.absPath)) continue;
          found.set(path.resolve(file.absPath), file.text);
        }
        await yieldNow();
        if (stop()) break;
      }
      if (!stop()) {
        const changed = new Set<string>();
        for (const gone of this.indexed) {
          if (found.has(gone) || this.isOpen(gone)) continue;
          for (const file of this.syncFile(gone, null)) changed.add(file);
          this.clearUris(gone, [...(this.published.get(gone) ?? [])]);
          this.published.delete(gone);
        }
        this.indexed = new Set(found.keys());
        for (const [absPath, text] of found) {
          if (this.isOpen(absPath)) continue;
          for (const file of this.syncFile(absPath, text)) changed.add(file);
        }
        this.markLoaded();
        const files = [...found.keys()].sort();
        // Per-file summaries first, one file at a time with the cache trimmed in between (last files first, so the
        // cache ends up holding the files checked first): a workspace-wide question asked by the first check then
        // reads summaries instead of analysing, and keeping, every file at once.
        const kinds = summaryKinds();
        if (kinds.length > 0) {
          progress.report(0, 'summarising files');
          for (let k = files.length - 1; k >= 0 && !stop(); k--) {
            const absPath = files[k]!;
            try {
              prepareSummaries(this.workspaceFor(absPath), [absPath], kinds, this.budgetMs);
            } catch (error) {
              this.logFailure(`summarising ${absPath}`, error);
            }
            if (k % 20 === 0) await yieldNow();
          }
        }
        let i = 0;
        for (const absPath of files) {
          if (stop()) break;
          i++;
          try {
            if (this.features.pull) this.result(absPath);
            else this.publish(absPath);
            findings += this.result(absPath).report?.findings.length ?? 0;
            checked++;
          } catch (error) {
            this.logFailure(`checking ${absPath}`, error);
          }
          if (i % 5 === 0 || i === files.length) progress.report(Math.round((100 * i) / files.length), `${i}/${files.length} files`);
          await yieldNow();
        }
        this.enqueue([...changed].filter((f) => this.isOpen(f)));
      }
      const cancelledNow = stop();
      this.connection.console.info(
        `indexing (${reason}) ${cancelledNow ? 'cancelled' : 'finished'}: ${checked} of ${this.indexed.size} files checked in ${Date.now() - started} ms, ${findings} findings`,
      );
      this.requestRefresh();
      return { files: checked, findings, cancelled: cancelledNow };
    } finally {
      this.markLoaded();
      progress.done();
      if (this.indexRun === run) this.indexRun = null;
      finish();
    }
  }

  private scheduleReindex(delay = 300): void {
    if (this.reindexTimer) clearTimeout(this.reindexTimer);
    this.reindexTimer = setTimeout(() => {
      this.reindexTimer = null;
      void this.guard('re-indexing', () => this.indexWorkspace('files changed on disk'));
    }, delay);
  }

  // ---- Configuration and file events ---------------------------------------------------------------------

  private async configurationChanged(settings: unknown): Promise<void> {
    await this.loadEditorSettings(settings);
    this.results.clear();
    this.enqueue(this.openPaths());
    this.requestRefresh();
    // Exclude globs may have changed which files belong to the workspace.
    this.scheduleReindex(0);
  }

  private openPaths(): string[] {
    return [...this.docs.allTexts().map((d) => d.absPath), ...this.docs.allNotebooks().map((n) => n.absPath)];
  }

  private watchedFilesChanged(params: DidChangeWatchedFilesParams): void {
    let reindex = false;
    const affected = new Set<string>();
    for (const change of params.changes) {
      const absPath = fileUriToPath(change.uri);
      if (absPath === null) continue;
      const base = path.basename(absPath);
      if (base === 'pyproject.toml' || base === '.gitignore') {
        clearConfigCache();
        this.shownConfigErrors.clear();
        this.results.clear();
        reindex = true;
        continue;
      }
      if (sourceKind(absPath) === null || this.isOpen(absPath)) continue;
      if (change.type === FileChangeType.Changed && this.indexed.has(absPath)) {
        const read = readSourceFile(absPath, absPath);
        for (const file of this.syncFile(absPath, 'file' in read ? read.file.text : null)) affected.add(file);
      } else {
        // Created and deleted files change the set of files: walk the folders again (it honours .gitignore).
        reindex = true;
      }
    }
    this.enqueue(affected);
    if (affected.size > 0) this.requestRefresh();
    if (reindex) this.scheduleReindex();
  }

  // ---- Requests ------------------------------------------------------------------------------------------

  /** The analysed file behind a document URI (a Python document, a notebook cell, or a workspace file on disk). */
  private fileOfUri(uri: string): string | null {
    const text = this.docs.text(uri);
    if (text) return text.absPath;
    const cell = this.docs.cellOwner(uri);
    if (cell) return cell.notebook.absPath;
    const notebook = this.docs.notebook(uri);
    if (notebook) return notebook.absPath;
    const absPath = fileUriToPath(uri);
    if (absPath !== null && this.workspaceFor(absPath).file(absPath)) return absPath;
    return null;
  }

  private async hover(params: HoverParams, token: CancellationToken): Promise<Hover | null> {
    await this.loaded;
    await yieldNow();
    if (token.isCancellationRequested) throw cancelled();
    const absPath = this.fileOfUri(params.textDocument.uri);
    if (absPath === null) return null;
    const result = this.result(absPath);
    const report = result.report;
    if (!report) return null;
    const view = this.view(absPath, report.text, report.notebook);
    const offset = view.offsetAt(params.textDocument.uri, params.position);
    if (offset === null) return null;
    const under = report.findings.filter((f) => f.start <= offset && offset <= f.end && view.location(f.start, f.end)?.ref.uri === params.textDocument.uri);
    const range = under[0] ? view.location(under[0].start, under[0].end)?.range : undefined;
    return hoverFor(under, range, { rule: (id) => this.rules.find((r) => r.meta.id === id), href: (id) => this.rulePages.href(id), markdown: this.features.markdownHover });
  }

  private editContext(): EditContext {
    return { viewOf: (p) => this.viewOf(p), documentChanges: this.features.documentChanges };
  }

  private async codeActions(params: CodeActionParams, token: CancellationToken): Promise<CodeAction[]> {
    await this.loaded;
    await yieldNow();
    if (token.isCancellationRequested) throw cancelled();
    const uri = params.textDocument.uri;
    const absPath = this.fileOfUri(uri);
    if (absPath === null || !this.isOpen(absPath)) return [];
    const report = this.result(absPath).report;
    if (!report) return [];
    const view = this.view(absPath, report.text, report.notebook);
    const from = view.offsetAt(uri, params.range.start);
    const to = view.offsetAt(uri, params.range.end);
    if (from === null || to === null) return [];
    const only = params.context.only;
    const actions: CodeAction[] = [];
    if (kindWanted(CodeActionKind.QuickFix, only)) {
      const syntax = this.workspaceFor(absPath).analysis(absPath)?.syntax ?? null;
      const context = this.diagnosticContext();
      for (const finding of report.findings) {
        if (finding.end < from || finding.start > to || finding.messageId === 'internal-error' || finding.rule === 'internal-error') continue;
        const location = view.location(finding.start, finding.end);
        if (!location || location.ref.uri !== uri) continue;
        const converted = toDiagnostics([finding], view, context).get(uri)?.[0];
        if (!converted) continue;
        const diagnostic =
          params.context.diagnostics.find((d) => d.code === finding.rule && d.source === converted.source && sameRange(d.range, converted.range)) ?? converted;
        actions.push(...quickFixes({ finding, diagnostic, absPath, view, syntax, context: this.editContext() }));
      }
    }
    if (only && kindWanted(FIX_ALL_KIND, only)) {
      const fixAll = this.fixAll(absPath, view);
      if (fixAll) actions.push(fixAll);
    }
    return actions;
  }

  /** `source.fixAll.noisewise`: every safe fix of the document, applied in rounds as `--fix` does. */
  private fixAll(absPath: string, view: FileView): CodeAction | null {
    const workspace = this.workspaceFor(absPath);
    const file = workspace.file(absPath);
    const report = this.result(absPath).report;
    if (!file || !report) return null;
    const open = this.docs.byPath(absPath);
    const original = file.raw;
    const settings = this.settingsFor(absPath);
    let finalRaw: string | null;
    try {
      finalRaw = fixAllRaw({
        report,
        raw: original,
        recheck: (raw) => {
          workspace.setFile({ path: absPath, absPath, text: raw });
          return checkFile(workspace, absPath, settings, undefined, { budgetMs: this.budgetMs });
        },
      });
    } finally {
      // Put the document back exactly as the editor has it (with its incrementally parsed tree).
      const text = open?.text;
      workspace.setFile({ path: absPath, absPath, text: original, parsed: text ? () => text.doc.syntax : open?.notebook?.virtual.syntax });
    }
    if (finalRaw === null) return null;
    const edits: FileEdit[] = [];
    if (open?.notebook) {
      const after = readNotebook(finalRaw).cells;
      const cells = open.notebook.cells;
      for (const cell of after) {
        const before = cells[cell.index];
        if (!before) continue;
        const edit = minimalEdit(view, before.uri, before.text, cell.source);
        if (edit) edits.push(edit);
      }
    } else if (open?.text) {
      const edit = minimalEdit(view, open.text.uri, original, finalRaw);
      if (edit) edits.push(edit);
    }
    const edit = toWorkspaceEdit(edits, this.editContext());
    return edit ? { title: 'Fix all safe noisewise findings', kind: FIX_ALL_KIND, edit } : null;
  }

  private async documentDiagnostics(params: DocumentDiagnosticParams, token: CancellationToken): Promise<DocumentDiagnosticReport> {
    await this.loaded;
    await yieldNow();
    if (token.isCancellationRequested) throw cancelled();
    const uri = params.textDocument.uri;
    const absPath = this.fileOfUri(uri);
    if (absPath === null) return { kind: DocumentDiagnosticReportKind.Full, items: [] };
    const result = this.result(absPath);
    const id = result.resultIds.get(uri) ?? resultId([]);
    if (params.previousResultId !== undefined && params.previousResultId === id) return { kind: DocumentDiagnosticReportKind.Unchanged, resultId: id };
    return { kind: DocumentDiagnosticReportKind.Full, resultId: id, items: result.byUri.get(uri) ?? [] };
  }

  private async workspaceDiagnostics(params: WorkspaceDiagnosticParams, token: CancellationToken): Promise<WorkspaceDiagnosticReport> {
    await this.loaded;
    const previous = new Map(params.previousResultIds.map((p) => [p.uri, p.value]));
    const items: WorkspaceDocumentDiagnosticReport[] = [];
    const reported = new Set<string>();
    let i = 0;
    for (const absPath of [...this.indexed].sort()) {
      if (i++ % 20 === 0) {
        await yieldNow();
        if (token.isCancellationRequested) throw cancelled();
      }
      if (this.isOpen(absPath) || absPath.endsWith('.ipynb')) continue;
      const result = this.result(absPath);
      for (const [uri, diagnostics] of result.byUri) {
        reported.add(uri);
        const id = result.resultIds.get(uri)!;
        if (previous.get(uri) === id) items.push({ kind: DocumentDiagnosticReportKind.Unchanged, uri, version: null, resultId: id });
        else items.push({ kind: DocumentDiagnosticReportKind.Full, uri, version: null, resultId: id, items: diagnostics });
      }
    }
    // Files that left the workspace: an empty report clears what the client still shows for them.
    for (const uri of previous.keys()) if (!reported.has(uri) && fileUriToPath(uri) !== null && !this.fileOfUri(uri)) items.push({ kind: DocumentDiagnosticReportKind.Full, uri, version: null, items: [] });
    return { items };
  }
}

function sameRange(a: { start: { line: number; character: number }; end: { line: number; character: number } }, b: typeof a): boolean {
  return a.start.line === b.start.line && a.start.character === b.start.character && a.end.line === b.end.line && a.end.character === b.end.character;
}

function folderOf(folder: WorkspaceFolder): Folder | null {
  const p = fileUriToPath(folder.uri);
  return p === null ? null : { uri: folder.uri, path: p };
}

function foldersOf(params: InitializeParams): Folder[] {
  if (params.workspaceFolders && params.workspaceFolders.length > 0) return params.workspaceFolders.map(folderOf).filter((f): f is Folder => f !== null);
  if (params.rootUri) {
    const folder = folderOf({ uri: params.rootUri, name: '' });
    return folder ? [folder] : [];
  }
  if (params.rootPath) return [{ uri: pathToUri(path.resolve(params.rootPath)), path: path.resolve(params.rootPath) }];
  return [];
}

const USAGE = `Usage: noisewise server --stdio

Runs the noisewise language server, speaking the Language Server Protocol over standard input and output
(also --node-ipc, --socket=PORT or --pipe=NAME). Editors start it; the VS Code extension bundles it.
`;

/**
 * Runs `noisewise server ARGS…`: prints the usage for --help, refuses to start without a transport (exit code 2),
 * otherwise serves until the client sends `exit` or closes standard input.
 */
export function runServerCommand(args: readonly string[]): void {
  if (args.includes('--help') || args.includes('-h')) {
    process.stdout.write(USAGE);
    return;
  }
  const transport = args.some((a) => a === '--stdio' || a === '--node-ipc' || a.startsWith('--socket') || a.startsWith('--pipe'));
  if (!transport) {
    process.stderr.write(`noisewise server: choose a transport, usually --stdio.\n\n${USAGE}`);
    process.exitCode = 2;
    return;
  }
  const connection = createConnection(ProposedFeatures.all);
  process.on('uncaughtException', (error) => connection.console.error(`uncaught error (the server keeps running): ${error?.stack ?? String(error)}`));
  process.on('unhandledRejection', (error) => connection.console.error(`unhandled rejection (the server keeps running): ${(error as Error)?.stack ?? String(error)}`));
  new NoisewiseServer(connection);
  connection.listen();
}
