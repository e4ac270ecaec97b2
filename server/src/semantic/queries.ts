// The questions rules ask of the semantic model: qualified names of expressions and calls, where a value comes
// from (def-use through assignments, attributes, properties and helper calls, across files), which class an
// object is an instance of, class hierarchies across the workspace, and constant values.
import type { SyntaxNode } from '../parse/syntax';
import { type Binding, type ClassInfo, type FunctionInfo, type ModuleAnalysis, unwrapParens } from './module';
import { foldConstant, type ConstantValue } from './values';
import type { FileAnalysis, Workspace } from './workspace';

/** What a name or dotted expression refers to. */
export type ResolvedSymbol =
  | { kind: 'class'; cls: ClassInfo }
  | { kind: 'function'; fn: FunctionInfo }
  | { kind: 'module'; analysis: FileAnalysis }
  | { kind: 'value'; binding: Binding }
  | { kind: 'external'; qualifiedName: string };

/** The type of a value, as far as it can be told: an instance of a workspace class or of a library class. */
export type ValueType = { kind: 'instance'; cls: ClassInfo } | { kind: 'external'; qualifiedName: string };

/** What a call calls: a resolved qualified name, or a method on a receiver that is not a module. */
export interface Callee {
  /** Fully qualified name when the callee resolves through imports (`torch.nn.functional.softplus`). */
  qualifiedName: string | null;
  /** Method name for calls on values (`x.softmax(-1)` → `softmax`). */
  method: string | null;
  /** The object a method is called on. */
  receiver: SyntaxNode | null;
  /** The workspace function or class called, when it is one (methods resolved through the receiver's class). */
  symbol: ResolvedSymbol | null;
  /** True when the call passes the receiver as the first parameter (a method called on an instance). */
  boundMethod: boolean;
}

/** An expression a value may come from, with the module that holds it. */
export interface Origin {
  node: SyntaxNode;
  /** Set when the value is an attribute of an instance: the class and attribute name (`self.sigma`). */
  attribute?: { cls: ClassInfo; name: string };
  /** Set when the value is a parameter of a function (no caller-specific value known). */
  parameter?: Binding;
}

/** Library classes whose subclasses are neural-network modules, by framework. */
export const MODULE_BASES = [
  'torch.nn.Module',
  'torch.nn.modules.module.Module',
  'pyro.nn.PyroModule',
  'pyro.nn.module.PyroModule',
  'flax.linen.Module',
  'flax.nnx.Module',
  'tensorflow.keras.Model',
  'tensorflow.keras.layers.Layer',
  'keras.Model',
  'keras.layers.Layer',
];

/** Method calls that return their receiver (or a copy of it of the same class). */
const SELF_RETURNING_METHODS = new Set(['to', 'cuda', 'cpu', 'train', 'eval', 'double', 'float', 'half', 'requires_grad_', 'type', 'share_memory']);

const MAX_DEPTH = 12;

/**
 * How deeply the recursive queries may nest inside each other. Each has its own small depth bound, but they call
 * one another (`callee` → `typeOf` of the receiver → `callee` of that call …) and on a chain of thousands of method
 * calls the bounds would not stop the stack from overflowing; real code never comes near this.
 */
const MAX_NESTING = 100;

/** What the queries check on their way in: the engine's per-file deadline (see engine/budget.ts). */
export interface QueryBudget {
  /** Throws once the file's analysis budget is spent. */
  check(): void;
}

/** Semantic queries over a workspace, from the point of view of one file. */
export class Semantics {
  /** Queries currently running inside each other (see MAX_NESTING). */
  private nesting = 0;

  constructor(
    readonly workspace: Workspace,
    readonly analysis: FileAnalysis,
    /** The per-file deadline, checked by the recursive queries (none when omitted). */
    private readonly budget: QueryBudget | null = null,
  ) {}

  /** The same queries from the point of view of another file of the workspace (sharing this one's budget). */
  forFile(analysis: FileAnalysis): Semantics {
    return analysis === this.analysis ? this : new Semantics(this.workspace, analysis, this.budget);
  }

