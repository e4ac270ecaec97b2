// The documents the editor has open: Python files (each with a tree-sitter tree re-parsed incrementally from the
// editor's changes) and notebooks (cells kept in order, turned into an nbformat text whose virtual module is
// re-parsed incrementally too).
import type { Parser } from 'web-tree-sitter';
import type {
  DidChangeNotebookDocumentParams,
  DidOpenNotebookDocumentParams,
  NotebookCell,
  TextDocumentContentChangeEvent,
  TextDocumentItem,
} from 'vscode-languageserver';
import { PythonDocument, type TextChange } from '../parse/document';
import { readNotebook } from '../parse/notebook';
import { LineIndex } from '../parse/positions';

/**
 * An open Python file. Edits are recorded as they arrive and applied to the tree only when the tree is needed
 * (`doc`), in one incremental re-parse, so a burst of keystrokes costs one parse.
 */
export class OpenTextDocument {
  private current: PythonDocument;
  private pending: TextChange[] = [];
  private pendingText: string | null = null;

  constructor(
    readonly uri: string,
    /** The path the engine knows the document by (a made-up one for unsaved buffers). */
    readonly absPath: string,
    readonly languageId: string,
    public version: number,
    private readonly parser: () => Parser,
    text: string,
  ) {
    this.current = PythonDocument.parse(parser(), text, true);
  }

  /** The current text (with every edit received so far). */
  get text(): string {
    return this.pendingText ?? this.current.text;
  }

  /** The current text and its syntax tree, re-parsing incrementally first when edits are pending. */
  get doc(): PythonDocument {
    if (this.pendingText !== null) {
      const changes = this.pending;
      this.pending = [];
      this.pendingText = null;
      this.current = this.current.edit(this.parser(), changes);
    }
    return this.current;
  }

  /** Records the editor's content changes (each relative to the text left by the previous one). */
  applyChanges(changes: readonly TextDocumentContentChangeEvent[]): void {
    let text = this.text;
    for (const change of changes) {
      if (!('range' in change) || change.range === undefined) {
        // A full replacement: parse it from scratch.
        this.current.dispose();
        this.current = PythonDocument.parse(this.parser(), change.text, true);
        this.pending = [];
        this.pendingText = null;
        text = change.text;
        continue;
      }
      const index = LineIndex.of(text);
      const start = index.fromLsp(change.range.start);
      const end = Math.max(start, index.fromLsp(change.range.end));
      this.pending.push({ start, end, newText: change.text });
      text = text.slice(0, start) + change.text + text.slice(end);
      this.pendingText = text;
    }
    // Changes that leave the parsed text as it was (a character typed and deleted in one batch) need no re-parse. This
    // also keeps the rule that a document's syntax is replaced only together with its text: the engine drops analyses
    // built on the old syntax when the text changes, and a re-parse takes nodes over from the old syntax.
    if (this.pendingText !== null && this.pendingText === this.current.text) {
      this.pending = [];
      this.pendingText = null;
    }
  }

  /** Frees the tree (WASM memory). */
  dispose(): void {
    this.current.dispose();
    this.pending = [];
    this.pendingText = null;
  }
}

/** One cell of an open notebook. */
export interface OpenCell {
  /** URI of the cell's text document. */
  uri: string;
  /** 1 = markup, 2 = code (LSP's NotebookCellKind). */
  kind: number;
  languageId: string;
  version: number;
  text: string;
}

/** An open notebook: its cells in order and what the engine reads of it. */
export interface OpenNotebook {
  uri: string;
  absPath: string;
  notebookType: string;
  version: number;
  cells: OpenCell[];
  /** The notebook as nbformat 4 JSON text (what the engine's workspace stores for a .ipynb file). */
  raw: string;
  /** The virtual module of the code cells, parsed (kept for incremental re-parsing). */
  virtual: PythonDocument;
}

/** A change that could not be applied (unknown document, or an older version than the one held). */
export class StaleChangeError extends Error {}

/** Whether a cell is analysed: a code cell in Python. */
export function isPythonCodeCell(cell: Pick<OpenCell, 'kind' | 'languageId'>): boolean {
  return cell.kind === 2 && cell.languageId === 'python';
}

/** The open documents and notebooks, keyed by URI. */
export class OpenDocuments {
  private readonly texts = new Map<string, OpenTextDocument>();
  private readonly notebooks = new Map<string, OpenNotebook>();
  /** Cell document URI → URI of the notebook that holds it. */
  private readonly cellOwners = new Map<string, string>();

  constructor(private readonly parser: () => Parser) {}

