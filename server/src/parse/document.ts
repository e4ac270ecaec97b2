// A parsed Python text that can be re-parsed incrementally after edits (the language server keeps one per open file).
import { Edit, type Parser, type Tree } from 'web-tree-sitter';
import { LineIndex } from './positions';
import { type SyntaxFile, toSyntaxFile } from './syntax';

/** One text edit in offsets (UTF-16 code units) of the text it applies to. */
export interface TextChange {
  start: number;
  end: number;
  newText: string;
}

/** A Python text, its tree-sitter tree (kept for incremental re-parsing) and the engine's syntax copy. */
export class PythonDocument {
  private constructor(
    readonly text: string,
    private tree: Tree | null,
    readonly syntax: SyntaxFile,
  ) {}

  /** Parses a text from scratch. `keepTree` keeps the tree-sitter tree for later incremental re-parses. */
  static parse(parser: Parser, text: string, keepTree = false): PythonDocument {
    const tree = parser.parse(text);
    if (!tree) throw new Error('noisewise: the parser returned no tree');
    const syntax = toSyntaxFile(tree, text);
    if (!keepTree) {
      tree.delete();
      return new PythonDocument(text, null, syntax);
    }
    return new PythonDocument(text, tree, syntax);
  }

  /**
   * Applies edits in order (each in offsets of the text as left by the previous one) and re-parses incrementally,
   * reusing the unchanged parts of the old tree. The old tree is freed; the returned document owns the new one.
   */
  edit(parser: Parser, changes: TextChange[]): PythonDocument {
    let text = this.text;
    const tree = this.tree;
    // What no change touched, for taking subtrees over: everything before the earliest start, and at the end the
    // shortest of the tails the changes leave alone (each change keeps the last `length - end` characters of its text).
    let prefix = text.length;
    let suffix = text.length;
    for (const change of changes) {
      prefix = Math.min(prefix, change.start);
      suffix = Math.min(suffix, text.length - change.end);
      const before = LineIndex.of(text);
      const next = text.slice(0, change.start) + change.newText + text.slice(change.end);
      const after = LineIndex.of(next);
      if (tree) {
        const newEnd = change.start + change.newText.length;
        tree.edit(
          new Edit({
            startIndex: change.start,
            oldEndIndex: change.end,
            newEndIndex: newEnd,
            startPosition: toPoint(before, change.start),
            oldEndPosition: toPoint(before, change.end),
            newEndPosition: toPoint(after, newEnd),
          }),
        );
      }
      text = next;
    }
    const newTree = parser.parse(text, tree ?? undefined);
    // Where the structure changed, per tree-sitter (the old tree must be the edited one, as here).
    const changed = tree && newTree ? tree.getChangedRanges(newTree) : null;
    tree?.delete();
    // This document no longer owns a tree: a later dispose() or edit() on it must not touch the freed one.
    this.tree = null;
    if (!newTree) throw new Error('noisewise: the parser returned no tree');
    // Unchanged subtrees of this document's copy move into the new one, so this document's syntax is spent now.
    return new PythonDocument(text, newTree, toSyntaxFile(newTree, text, changed ? { previous: this.syntax, prefix, suffix, changed } : undefined));
  }

  /** Frees the tree-sitter tree (WASM memory); the syntax copy stays usable. */
  dispose(): void {
    this.tree?.delete();
    this.tree = null;
  }
}

function toPoint(index: LineIndex, offset: number): { row: number; column: number } {
  const p = index.toLsp(offset);
  return { row: p.line, column: p.character };
}
