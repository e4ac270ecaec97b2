// Jupyter notebooks (nbformat 4): the code cells become one virtual Python module, in order, with a map back to
// (cell, offset in cell); IPython magics and shell lines are turned into comments of the same length so they
// neither break the parse nor move any offset. Fixes are written back into the cells' `source` only.
import { LineIndex } from './positions';

/** One code cell's place in the virtual module. */
export interface VirtualCell {
  /** 0-based index into the notebook's `cells` array (markdown cells included). */
  index: number;
  /** The cell's source text exactly as stored (lines joined). */
  source: string;
  /** Offset of the cell's first character in the virtual module. */
  start: number;
  /** Whether the file stores this cell's source as a list of lines (nbformat's usual form) or as one string. */
  sourceIsList: boolean;
}

/** A notebook read for analysis. */
export interface NotebookModel {
  /** The virtual module: code cells' sources (magics neutralised) joined by one newline each. */
  text: string;
  cells: VirtualCell[];
  /** The parsed JSON document, kept so fixes change only the affected `source` fields. */
  json: Record<string, unknown>;
  /** Indentation used by the file (nbformat writes 1 space), and whether it ends with a newline. */
  indent: string | number;
  trailingNewline: boolean;
  /**
   * The notebook file's text as read. Fixes splice new `source` values into it, so every byte outside the changed
   * cells' sources stays as it was (number spellings, escapes, key order, line breaks).
   */
  raw?: string;
}

/** A broken notebook: the message says what is wrong, for the CLI and the editor to show. */
export class NotebookError extends Error {}

