// The engine's own syntax tree: a plain-JavaScript copy of the tree-sitter tree made in one cursor walk, so that
// analysis never crosses into WASM memory and the tree-sitter tree can be freed (or kept only for re-parsing).
import * as treeSitter from 'web-tree-sitter';
import type { Tree } from 'web-tree-sitter';
import { firstAtLeast } from './sorted';

/** One node of the syntax tree; offsets are UTF-16 code units into the parsed text. */
export class SyntaxNode {
  /**
   * Named children, plus anonymous children that carry a field name (operators). Leaves share one frozen empty
   * array (most nodes are leaves, so this saves an allocation per node); `appendChild` replaces it on first use.
   */
  children: SyntaxNode[] = NO_CHILDREN;
  private namedCache: SyntaxNode[] | undefined = undefined;

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

  /**
   * Named children that are not comments (computed once; the children array itself when nothing is left out).
   * Callers must not mutate the returned array.
   */
  get namedChildren(): SyntaxNode[] {
    if (this.namedCache === undefined) {
      const all = this.children;
      const keep = (c: SyntaxNode) => c.type !== 'comment' && c.field !== 'operator' && c.field !== 'operators';
      this.namedCache = all.every(keep) ? all : all.filter(keep);
    }
    return this.namedCache;
  }

  /** Adds a child while the tree is being built. */
  appendChild(child: SyntaxNode): void {
    if (this.children === NO_CHILDREN) this.children = [child];
    else this.children.push(child);
  }

  /**
   * Called when the tree walk leaves this node: gives the children array its exact size. An array grown by `push`
   * keeps spare capacity (V8 grows a one-element array to 17 slots), which for a whole file's nodes was about a quarter
   * of the copied tree's memory.
   */
  sealChildren(): void {
    if (this.children.length > 1) this.children = this.children.slice();
  }