  /**
   * Throws (an error the engine catches) once the file's analysis budget is spent. Cheap: the clock is read on every
   * 64th call. The queries call it themselves; a rule calls it in loops that ask no query.
   */
  checkBudget(): void {
    this.budget?.check();
  }

  /**
   * Runs a recursive query one level deeper, or returns `fallback` when the nesting bound is reached; checks the
   * deadline on the way in.
   */
  private nested<T>(fallback: T, run: () => T): T {
    this.budget?.check();
    if (this.nesting >= MAX_NESTING) return fallback;
    this.nesting++;
    try {
      return run();
    } finally {
      this.nesting--;
    }
  }

  /** The module model of the file being checked. */
  get module(): ModuleAnalysis {
    return this.analysis.module;
  }

  /** The module model a node belongs to (nodes can come from other files through cross-file queries). */
  moduleOf(node: SyntaxNode): ModuleAnalysis {
    if (node.file === this.analysis.syntax) return this.analysis.module;
    return this.workspace.analysisOfNode(node)?.module ?? this.analysis.module;
  }

  private fileOf(node: SyntaxNode): FileAnalysis {
    if (node.file === this.analysis.syntax) return this.analysis;
    return this.workspace.analysisOfNode(node) ?? this.analysis;
  }

  /** Bindings that may reach an identifier. */
  bindings(identifier: SyntaxNode): Binding[] {
    this.budget?.check();
    return this.moduleOf(identifier).resolveName(identifier);
  }

  /**
   * Fully qualified name of a name or dotted expression, following imports and simple aliases
   * (`F.softplus`, `from torch.nn import functional as fn; fn.softplus`, `sp = F.softplus; sp`).
   */
  qualifiedName(expr: SyntaxNode, depth = 0): string | null {
    if (depth > MAX_DEPTH) return null;
    return this.nested(null, () => this.qualifiedNameNested(expr, depth));
  }

  private qualifiedNameNested(expr: SyntaxNode, depth: number): string | null {
    const node = unwrapParens(expr);
    if (node.type === 'identifier') {
      const bindings = this.bindings(node);
      if (bindings.length === 0) return BUILTINS.has(node.text) ? `builtins.${node.text}` : null;
      let name: string | null = null;
      for (const b of bindings) {
        const candidate = this.qualifiedNameOfBinding(b, depth);
        if (candidate === null) return null;
        if (name !== null && name !== candidate) return null;
        name = candidate;
      }
      return name;
    }
    if (node.type === 'attribute') {
      const object = node.child('object');
      const attr = node.child('attribute');
      if (!object || !attr) return null;
      const base = this.qualifiedName(object, depth + 1);
      return base ? `${base}.${attr.text}` : null;
    }
    return null;
  }

  private qualifiedNameOfBinding(b: Binding, depth: number): string | null {
    if (b.kind === 'import') return b.qualifiedName ?? null;
    if (b.kind === 'class' || b.kind === 'def') {
      const module = this.moduleOf(b.node);
      if (b.definition) {
        const info = b.kind === 'class' ? module.classByNode.get(b.definition.id) : module.functionByNode.get(b.definition.id);
        if (info) return info.qualifiedName;
      }
      return null;
    }
    if (b.kind === 'assign' && b.value) {
      const v = unwrapParens(b.value);
      if (v.type === 'identifier' || v.type === 'attribute') return this.qualifiedName(v, depth + 1);
    }
    return null;
  }

  /** What a call calls. */
  callee(call: SyntaxNode): Callee {
    this.budget?.check();
    // Asked for every call by several rules: the memo comes first.
    const memo = this.workspace.memoTable<SyntaxNode, Callee>('callee');
    const cached = memo.get(call);
    if (cached) return cached;
    const fn = call.child('function');
    if (!fn) return { qualifiedName: null, method: null, receiver: null, symbol: null, boundMethod: false };
    const result = this.nested(null, () => this.calleeUncached(call, fn));
    // An answer cut short by the nesting bound is not remembered: asked again from shallower, it may be complete.
    if (result === null) return { qualifiedName: null, method: null, receiver: null, symbol: null, boundMethod: false };
    memo.set(call, result);
    return result;
  }

