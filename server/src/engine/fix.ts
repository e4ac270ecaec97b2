// Applying text edits: the one routine that turns a list of non-overlapping edits into new text.
import type { TextEdit } from './finding';

/** Thrown when two edits of one text overlap. */
export class OverlappingEditsError extends Error {}

/** Applies edits (offsets into `text`) and returns the new text; edits must not overlap. */
export function applyTextEdits(text: string, edits: readonly Pick<TextEdit, 'start' | 'end' | 'newText'>[]): string {
  const ordered = [...edits].sort((a, b) => a.start - b.start || a.end - b.end);
  for (let i = 1; i < ordered.length; i++) {
    if (ordered[i]!.start < ordered[i - 1]!.end) throw new OverlappingEditsError(`edits overlap at offset ${ordered[i]!.start}`);
  }
  const parts: string[] = [];
  let at = 0;
  for (const e of ordered) {
    parts.push(text.slice(at, e.start), e.newText);
    at = e.end;
  }
  parts.push(text.slice(at));
  return parts.join('');
}
