// Model-mode tracking: which objects are in eval or train mode at each statement of a function (or module), from
// `.eval()`, `.train(...)`, `.training = …`, loops that switch submodules back to train mode, and the summarised
// effects of the helpers a function calls; modes of parameters are resolved at every call site of the function
// across the workspace (a bounded fixed point over the call graph).
import { type FunctionInfo, type Semantics, type SyntaxNode, unwrapParens } from '../../server/src/engine/api';

/** The training mode of one model object at one program point. */
export type Mode =
  | { kind: 'eval' | 'train' | 'dropout-on' | 'unknown'; at: SyntaxNode | null }
  | { kind: 'entry'; fn: FunctionInfo; index: number; at: null };

/** What an expression refers to as an object: a parameter, an allocation site, or a class attribute. */
export interface ObjectRef {
  key: string;
  kind: 'param' | 'alloc' | 'attr';
  node: SyntaxNode;
  /** For parameters: the function and the parameter's index. */
  fn?: FunctionInfo;
  index?: number;
}

type State = Map<string, Mode>;

/** The result of running a function (or module) body: the state before each statement, at returns, at exit. */
interface Flow {
  before: Map<SyntaxNode, State>;
  returns: { expr: SyntaxNode; state: State }[];
  exit: State | null;
}

/** The effect of a function on its parameters' modes and the mode of the object it returns. */
interface Summary {
  /** Per parameter: the mode at exit, or null when the function leaves it unchanged. */
  params: (Mode | null)[];
  returned: Mode | null;
}

const SELF_RETURNING = new Set(['to', 'cuda', 'cpu', 'train', 'eval', 'float', 'double', 'half', 'requires_grad_', 'type', 'share_memory']);
const SUBMODULE_ITERATORS = new Set(['modules', 'children', 'named_modules', 'named_children']);
const UNKNOWN: Mode = { kind: 'unknown', at: null };
const MAX_RESOLVE_DEPTH = 8;
const MAX_LOOP_NESTING = 5;

/** Model-mode queries over a workspace (memoised in the workspace's memo tables). */
export class ModeFlow {
  private readonly flows: Map<SyntaxNode, Flow>;
  private readonly summaries: Map<SyntaxNode, Summary>;
  private readonly inProgress = new Set<SyntaxNode>();

  constructor(private readonly sem: Semantics) {
    this.flows = sem.workspace.memoTable<SyntaxNode, Flow>('noiseless-mc-evaluation:flow');
    this.summaries = sem.workspace.memoTable<SyntaxNode, Summary>('noiseless-mc-evaluation:summary');
  }

  /** A stable key for a node across the workspace. */
  private nodeKey(node: SyntaxNode): string {
    return `${this.sem.workspace.analysisOfNode(node)?.file.absPath ?? '?'}#${node.start}:${node.end}`;
  }

  /** The object an expression refers to (through names, self-returning methods and attributes), or null. */
  objectRef(expr: SyntaxNode, depth = 0): ObjectRef | null {
    if (depth > 12) return null;
    const sem = this.sem;
    const node = unwrapParens(expr);
    if (node.type === 'identifier') {
      const bindings = sem.bindings(node);
      if (bindings.length === 0) return null;
      let ref: ObjectRef | null = null;
      for (const b of bindings) {
        let r: ObjectRef | null = null;
        if (b.kind === 'param' && b.definition) {
          const fn = sem.moduleOf(b.node).functionByNode.get(b.definition.id);
          if (fn) r = { key: `p:${this.nodeKey(b.node)}`, kind: 'param', node: b.node, fn, index: b.paramIndex ?? fn.params.findIndex((p) => p.node === b.node) };
        } else if ((b.kind === 'assign' || b.kind === 'walrus' || b.kind === 'with') && b.value && !b.iterated && !b.unpack) r = this.objectRef(b.value, depth + 1);
        if (!r || (ref && ref.key !== r.key)) return null;
        ref = r;
      }
      return ref;
    }
    if (node.type === 'attribute') {
      const object = node.child('object');
      const attr = node.child('attribute')?.text;
      if (!object || !attr) return null;
      const type = sem.typeOf(object);
      if (type?.kind !== 'instance') return null;
      const assigned = sem.attributeBindings(type.cls, attr).filter((a) => a.value);
      let ref: ObjectRef | null = null;
      for (const a of assigned) {
        const r = this.objectRef(a.value!, depth + 1);
        if (!r || (ref && ref.key !== r.key)) return { key: `a:${type.cls.qualifiedName}.${attr}`, kind: 'attr', node };
        ref = r;
      }
      return ref ?? { key: `a:${type.cls.qualifiedName}.${attr}`, kind: 'attr', node };
    }
    if (node.type === 'call') {
      const callee = sem.callee(node);
      if (callee.method && callee.receiver && !callee.qualifiedName && SELF_RETURNING.has(callee.method) && callee.symbol === null) return this.objectRef(callee.receiver, depth + 1);
      return { key: `c:${this.nodeKey(node)}`, kind: 'alloc', node };
    }
    return null;
  }

