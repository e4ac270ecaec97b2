// The workspace index: every Python file and notebook of a project, their module names, who imports whom, and
// lazily built per-file semantic models, so that a rule can follow an import into another file. Updating one file
// invalidates only that file's model and tells which files depend on it.
import * as path from 'node:path';
import type { Parser } from 'web-tree-sitter';
import { PythonDocument } from '../parse/document';
import { type NotebookModel, NotebookError, readNotebook } from '../parse/notebook';
import type { SyntaxFile, SyntaxNode } from '../parse/syntax';
import { scanImports } from './import-scan';
import { ModuleAnalysis } from './module';

/** One file of the workspace as the index knows it. */
export interface WorkspaceFile {
  /** Path as reported in output. */
  path: string;
  absPath: string;
  kind: 'python' | 'notebook';
  /** Raw text as read (notebook JSON for notebooks). */
  raw: string;
  /** Dotted module name derived from the path relative to the workspace root. */
  moduleName: string;
  isPackage: boolean;
  /** Content version; bumped on every update. */
  version: number;
  /**
   * Module names this file imports, read from its text when it is added (`scanImports`), so that the import graph
   * never needs an analysis; null only for a notebook that cannot be read (it imports nothing).
   */
  importedModules: string[] | null;
}

/** A file's parsed and analysed state (built on first use). */
export interface FileAnalysis {
  file: WorkspaceFile;
  /** The analysed Python text (the virtual module for notebooks). */
  text: string;
  notebook: NotebookModel | null;
  syntax: SyntaxFile;
  module: ModuleAnalysis;
  /** Why the file could not be analysed, when it could not (then syntax/module describe an empty module). */
  unreadable: string | null;
  /** Set when analysing the file failed inside noisewise (an internal error, not a problem of the file). */
  failure?: string;
}

/** Provides the Python parser (shared; initialised by the caller). */
export type ParserProvider = () => Parser;

/** Bound on the number of analysed files kept in memory at once (others are re-analysed on demand). */
const DEFAULT_CACHE_LIMIT = 400;

/** All files of one workspace and their analyses. */
export class Workspace {
  private readonly files = new Map<string, WorkspaceFile>();
  private readonly byModuleName = new Map<string, string[]>();
  /** `moduleFileByName` answers (importer → name → file); cleared when a file is added or removed. */
  private readonly moduleLookups = new Map<string, Map<string, string | null>>();
  /** How many files have each stem: `models` for models.py, `lab` for lab/__init__.py (see resolveModuleFile). */
  private readonly stems = new Map<string, number>();
  private readonly analyses = new Map<string, FileAnalysis>();
  private readonly moduleOwner = new WeakMap<SyntaxFile, FileAnalysis>();
  /** Syntax trees handed in by `setFile({ parsed })`, reused by `analyse` while they match the file's text. */
  private readonly preParsed = new Map<string, SyntaxFile | (() => SyntaxFile)>();
  /** Who imports whom (absolute paths), derived from every file's import list; reset when files change. */
  private importers: Map<string, string[]> | null = null;
  /** Memo tables that rules and queries fill; cleared whenever any file changes. */
  readonly memo = new Map<string, Map<unknown, unknown>>();
  /**
   * Per-file summaries (absolute path → summary name → value): plain data derived from one file and what it
   * imports. Unlike memo tables they survive cache trims, so a workspace-wide question (where is any tensor
   * clamped in place?) costs one pass over each file, not one per checked file; a change to a file drops the
   * summaries of the files that depend on it.
   */
  private readonly summaries = new Map<string, Map<string, unknown>>();
  private versionCounter = 0;

  constructor(
    /** Absolute root directory; module names are computed relative to it. */
    readonly root: string,
    private readonly parser: ParserProvider,
    private readonly cacheLimit = DEFAULT_CACHE_LIMIT,
  ) {}