  /**
   * This node and every node below it, in preorder (the order of the file's `nodes`, where a subtree is one run),
   * as a fresh array. A node outside the `nodes` array (a MISSING token kept only in `errors`) is a leaf.
   */
  subtree(): SyntaxNode[] {
    const nodes = this.file.nodes;
    if (nodes[this.id] !== this) return [this];
    return nodes.slice(this.id, this.file.lastDescendantId(this) + 1);
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

/** The children of every leaf. */
// Frozen: pushing onto it throws, so a stray mutation cannot leak into every leaf.
const NO_CHILDREN = Object.freeze([]) as unknown as SyntaxNode[];

/** A whole parsed file: its text, every node in preorder, and the parse errors. */
export class SyntaxFile {
  readonly nodes: SyntaxNode[] = [];
  root!: SyntaxNode;
  /** ERROR and MISSING nodes, for reporting and for rules that want to stay quiet near broken code. */
  readonly errors: SyntaxNode[] = [];
  /** Per node id, the id of its last descendant (computed on first use; preorder makes every subtree contiguous). */
  private lastDescendants: Int32Array | null = null;
  /** How many nodes were taken over from the copy of the previous version (incremental re-parse; else 0). */
  reusedNodes = 0;
  /**
   * True once the copy of a later version may have taken this copy's nodes over (see ReusableSyntax): its nodes may
   * belong to another file now, so whatever was built on it must be built again.
   */
  spent = false;

  constructor(readonly text: string) {}

  /** The id of a node's last descendant in `nodes` (the node's own id for a leaf). */
  lastDescendantId(node: SyntaxNode): number {
    return this.lastDescendantIds()[node.id]!;
  }

  /** Per node id, the id of its last descendant. */
  lastDescendantIds(): Int32Array {
    if (this.lastDescendants === null) {
      const nodes = this.nodes;
      const last = new Int32Array(nodes.length);
      // Children have larger ids than their parent, so one backward pass sees every child before its parent.
      for (let i = nodes.length - 1; i >= 0; i--) {
        const children = nodes[i]!.children;
        last[i] = children.length > 0 ? last[children[children.length - 1]!.id]! : i;
      }
      this.lastDescendants = last;
    }
    return this.lastDescendants;
  }
}

/** Node types whose anonymous children are kept because they carry the meaning (the operator). */
const OPERATOR_PARENTS = new Set(['binary_operator', 'augmented_assignment', 'unary_operator', 'boolean_operator', 'comparison_operator', 'not_operator']);

/** The raw WASM entry points the fast walk calls (exposed by the bundle's build step; see scripts/bundle.mjs). */
interface WasmInternals {
  C: {
    HEAP32: Int32Array;
    _ts_tree_cursor_current_node_type_id_wasm(tree: number): number;
    _ts_tree_cursor_current_field_id_wasm(tree: number): number;
    _ts_tree_cursor_current_node_is_missing_wasm(tree: number): number;
    _ts_tree_cursor_current_node_is_named_wasm(tree: number): number;
    _ts_tree_cursor_start_index_wasm(tree: number): number;
    _ts_tree_cursor_end_index_wasm(tree: number): number;
    _ts_tree_cursor_goto_first_child_wasm(tree: number): number;
    _ts_tree_cursor_goto_next_sibling_wasm(tree: number): number;
    _ts_tree_cursor_goto_parent_wasm(tree: number): number;
    _ts_language_type_is_named_wasm(language: number, typeId: number): number;
  };
  TRANSFER_BUFFER: number;
}

/** The WASM internals when the loaded web-tree-sitter build exposes them, else null (then the public API is used). */
function wasmInternals(): WasmInternals | null {
  const getter = (treeSitter as unknown as { __noisewiseInternals?: () => WasmInternals }).__noisewiseInternals;
  if (typeof getter !== 'function') return null;
  const internals = getter();
  return internals && internals.C && typeof internals.C._ts_tree_cursor_goto_first_child_wasm === 'function' ? internals : null;
}

/** The size of web-tree-sitter's WASM memory in bytes (it never shrinks), or null when it cannot be read. */
export function wasmMemoryBytes(): number | null {
  const internals = wasmInternals() as (WasmInternals & { C: { HEAP8?: Int8Array } }) | null;
  return internals?.C.HEAP8?.buffer.byteLength ?? null;
}

/** Whether `toSyntaxFile` uses the direct WASM walk (for tests and the benchmark to report). */
export function fastWalkAvailable(): boolean {
  return wasmInternals() !== null;
}

/**
 * Copies a tree-sitter tree into a SyntaxFile with one iterative cursor walk (no recursion, so nesting depth
 * cannot overflow the stack). Named nodes are kept; anonymous ones only where they carry a field (operators).
 * Uses the direct WASM walk when available (same result, a fraction of the calls), else the public cursor API.
 */
export function toSyntaxFile(tree: Tree, text: string, reuse?: ReusableSyntax): SyntaxFile {
  const internals = wasmInternals();
  return internals ? toSyntaxFileDirect(tree, text, internals, reuse) : toSyntaxFileWithCursor(tree, text);
}

/**
 * The copy of the tree before an incremental re-parse, offered to `toSyntaxFile` of the new tree: subtrees of the new
 * tree that lie wholly in the text the edit left alone, and whose structure tree-sitter reports unchanged, are taken
 * over from it (renumbered and shifted) instead of being copied again from WASM memory. Taking them over moves the
 * node objects into the new file: the previous SyntaxFile must not be used afterwards.
 */
export interface ReusableSyntax {
  previous: SyntaxFile;
  /** Length of the text at the start that the edit left alone (the same in the old and the new text). */
  prefix: number;
  /** Length of the text at the end that the edit left alone (at most the old and the new length minus `prefix`). */
  suffix: number;
  /** Ranges of the new tree whose syntactic structure changed (tree-sitter's `getChangedRanges`), UTF-16 offsets. */
  changed: readonly { startIndex: number; endIndex: number }[];
}

/** The SyntaxNode fields that taking over a subtree rewrites (they are read-only for everyone else). */
type Movable = { -readonly [K in 'id' | 'start' | 'end' | 'parent' | 'field' | 'file']: SyntaxNode[K] };

/**
 * Takes over subtrees of the previous copy for one new tree (see ReusableSyntax). The previous copy's node objects are
 * renumbered and shifted as they move, so every lookup goes through the offsets and subtree ends read before the first
 * move.
 */
class SubtreeReuse {
  private readonly prefix: number;
  private readonly delta: number;
  /** Where the unchanged tail begins in the new text. */
  private readonly tailStart: number;
  private readonly previous: SyntaxFile;
  /** Starts and ends of tree-sitter's changed ranges (sorted, not overlapping). */
  private readonly changedStarts: Int32Array;
  private readonly changedEnds: Int32Array;
  /** Start offsets of the previous copy's parse errors, sorted. */
  private readonly errorStarts: Int32Array;
  /** Per node of the previous copy (by its old id): start, end, and the old id of its last descendant. */
  private readonly starts: Int32Array;
  private readonly ends: Int32Array;
  private readonly lasts: Int32Array;
  /** Nodes taken over so far (for the benchmark and the tests). */
  taken = 0;

  constructor(reuse: ReusableSyntax, text: string) {
    const previous = reuse.previous;
    this.previous = previous;
    previous.spent = true;
    // Sorted and merged where they overlap, so that their ends are sorted too.
    const merged: { startIndex: number; endIndex: number }[] = [];
    for (const r of [...reuse.changed].sort((a, b) => a.startIndex - b.startIndex)) {
      const last = merged[merged.length - 1];
      if (last && r.startIndex <= last.endIndex) last.endIndex = Math.max(last.endIndex, r.endIndex);
      else merged.push({ startIndex: r.startIndex, endIndex: r.endIndex });
    }
    this.changedStarts = Int32Array.from(merged, (r) => r.startIndex);
    this.changedEnds = Int32Array.from(merged, (r) => r.endIndex);
    this.errorStarts = Int32Array.from(previous.errors, (e) => e.start).sort();
    const shorter = Math.min(previous.text.length, text.length);
    this.prefix = Math.max(0, Math.min(reuse.prefix, shorter));
    this.tailStart = text.length - Math.max(0, Math.min(reuse.suffix, shorter - this.prefix));
    this.delta = text.length - previous.text.length;
    const nodes = previous.nodes;
    this.starts = new Int32Array(nodes.length);
    this.ends = new Int32Array(nodes.length);
    for (let i = 0; i < nodes.length; i++) {
      this.starts[i] = nodes[i]!.start;
      this.ends[i] = nodes[i]!.end;
    }
    this.lasts = previous.lastDescendantIds();
  }

  /**
   * The old id of the previous copy's node for a named node of the new tree at [start, end) of the given type, when
   * its whole subtree can be taken over: its text is in the unchanged prefix or tail, no changed range touches it, it
   * holds no parse error, and a node of the same type spans the same text in the previous copy. Else -1.
   */
  match(type: string, start: number, end: number): number {
    if (end <= start) return -1;
    let shift: number;
    if (end <= this.prefix) shift = 0;
    else if (start >= this.tailStart) shift = this.delta;
    else return -1;
    // A changed range touching [start, end]: the first range ending at or after `start` must begin after `end`.
    const range = firstAtLeast(this.changedEnds, start);
    if (range < this.changedStarts.length && this.changedStarts[range]! <= end) return -1;
    const oldStart = start - shift;
    const oldEnd = end - shift;
    // A parse error of the previous copy starting inside [oldStart, oldEnd] (or one enclosing it and starting at
    // oldStart, which is refused too): nothing of that stretch is taken over.
    const error = firstAtLeast(this.errorStarts, oldStart);
    if (error < this.errorStarts.length && this.errorStarts[error]! <= oldEnd) return -1;
    // Preorder never decreases in start offset: the candidates are the run of nodes starting at oldStart.
    const starts = this.starts;
    const nodes = this.previous.nodes;
    for (let i = firstAtLeast(starts, oldStart); i < starts.length && starts[i] === oldStart; i++) {
      if (this.ends[i] === oldEnd && nodes[i]!.type === type && !nodes[i]!.missing) return i;
    }
    return -1;
  }

  /** Moves the subtree of the previous copy's node `oldId` (from `match`) into `file` under `parent`; returns its root. */
  take(oldId: number, file: SyntaxFile, parent: SyntaxNode, field: string | null): SyntaxNode {
    const shift = this.starts[oldId]! >= this.prefix ? this.delta : 0;
    const nodes = this.previous.nodes;
    const last = this.lasts[oldId]!;
    for (let i = oldId; i <= last; i++) {
      const node = nodes[i] as unknown as Movable;
      node.id = file.nodes.length;
      node.start = this.starts[i]! + shift;
      node.end = this.ends[i]! + shift;
      node.file = file;
      file.nodes.push(nodes[i]!);
    }
    const root = nodes[oldId]!;
    const moved = root as unknown as Movable;
    moved.parent = parent;
    moved.field = field;
    this.taken += last - oldId + 1;
    return root;
  }
}

/**
 * The same walk as toSyntaxFileWithCursor, but keeping the cursor's state in web-tree-sitter's transfer buffer and
 * calling the WASM functions directly: the public TreeCursor copies its four handles into and out of WASM memory on
 * every getter, which costs more than the walk itself.
 * NOTE: relies on web-tree-sitter 0.27.2's internal calling convention (cursor state in TRANSFER_BUFFER); the
 * equality of both walks is tested on every fixture, and the version is pinned.
 */
export function toSyntaxFileDirect(tree: Tree, text: string, internals: WasmInternals, reuse?: ReusableSyntax): SyntaxFile {
  const { C, TRANSFER_BUFFER } = internals;
  const file = new SyntaxFile(text);
  const reusing = reuse ? new SubtreeReuse(reuse, text) : null;
  const language = tree.language as unknown as { types: string[]; fields: (string | null)[]; 0: number };
  const { types, fields } = internalizedNames(language);
  const treeAddress = (tree as unknown as { 0: number })[0];
  const hasError = tree.rootNode.hasError;
  const cursor = tree.walk() as unknown as { handles: number[]; delete(): void };
  const base = TRANSFER_BUFFER >> 2;
  let heap = C.HEAP32;
  for (let i = 0; i < 4; i++) heap[base + i] = cursor.handles[i]!;
  const named = namedTable(C, language[0], types.length);
  try {
    const stack: (SyntaxNode | null)[] = [];
    let parent: SyntaxNode | null = null;
    for (;;) {
      const typeId = C._ts_tree_cursor_current_node_type_id_wasm(treeAddress);
      // ERROR (and any symbol outside the grammar's table) is named or not per node; grammar symbols are fixed.
      const isNamed = typeId < named.length ? named[typeId] === 1 : C._ts_tree_cursor_current_node_is_named_wasm(treeAddress) === 1;
      let created: SyntaxNode | null = null;
      let reused = false;
      if (isNamed || (parent !== null && OPERATOR_PARENTS.has(parent.type))) {
        const type = types[typeId] ?? 'ERROR';
        if (isNamed || (type !== '(' && type !== ')')) {
          const fieldId = C._ts_tree_cursor_current_field_id_wasm(treeAddress);
          const field = fieldId ? (fields[fieldId] ?? null) : null;
          const start = C._ts_tree_cursor_start_index_wasm(treeAddress);
          const end = C._ts_tree_cursor_end_index_wasm(treeAddress);
          const oldId = reusing !== null && isNamed && parent !== null ? reusing.match(type, start, end) : -1;
          if (oldId >= 0) {
            // The same subtree as in the previous copy: moved over whole, and the walk goes on after it.
            parent!.appendChild(reusing!.take(oldId, file, parent!, field));
            reused = true;
          } else {
            const missing: boolean = start === end && parent !== null && C._ts_tree_cursor_current_node_is_missing_wasm(treeAddress) === 1;
            created = new SyntaxNode(file.nodes.length, type, start, end, parent, field ?? (isNamed ? null : 'operator'), file, missing);
            file.nodes.push(created);
            if (parent) parent.appendChild(created);
            else file.root = created;
            if (type === 'ERROR' || missing) file.errors.push(created);
          }
        }
      }
      if (created === null && !reused && hasError && parent !== null) {
        const start = C._ts_tree_cursor_start_index_wasm(treeAddress);
        if (start === C._ts_tree_cursor_end_index_wasm(treeAddress) && C._ts_tree_cursor_current_node_is_missing_wasm(treeAddress) === 1) {
          file.errors.push(new SyntaxNode(file.nodes.length, types[typeId] ?? 'MISSING', start, start, parent, null, file, true));
        }
      }
      if (isNamed && !reused && C._ts_tree_cursor_goto_first_child_wasm(treeAddress) === 1) {
        stack.push(parent);
        parent = created ?? parent;
        continue;
      }
      let done = false;
      for (;;) {
        if (C._ts_tree_cursor_goto_next_sibling_wasm(treeAddress) === 1) break;
        if (C._ts_tree_cursor_goto_parent_wasm(treeAddress) !== 1) {
          done = true;
          break;
        }
        parent?.sealChildren();
        parent = stack.pop() ?? null;
      }
      if (done) {
        file.root?.sealChildren();
        if (reusing) file.reusedNodes = reusing.taken;
        return file;
      }
    }
  } finally {
    // The cursor moved inside WASM: copy its state back so that delete() frees what it really holds.
    heap = C.HEAP32;
    for (let i = 0; i < 4; i++) cursor.handles[i] = heap[base + i]!;
    cursor.delete();
  }
}

const namedTables = new Map<number, Uint8Array>();

function namedTable(C: WasmInternals['C'], languageAddress: number, count: number): Uint8Array {
  let table = namedTables.get(languageAddress);
  if (!table) {
    table = new Uint8Array(count);
    for (let i = 0; i < count; i++) table[i] = C._ts_language_type_is_named_wasm(languageAddress, i) === 1 ? 1 : 0;
    namedTables.set(languageAddress, table);
  }
  return table;
}

/**
 * The grammar's node type and field names as internalized strings, once per language. web-tree-sitter builds them
 * from C strings, and V8 compares such strings by their characters; the engine compares node types and fields with
 * literals (`node.type === 'call'`, `child('function')`) millions of times per check, and two internalized strings
 * compare by address.
 */
function internalizedNames(language: { types: readonly string[]; fields: readonly (string | null)[] }): { types: string[]; fields: (string | null)[] } {
  let names = internalizedByLanguage.get(language);
  if (!names) {
    names = { types: language.types.map(internalize), fields: language.fields.map((f) => (f === null ? null : internalize(f))) };
    internalizedByLanguage.set(language, names);
  }
  return names;
}

const internalizedByLanguage = new WeakMap<object, { types: string[]; fields: (string | null)[] }>();

/** The same string, internalized: V8 interns the keys of an object's properties. */
function internalize(name: string): string {
  const holder: Record<string, true> = {};
  holder[name] = true;
  return Object.keys(holder)[0] ?? name;
}

/** Copies a tree with the public TreeCursor API (used when the WASM internals are not exposed). */
export function toSyntaxFileWithCursor(tree: Tree, text: string): SyntaxFile {
  const file = new SyntaxFile(text);
  const language = tree.language;
  const { types, fields } = internalizedNames(language);
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
      let named = typeId < types.length ? namedBySymbol[typeId] : undefined;
      if (named === undefined) {
        named = cursor.nodeIsNamed;
        if (typeId < types.length) namedBySymbol[typeId] = named;
      }
      let created: SyntaxNode | null = null;
      if (named || (parent !== null && OPERATOR_PARENTS.has(parent.type))) {
        const type = types[typeId] ?? 'ERROR';
        if (named || (type !== '(' && type !== ')')) {
          const fieldId = cursor.currentFieldId;
          const field = fieldId ? (fields[fieldId] ?? null) : null;
          const start = cursor.startIndex;
          const end = cursor.endIndex;
          const missing: boolean = start === end && parent !== null && cursor.nodeIsMissing;
          created = new SyntaxNode(file.nodes.length, type, start, end, parent, field ?? (named ? null : 'operator'), file, missing);
          file.nodes.push(created);
          if (parent) parent.appendChild(created);
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
        if (!cursor.gotoParent()) {
          file.root?.sealChildren();
          return file;
        }
        parent?.sealChildren();
        parent = stack.pop() ?? null;
      }
    }
  } finally {
    cursor.delete();
  }
}

/** Whether a grammar symbol is a named node type, learned from the cursor the first time a symbol is seen. */
const namedBySymbol: (boolean | undefined)[] = [];