  /** The scope node (function definition or module root) whose body holds a node. */
  scopeNodeOf(node: SyntaxNode): SyntaxNode {
    const fn = this.sem.moduleOf(node).enclosingFunction(node);
    return fn ? fn.node : node.file.root;
  }

  /** The state before the innermost analysed statement that contains a node. */
  stateBefore(node: SyntaxNode): State {
    const flow = this.flow(this.scopeNodeOf(node));
    for (let n: SyntaxNode | null = node; n; n = n.parent) {
      const s = flow.before.get(n);
      if (s) return s;
    }
    return new Map();
  }

  /** The mode of the object an expression refers to, at the statement that contains `at` (callers not consulted). */
  modeAt(expr: SyntaxNode, at: SyntaxNode, depth = 0): Mode {
    const ref = this.objectRef(expr);
    if (!ref) return UNKNOWN;
    const state = this.stateBefore(at);
    // Effects inside a call's own arguments (`f(model.eval())`) happen before the call.
    const args = at.type === 'call' ? at.child('arguments') : null;
    if (args) {
      const copy = new Map(state);
      this.applyEffects(args, copy);
      const inArgs = copy.get(ref.key);
      if (inArgs) return inArgs;
    }
    const known = state.get(ref.key);
    if (known) return known;
    return this.attributeEntryMode(expr, at, ref, depth) ?? this.initialMode(ref, depth);
  }

  /**
   * The mode of `self.<attr>` when a method (other than `__init__`) starts: the mode `__init__` leaves it in, when
   * no other method of the class hierarchy leaves it in a different mode. Null when the expression is not such an
   * attribute.
   */
  private attributeEntryMode(expr: SyntaxNode, at: SyntaxNode, ref: ObjectRef, depth: number): Mode | null {
    const sem = this.sem;
    const e = unwrapParens(expr);
    const object = e.type === 'attribute' ? e.child('object') : null;
    if (!object || !sem.isSelf(unwrapParens(object))) return null;
    const method = sem.moduleOf(at).enclosingFunction(at);
    const cls = method?.owner;
    if (!method || !cls || method.name === '__init__') return null;
    const init = sem.findMethod(cls, '__init__');
    if (!init) return null;
    const initFlow = this.flow(init.node);
    const initEnds = [...initFlow.returns.map((r) => r.state), ...(initFlow.exit ? [initFlow.exit] : [])];
    let mode: Mode | null = null;
    for (const end of initEnds) {
      const m = end.get(ref.key) ?? this.initialMode(ref, depth + 1);
      mode = mode ? joinMode(mode, m) : m;
    }
    if (!mode || mode.kind === 'unknown') return UNKNOWN;
    for (const c of sem.subclassesOf(cls).flatMap((sub) => sem.ancestry(sub))) {
      for (const other of c.methods.values()) {
        if (other.name === '__init__') continue;
        const f = this.flow(other.node);
        for (const end of [...f.returns.map((r) => r.state), ...(f.exit ? [f.exit] : [])]) {
          const m = end.get(ref.key);
          if (m && joinMode(m, mode).kind === 'unknown') return UNKNOWN;
        }
      }
    }
    return mode;
  }

  /**
   * The mode of an object at a point, resolving "whatever the caller passed" through every call site of the
   * function in the workspace (all must agree).
   */
  resolvedModeAt(expr: SyntaxNode, at: SyntaxNode): Mode {
    return this.resolveEntry(this.modeAt(expr, at), 0, new Set());
  }