  private calleeUncached(call: SyntaxNode, fn: SyntaxNode): Callee {
    const qualifiedName = this.qualifiedName(fn);
    if (qualifiedName) {
      const symbol = this.symbolOfQualifiedName(qualifiedName, this.fileOf(call).file.absPath);
      return { qualifiedName: symbol && symbol.kind !== 'external' ? qualifiedNameOfSymbol(symbol) : qualifiedName, method: null, receiver: null, symbol, boundMethod: false };
    }
    const f = unwrapParens(fn);
    if (f.type === 'attribute') {
      const method = f.child('attribute')?.text ?? null;
      const receiver = f.child('object');
      let symbol: ResolvedSymbol | null = null;
      if (method && receiver) {
        const type = this.typeOf(receiver);
        if (type?.kind === 'instance') {
          const m = this.findMethod(type.cls, method);
          if (m) symbol = { kind: 'function', fn: m };
        }
      }
      return { qualifiedName: null, method, receiver, symbol, boundMethod: symbol !== null };
    }
    return { qualifiedName: null, method: null, receiver: null, symbol: null, boundMethod: false };
  }

  /**
   * True when a call calls one of the named functions: by qualified name (`torch.exp`), or, for names given as
   * `.exp`, as a method on a value (`x.exp()`).
   */
  isCallTo(call: SyntaxNode, names: readonly string[]): boolean {
    if (call.type !== 'call') return false;
    const callee = this.callee(call);
    for (const name of names) {
      if (name.startsWith('.')) {
        if (callee.method === name.slice(1)) return true;
      } else if (callee.qualifiedName === name) return true;
    }
    return false;
  }

  /** Resolves a dotted qualified name to a workspace class, function, module or module-level value. */
  symbolOfQualifiedName(qualifiedName: string, fromAbsPath?: string, depth = 0): ResolvedSymbol | null {
    if (depth > MAX_DEPTH) return null;
    this.budget?.check();
    const memoKey = `${fromAbsPath ?? ''}|${qualifiedName}`;
    const memo = this.workspace.memoTable<string, ResolvedSymbol | null>('symbol');
    if (memo.has(memoKey)) return memo.get(memoKey)!;
    memo.set(memoKey, null);
    const result = this.symbolUncached(qualifiedName, fromAbsPath, depth);
    memo.set(memoKey, result);
    return result;
  }

  private symbolUncached(qualifiedName: string, fromAbsPath: string | undefined, depth: number): ResolvedSymbol | null {
    const parts = qualifiedName.split('.');
    // Symbols defined in the checked file itself carry its module name.
    for (let i = parts.length; i >= 1; i--) {
      const moduleName = parts.slice(0, i).join('.');
      const target = moduleName === this.analysis.module.name ? this.analysis : this.workspace.moduleByName(moduleName, fromAbsPath);
      if (!target) continue;
      const rest = parts.slice(i);
      if (rest.length === 0) return { kind: 'module', analysis: target };
      return this.memberOf(target, rest, depth) ?? { kind: 'external', qualifiedName };
    }
    return { kind: 'external', qualifiedName };
  }

  private memberOf(target: FileAnalysis, rest: string[], depth: number): ResolvedSymbol | null {
    const [head, ...tail] = rest;
    const bindings = target.module.exported(head!);
    if (bindings.length === 0) return null;
    const b = bindings[bindings.length - 1]!;
    let symbol: ResolvedSymbol | null = null;
    if (b.kind === 'class' && b.definition) {
      const cls = target.module.classByNode.get(b.definition.id);
      if (cls) symbol = { kind: 'class', cls };
    } else if (b.kind === 'def' && b.definition) {
      const fn = target.module.functionByNode.get(b.definition.id);
      if (fn) symbol = { kind: 'function', fn };
    } else if (b.kind === 'import' && b.qualifiedName) {
      return this.symbolOfQualifiedName([b.qualifiedName, ...tail].join('.'), target.file.absPath, depth + 1);
    } else symbol = { kind: 'value', binding: b };
    if (!symbol) return null;
    if (tail.length === 0) return symbol;
    if (symbol.kind === 'class') {
      const method = this.findMethod(symbol.cls, tail[0]!);
      if (method && tail.length === 1) return { kind: 'function', fn: method };
    }
    return null;
  }