  /**
   * Adds or replaces a file; returns false when the text is unchanged. Callers that need to know which files to
   * re-check ask `dependentsOf` before and after the update (the import graph may change with the edit).
   * `parsed` is an optional syntax tree the caller already holds for the analysed text (the language server
   * re-parses open documents incrementally), or a function that returns it when the analysis is built; it is used
   * instead of a fresh parse when its text is exactly the analysed text (the file itself, or the notebook's virtual
   * module), and ignored otherwise.
   */
  setFile(input: { path: string; absPath: string; text: string; parsed?: SyntaxFile | (() => SyntaxFile) }): boolean {
    const absPath = path.resolve(input.absPath);
    const existing = this.files.get(absPath);
    if (existing && existing.raw === input.text && existing.path === input.path) {
      if (input.parsed) this.preParsed.set(absPath, input.parsed);
      return false;
    }
    if (input.parsed) this.preParsed.set(absPath, input.parsed);
    else this.preParsed.delete(absPath);
    const stale = this.summaryDependents(absPath);
    if (existing) this.unregisterModuleName(existing);
    if (!existing || existing.path !== input.path) this.moduleLookups.clear();
    const kind = absPath.endsWith('.ipynb') ? 'notebook' : 'python';
    const { moduleName, isPackage } = moduleNameFor(this.root, absPath);
    const file: WorkspaceFile = { path: input.path, absPath, kind, raw: input.text, moduleName, isPackage, version: ++this.versionCounter, importedModules: importsOfText(kind, input.text, moduleName, isPackage) };
    this.files.set(absPath, file);
    this.registerModuleName(file);
    this.analyses.delete(absPath);
    this.memo.clear();
    this.importers = null;
    // A new module name may resolve imports that pointed nowhere before: drop those files' summaries too.
    for (const dependent of this.summaryDependents(absPath)) stale.add(dependent);
    for (const dependent of stale) this.summaries.delete(dependent);
    return true;
  }

  /** Removes a file; returns false when it was not known. */
  removeFile(absPathIn: string): boolean {
    const absPath = path.resolve(absPathIn);
    const existing = this.files.get(absPath);
    if (!existing) return false;
    for (const dependent of this.summaryDependents(absPath)) this.summaries.delete(dependent);
    this.unregisterModuleName(existing);
    this.moduleLookups.clear();
    this.files.delete(absPath);
    this.analyses.delete(absPath);
    this.preParsed.delete(absPath);
    this.memo.clear();
    this.importers = null;
    return true;
  }

  /** The file entry for an absolute path. */
  file(absPath: string): WorkspaceFile | undefined {
    return this.files.get(path.resolve(absPath));
  }

  /** All files, in path order. */
  allFiles(): WorkspaceFile[] {
    return [...this.files.values()].sort((a, b) => (a.absPath < b.absPath ? -1 : a.absPath > b.absPath ? 1 : 0));
  }

  /** The analysis of a file, building it when needed. */
  analysis(absPathIn: string): FileAnalysis | null {
    const absPath = path.resolve(absPathIn);
    let cached = this.analyses.get(absPath);
    if (cached?.syntax.spent) {
      // Its syntax was re-parsed away under it (a caller re-parsed a document without a new text): build it again,
      // and forget what the memo tables derived from the old nodes.
      this.analyses.delete(absPath);
      this.memo.clear();
      cached = undefined;
    }
    if (cached) {
      // Refresh its place in the LRU order.
      this.analyses.delete(absPath);
      this.analyses.set(absPath, cached);
      return cached;
    }
    const file = this.files.get(absPath);
    if (!file) return null;
    let analysis: FileAnalysis;
    try {
      analysis = this.analyse(file);
    } catch (error) {
      // A bug in the syntax copy or the model must not reach the other files that look into this one: they see an
      // empty module, and checking this file reports the failure (see `failure`).
      const message = `noisewise could not analyse this file: ${error instanceof Error ? error.message : String(error)}`;
      const syntax = PythonDocument.parse(this.parser(), '').syntax;
      analysis = { file, text: '', notebook: null, syntax, module: new ModuleAnalysis(syntax, file.moduleName, file.isPackage), unreadable: message, failure: message };
    }
    this.analyses.set(absPath, analysis);
    this.moduleOwner.set(analysis.syntax, analysis);
    return analysis;
  }

  /**
   * Evicts the least recently used analyses beyond the cache limit. Called between file checks, never during one:
   * a rule may hold classes and nodes of any file it looked at, and an analysis rebuilt in the middle of a check
   * would give the same file new objects. Memo tables may hold evicted objects, so they are cleared when anything
   * is evicted. Returns the number of analyses evicted.
   */
  trimCache(): number {
    let evicted = 0;
    if (this.analyses.size <= this.cacheLimit) return 0;
    // Trim well below the limit, so that memo tables (cleared on every trim) are rebuilt rarely on large workspaces.
    const target = Math.max(1, Math.floor(this.cacheLimit * 0.75));
    while (this.analyses.size > target) {
      const oldest = this.analyses.keys().next().value as string;
      this.analyses.delete(oldest);
      evicted++;
    }
    if (evicted > 0) this.memo.clear();
    return evicted;
  }

  /**
   * A summary of one file: `compute` runs on the file's analysis the first time and whenever the file or a file
   * it imports changed since; the value is kept across cache trims. It must be plain data: no syntax nodes, classes
   * or other objects of an analysis (those are rebuilt when an evicted file is analysed again), so that holding
   * summaries of every file costs little memory. Null when the file is not part of the workspace.
   */
  fileSummary<T>(name: string, absPathIn: string, compute: (analysis: FileAnalysis) => T): T | null {
    const absPath = path.resolve(absPathIn);
    let perFile = this.summaries.get(absPath);
    if (perFile?.has(name)) return perFile.get(name) as T;
    const analysis = this.analysis(absPath);
    if (!analysis) return null;
    const value = compute(analysis);
    perFile = this.summaries.get(absPath);
    if (!perFile) {
      perFile = new Map();
      this.summaries.set(absPath, perFile);
    }
    perFile.set(name, value);
    return value;
  }