/** Reads notebook JSON text into a virtual module; throws NotebookError with a clear message when it is not one. */
export function readNotebook(raw: string): NotebookModel {
  let json: unknown;
  try {
    json = JSON.parse(raw.charCodeAt(0) === 0xfeff ? raw.slice(1) : raw);
  } catch (error) {
    throw new NotebookError(`not a valid notebook: the file is not valid JSON (${(error as Error).message})`);
  }
  if (!json || typeof json !== 'object' || Array.isArray(json)) throw new NotebookError('not a valid notebook: the top level is not a JSON object');
  const doc = json as Record<string, unknown>;
  const format = doc.nbformat;
  if (typeof format === 'number' && format < 4) throw new NotebookError(`unsupported notebook format ${format} (nbformat 4 is supported)`);
  const cellsValue = doc.cells;
  if (!Array.isArray(cellsValue)) throw new NotebookError('not a valid notebook: "cells" is missing or is not a list');
  const language = notebookLanguage(doc);
  if (language && language !== 'python') throw new NotebookError(`notebook language is ${language}, not Python`);
  const cells: VirtualCell[] = [];
  const parts: string[] = [];
  let offset = 0;
  cellsValue.forEach((cell, index) => {
    if (!cell || typeof cell !== 'object') throw new NotebookError(`not a valid notebook: cell ${index} is not an object`);
    const c = cell as Record<string, unknown>;
    if (c.cell_type !== 'code') return;
    const src = c.source;
    let source: string;
    if (typeof src === 'string') source = src;
    else if (Array.isArray(src) && src.every((s) => typeof s === 'string')) source = (src as string[]).join('');
    else if (src === undefined) source = '';
    else throw new NotebookError(`not a valid notebook: cell ${index} has a "source" that is neither a string nor a list of strings`);
    cells.push({ index, source, start: offset, sourceIsList: Array.isArray(src) });
    const python = neutraliseMagics(source);
    parts.push(python, '\n');
    offset += python.length + 1;
  });
  const indentMatch = /^\{\r?\n([ \t]+)"/.exec(raw);
  return {
    raw,
    text: parts.join(''),
    cells,
    json: doc,
    indent: indentMatch ? indentMatch[1]! : raw.trimStart().startsWith('{\n') || raw.includes('\n') ? 1 : 0,
    trailingNewline: raw.endsWith('\n'),
  };
}

function notebookLanguage(doc: Record<string, unknown>): string | undefined {
  const meta = doc.metadata as Record<string, unknown> | undefined;
  const info = meta?.language_info as Record<string, unknown> | undefined;
  const kernel = meta?.kernelspec as Record<string, unknown> | undefined;
  const name = (info?.name ?? kernel?.language) as unknown;
  return typeof name === 'string' ? name.toLowerCase() : undefined;
}

/** Cell magics whose body is still Python. */
const PYTHON_BODY_CELL_MAGICS = new Set(['time', 'timeit', 'capture', 'prun', 'debug']);

/**
 * Turns IPython-only lines into comments of exactly the same length: line magics (`%matplotlib inline`), shell
 * lines (`!pip install …`), assignments from them (`files = !ls`), help queries (`model?`) and cell magics
 * (`%%bash` comments out the whole cell; `%%time` only its first line).
 */
export function neutraliseMagics(source: string): string {
  if (!/[%!?]/.test(source)) return source;
  const lines = source.split(/(?<=\n)/);
  const first = /^\s*%%(\w+)/.exec(lines[0] ?? '');
  const wholeCell = first !== null && !PYTHON_BODY_CELL_MAGICS.has(first[1]!);
  return lines
    .map((line, i) => {
      const body = line.replace(/\r?\n$/, '');
      const indent = /^\s*/.exec(body)![0].length;
      const rest = body.slice(indent);
      if (rest === '') return line;
      const magic =
        wholeCell ||
        (i === 0 && first !== null) ||
        rest.startsWith('%') ||
        rest.startsWith('!') ||
        /^[A-Za-z_][\w.,\s]*=\s*[%!]/.test(rest) ||
        /^\?/.test(rest) ||
        /^[A-Za-z_][\w.]*\?\??$/.test(rest);
      if (!magic) return line;
      return line.slice(0, indent) + '#' + line.slice(indent + 1);
    })
    .join('');
}

/** Where a virtual-module offset lies: the cell and the offset inside that cell's source. */
export function locateInNotebook(model: NotebookModel, offset: number): { cell: VirtualCell; offset: number } {
  const cells = model.cells;
  if (cells.length === 0) throw new Error('noisewise: a notebook with no code cells has no positions');
  let lo = 0;
  let hi = cells.length - 1;
  while (lo < hi) {
    const mid = (lo + hi + 1) >> 1;
    if (cells[mid]!.start <= offset) lo = mid;
    else hi = mid - 1;
  }
  const cell = cells[lo]!;
  return { cell, offset: Math.min(Math.max(0, offset - cell.start), cell.source.length) };
}

/** Line index per cell, cached on first use. */
const cellIndexes = new WeakMap<VirtualCell, LineIndex>();

/** Line index of one cell's source. */
export function cellLineIndex(cell: VirtualCell): LineIndex {
  let index = cellIndexes.get(cell);
  if (!index) {
    index = new LineIndex(cell.source);
    cellIndexes.set(cell, index);
  }
  return index;
}

/** An edit in virtual-module offsets. */
export interface VirtualEdit {
  start: number;
  end: number;
  newText: string;
}

/**
 * Applies edits (virtual-module offsets, non-overlapping) to the cells' sources and returns the new notebook file
 * text. Only the `source` of the cells an edit touches changes: the new values are spliced into the file's text in
 * the file's own layout (list or string, indentation, line breaks), and every other byte is kept. An edit that spans
 * two cells is refused. The model is not changed.
 */
export function applyNotebookEdits(model: NotebookModel, edits: VirtualEdit[]): string {
  const byCell = new Map<VirtualCell, VirtualEdit[]>();
  for (const edit of edits) {
    const at = locateInNotebook(model, edit.start);
    const endAt = locateInNotebook(model, Math.max(edit.start, edit.end));
    if (endAt.cell !== at.cell) throw new Error('noisewise: a fix may not span two notebook cells');
    const list = byCell.get(at.cell) ?? [];
    list.push({ start: at.offset, end: at.offset + (edit.end - edit.start), newText: edit.newText });
    byCell.set(at.cell, list);
  }
  const newSources = new Map<VirtualCell, string>();
  for (const [cell, cellEdits] of byCell) {
    cellEdits.sort((a, b) => b.start - a.start);
    let text = cell.source;
    for (const e of cellEdits) text = text.slice(0, e.start) + e.newText + text.slice(e.end);
    newSources.set(cell, text);
  }
  const spliced = model.raw === undefined ? null : spliceSources(model, model.raw, newSources);
  if (spliced !== null) return spliced;
  // No text to splice into (or a changed cell without a "source" key): write the whole document out again.
  const json = structuredClone(model.json);
  const cells = json.cells as Record<string, unknown>[];
  for (const [cell, text] of newSources) cells[cell.index]!.source = cell.sourceIsList ? splitSourceLines(text) : text;
  const out = JSON.stringify(json, null, model.indent);
  return model.trailingNewline ? out + '\n' : out;
}

/** Replaces the `source` values of the given cells inside the file's text; null when a cell has no `source` key. */
function spliceSources(model: NotebookModel, raw: string, newSources: ReadonlyMap<VirtualCell, string>): string | null {
  const spans = cellSourceSpans(raw);
  const eol = /\r\n/.test(raw) ? '\r\n' : '\n';
  const unit = typeof model.indent === 'number' ? ' '.repeat(model.indent) : model.indent;
  const replacements: { start: number; end: number; text: string }[] = [];
  for (const [cell, text] of newSources) {
    const span = spans.get(cell.index);
    if (!span) return null;
    const before = raw.slice(span.start, span.end);
    let value: string;
    if (!cell.sourceIsList) value = JSON.stringify(text);
    else {
      const items = splitSourceLines(text).map((line) => JSON.stringify(line));
      const lineStart = Math.max(raw.lastIndexOf('\n', span.start - 1), raw.lastIndexOf('\r', span.start - 1)) + 1;
      const keyIndent = /^[ \t]*/.exec(raw.slice(lineStart, span.start))![0];
      // nbformat writes one item per line, one indentation unit deeper than the key; a one-line list stays on one line.
      const multiLine = before.includes('\n') || (before.replace(/\s/g, '') === '[]' && unit !== '' && raw.includes('\n'));
      if (items.length === 0) value = '[]';
      else if (multiLine) value = `[${eol}${items.map((item) => `${keyIndent}${unit}${item}`).join(`,${eol}`)}${eol}${keyIndent}]`;
      else value = `[${items.join(before.includes('", "') ? ', ' : ',')}]`;
    }
    replacements.push({ start: span.start, end: span.end, text: value });
  }
  replacements.sort((a, b) => b.start - a.start);
  let out = raw;
  for (const r of replacements) out = out.slice(0, r.start) + r.text + out.slice(r.end);
  return out;
}

/**
 * Where each cell's `source` value lies in a notebook's JSON text (offsets of the value, by index into `cells`). One
 * iterative scan with an explicit stack, so deeply nested outputs cannot overflow the stack; the text must be JSON
 * that parsed.
 */
export function cellSourceSpans(raw: string): Map<number, { start: number; end: number }> {
  type Role = 'root' | 'cells' | 'cell' | 'source' | 'other';
  interface Frame {
    array: boolean;
    role: Role;
    /** The key whose value comes next (objects), or null while a key is expected. */
    key: string | null;
    /** Elements before the current one (arrays). */
    count: number;
    /** The cell index (for a cell object and its source value). */
    cell: number;
    start: number;
  }
  const spans = new Map<number, { start: number; end: number }>();
  const stack: Frame[] = [];
  const roleOfValue = (): { role: Role; cell: number } => {
    const top = stack[stack.length - 1];
    if (!top) return { role: 'root', cell: -1 };
    if (top.role === 'root' && !top.array && top.key === 'cells') return { role: 'cells', cell: -1 };
    if (top.role === 'cells' && top.array) return { role: 'cell', cell: top.count };
    if (top.role === 'cell' && !top.array && top.key === 'source') return { role: 'source', cell: top.cell };
    return { role: 'other', cell: -1 };
  };
  const scalar = (start: number, end: number): void => {
    const { role, cell } = roleOfValue();
    if (role === 'source') spans.set(cell, { start, end });
  };
  let i = raw.charCodeAt(0) === 0xfeff ? 1 : 0;
  while (i < raw.length) {
    const c = raw[i]!;
    if (c === ' ' || c === '\n' || c === '\r' || c === '\t' || c === ':') {
      i++;
      continue;
    }
    const top = stack[stack.length - 1];
    if (c === '"') {
      let end = i + 1;
      while (end < raw.length && raw[end] !== '"') end += raw[end] === '\\' ? 2 : 1;
      end++;
      if (top && !top.array && top.key === null) top.key = JSON.parse(raw.slice(i, end)) as string;
      else scalar(i, end);
      i = end;
      continue;
    }
    if (c === ',') {
      if (top?.array) top.count++;
      else if (top) top.key = null;
      i++;
      continue;
    }
    if (c === '{' || c === '[') {
      const { role, cell } = roleOfValue();
      stack.push({ array: c === '[', role, key: null, count: 0, cell, start: i });
      i++;
      continue;
    }
    if (c === '}' || c === ']') {
      const frame = stack.pop();
      if (frame?.role === 'source') spans.set(frame.cell, { start: frame.start, end: i + 1 });
      i++;
      continue;
    }
    // A number, true, false or null.
    let end = i;
    while (end < raw.length && !/[\s,\]}]/.test(raw[end]!)) end++;
    scalar(i, end);
    i = end;
  }
  return spans;
}

/** Splits a cell source the way nbformat stores it: each line keeps its newline, the last one may not. */
export function splitSourceLines(text: string): string[] {
  if (text === '') return [];
  return text.split(/(?<=\n)/);
}