  private resolveEntry(mode: Mode, depth: number, visited: Set<string>): Mode {
    if (mode.kind !== 'entry') return mode;
    const fn = mode.fn;
    if (depth > MAX_RESOLVE_DEPTH) return UNKNOWN;
    const visitKey = `${this.nodeKey(fn.node)}:${mode.index}`;
    if (visited.has(visitKey)) return UNKNOWN;
    visited.add(visitKey);
    const calls = this.callersOf(fn);
    if (calls.length === 0) return UNKNOWN;
    let out: Mode | null = null;
    for (const call of calls) {
      const arg = this.argumentFor(call, fn, mode.index);
      if (!arg) return UNKNOWN;
      const m = this.resolveEntry(this.modeAt(arg, call, depth + 1), depth + 1, visited);
      out = out ? joinMode(out, m) : m;
      if (out.kind === 'unknown') return out;
    }
    return out ?? UNKNOWN;
  }

  /** The expression a call passes for a function's parameter (the receiver for `self` of a bound method). */
  argumentFor(call: SyntaxNode, fn: FunctionInfo, index: number): SyntaxNode | null {
    const callee = this.sem.callee(call);
    // A bound method and a constructor call (to `__init__`) pass `self` implicitly.
    const offset = callee.boundMethod || callee.symbol?.kind === 'class' ? 1 : 0;
    if (callee.symbol?.kind === 'class' && index === 0) return null;
    if (index < offset) return callee.receiver;
    return this.sem.argument(call, index - offset, fn.params[index]?.name);
  }

  /** Every call of a workspace function, in its file and the files that import it. */
  callersOf(fn: FunctionInfo): SyntaxNode[] {
    const sem = this.sem;
    const memo = sem.workspace.memoTable<SyntaxNode, SyntaxNode[]>('noiseless-mc-evaluation:callers');
    const cached = memo.get(fn.node);
    if (cached) return cached;
    const out: SyntaxNode[] = [];
    const owner = sem.workspace.analysisOfNode(fn.node);
    if (owner) {
      for (const file of [...sem.workspace.dependentsOf(owner.file.absPath)].sort()) out.push(...(this.callIndex(file).get(fn.node) ?? []));
    }
    memo.set(fn.node, out);
    return out;
  }

  /**
   * The calls of one file grouped by the workspace function they run (constructor calls under the `__init__` they
   * run), built once per file so that finding the callers of many functions stays linear in the workspace size.
   */
  private callIndex(absPath: string): Map<SyntaxNode, SyntaxNode[]> {
    const sem = this.sem;
    const memo = sem.workspace.memoTable<string, Map<SyntaxNode, SyntaxNode[]>>('noiseless-mc-evaluation:call-index');
    const cached = memo.get(absPath);
    if (cached) return cached;
    const index = new Map<SyntaxNode, SyntaxNode[]>();
    memo.set(absPath, index);
    const add = (target: SyntaxNode, call: SyntaxNode) => {
      const list = index.get(target);
      if (list) list.push(call);
      else index.set(target, [call]);
    };
    for (const n of sem.callsIn(absPath)) {
      const callee = sem.callee(n);
      if (callee.symbol?.kind === 'function') add(callee.symbol.fn.node, n);
      else if (callee.symbol?.kind === 'class') {
        // Constructor calls run `__init__`.
        const init = sem.findMethod(callee.symbol.cls, '__init__');
        if (init) add(init.node, n);
      }
    }
    return index;
  }

  private modeOfRef(ref: ObjectRef, state: State, depth: number): Mode {
    const known = state.get(ref.key);
    if (known) return known;
    return this.initialMode(ref, depth);
  }