  /** Opens a Python document, parsing it from scratch. */
  openText(item: TextDocumentItem, absPath: string): OpenTextDocument {
    this.texts.get(item.uri)?.dispose();
    const doc = new OpenTextDocument(item.uri, absPath, item.languageId, item.version, this.parser, item.text);
    this.texts.set(item.uri, doc);
    return doc;
  }

  /** Records the editor's content changes (parsed when next needed); throws StaleChangeError for an unknown or old document. */
  changeText(uri: string, version: number, changes: TextDocumentContentChangeEvent[]): OpenTextDocument {
    const open = this.texts.get(uri);
    if (!open) throw new StaleChangeError(`a change arrived for ${uri}, which is not open`);
    if (version < open.version) throw new StaleChangeError(`a change for ${uri} has version ${version}, older than the open version ${open.version}`);
    open.applyChanges(changes);
    open.version = version;
    return open;
  }

  /** Closes a Python document; returns what was open. */
  closeText(uri: string): OpenTextDocument | undefined {
    const open = this.texts.get(uri);
    if (!open) return undefined;
    open.dispose();
    this.texts.delete(uri);
    return open;
  }

  /** The open Python document with a URI. */
  text(uri: string): OpenTextDocument | undefined {
    return this.texts.get(uri);
  }

  /** Every open Python document. */
  allTexts(): OpenTextDocument[] {
    return [...this.texts.values()];
  }

  /** Opens a notebook with its cells' documents. */
  openNotebook(params: DidOpenNotebookDocumentParams, absPath: string): OpenNotebook {
    this.closeNotebook(params.notebookDocument.uri);
    const items = new Map(params.cellTextDocuments.map((d) => [d.uri, d]));
    const cells = params.notebookDocument.cells.map((cell) => cellFrom(cell, items.get(cell.document)));
    const raw = notebookJson(cells);
    const notebook: OpenNotebook = {
      uri: params.notebookDocument.uri,
      absPath,
      notebookType: params.notebookDocument.notebookType,
      version: params.notebookDocument.version,
      cells,
      raw,
      virtual: PythonDocument.parse(this.parser(), readNotebook(raw).text, true),
    };
    this.notebooks.set(notebook.uri, notebook);
    for (const cell of cells) this.cellOwners.set(cell.uri, notebook.uri);
    return notebook;
  }

  /**
   * Applies a notebook change (cell structure, cell kinds, cell texts) and re-parses the virtual module
   * incrementally; returns the notebook and the URIs of cells that were removed.
   */
  changeNotebook(params: DidChangeNotebookDocumentParams): { notebook: OpenNotebook; removedCells: string[] } {
    const notebook = this.notebooks.get(params.notebookDocument.uri);
    if (!notebook) throw new StaleChangeError(`a change arrived for notebook ${params.notebookDocument.uri}, which is not open`);
    if (params.notebookDocument.version < notebook.version) {
      throw new StaleChangeError(`a change for notebook ${notebook.uri} has version ${params.notebookDocument.version}, older than the open version ${notebook.version}`);
    }
    const removedCells: string[] = [];
    const change = params.change;
    const structure = change.cells?.structure;
    if (structure) {
      const opened = new Map((structure.didOpen ?? []).map((d) => [d.uri, d]));
      const known = new Map(notebook.cells.map((c) => [c.uri, c]));
      const inserted = (structure.array.cells ?? []).map((cell) => {
        const item = opened.get(cell.document);
        if (item) return cellFrom(cell, item);
        // A moved cell keeps its text document; only its place changes.
        const existing = known.get(cell.document);
        return existing ? { ...existing, kind: cell.kind } : cellFrom(cell, undefined);
      });
      const deleted = notebook.cells.splice(structure.array.start, structure.array.deleteCount, ...inserted);
      const still = new Set(notebook.cells.map((c) => c.uri));
      for (const cell of deleted) {
        if (!still.has(cell.uri)) {
          removedCells.push(cell.uri);
          this.cellOwners.delete(cell.uri);
        }
      }
      for (const closed of structure.didClose ?? []) {
        if (!still.has(closed.uri)) this.cellOwners.delete(closed.uri);
      }
      for (const cell of notebook.cells) this.cellOwners.set(cell.uri, notebook.uri);
    }
    for (const data of change.cells?.data ?? []) {
      const cell = notebook.cells.find((c) => c.uri === data.document);
      if (cell) cell.kind = data.kind;
    }
    for (const content of change.cells?.textContent ?? []) {
      const cell = notebook.cells.find((c) => c.uri === content.document.uri);
      if (!cell) throw new StaleChangeError(`a text change arrived for cell ${content.document.uri}, which is not in notebook ${notebook.uri}`);
      cell.text = applyToString(cell.text, content.changes);
      cell.version = content.document.version;
    }
    notebook.version = params.notebookDocument.version;
    this.refreshNotebook(notebook);
    return { notebook, removedCells };
  }

