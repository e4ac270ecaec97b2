// Maps engine offsets of one analysed file to editor locations and back: the file's own URI for Python files, the
// right cell's URI for notebooks. Every unit conversion goes through parse/positions.ts and parse/notebook.ts.
import type { Position, Range } from 'vscode-languageserver';
import { cellLineIndex, locateInNotebook, type NotebookModel } from '../parse/notebook';
import { LineIndex } from '../parse/positions';

/** An editor document a location points into, with the version the location was computed for (null if closed). */
export interface DocumentRef {
  uri: string;
  version: number | null;
}

/** One analysed file as the editor sees it. */
export class FileView {
  private index: LineIndex | null = null;

  constructor(
    readonly absPath: string,
    /** The analysed text (the virtual module for notebooks); engine offsets refer to it. */
    readonly text: string,
    readonly notebook: NotebookModel | null,
    /** The document of a Python file. */
    readonly document: DocumentRef | null,
    /** For an open notebook: the document of each cell, by the cell's index in the notebook. */
    readonly cells: readonly DocumentRef[] | null,
  ) {}

  /** Line index of the analysed text. */
  get lines(): LineIndex {
    this.index ??= LineIndex.of(this.text);
    return this.index;
  }

  /**
   * The editor location of offsets [start, end). In a notebook the end is clamped to the cell that holds the start;
   * null when the file is a notebook that is not open (its cells have no documents).
   */
  location(start: number, end: number): { ref: DocumentRef; range: Range } | null {
    const from = Math.min(start, end);
    const to = Math.max(start, end);
    if (!this.notebook) {
      if (!this.document) return null;
      return { ref: this.document, range: { start: this.lines.toLsp(from), end: this.lines.toLsp(to) } };
    }
    if (!this.cells || this.notebook.cells.length === 0) return null;
    const at = locateInNotebook(this.notebook, from);
    const ref = this.cells[at.cell.index];
    if (!ref) return null;
    const index = cellLineIndex(at.cell);
    const endInCell = Math.min(Math.max(at.offset, to - at.cell.start), at.cell.source.length);
    return { ref, range: { start: index.toLsp(at.offset), end: index.toLsp(endInCell) } };
  }

  /** The engine offset of a position in one of this file's documents (the file, or one of its cells); null if elsewhere. */
  offsetAt(uri: string, position: Position): number | null {
    if (!this.notebook) return this.document && this.document.uri === uri ? this.lines.fromLsp(position) : null;
    if (!this.cells) return null;
    const cellIndex = this.cells.findIndex((c) => c.uri === uri);
    if (cellIndex < 0) return null;
    const cell = this.notebook.cells.find((c) => c.index === cellIndex);
    if (!cell) return null;
    return cell.start + cellLineIndex(cell).fromLsp(position);
  }

  /** Offsets [start, end) of the analysed text that hold one document (the whole text, or one cell's source). */
  span(uri: string): { start: number; end: number } | null {
    if (!this.notebook) return this.document && this.document.uri === uri ? { start: 0, end: this.text.length } : null;
    const cellIndex = this.cells?.findIndex((c) => c.uri === uri) ?? -1;
    const cell = this.notebook.cells.find((c) => c.index === cellIndex);
    return cell ? { start: cell.start, end: cell.start + cell.source.length } : null;
  }
}