  /** The mode of an object where it is made: a new module trains, a helper's return is summarised, a parameter is "entry". */
  private initialMode(ref: ObjectRef, depth: number): Mode {
    const sem = this.sem;
    if (ref.kind === 'param' && ref.fn) return { kind: 'entry', fn: ref.fn, index: ref.index ?? 0, at: null };
    if (ref.kind !== 'alloc' || depth > MAX_RESOLVE_DEPTH) return UNKNOWN;
    const call = ref.node;
    const callee = sem.callee(call);
    if (callee.symbol?.kind === 'class') return { kind: 'train', at: call };
    const q = callee.qualifiedName;
    if (q && /^torch\.nn\.(?:modules\.\w+\.)?[A-Z]\w*$/.test(q)) return { kind: 'train', at: call };
    if (q === 'copy.deepcopy') {
      const arg = sem.argument(call, 0);
      return arg ? this.modeAt(arg, call, depth + 1) : UNKNOWN;
    }
    if (callee.symbol?.kind === 'function') {
      const fn = callee.symbol.fn;
      const returned = this.summary(fn).returned;
      if (!returned) return UNKNOWN;
      if (returned.kind !== 'entry') return returned;
      if (returned.fn.node !== fn.node) return UNKNOWN;
      const arg = this.argumentFor(call, fn, returned.index);
      return arg ? this.modeAt(arg, call, depth + 1) : UNKNOWN;
    }
    return UNKNOWN;
  }

  /** The effects of a workspace function on its parameters and the mode of what it returns. */
  summary(fn: FunctionInfo): Summary {
    const cached = this.summaries.get(fn.node);
    if (cached) return cached;
    if (this.inProgress.has(fn.node)) return { params: fn.params.map(() => null), returned: null };
    const flow = this.flow(fn.node);
    const ends: State[] = [...flow.returns.map((r) => r.state), ...(flow.exit ? [flow.exit] : [])];
    const params = fn.params.map((p) => {
      const key = `p:${this.nodeKey(p.node)}`;
      let out: Mode | null | undefined;
      for (const end of ends) {
        const m = end.get(key) ?? null;
        if (out === undefined) out = m;
        else if (out === null || m === null) out = out === m ? null : UNKNOWN;
        else out = joinMode(out, m);
      }
      return out ?? null;
    });
    let returned: Mode | null = null;
    for (const r of flow.returns) {
      const ref = this.objectRef(r.expr);
      const m = ref ? this.modeOfRef(ref, r.state, 1) : UNKNOWN;
      returned = returned ? joinMode(returned, m) : m;
    }
    const summary: Summary = { params, returned };
    this.summaries.set(fn.node, summary);
    return summary;
  }

  /** Runs the mode analysis over a function's (or the module's) body. */
  flow(scopeNode: SyntaxNode): Flow {
    const cached = this.flows.get(scopeNode);
    if (cached) return cached;
    const flow: Flow = { before: new Map(), returns: [], exit: null };
    this.flows.set(scopeNode, flow);
    this.inProgress.add(scopeNode);
    try {
      const body = scopeNode.type === 'function_definition' ? scopeNode.child('body') : scopeNode;
      if (body) flow.exit = this.execBlock(body.namedChildren, new Map(), flow, 0);
    } finally {
      this.inProgress.delete(scopeNode);
    }
    return flow;
  }

  private execBlock(statements: SyntaxNode[], entry: State, flow: Flow, nesting: number): State | null {
    let state: State | null = entry;
    for (const stmt of statements) {
      if (state === null) return null;
      if (stmt.type === 'comment') continue;
      state = this.execStatement(stmt, state, flow, nesting);
    }
    return state;
  }

  private record(stmt: SyntaxNode, state: State, flow: Flow): void {
    const previous = flow.before.get(stmt);
    flow.before.set(stmt, previous ? joinStates(previous, state) : new Map(state));
  }