  /** Closes a notebook; returns what was open. */
  closeNotebook(uri: string): OpenNotebook | undefined {
    const notebook = this.notebooks.get(uri);
    if (!notebook) return undefined;
    notebook.virtual.dispose();
    for (const cell of notebook.cells) this.cellOwners.delete(cell.uri);
    this.notebooks.delete(uri);
    return notebook;
  }

  /** The open notebook with a URI. */
  notebook(uri: string): OpenNotebook | undefined {
    return this.notebooks.get(uri);
  }

  /** Every open notebook. */
  allNotebooks(): OpenNotebook[] {
    return [...this.notebooks.values()];
  }

  /** The notebook that holds a cell document, and the cell's index in its `cells`. */
  cellOwner(cellUri: string): { notebook: OpenNotebook; index: number } | undefined {
    const owner = this.cellOwners.get(cellUri);
    const notebook = owner === undefined ? undefined : this.notebooks.get(owner);
    if (!notebook) return undefined;
    const index = notebook.cells.findIndex((c) => c.uri === cellUri);
    return index < 0 ? undefined : { notebook, index };
  }

  /** The open Python document or notebook whose engine path is `absPath`. */
  byPath(absPath: string): { text?: OpenTextDocument; notebook?: OpenNotebook } | undefined {
    for (const text of this.texts.values()) if (text.absPath === absPath) return { text };
    for (const notebook of this.notebooks.values()) if (notebook.absPath === absPath) return { notebook };
    return undefined;
  }

  /** Frees every tree (on shutdown). */
  disposeAll(): void {
    for (const text of this.texts.values()) text.dispose();
    for (const notebook of this.notebooks.values()) notebook.virtual.dispose();
  }

  /** Rebuilds a notebook's nbformat text after its cells changed and re-parses only the changed span of its virtual module. */
  private refreshNotebook(notebook: OpenNotebook): void {
    notebook.raw = notebookJson(notebook.cells);
    const next = readNotebook(notebook.raw).text;
    const previous = notebook.virtual.text;
    if (next === previous) return;
    notebook.virtual = notebook.virtual.edit(this.parser(), [spanChange(previous, next)]);
  }
}

function cellFrom(cell: NotebookCell, item: TextDocumentItem | undefined): OpenCell {
  return { uri: cell.document, kind: cell.kind, languageId: item?.languageId ?? 'python', version: item?.version ?? 0, text: item?.text ?? '' };
}

/**
 * The nbformat 4 text of the cells: Python code cells as `code`, other code cells as `raw` (not analysed), markup as
 * `markdown`. Cell indexes in the file equal indexes in the editor's cell list, so findings map back to cells.
 */
export function notebookJson(cells: readonly OpenCell[]): string {
  return JSON.stringify({
    cells: cells.map((cell) => ({ cell_type: isPythonCodeCell(cell) ? 'code' : cell.kind === 2 ? 'raw' : 'markdown', metadata: {}, source: cell.text })),
    metadata: { language_info: { name: 'python' } },
    nbformat: 4,
    nbformat_minor: 5,
  });
}

/** The single replacement that turns `before` into `after` (common prefix and suffix kept). */
export function spanChange(before: string, after: string): TextChange {
  let start = 0;
  const max = Math.min(before.length, after.length);
  while (start < max && before.charCodeAt(start) === after.charCodeAt(start)) start++;
  // Never split a surrogate pair or a CRLF: back off one unit when the prefix ends inside one.
  if (start > 0 && start < max && isLowSurrogateOrLf(before, start)) start--;
  let endBefore = before.length;
  let endAfter = after.length;
  while (endBefore > start && endAfter > start && before.charCodeAt(endBefore - 1) === after.charCodeAt(endAfter - 1)) {
    endBefore--;
    endAfter--;
  }
  return { start, end: endBefore, newText: after.slice(start, endAfter) };
}

function isLowSurrogateOrLf(text: string, offset: number): boolean {
  const c = text.charCodeAt(offset);
  return (c >= 0xdc00 && c <= 0xdfff) || (c === 10 && text.charCodeAt(offset - 1) === 13);
}

/** Applies LSP content changes to a plain string (cells keep no tree of their own). */
export function applyToString(text: string, changes: readonly TextDocumentContentChangeEvent[]): string {
  let out = text;
  for (const change of changes) {
    if (!('range' in change) || change.range === undefined) {
      out = change.text;
      continue;
    }
    const index = LineIndex.of(out);
    const start = index.fromLsp(change.range.start);
    const end = Math.max(start, index.fromLsp(change.range.end));
    out = out.slice(0, start) + change.text + out.slice(end);
  }
  return out;
}
