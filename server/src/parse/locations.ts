// Converts engine offsets of a file report into what the CLI, JSON and SARIF print: 1-based lines and code-point
// columns, counted inside the cell for notebooks.
import type { FileReport } from '../engine/types';
import { cellLineIndex, locateInNotebook } from './notebook';
import { LineIndex } from './positions';

/** A printed position: 1-based line and 1-based column in Unicode code points; `cell` for notebooks. */
export interface CliLocation {
  line: number;
  column: number;
  /** 0-based index into the notebook's `cells` array (markdown cells included); absent for Python files. */
  cell?: number;
}

/** A printed range; for notebooks both ends are inside the same cell. */
export interface CliRange {
  line: number;
  column: number;
  endLine: number;
  endColumn: number;
  cell?: number;
}

/** Line indexes of Python reports' texts, built on first use. */
const textIndexes = new WeakMap<FileReport, LineIndex>();

function textIndex(report: FileReport): LineIndex {
  let index = textIndexes.get(report);
  if (!index || index.text !== report.text) {
    index = new LineIndex(report.text);
    textIndexes.set(report, index);
  }
  return index;
}

/** The printed position of an offset into `report.text`. */
export function cliLocation(report: FileReport, offset: number): CliLocation {
  const notebook = report.notebook;
  if (report.kind !== 'notebook' || !notebook || notebook.cells.length === 0) return textIndex(report).toCli(offset);
  const at = locateInNotebook(notebook, offset);
  const position = cellLineIndex(at.cell).toCli(at.offset);
  return { line: position.line, column: position.column, cell: at.cell.index };
}

/**
 * The printed range of offsets [start, end) into `report.text`. In a notebook the end is clamped to the cell that
 * holds the start, so a range never spans two cells.
 */
export function cliRange(report: FileReport, start: number, end: number): CliRange {
  const from = Math.min(start, end);
  const to = Math.max(start, end);
  const notebook = report.notebook;
  if (report.kind !== 'notebook' || !notebook || notebook.cells.length === 0) {
    const index = textIndex(report);
    const a = index.toCli(from);
    const b = index.toCli(to);
    return { line: a.line, column: a.column, endLine: b.line, endColumn: b.column };
  }
  const at = locateInNotebook(notebook, from);
  const cell = at.cell;
  const index = cellLineIndex(cell);
  const endInCell = Math.min(Math.max(at.offset, to - cell.start), cell.source.length);
  const a = index.toCli(at.offset);
  const b = index.toCli(endInCell);
  return { line: a.line, column: a.column, endLine: b.line, endColumn: b.column, cell: cell.index };
}