  private execStatement(stmt: SyntaxNode, entry: State, flow: Flow, nesting: number): State | null {
    this.record(stmt, entry, flow);
    let state = new Map(entry);
    switch (stmt.type) {
      case 'return_statement': {
        this.applyEffects(stmt, state);
        const expr = stmt.namedChildren[0];
        if (expr) flow.returns.push({ expr, state });
        return null;
      }
      case 'raise_statement':
        return null;
      case 'if_statement': {
        const cond = stmt.child('condition');
        if (cond) this.applyEffects(cond, state);
        const outs: (State | null)[] = [];
        outs.push(this.execBlock(stmt.child('consequence')?.namedChildren ?? [], state, flow, nesting));
        let hasElse = false;
        for (const alt of stmt.childrenOf('alternative')) {
          if (alt.type === 'elif_clause') {
            const c = alt.child('condition');
            if (c) this.applyEffects(c, state);
            outs.push(this.execBlock(alt.child('consequence')?.namedChildren ?? [], state, flow, nesting));
          } else if (alt.type === 'else_clause') {
            hasElse = true;
            outs.push(this.execBlock(alt.child('body')?.namedChildren ?? [], state, flow, nesting));
          }
        }
        if (!hasElse) outs.push(state);
        return joinAll(outs);
      }
      case 'for_statement':
      case 'while_statement': {
        const head = stmt.type === 'for_statement' ? stmt.child('right') : stmt.child('condition');
        if (head) this.applyEffects(head, state);
        if (stmt.type === 'for_statement') this.submoduleLoopEffect(stmt, state);
        const body = stmt.child('body')?.namedChildren ?? [];
        const first = this.execBlock(body, state, flow, nesting + 1);
        let out = joinAll([state, first]);
        if (nesting < MAX_LOOP_NESTING && out) {
          const second = this.execBlock(body, out, flow, nesting + 1);
          out = joinAll([out, second]);
        }
        const orelse = stmt.child('alternative');
        if (orelse && out) return this.execBlock(orelse.child('body')?.namedChildren ?? [], out, flow, nesting);
        return out;
      }
      case 'with_statement': {
        for (const c of stmt.children) if (c.type === 'with_clause') this.applyEffects(c, state);
        return this.execBlock(stmt.child('body')?.namedChildren ?? [], state, flow, nesting);
      }
      case 'try_statement': {
        const body = this.execBlock(stmt.child('body')?.namedChildren ?? [], state, flow, nesting);
        const afterBody = joinAll([state, body]) ?? state;
        const outs: (State | null)[] = [];
        let finallyBlock: SyntaxNode | null = null;
        let elseOut: State | null = body;
        for (const c of stmt.children) {
          if (c.type === 'except_clause' || c.type === 'except_group_clause') {
            const block = c.children.find((x) => x.type === 'block');
            outs.push(this.execBlock(block?.namedChildren ?? [], afterBody, flow, nesting));
          } else if (c.type === 'else_clause') elseOut = body ? this.execBlock(c.child('body')?.namedChildren ?? [], body, flow, nesting) : null;
          else if (c.type === 'finally_clause') finallyBlock = c.children.find((x) => x.type === 'block') ?? null;
        }
        outs.push(elseOut);
        const joined = joinAll(outs);
        if (finallyBlock) return this.execBlock(finallyBlock.namedChildren, joined ?? afterBody, flow, nesting);
        return joined;
      }
      case 'match_statement': {
        const subject = stmt.child('subject');
        if (subject) this.applyEffects(subject, state);
        const outs: (State | null)[] = [state];
        for (const c of stmt.child('body')?.namedChildren ?? []) {
          if (c.type === 'case_clause') outs.push(this.execBlock(c.child('consequence')?.namedChildren ?? [], state, flow, nesting));
        }
        return joinAll(outs);
      }
      case 'function_definition':
      case 'class_definition':
      case 'decorated_definition':
        return state;
      default:
        this.applyEffects(stmt, state);
        return state;
    }
  }

  /** Applies the mode effects of the calls and assignments inside an expression or simple statement, in order. */
  private applyEffects(root: SyntaxNode, state: State): void {
    const stack: SyntaxNode[] = [root];
    const ordered: SyntaxNode[] = [];
    while (stack.length) {
      const n = stack.pop()!;
      if (n !== root && (n.type === 'function_definition' || n.type === 'class_definition' || n.type === 'lambda')) continue;
      ordered.push(n);
      for (let i = n.children.length - 1; i >= 0; i--) stack.push(n.children[i]!);
    }
    // Calls take effect after their arguments are evaluated: visit innermost calls first within each statement.
    for (const n of ordered.reverse()) {
      if (n.type === 'call') this.callEffect(n, state);
      else if (n.type === 'assignment') this.assignmentEffect(n, state);
      else if (n.type === 'list_comprehension' || n.type === 'generator_expression' || n.type === 'set_comprehension') this.submoduleLoopEffect(n, state);
    }
  }

  private set(state: State, expr: SyntaxNode, mode: Mode): void {
    const ref = this.objectRef(expr);
    if (ref) {
      state.set(ref.key, mode);
      return;
    }
    // A submodule reached through a tracked model (`model.head.drop.train()`): the model's dropout may be on again.
    if (mode.kind !== 'train' && mode.kind !== 'dropout-on') return;
    for (let n = unwrapParens(expr); n.type === 'attribute'; ) {
      const object = n.child('object');
      if (!object) break;
      const outer = this.objectRef(object);
      if (outer) {
        state.set(outer.key, { kind: 'dropout-on', at: mode.at });
        return;
      }
      n = unwrapParens(object);
    }
  }