  /** Resolves an expression (name or dotted) to what it refers to. */
  symbol(expr: SyntaxNode): ResolvedSymbol | null {
    const name = this.qualifiedName(expr);
    if (!name) return null;
    return this.symbolOfQualifiedName(name, this.fileOf(expr).file.absPath);
  }

  /** Base classes of a class: workspace classes resolved across files, library classes by qualified name. */
  baseTypes(cls: ClassInfo): ValueType[] {
    const out: ValueType[] = [];
    for (const base of cls.bases) {
      const symbol = this.symbol(base);
      if (symbol?.kind === 'class') out.push({ kind: 'instance', cls: symbol.cls });
      else if (symbol?.kind === 'external') out.push({ kind: 'external', qualifiedName: symbol.qualifiedName });
      else {
        const name = this.qualifiedName(base);
        if (name) out.push({ kind: 'external', qualifiedName: name });
      }
    }
    return out;
  }

  /** The class and its workspace ancestors, in method-resolution order (depth-first, left to right, no repeats). */
  ancestry(cls: ClassInfo): ClassInfo[] {
    const memo = this.workspace.memoTable<ClassInfo, ClassInfo[]>('ancestry');
    const cached = memo.get(cls);
    if (cached) return cached;
    const out: ClassInfo[] = [];
    memo.set(cls, out);
    const visit = (c: ClassInfo, depth: number) => {
      if (depth > MAX_DEPTH || out.includes(c)) return;
      out.push(c);
      for (const base of this.baseTypes(c)) if (base.kind === 'instance') visit(base.cls, depth + 1);
    };
    visit(cls, 0);
    return out;
  }

  /** True when a class derives (through workspace classes in any file) from one of the named library classes. */
  isSubclassOf(cls: ClassInfo, qualifiedNames: readonly string[]): boolean {
    for (const c of this.ancestry(cls)) {
      if (qualifiedNames.includes(c.qualifiedName)) return true;
      for (const base of this.baseTypes(c)) if (base.kind === 'external' && qualifiedNames.includes(base.qualifiedName)) return true;
    }
    return false;
  }

  /** True when a class is a neural-network module (torch, Pyro, Flax or Keras). */
  isModuleClass(cls: ClassInfo): boolean {
    return this.isSubclassOf(cls, MODULE_BASES);
  }

  /** A method by name, looked up through the workspace ancestry. */
  findMethod(cls: ClassInfo, name: string): FunctionInfo | null {
    for (const c of this.ancestry(cls)) {
      const m = c.methods.get(name);
      if (m) return m;
    }
    return null;
  }

  /** Attribute bindings (`self.name = …`) of a class and its workspace ancestors. */
  attributeBindings(cls: ClassInfo, name: string): { cls: ClassInfo; target: SyntaxNode; value: SyntaxNode | null; method: FunctionInfo | null }[] {
    const out: { cls: ClassInfo; target: SyntaxNode; value: SyntaxNode | null; method: FunctionInfo | null }[] = [];
    for (const c of this.ancestry(cls)) {
      for (const a of c.attributes.get(name) ?? []) out.push({ cls: c, target: a.target, value: a.value, method: a.method });
    }
    return out;
  }

  /** Workspace classes that derive from a class (in any analysed file of the workspace), the class included. */
  subclassesOf(cls: ClassInfo): ClassInfo[] {
    const memo = this.workspace.memoTable<ClassInfo, ClassInfo[]>('subclassesOf');
    const cached = memo.get(cls);
    if (cached) return cached;
    const out: ClassInfo[] = [cls];
    memo.set(cls, out);
    for (const file of this.workspace.dependentsOf(cls.module.syntax === this.analysis.syntax ? this.analysis.file.absPath : (this.workspace.analysisOfNode(cls.node)?.file.absPath ?? this.analysis.file.absPath))) {
      const below = this.subclassIndex(file)?.get(cls);
      if (below) out.push(...below);
    }
    return out;
  }