  /** The summaries held for some files (plain data, to hand to another workspace over the same texts). */
  exportSummaries(absPaths: readonly string[]): [string, [string, unknown][]][] {
    const out: [string, [string, unknown][]][] = [];
    for (const absPath of absPaths) {
      const perFile = this.summaries.get(path.resolve(absPath));
      if (perFile && perFile.size > 0) out.push([path.resolve(absPath), [...perFile]]);
    }
    return out;
  }

  /** Takes summaries computed by another workspace over the same texts; those already held are kept. */
  importSummaries(entries: readonly [string, [string, unknown][]][]): void {
    for (const [absPath, values] of entries) {
      if (!this.files.has(absPath)) continue;
      let perFile = this.summaries.get(absPath);
      if (!perFile) {
        perFile = new Map();
        this.summaries.set(absPath, perFile);
      }
      for (const [name, value] of values) if (!perFile.has(name)) perFile.set(name, value);
    }
  }

  /** The files whose summaries may depend on a file (it and its importers, transitively); none while none exist. */
  private summaryDependents(absPath: string): Set<string> {
    return this.summaries.size === 0 ? new Set() : this.dependentsOf(absPath);
  }

  /** The analysis a syntax node belongs to. */
  analysisOfNode(node: SyntaxNode): FileAnalysis | undefined {
    return this.moduleOwner.get(node.file);
  }

  /**
   * The workspace module with a dotted name, as seen from an importing file: a sibling module in the importer's
   * folder first, then the full name from the root, then a unique suffix match (scripts run from a subfolder).
   */
  moduleByName(name: string, fromAbsPath?: string): FileAnalysis | null {
    const file = this.moduleFileByName(name, fromAbsPath);
    return file ? this.analysis(file) : null;
  }

  /** Absolute path of the workspace module with a dotted name (see moduleByName), without analysing it. */
  moduleFileByName(name: string, fromAbsPath?: string): string | null {
    // Resolution depends only on the set of files and the importer, so it is cached until that set changes.
    const importer = fromAbsPath ?? '';
    let byName = this.moduleLookups.get(importer);
    if (!byName) {
      byName = new Map();
      this.moduleLookups.set(importer, byName);
    }
    const cached = byName.get(name);
    if (cached !== undefined) return cached;
    const found = this.resolveModuleFile(name, fromAbsPath);
    byName.set(name, found);
    return found;
  }

  private resolveModuleFile(name: string, fromAbsPath?: string): string | null {
    // Most names asked for are outside the workspace (`torch.nn`): no file is called like their last part, and no
    // module name ends with them, so no path needs building.
    const lastDot = name.lastIndexOf('.');
    if (!this.byModuleName.has(name) && !this.stems.has(lastDot < 0 ? name : name.slice(lastDot + 1))) return null;
    if (fromAbsPath) {
      const dir = path.dirname(fromAbsPath);
      const rel = name.split('.');
      for (const candidate of [path.join(dir, ...rel) + '.py', path.join(dir, ...rel, '__init__.py')]) {
        if (this.files.has(candidate)) return candidate;
      }
    }
    const owners = this.byModuleName.get(name);
    if (!owners || owners.length === 0) return null;
    if (owners.length === 1) return owners[0]!;
    // Prefer the exact full name, then the candidate closest to the importer.
    const exact = owners.find((p) => this.files.get(p)?.moduleName === name);
    if (exact) return exact;
    if (fromAbsPath) {
      const sorted = [...owners].sort((a, b) => commonPrefixLength(b, fromAbsPath) - commonPrefixLength(a, fromAbsPath));
      return sorted[0]!;
    }
    return null;
  }

  /** Files that import this one, directly or through other workspace files (the file itself included). */
  dependentsOf(absPathIn: string): Set<string> {
    const absPath = path.resolve(absPathIn);
    const out = new Set<string>([absPath]);
    const queue = [absPath];
    const importers = this.importersIndex();
    while (queue.length) {
      const current = queue.pop()!;
      for (const importer of importers.get(current) ?? []) {
        if (!out.has(importer)) {
          out.add(importer);
          queue.push(importer);
        }
      }
    }
    return out;
  }

