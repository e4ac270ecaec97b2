// The engine's own syntax tree: a plain-JavaScript copy of the tree-sitter tree made in one cursor walk, so that
// analysis never crosses into WASM memory and the tree-sitter tree can be freed (or kept only for re-parsing).
import type { Tree } from 'web-tree-sitter';

/** One node of the syntax tree; offsets are UTF-16 code units into the parsed text. */
export class SyntaxNode {
  /** Named children, plus anonymous children that carry a field name (operators). */
  readonly children: SyntaxNode[] = [];

  constructor(
    /** Preorder index of this node in its file's `nodes` array. */
    readonly id: number,
    /** tree-sitter node type, e.g. `call`, `identifier`, `ERROR`. */
    readonly type: string,
    readonly start: number,
    readonly end: number,
    readonly parent: SyntaxNode | null,
    /** Field name under which the parent holds this node (`function`, `left`, `operator` …), or null. */
    readonly field: string | null,
    readonly file: SyntaxFile,
    /** True for nodes tree-sitter inserted to recover from an error (zero width). */
    readonly missing: boolean,
  ) {}

  /** Source text of the node. */
  get text(): string {
    return this.file.text.slice(this.start, this.end);
  }

  /** First child held under the given field name. */
  child(field: string): SyntaxNode | null {
    for (const c of this.children) if (c.field === field) return c;
    return null;
  }

  /** All children held under the given field name. */
  childrenOf(field: string): SyntaxNode[] {
    return this.children.filter((c) => c.field === field);
  }

  /** Named children that are not comments. */
  get namedChildren(): SyntaxNode[] {
    return this.children.filter((c) => c.type !== 'comment' && c.field !== 'operator' && c.field !== 'operators');
  }

  /** Closest ancestor (or this node) whose type is one of the given types. */
  closest(...types: string[]): SyntaxNode | null {
    for (let n: SyntaxNode | null = this; n; n = n.parent) if (types.includes(n.type)) return n;
    return null;
  }

  /** True when `other` lies inside this node (or is this node). */
  contains(other: SyntaxNode): boolean {
    return other.file === this.file && other.start >= this.start && other.end <= this.end && other.id >= this.id;
  }
}

/** A whole parsed file: its text, every node in preorder, and the parse errors. */
export class SyntaxFile {
  readonly nodes: SyntaxNode[] = [];
  root!: SyntaxNode;
  /** ERROR and MISSING nodes, for reporting and for rules that want to stay quiet near broken code. */
  readonly errors: SyntaxNode[] = [];

  constructor(readonly text: string) {}
}

/** Node types whose anonymous children are kept because they carry the meaning (the operator). */
const OPERATOR_PARENTS = new Set(['binary_operator', 'augmented_assignment', 'unary_operator', 'boolean_operator', 'comparison_operator', 'not_operator']);

/**
 * Copies a tree-sitter tree into a SyntaxFile with one iterative cursor walk (no recursion, so nesting depth
 * cannot overflow the stack). Named nodes are kept; anonymous ones only where they carry a field (operators).
 */
export function toSyntaxFile(tree: Tree, text: string): SyntaxFile {
  const file = new SyntaxFile(text);
  const language = tree.language;
  const types = language.types;
  const cursor = tree.walk();
  // Read once: only a tree with errors can hold MISSING punctuation, which the walk below must still record.
  const hasError = tree.rootNode.hasError;
  // NOTE: every cursor getter is a call into WASM, so the walk reads as little as it can: named-ness is cached per
  // symbol, and punctuation (anonymous nodes outside operator positions) is skipped after reading only its symbol.
  try {
    const stack: (SyntaxNode | null)[] = [];
    let parent: SyntaxNode | null = null;
    for (;;) {
      const typeId = cursor.nodeTypeId;
      let named = namedBySymbol[typeId];
      if (named === undefined) {
        named = cursor.nodeIsNamed;
        namedBySymbol[typeId] = named;
      }
      let created: SyntaxNode | null = null;
      if (named || (parent !== null && OPERATOR_PARENTS.has(parent.type))) {
        const type = types[typeId] ?? 'ERROR';
        if (named || (type !== '(' && type !== ')')) {
          const field = cursor.currentFieldName;
          const start = cursor.startIndex;
          const end = cursor.endIndex;
          const missing: boolean = start === end && parent !== null && cursor.nodeIsMissing;
          created = new SyntaxNode(file.nodes.length, type, start, end, parent, field ?? (named ? null : 'operator'), file, missing);
          file.nodes.push(created);
          if (parent) parent.children.push(created);
          else file.root = created;
          if (type === 'ERROR' || missing) file.errors.push(created);
        }
      }
      if (created === null && hasError && parent !== null && cursor.nodeIsMissing) {
        // A token inserted to recover (MISSING ")") is punctuation and not kept as a node, but it is a parse error:
        // it goes into `errors` only, with the id the next kept node gets, so that `contains` works on it.
        const at = cursor.startIndex;
        file.errors.push(new SyntaxNode(file.nodes.length, types[cursor.nodeTypeId] ?? 'MISSING', at, at, parent, null, file, true));
      }
      // Descend only into named nodes; anonymous tokens have nothing inside that we keep.
      if (named && cursor.gotoFirstChild()) {
        stack.push(parent);
        parent = created ?? parent;
        continue;
      }
      for (;;) {
        if (cursor.gotoNextSibling()) break;
        if (!cursor.gotoParent()) return file;
        parent = stack.pop() ?? null;
      }
    }
  } finally {
    cursor.delete();
  }
}

/** Whether a grammar symbol is a named node type, learned from the cursor the first time a symbol is seen. */
const namedBySymbol: (boolean | undefined)[] = [];