  /** Per class, the classes of one file that derive from it (in the file's order), built once per file. */
  private subclassIndex(absPath: string): Map<ClassInfo, ClassInfo[]> | null {
    const memo = this.workspace.memoTable<string, Map<ClassInfo, ClassInfo[]>>('subclass-index');
    const cached = memo.get(absPath);
    if (cached) return cached;
    const analysis = this.workspace.analysis(absPath);
    if (!analysis) return null;
    const index = new Map<ClassInfo, ClassInfo[]>();
    memo.set(absPath, index);
    for (const c of analysis.module.classes) {
      for (const ancestor of this.ancestry(c)) {
        if (ancestor === c) continue;
        const list = index.get(ancestor);
        if (list) list.push(c);
        else index.set(ancestor, [c]);
      }
    }
    return index;
  }

  /**
   * The module-level name the file of `at` binds to a library module or object by a plain import (`F` for
   * `torch.nn.functional` after `import torch.nn.functional as F`), for fixes that write code using it; null when
   * the file has none (or binds the name more than once).
   */
  moduleAlias(at: SyntaxNode, qualified: string): string | null {
    for (const [name, bindings] of this.moduleOf(at).moduleScope.bindings) {
      if (bindings.length === 1 && bindings[0]!.kind === 'import' && bindings[0]!.qualifiedName === qualified) return name;
    }
    return null;
  }

  /** The calls of a workspace file, in source order, from a per-file index. */
  callsIn(absPath: string): SyntaxNode[] {
    const memo = this.workspace.memoTable<string, SyntaxNode[]>('calls');
    let calls = memo.get(absPath);
    if (!calls) {
      calls = this.nodesOf(absPath).filter((node) => node.type === 'call' && node.child('function') !== null);
      memo.set(absPath, calls);
    }
    return calls;
  }

  /** The calls in a workspace file whose callee is a name or attribute ending in `name` (`f(…)`, `obj.f(…)`), from a per-file index. */
  callsNamed(absPath: string, name: string): SyntaxNode[] {
    return this.byLastName('calls-by-name', absPath, name, () => this.callsIn(absPath), (call) => {
      const fn = call.child('function')!;
      return fn.type === 'attribute' ? fn.child('attribute')?.text : fn.type === 'identifier' ? fn.text : undefined;
    });
  }

  /** The attribute nodes `x.<name>` of a workspace file, from a per-file index. */
  attributesNamed(absPath: string, name: string): SyntaxNode[] {
    return this.byLastName('attributes-by-name', absPath, name, () => this.nodesOf(absPath), (node) => (node.type === 'attribute' ? node.child('attribute')?.text : undefined));
  }

  /** Every node of a workspace file (this check's file without a workspace lookup). */
  private nodesOf(absPath: string): SyntaxNode[] {
    const analysis = absPath === this.analysis.file.absPath ? this.analysis : this.workspace.analysis(absPath);
    return analysis?.syntax.nodes ?? [];
  }

  /** Nodes of a file grouped by a name `pick` reads from them, built once per file and memo lifetime. */
  private byLastName(table: string, absPath: string, name: string, nodes: () => SyntaxNode[], pick: (node: SyntaxNode) => string | undefined): SyntaxNode[] {
    const memo = this.workspace.memoTable<string, Map<string, SyntaxNode[]>>(table);
    let index = memo.get(absPath);
    if (!index) {
      index = new Map();
      memo.set(absPath, index);
      for (const node of nodes()) {
        const key = pick(node);
        if (key === undefined) continue;
        const list = index.get(key);
        if (list) list.push(node);
        else index.set(key, [node]);
      }
    }
    return index.get(name) ?? [];
  }

  /** The class whose instance `self` (the first parameter of a method) is, for a node inside a method. */
  selfClass(node: SyntaxNode): ClassInfo | null {
    const module = this.moduleOf(node);
    const fn = module.enclosingFunction(node);
    return fn?.owner ?? null;
  }

  /** True when an identifier is the `self` parameter of the method it appears in. */
  isSelf(node: SyntaxNode): boolean {
    if (node.type !== 'identifier') return false;
    const bindings = this.bindings(node);
    return bindings.length === 1 && bindings[0]!.kind === 'param' && bindings[0]!.paramIndex === 0 && !!this.moduleOf(node).enclosingFunction(node)?.owner && bindings[0]!.scope.kind === 'function';
  }