  private callEffect(call: SyntaxNode, state: State): void {
    const sem = this.sem;
    const callee = sem.callee(call);
    if (callee.method && callee.receiver && !callee.qualifiedName && callee.symbol === null) {
      if (callee.method === 'eval') return this.setPartial(state, callee.receiver, { kind: 'eval', at: call });
      if (callee.method === 'train') {
        const flag = sem.argument(call, 0, 'mode');
        const v = flag ? sem.fold(flag) : true;
        if (v === true) return this.setPartial(state, callee.receiver, { kind: 'train', at: call });
        if (v === false) return this.setPartial(state, callee.receiver, { kind: 'eval', at: call });
        return this.setPartial(state, callee.receiver, { kind: 'unknown', at: call });
      }
      if (callee.method === 'apply') {
        const fnArg = sem.argument(call, 0, 'fn');
        if (fnArg && this.switchesOnTrain(fnArg)) this.set(state, callee.receiver, { kind: 'dropout-on', at: call });
        return;
      }
    }
    if (callee.symbol?.kind !== 'function') return;
    const fn = callee.symbol.fn;
    const summary = this.summary(fn);
    summary.params.forEach((effect, index) => {
      if (!effect) return;
      const arg = this.argumentFor(call, fn, index);
      if (!arg) return;
      if (effect.kind === 'entry') return;
      this.set(state, arg, { kind: effect.kind, at: effect.at ?? call });
    });
  }

  /**
   * `.eval()` / `.train()` on an object. When the object is a submodule reached from a tracked model
   * (`model.head.drop`, `model.body[3]`, `self.drop`), only part of the model changes: a submodule switched to
   * train mode re-enables (some of) the model's dropout; a submodule switched to eval mode changes nothing here.
   */
  private setPartial(state: State, receiver: SyntaxNode, mode: Mode): void {
    let n = unwrapParens(receiver);
    let partial = false;
    while (n.type === 'attribute' || n.type === 'subscript') {
      const object = n.type === 'attribute' ? n.child('object') : n.child('value');
      if (!object) break;
      const holder = this.sem.typeOf(object);
      const isModule = holder?.kind === 'instance' ? this.sem.isModuleClass(holder.cls) : holder?.kind === 'external' && /^torch\.nn\./.test(holder.qualifiedName);
      if (!isModule) break;
      partial = true;
      const outer = this.objectRef(object);
      if (outer && mode.kind === 'train') state.set(outer.key, { kind: 'dropout-on', at: mode.at });
      n = unwrapParens(object);
    }
    if (!partial) this.set(state, receiver, mode);
  }

  private assignmentEffect(node: SyntaxNode, state: State): void {
    const left = node.child('left');
    const right = node.child('right');
    if (left?.type !== 'attribute' || left.child('attribute')?.text !== 'training' || !right) return;
    const object = left.child('object');
    if (!object) return;
    const v = this.sem.fold(right);
    if (v === true) this.set(state, object, { kind: 'dropout-on', at: node });
    else if (v === false) this.set(state, object, { kind: 'eval', at: node });
  }

  /** True when a function or lambda passed to `Module.apply` switches modules to train mode. */
  private switchesOnTrain(fnArg: SyntaxNode): boolean {
    const n = unwrapParens(fnArg);
    let body: SyntaxNode | null = null;
    if (n.type === 'lambda') body = n.child('body');
    else {
      const symbol = this.sem.symbol(n);
      if (symbol?.kind === 'function') body = symbol.fn.node.child('body');
    }
    if (!body) return false;
    const stack = [body];
    while (stack.length) {
      const x = stack.pop()!;
      if (x.type === 'call') {
        const c = this.sem.callee(x);
        if (c.method === 'train' && !c.qualifiedName) {
          const flag = this.sem.argument(x, 0, 'mode');
          if (!flag || this.sem.fold(flag) !== false) return true;
        }
      }
      if (x.type === 'assignment' && x.child('left')?.type === 'attribute' && x.child('left')!.child('attribute')?.text === 'training' && this.sem.fold(x.child('right')!) === true) return true;
      for (const c of x.children) stack.push(c);
    }
    return false;
  }