  /** Workspace files a file imports (resolved). */
  importsOf(absPathIn: string): string[] {
    const absPath = path.resolve(absPathIn);
    const file = this.files.get(absPath);
    if (!file) return [];
    const names = file.importedModules ?? [];
    const out = new Set<string>();
    for (const name of names) {
      const parts = name.split('.');
      for (let i = parts.length; i > 0; i--) {
        const target = this.moduleFileByName(parts.slice(0, i).join('.'), absPath);
        if (target && target !== absPath) {
          out.add(target);
          break;
        }
      }
    }
    return [...out];
  }

  private importersIndex(): Map<string, string[]> {
    // Built from module names and import lists only (no syntax), so it survives cache trims; file changes reset it.
    if (this.importers) return this.importers;
    const index = new Map<string, string[]>();
    for (const file of this.files.values()) {
      for (const target of this.importsOf(file.absPath)) {
        const list = index.get(target) ?? [];
        list.push(file.absPath);
        index.set(target, list);
      }
    }
    this.importers = index;
    return index;
  }

  /** A memo table for one kind of derived fact; cleared whenever a file changes. */
  memoTable<K, V>(name: string): Map<K, V> {
    let table = this.memo.get(name);
    if (!table) {
      table = new Map();
      this.memo.set(name, table);
    }
    return table as Map<K, V>;
  }

  private analyse(file: WorkspaceFile): FileAnalysis {
    let text = file.raw;
    let notebook: NotebookModel | null = null;
    let unreadable: string | null = null;
    if (file.kind === 'notebook') {
      try {
        notebook = readNotebook(file.raw);
        text = notebook.text;
      } catch (error) {
        unreadable = error instanceof NotebookError ? error.message : `could not read the notebook: ${(error as Error).message}`;
        text = '';
      }
    }
    const handed = this.preParsed.get(file.absPath);
    const parsed = typeof handed === 'function' ? handed() : handed;
    const syntax = parsed && parsed.text === text && !parsed.spent ? parsed : PythonDocument.parse(this.parser(), text).syntax;
    const module = new ModuleAnalysis(syntax, file.moduleName, file.isPackage);
    return { file, text, notebook, syntax, module, unreadable };
  }

  private registerModuleName(file: WorkspaceFile): void {
    const stem = stemOf(file.absPath);
    this.stems.set(stem, (this.stems.get(stem) ?? 0) + 1);
    const parts = file.moduleName.split('.');
    for (let i = 0; i < parts.length; i++) {
      const suffix = parts.slice(i).join('.');
      const list = this.byModuleName.get(suffix) ?? [];
      list.push(file.absPath);
      this.byModuleName.set(suffix, list);
    }
  }

  private unregisterModuleName(file: WorkspaceFile): void {
    const stem = stemOf(file.absPath);
    const count = (this.stems.get(stem) ?? 1) - 1;
    if (count > 0) this.stems.set(stem, count);
    else this.stems.delete(stem);
    const parts = file.moduleName.split('.');
    for (let i = 0; i < parts.length; i++) {
      const suffix = parts.slice(i).join('.');
      const list = this.byModuleName.get(suffix);
      if (!list) continue;
      const next = list.filter((p) => p !== file.absPath);
      if (next.length) this.byModuleName.set(suffix, next);
      else this.byModuleName.delete(suffix);
    }
  }
}

/** The name a file is imported by as the last part of a dotted name: its stem, or its folder's for `__init__`. */
function stemOf(absPath: string): string {
  const stem = path.basename(absPath).replace(/\.(py|ipynb)$/, '');
  return stem === '__init__' ? path.basename(path.dirname(absPath)) : stem;
}

/** The modules a file's text imports; a notebook's code cells are read as its virtual module. */
function importsOfText(kind: 'python' | 'notebook', raw: string, moduleName: string, isPackage: boolean): string[] | null {
  if (kind === 'python') return scanImports(raw, moduleName, isPackage);
  try {
    return scanImports(readNotebook(raw).text, moduleName, isPackage);
  } catch {
    return null;
  }
}

/** Dotted module name of a file relative to the root (`riverlab/models.py` → `riverlab.models`). */
export function moduleNameFor(root: string, absPath: string): { moduleName: string; isPackage: boolean } {
  let rel = path.relative(root, absPath);
  if (rel.startsWith('..') || path.isAbsolute(rel)) rel = path.basename(absPath);
  const parts = rel.split(/[\\/]+/);
  const last = parts.pop()!.replace(/\.(py|ipynb)$/, '');
  const isPackage = last === '__init__';
  if (!isPackage) parts.push(last);
  const clean = parts.map((p) => p.replace(/[^A-Za-z0-9_]/g, '_'));
  return { moduleName: clean.join('.') || '__main__', isPackage };
}

function commonPrefixLength(a: string, b: string): number {
  let i = 0;
  while (i < a.length && i < b.length && a[i] === b[i]) i++;
  return i;
}