  /**
   * The expressions a value may come from: names are followed to the values bound to them, `self.x` to the
   * values assigned to the attribute in the class (and its ancestors), properties and argument-less methods to
   * their return expressions, calls of workspace functions to their returns. Anything else is its own origin.
   */
  origins(expr: SyntaxNode, depth = 0, seen: Set<SyntaxNode> = new Set()): Origin[] {
    return this.nested([], () => this.originsNested(expr, depth, seen));
  }

  private originsNested(expr: SyntaxNode, depth: number, seen: Set<SyntaxNode>): Origin[] {
    const node = unwrapParens(expr);
    if (depth > MAX_DEPTH || seen.has(node)) return [];
    seen.add(node);
    if (node.type === 'identifier') {
      const bindings = this.bindings(node);
      const out: Origin[] = [];
      for (const b of bindings) {
        if (b.kind === 'param') {
          if (b.value) out.push(...this.origins(b.value, depth + 1, seen));
          out.push({ node: b.node, parameter: b });
        } else if ((b.kind === 'assign' || b.kind === 'walrus' || b.kind === 'with') && b.value && !b.iterated) out.push(...this.origins(b.value, depth + 1, seen));
        else if (b.kind === 'augassign' && b.value) out.push({ node: b.value });
        else out.push({ node: b.node });
      }
      return out.length ? out : [{ node }];
    }
    if (node.type === 'attribute') {
      const object = node.child('object');
      const attr = node.child('attribute')?.text;
      if (object && attr) {
        const type = this.typeOf(object, depth + 1);
        if (type?.kind === 'instance') {
          const out: Origin[] = [];
          const bindings = this.attributeBindings(type.cls, attr);
          for (const a of bindings) {
            if (a.value) out.push(...this.origins(a.value, depth + 1, seen).map((o) => (o.node === unwrapParens(a.value!) ? { ...o, attribute: { cls: a.cls, name: attr } } : o)));
          }
          const getter = this.findMethod(type.cls, attr);
          if (getter && this.isProperty(getter)) for (const r of getter.returns) out.push(...this.origins(r, depth + 1, seen));
          if (out.length) return out;
        }
      }
      return [{ node }];
    }
    if (node.type === 'call') {
      const callee = this.callee(node);
      const args = node.child('arguments')?.namedChildren ?? [];
      if (callee.symbol?.kind === 'function' && args.length === 0 && !callee.symbol.fn.owner) {
        const out = callee.symbol.fn.returns.flatMap((r) => this.origins(r, depth + 1, seen));
        if (out.length) return out;
      }
      if (callee.method && callee.receiver && args.length === 0) {
        const type = this.typeOf(callee.receiver, depth + 1);
        if (type?.kind === 'instance') {
          const method = this.findMethod(type.cls, callee.method);
          if (method && method.params.length <= 1) {
            const out = method.returns.flatMap((r) => this.origins(r, depth + 1, seen));
            if (out.length) return out;
          }
        }
      }
      return [{ node }];
    }
    return [{ node }];
  }

  /** The type of a value: an instance of a workspace class or of a library class, when it can be told. */
  typeOf(expr: SyntaxNode, depth = 0): ValueType | null {
    if (depth > MAX_DEPTH) return null;
    this.budget?.check();
    const node = unwrapParens(expr);
    const memo = this.workspace.memoTable<SyntaxNode, ValueType | null>('typeOf');
    if (memo.has(node)) return memo.get(node)!;
    memo.set(node, null);
    const result = this.nested(undefined, () => this.typeOfUncached(node, depth));
    // An answer cut short by the nesting bound is not remembered (see callee).
    if (result === undefined) {
      memo.delete(node);
      return null;
    }
    memo.set(node, result);
    return result;
  }