  /**
   * A loop (or comprehension) over `model.modules()` (or children, named_modules, named_children) that calls
   * `.train()` on, or sets `.training = True` for, the loop variable switches (some of) the model back on.
   */
  private submoduleLoopEffect(loop: SyntaxNode, state: State): void {
    const sem = this.sem;
    const clause = loop.type === 'for_statement' ? loop : loop.children.find((c) => c.type === 'for_in_clause');
    if (!clause) return;
    let iterable = clause.child('right') ? unwrapParens(clause.child('right')!) : null;
    // list(model.modules()), filter(pred, model.modules())
    if (iterable?.type === 'call' && !sem.callee(iterable).method) {
      const args = iterable.child('arguments')?.namedChildren ?? [];
      const inner = args.find((a) => a.type === 'call' && SUBMODULE_ITERATORS.has(sem.callee(a).method ?? ''));
      if (inner) iterable = inner;
    }
    if (iterable?.type !== 'call') return;
    const callee = sem.callee(iterable);
    if (!callee.method || !SUBMODULE_ITERATORS.has(callee.method) || !callee.receiver) return;
    const left = clause.child('left');
    if (!left) return;
    const targets = new Set<string>();
    // An explicit stack: loop targets can nest deeply (`for ((((a,),),),) in …`).
    for (const stack = [left]; stack.length > 0; ) {
      const u = unwrapParens(stack.pop()!);
      if (u.type === 'identifier') targets.add(u.text);
      else stack.push(...u.namedChildren);
    }
    const body = loop.type === 'for_statement' ? loop.child('body') : loop.child('body');
    if (!body) return;
    const stack = [body];
    while (stack.length) {
      const x = stack.pop()!;
      if (x.type === 'call') {
        const c = sem.callee(x);
        const receiver = c.receiver ? unwrapParens(c.receiver) : null;
        if (c.method === 'train' && receiver?.type === 'identifier' && targets.has(receiver.text)) {
          const flag = sem.argument(x, 0, 'mode');
          if (!flag || sem.fold(flag) !== false) {
            this.set(state, callee.receiver, { kind: 'dropout-on', at: loop });
            return;
          }
        }
        if (c.symbol?.kind === 'function') {
          const fn = c.symbol.fn;
          const summary = this.summary(fn);
          const passes = summary.params.some((effect, index) => {
            if (!effect || (effect.kind !== 'train' && effect.kind !== 'dropout-on')) return false;
            const arg = this.argumentFor(x, fn, index);
            return !!arg && unwrapParens(arg).type === 'identifier' && targets.has(unwrapParens(arg).text);
          });
          if (passes) {
            this.set(state, callee.receiver, { kind: 'dropout-on', at: loop });
            return;
          }
        }
      }
      if (x.type === 'assignment') {
        const l = x.child('left');
        const object = l?.type === 'attribute' ? l.child('object') : null;
        if (l?.child('attribute')?.text === 'training' && object && targets.has(unwrapParens(object).text) && sem.fold(x.child('right')!) === true) {
          this.set(state, callee.receiver, { kind: 'dropout-on', at: loop });
          return;
        }
      }
      for (const c of x.children) stack.push(c);
    }
  }
}

/** Joins two modes: equal modes stay, anything else is unknown. */
export function joinMode(a: Mode, b: Mode): Mode {
  if (a.kind !== b.kind) return UNKNOWN;
  if (a.kind === 'entry' && b.kind === 'entry') return a.index === b.index && a.fn.node === b.fn.node ? a : UNKNOWN;
  return a;
}

function joinStates(a: State, b: State): State {
  const out: State = new Map();
  for (const [k, v] of a) {
    const w = b.get(k);
    out.set(k, w ? joinMode(v, w) : UNKNOWN);
  }
  for (const [k] of b) if (!a.has(k)) out.set(k, UNKNOWN);
  return out;
}

function joinAll(states: (State | null)[]): State | null {
  let out: State | null = null;
  for (const s of states) {
    if (!s) continue;
    out = out ? joinStates(out, s) : new Map(s);
  }
  return out;
}
