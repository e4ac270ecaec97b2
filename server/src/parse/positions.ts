// The one place where positions change units: engine offsets (UTF-16 code units into the text) to LSP positions
// (0-based line, UTF-16 character), CLI positions (1-based line, 1-based column counted in Unicode code points)
// and UTF-8 byte offsets, in both directions.

/** A 0-based line and UTF-16 character, as the Language Server Protocol counts them. */
export interface LspPosition {
  line: number;
  character: number;
}

/** A 1-based line and 1-based column counted in Unicode code points, as the CLI prints them. */
export interface CliPosition {
  line: number;
  column: number;
}

/** How many texts `LineIndex.of` keeps indexed (the old and the new text of an edit, in a file and a notebook). */
const RECENT_INDEXES = 4;
const recentIndexes = new Map<string, LineIndex>();

/** Line starts of one text, for converting offsets to positions and back in O(log lines). */
export class LineIndex {
  /** Offsets (UTF-16 code units) at which each line begins; line 0 begins at 0. */
  readonly lineStarts: number[];

  constructor(readonly text: string) {
    const starts = [0];
    for (let i = 0; i < text.length; i++) {
      const c = text.charCodeAt(i);
      if (c === 10) starts.push(i + 1);
      else if (c === 13) {
        if (text.charCodeAt(i + 1) === 10) i++;
        starts.push(i + 1);
      }
    }
    this.lineStarts = starts;
  }

  /**
   * The line index of a text, shared with other callers that asked for the same text lately. While the user types,
   * each version of a file is indexed by the editor's change, the re-parse, the check and the diagnostics: one scan of
   * the text serves them all. Keyed by the text itself; a few recent texts are kept.
   */
  static of(text: string): LineIndex {
    let index = recentIndexes.get(text);
    if (index === undefined) {
      index = new LineIndex(text);
      if (recentIndexes.size >= RECENT_INDEXES) recentIndexes.delete(recentIndexes.keys().next().value!);
    } else recentIndexes.delete(text);
    recentIndexes.set(text, index);
    return index;
  }

  /** Number of lines (a text ending in a newline has an empty last line). */
  get lineCount(): number {
    return this.lineStarts.length;
  }

  /** 0-based line that contains the offset (offsets are clamped to the text). */
  lineOf(offset: number): number {
    const starts = this.lineStarts;
    let lo = 0;
    let hi = starts.length - 1;
    const target = Math.max(0, Math.min(offset, this.text.length));
    while (lo < hi) {
      const mid = (lo + hi + 1) >> 1;
      if (starts[mid]! <= target) lo = mid;
      else hi = mid - 1;
    }
    return lo;
  }

  /** Offset where the 0-based line ends, before its line break. */
  lineEnd(line: number): number {
    const next = this.lineStarts[line + 1];
    if (next === undefined) return this.text.length;
    let end = next;
    if (end > 0 && this.text.charCodeAt(end - 1) === 10) end--;
    if (end > 0 && this.text.charCodeAt(end - 1) === 13) end--;
    return end;
  }

  /** LSP position of an offset. */
  toLsp(offset: number): LspPosition {
    const clamped = Math.max(0, Math.min(offset, this.text.length));
    const line = this.lineOf(clamped);
    return { line, character: clamped - this.lineStarts[line]! };
  }

  /** Offset of an LSP position; characters past the end of the line clamp to the line end. */
  fromLsp(position: LspPosition): number {
    if (position.line < 0) return 0;
    if (position.line >= this.lineStarts.length) return this.text.length;
    const start = this.lineStarts[position.line]!;
    return Math.min(start + Math.max(0, position.character), this.lineEnd(position.line));
  }

  /** CLI position (1-based, code points) of an offset. */
  toCli(offset: number): CliPosition {
    const clamped = Math.max(0, Math.min(offset, this.text.length));
    const line = this.lineOf(clamped);
    const start = this.lineStarts[line]!;
    return { line: line + 1, column: codePointsBetween(this.text, start, clamped) + 1 };
  }

  /** Offset of a CLI position (1-based line, 1-based code-point column). */
  fromCli(position: CliPosition): number {
    const line = position.line - 1;
    if (line < 0) return 0;
    if (line >= this.lineStarts.length) return this.text.length;
    let offset = this.lineStarts[line]!;
    const end = this.lineEnd(line);
    for (let n = 1; n < position.column && offset < end; n++) {
      offset += isHighSurrogate(this.text.charCodeAt(offset)) && isLowSurrogate(this.text.charCodeAt(offset + 1)) ? 2 : 1;
    }
    return offset;
  }
}

function isHighSurrogate(c: number): boolean {
  return c >= 0xd800 && c <= 0xdbff;
}

function isLowSurrogate(c: number): boolean {
  return c >= 0xdc00 && c <= 0xdfff;
}

/** Number of Unicode code points in text[from, to). */
export function codePointsBetween(text: string, from: number, to: number): number {
  let n = 0;
  for (let i = from; i < to; i++) {
    if (isHighSurrogate(text.charCodeAt(i)) && i + 1 < to && isLowSurrogate(text.charCodeAt(i + 1))) i++;
    n++;
  }
  return n;
}

/** UTF-8 byte offset of a UTF-16 offset. */
export function utf16ToByteOffset(text: string, offset: number): number {
  let bytes = 0;
  const end = Math.min(offset, text.length);
  for (let i = 0; i < end; i++) {
    const c = text.charCodeAt(i);
    if (c < 0x80) bytes += 1;
    else if (c < 0x800) bytes += 2;
    else if (isHighSurrogate(c) && isLowSurrogate(text.charCodeAt(i + 1)) && i + 1 < end) {
      bytes += 4;
      i++;
    } else bytes += 3;
  }
  return bytes;
}

/** UTF-16 offset of a UTF-8 byte offset (a byte offset inside a character maps to that character's start). */
export function byteToUtf16Offset(text: string, byteOffset: number): number {
  let bytes = 0;
  for (let i = 0; i < text.length; i++) {
    if (bytes >= byteOffset) return i;
    const c = text.charCodeAt(i);
    let width: number;
    if (c < 0x80) width = 1;
    else if (c < 0x800) width = 2;
    else if (isHighSurrogate(c) && isLowSurrogate(text.charCodeAt(i + 1))) width = 4;
    else width = 3;
    if (bytes + width > byteOffset) return i;
    bytes += width;
    if (width === 4) i++;
  }
  return text.length;
}