  private typeOfUncached(node: SyntaxNode, depth: number): ValueType | null {
    if (node.type === 'identifier') {
      if (this.isSelf(node)) {
        const cls = this.selfClass(node);
        return cls ? { kind: 'instance', cls } : null;
      }
      for (const b of this.bindings(node)) {
        if (b.kind === 'param' && b.annotation) {
          const symbol = this.symbol(b.annotation.namedChildren[0] ?? b.annotation);
          if (symbol?.kind === 'class') return { kind: 'instance', cls: symbol.cls };
          if (symbol?.kind === 'external') return { kind: 'external', qualifiedName: symbol.qualifiedName };
        }
        if (b.value && !b.iterated && b.kind !== 'augassign') {
          const t = this.typeOf(b.value, depth + 1);
          if (t) return t;
        }
      }
      return null;
    }
    if (node.type === 'attribute') {
      const object = node.child('object');
      const attr = node.child('attribute')?.text;
      if (!object || !attr) return null;
      const ownerType = this.typeOf(object, depth + 1);
      if (ownerType?.kind === 'instance') {
        for (const a of this.attributeBindings(ownerType.cls, attr)) {
          if (!a.value) continue;
          const t = this.typeOf(a.value, depth + 1);
          if (t) return t;
        }
      }
      return null;
    }
    if (node.type === 'call') {
      const callee = this.callee(node);
      if (callee.symbol?.kind === 'class') return { kind: 'instance', cls: callee.symbol.cls };
      if (callee.symbol?.kind === 'function') {
        for (const r of callee.symbol.fn.returns) {
          const t = this.typeOf(r, depth + 1);
          if (t) return t;
        }
        return null;
      }
      if (callee.qualifiedName === 'copy.deepcopy') {
        const arg = node.child('arguments')?.namedChildren[0];
        return arg ? this.typeOf(arg, depth + 1) : null;
      }
      if (callee.qualifiedName && /^[A-Za-z_][\w.]*\.[A-Z]\w*$/.test(callee.qualifiedName)) return { kind: 'external', qualifiedName: callee.qualifiedName };
      if (callee.method && callee.receiver && SELF_RETURNING_METHODS.has(callee.method)) return this.typeOf(callee.receiver, depth + 1);
      return null;
    }
    return null;
  }

  /** Folds an expression to a constant (numbers, strings, booleans), following names bound once. */
  fold(expr: SyntaxNode): ConstantValue | null {
    return foldConstant(expr, {
      resolve: (identifier) => {
        const bindings = this.bindings(identifier);
        if (bindings.length !== 1) return null;
        const b = bindings[0]!;
        return (b.kind === 'assign' || b.kind === 'param') && !b.iterated ? b.value : null;
      },
      qualifiedName: (e) => this.qualifiedName(e),
    });
  }

  /** True when a method is a `@property` (or `functools.cached_property`) getter, resolved through imports. */
  isProperty(fn: FunctionInfo): boolean {
    return fn.decorators.some((d) => {
      const expr = d.namedChildren[0];
      const name = expr ? this.qualifiedName(expr) : null;
      return name === 'builtins.property' || name === 'functools.cached_property';
    });
  }

  /** The positional argument at an index, or the keyword argument with a name (keyword wins). */
  argument(call: SyntaxNode, index: number, keyword?: string): SyntaxNode | null {
    const args = call.child('arguments');
    if (!args) return null;
    let position = 0;
    let positional: SyntaxNode | null = null;
    for (const a of args.namedChildren) {
      if (a.type === 'keyword_argument') {
        if (keyword && a.child('name')?.text === keyword) return a.child('value');
        continue;
      }
      if (a.type === 'list_splat' || a.type === 'dictionary_splat') return null;
      if (position === index) positional = a;
      position++;
    }
    return positional;
  }
}

/** Qualified name of a resolved symbol. */
export function qualifiedNameOfSymbol(symbol: ResolvedSymbol): string {
  switch (symbol.kind) {
    case 'class':
      return symbol.cls.qualifiedName;
    case 'function':
      return symbol.fn.qualifiedName;
    case 'module':
      return symbol.analysis.module.name;
    case 'value':
      return symbol.binding.name;
    case 'external':
      return symbol.qualifiedName;
  }
}

const BUILTINS = new Set(['len', 'abs', 'min', 'max', 'sum', 'float', 'int', 'range', 'print', 'list', 'dict', 'tuple', 'zip', 'enumerate', 'map', 'iter', 'next', 'round', 'pow', 'isinstance', 'super', 'getattr', 'setattr', 'sorted', 'reversed', 'any', 'all', 'property', 'staticmethod', 'classmethod']);
