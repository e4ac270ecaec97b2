// Data flow for elbo-scale-mismatch: values of expressions through assignments, parameters (bound by the call
// being analysed, or by every call site in the workspace), attributes and returns; which tensors are minibatches
// and which are full training arrays; which loop feeds them; and what a scale expression means (N, B, K, a number).
import { type Binding, type ClassInfo, type ConstantValue, firstAtLeast, type FunctionInfo, type Semantics, type SyntaxNode, unwrapParens } from '../../server/src/engine/api';
import { constant, ONE, OPAQUE, over, power, type Scale, symbol, type SymbolUse, times } from './scale';

/** Argument bindings of one analysed call: parameter → the argument expression and the frame it is evaluated in. */
export interface Frame {
  args: Map<Binding, Arg>;
  depth: number;
}

/** An argument expression in its own frame (node null: not passed, the default applies). */
export interface Arg {
  node: SyntaxNode | null;
  frame: Frame | null;
}

/** An expression a value comes from, with the frame it is evaluated in (and its binding when it is a leaf name). */
export interface Value {
  node: SyntaxNode;
  frame: Frame | null;
  binding?: Binding;
}

/** A call resolved to a workspace function, with how its parameters map to the call's arguments. */
export interface ResolvedCall {
  fn: FunctionInfo;
  /** The receiver bound to the first parameter (`self`), when the call is a method call on an instance. */
  receiver: SyntaxNode | null;
  /** True for a constructor call `Cls(...)` running `__init__`: `self` is the new object, not an argument. */
  constructs?: boolean;
}

/** What a loop iterates over. */
export interface IterableInfo {
  kind: 'loader' | 'index-batches' | 'index-starts' | 'counter' | 'modules' | 'unknown';
  /** The loader (or index source) expression and its frame. */
  source: Value | null;
  /** The batch size when it folds (DataLoader `batch_size`, `.split(bs)`, `range(0, n, bs)`). */
  batchSize: number | null;
  /** Source text of the batch-size expression, when there is one. */
  batchSizeText: string | null;
  /** True when the loop target is the index of `enumerate(...)`, not the element. */
  enumerated: boolean;
}

/** Whether a tensor is a minibatch, a full training array, or unknown; with the loop that feeds the minibatch. */
export interface TensorKind {
  kind: 'batch' | 'full' | 'unknown';
  loader: IterableInfo | null;
  /** The loader's element itself (a tuple or dict of the minibatch's tensors), not one tensor of it. */
  whole?: boolean;
}

/** Workspace classes and qualified names the analysis recognises. */
const DATALOADERS = ['torch.utils.data.DataLoader', 'torch.utils.data.dataloader.DataLoader'];
const DATASET_BASES = ['torch.utils.data.Dataset', 'torch.utils.data.dataset.Dataset', 'torch.utils.data.TensorDataset', 'torch.utils.data.dataset.TensorDataset'];
const DATASET_CALLS = ['torch.utils.data.TensorDataset', 'torch.utils.data.dataset.TensorDataset', 'torch.utils.data.Subset', 'torch.utils.data.dataset.Subset', 'torch.utils.data.ConcatDataset'];
const RANDOM_SPLIT = ['torch.utils.data.random_split', 'torch.utils.data.dataset.random_split'];
const LIGHTNING_MODULES = ['pytorch_lightning.LightningModule', 'pytorch_lightning.core.LightningModule', 'pytorch_lightning.core.module.LightningModule', 'lightning.pytorch.LightningModule', 'lightning.LightningModule', 'lightning.pytorch.core.LightningModule', 'lightning.pytorch.core.module.LightningModule'];
const WRAPPING_ITERATORS = ['builtins.iter', 'tqdm.tqdm', 'tqdm.auto.tqdm', 'tqdm.notebook.tqdm', 'tqdm.std.tqdm', 'builtins.zip', 'itertools.islice', 'itertools.cycle'];
/** Tensor methods that keep the examples of their receiver (minibatch stays minibatch). */
const KEEP_ROWS = new Set(['to', 'cuda', 'cpu', 'float', 'double', 'half', 'long', 'int', 'bool', 'view', 'reshape', 'squeeze', 'unsqueeze', 'flatten', 'contiguous', 'clone', 'detach', 'permute', 'type', 'requires_grad_', 'view_as', 'reshape_as', 'numpy', 'astype']);
/** Functions whose result has the rows of their first argument. */
const KEEP_ROWS_FUNCTIONS = ['torch.as_tensor', 'torch.tensor', 'torch.from_numpy', 'numpy.asarray', 'numpy.array', 'torch.Tensor', 'torch.FloatTensor', 'torch.LongTensor'];
/** Conversions that keep the number they are given. */
const PASS_NUMBER = ['builtins.float', 'builtins.int', 'builtins.round', 'builtins.abs', 'math.ceil', 'math.floor', 'numpy.ceil', 'numpy.floor', 'torch.tensor', 'torch.as_tensor', 'numpy.float32', 'numpy.float64', 'torch.scalar_tensor'];
/** Functions of a dimensionless argument that return a dimensionless weight (schedules: sigmoid ramps, exponential decays). */
const DIMENSIONLESS_FUNCTIONS = ['math.exp', 'numpy.exp', 'torch.sigmoid', 'math.tanh', 'numpy.tanh', 'torch.tanh', 'math.cos', 'numpy.cos', 'torch.exp', 'scipy.special.expit', 'torch.clamp', 'numpy.clip'];
/** Attributes that count steps (Lightning's trainer state). */
const COUNTER_ATTRIBUTES = new Set(['current_epoch', 'global_step', 'epoch', 'step', 'iteration']);

/** Names that mean the minibatch size when their value cannot be followed (data flow wins over names). */
const BATCH_SIZE_NAMES = ['batch_size', 'B', 'batchsize', 'bs', 'BATCH_SIZE', 'BATCHSIZE', 'mb_size', 'minibatch_size', 'train_batch_size', 'batch_sz', 'BS'];
/** Names that mean the number of minibatches per epoch when their value cannot be followed. */
const NUM_BATCH_NAMES = ['num_batches', 'n_batches', 'nbatches', 'NUM_BATCHES', 'N_BATCHES', 'batches_per_epoch', 'steps_per_epoch', 'n_batch', 'num_batch', 'iters_per_epoch', 'num_train_batches', 'n_train_batches'];

const MAX_DEPTH = 14;

/** The analysis state shared by the rule's parts while checking one file (memo tables live in the workspace). */
export class Flow {
  private readonly datasetNames: Set<string>;
  /** The dataset-size names as one string: memo tables are kept per value (see `memoTable`). */
  private readonly settingsKey: string;
  private readonly tableNames = new Map<string, string>();

  constructor(
    readonly sem: Semantics,
    datasetSizeNames: readonly string[],
  ) {
    this.datasetNames = new Set(datasetSizeNames);
    this.settingsKey = [...this.datasetNames].sort().join(',');
  }

  /**
   * A workspace memo table of this rule. Answers may depend on the dataset-size names, which come from the
   * configuration of the file being checked, and a memo table is shared by every file check: so each set of names
   * gets its own tables (one set in a workspace with one configuration).
   */
  memoTable<K, V>(name: string): Map<K, V> {
    // The composed table names are kept, so that no string is built (and hashed) on every memo access.
    let full = this.tableNames.get(name);
    if (full === undefined) {
      full = `${name}\0${this.settingsKey}`;
      this.tableNames.set(name, full);
    }
    return this.sem.workspace.memoTable<K, V>(full);
  }

  /** Call sites of a workspace function anywhere in the files that import its file (or in the file itself). */
  callers(fn: FunctionInfo): { call: SyntaxNode; receiver: SyntaxNode | null; constructs: boolean }[] {
    const memo = this.memoTable<SyntaxNode, { call: SyntaxNode; receiver: SyntaxNode | null; constructs: boolean }[]>('elbo-scale-mismatch:callers');
    const cached = memo.get(fn.node);
    if (cached) return cached;
    const out: { call: SyntaxNode; receiver: SyntaxNode | null; constructs: boolean }[] = [];
    memo.set(fn.node, out);
    // Candidates by the called name (looked up in a per-file index): the function's own name; for a constructor the
    // names of its class and of the subclasses that inherit it, and `super().__init__`; for forward / call / __call__
    // every call (an instance may be called by any name).
    const names = fn.name === '__init__' && fn.owner ? [...new Set([...this.sem.subclassesOf(fn.owner).map((c) => c.name), '__init__'])] : [fn.name];
    const owner = this.sem.workspace.analysisOfNode(fn.node) ?? this.sem.analysis;
    for (const file of [...this.sem.workspace.dependentsOf(owner.file.absPath)].sort()) {
      const candidates = isCallableMethod(fn) ? this.sem.callsIn(file) : names.flatMap((name) => this.sem.callsNamed(file, name));
      for (const node of candidates) {
        const resolved = this.resolveCall(node, null);
        if (resolved?.fn === fn) out.push({ call: node, receiver: resolved.receiver, constructs: !!resolved.constructs });
      }
    }
    return out;
  }

  /**
   * The files of the program around a file: the files that import it (directly or not), and every workspace file
   * those import. Values that reach code in the file come from these files (helpers, models, training scripts).
   */
  programFiles(file: string): string[] {
    const workspace = this.sem.workspace;
    const memo = workspace.memoTable<string, string[]>('elbo-scale-mismatch:program-files');
    const cached = memo.get(file);
    if (cached) return cached;
    const files = new Set(workspace.dependentsOf(file));
    const queue = [...files];
    while (queue.length) {
      for (const imported of workspace.importsOf(queue.pop()!)) {
        if (files.has(imported)) continue;
        files.add(imported);
        queue.push(imported);
      }
    }
    const out = [...files].sort();
    memo.set(file, out);
    return out;
  }

  /** The workspace function a call runs, resolving methods through the receiver's class and `model(x)` to `forward`. */
  resolveCall(call: SyntaxNode, frame: Frame | null): ResolvedCall | null {
    const callee = this.sem.callee(call);
    if (callee.symbol?.kind === 'function') return { fn: callee.symbol.fn, receiver: callee.boundMethod ? callee.receiver : null };
    if (callee.symbol?.kind === 'class') {
      const init = this.sem.findMethod(callee.symbol.cls, '__init__');
      return init ? { fn: init, receiver: null, constructs: true } : null;
    }
    const fnNode = call.child('function');
    if (!fnNode) return null;
    if (callee.method && callee.receiver) {
      const type = this.typeOf(callee.receiver, frame);
      if (type?.kind === 'instance') {
        const method = this.sem.findMethod(type.cls, callee.method);
        if (method) return { fn: method, receiver: isStatic(method) ? null : callee.receiver };
      }
      return null;
    }
    // Calling an instance runs its forward (torch), call (Keras) or __call__.
    const type = this.typeOf(fnNode, frame);
    if (type?.kind === 'instance') {
      for (const name of ['forward', 'call', '__call__']) {
        const method = this.sem.findMethod(type.cls, name);
        if (method) return { fn: method, receiver: fnNode };
      }
    }
    return null;
  }

  /** The frame a resolved call creates: its parameters bound to the call's arguments. */
  frameFor(call: SyntaxNode, resolved: ResolvedCall, frame: Frame | null): Frame {
    const args = new Map<Binding, Arg>();
    const params = resolved.fn.params;
    let offset = 0;
    if (resolved.receiver && params[0]) {
      args.set(params[0], { node: resolved.receiver, frame });
      offset = 1;
    } else if (resolved.constructs || (resolved.fn.owner && params[0] && !isStatic(resolved.fn) && this.sem.callee(call).boundMethod)) offset = 1;
    for (let i = offset; i < params.length; i++) {
      const p = params[i]!;
      const arg = this.sem.argument(call, i - offset, p.name);
      args.set(p, arg ? { node: arg, frame } : { node: p.value, frame: null });
    }
    return { args, depth: (frame?.depth ?? 0) + 1 };
  }

  /** The arguments a parameter may hold: from the frame, else from every call site, else its default. */
  paramArgs(binding: Binding, frame: Frame | null): Arg[] {
    const bound = frame?.args.get(binding);
    if (bound) return [bound];
    const fnNode = binding.definition;
    const module = fnNode ? this.sem.moduleOf(fnNode) : null;
    const fn = fnNode && module ? module.functionByNode.get(fnNode.id) : undefined;
    if (!fn || (frame?.depth ?? 0) > MAX_DEPTH) return binding.value ? [{ node: binding.value, frame: null }] : [];
    const index = fn.params.indexOf(binding);
    const out: Arg[] = [];
    for (const site of this.callers(fn)) {
      const offset = site.receiver || site.constructs || (fn.owner && !isStatic(fn) && this.sem.callee(site.call).boundMethod) ? 1 : 0;
      if (index === 0 && site.receiver) {
        out.push({ node: site.receiver, frame: null });
        continue;
      }
      const arg = this.sem.argument(site.call, index - offset, binding.name);
      out.push(arg ? { node: arg, frame: { args: new Map(), depth: (frame?.depth ?? 0) + 1 } } : { node: binding.value, frame: null });
    }
    if (out.length === 0 && binding.value) out.push({ node: binding.value, frame: null });
    return out;
  }

  /** The expressions a value may come from (through names, parameters, instance attributes and properties). */
  values(expr: SyntaxNode, frame: Frame | null, depth = 0, seen = new Set<SyntaxNode>()): Value[] {
    const node = unwrapParens(expr);
    if (depth > MAX_DEPTH || seen.has(node)) return [];
    seen.add(node);
    if (node.type === 'identifier') {
      const out: Value[] = [];
      for (const b of this.reachingBindings(node)) {
        if (b.kind === 'param') {
          if (this.isSelfBinding(b)) {
            out.push({ node, frame, binding: b });
            continue;
          }
          const args = this.paramArgs(b, frame);
          if (args.length === 0) out.push({ node, frame, binding: b });
          for (const a of args) {
            if (a.node) out.push(...this.values(a.node, a.frame, depth + 1, seen));
            else out.push({ node, frame, binding: b });
          }
        } else if ((b.kind === 'assign' || b.kind === 'walrus' || b.kind === 'with') && b.value && !b.iterated && !b.unpack) {
          out.push(...this.values(b.value, frame, depth + 1, seen));
          // A preallocated tensor filled item by item (`log_priors[i] = net.log_prior()`) holds those values too.
          for (const stored of this.itemStores(b)) out.push(...this.values(stored, frame, depth + 1, seen));
        } else if (b.unpack && !b.iterated) {
          const elements = this.returnedElements(b.unpack.from, b.unpack.index, frame);
          if (elements.length === 0) out.push({ node: b.node, frame, binding: b });
          for (const e of elements) out.push(...this.values(e.node, e.frame, depth + 1, seen));
        } else out.push({ node: b.node, frame, binding: b });
      }
      return out.length ? out : [{ node, frame }];
    }
    if (node.type === 'attribute') {
      const object = node.child('object');
      const attr = node.child('attribute')?.text;
      if (object && attr) {
        const type = this.typeOf(object, frame, depth + 1);
        if (type?.kind === 'instance') {
          const out: Value[] = [];
          for (const a of this.sem.attributeBindings(type.cls, attr)) {
            if (a.value) out.push(...this.values(a.value, null, depth + 1, seen));
          }
          const getter = this.sem.findMethod(type.cls, attr);
          if (getter && getter.decorators.some((d) => /property/.test(d.text))) {
            const self = getter.params[0];
            const inner: Frame = { args: new Map(self ? [[self, { node: object, frame }]] : []), depth: (frame?.depth ?? 0) + 1 };
            for (const r of getter.returns) out.push(...this.values(r, inner, depth + 1, seen));
          }
          if (out.length) return out;
        }
      }
      return [{ node, frame }];
    }
    return [{ node, frame }];
  }

  /**
   * The bindings that reach a use of a name. The semantic model lets a binding made later in a loop reach uses
   * earlier in the loop (around the back edge); such a binding cannot reach the use when another binding in the
   * same loop, before the use, is executed on every path to it (`loss = …; loss.backward(); …; loss = …`).
   */
  reachingBindings(use: SyntaxNode): Binding[] {
    const bindings = this.sem.bindings(use);
    if (bindings.length < 2 || !bindings.some((b) => bindingPoint(b) > use.start)) return bindings;
    const scopeNode = bindings[0]!.scope.node;
    const useChain = conditionalChain(use, scopeNode);
    const dominating = bindings.filter((b) => bindingPoint(b) < use.start && b.scope.node === scopeNode && !insideNestedFunction(b.node, scopeNode) && conditionalChain(b.node, scopeNode).every((c) => useChain.includes(c)));
    if (dominating.length === 0) return bindings;
    return bindings.filter((b) => {
      if (bindingPoint(b) <= use.start) return true;
      const loop = useChain.find((c) => (c.type === 'for_statement' || c.type === 'while_statement') && c.contains(b.node));
      return !loop || !dominating.some((d) => loop.contains(d.node) && !(loop.type === 'for_statement' && !loop.child('body')?.contains(d.node)));
    });
  }

  /**
   * True when a node can only run on a path that a call's frame rules out: it lies in a branch of an `if` / `elif` /
   * `else` or a conditional expression whose condition, over parameters the frame binds to constants (or to `None`
   * or to some object), folds the other way (`if n_data is None: return nll + kl` when every call passes `n_data`).
   */
  deadUnder(node: SyntaxNode, frame: Frame | null): boolean {
    if (!frame || frame.args.size === 0) return false;
    for (let n: SyntaxNode = node; n.parent; n = n.parent) {
      const parent: SyntaxNode = n.parent;
      if (parent.type === 'function_definition' || parent.type === 'lambda' || parent.type === 'class_definition') return false;
      if (parent.type === 'block') {
        // After `if <true>: return …` in the same block, nothing runs.
        for (const before of parent.namedChildren) {
          if (before.start >= n.start) break;
          if (before.type !== 'if_statement' || before.children.some((c) => c.type === 'elif_clause' || c.type === 'else_clause')) continue;
          const last = before.child('consequence')?.namedChildren.filter((c) => c.type !== 'comment').pop();
          if ((last?.type === 'return_statement' || last?.type === 'raise_statement') && this.truthUnder(before.child('condition'), frame) === true) return true;
        }
      }
      if (parent.type === 'if_statement' || parent.type === 'elif_clause') {
        if (n.field === 'consequence' && this.truthUnder(parent.child('condition'), frame) === false) return true;
        if (parent.type === 'if_statement' && (n.type === 'elif_clause' || n.type === 'else_clause')) {
          // An `elif` / `else` runs only when the `if` and the earlier `elif`s were false.
          for (const c of [parent.child('condition'), ...parent.children.filter((c) => c.type === 'elif_clause' && c.start < n.start).map((c) => c.child('condition'))]) {
            if (this.truthUnder(c, frame) === true) return true;
          }
        }
      }
      if (parent.type === 'conditional_expression') {
        const [consequence, condition, alternative] = parent.namedChildren.filter((c) => c.type !== 'comment');
        const truth = this.truthUnder(condition ?? null, frame);
        if ((n === consequence && truth === false) || (n === alternative && truth === true)) return true;
      }
    }
    return false;
  }

  /** The truth of a condition over parameters bound by a frame, when it folds (null when it does not). */
  private truthUnder(condition: SyntaxNode | null, frame: Frame, depth = 0): boolean | null {
    if (!condition || depth > MAX_DEPTH) return null;
    const node = unwrapParens(condition);
    if (node.type === 'not_operator') {
      const inner = this.truthUnder(node.child('argument'), frame, depth + 1);
      return inner === null ? null : !inner;
    }
    if (node.type === 'boolean_operator') {
      const op = node.child('operator')?.text;
      const l = this.truthUnder(node.child('left'), frame, depth + 1);
      const r = this.truthUnder(node.child('right'), frame, depth + 1);
      if (op === 'and') return l === false || r === false ? false : l === true && r === true ? true : null;
      if (op === 'or') return l === true || r === true ? true : l === false && r === false ? false : null;
      return null;
    }
    if (node.type === 'comparison_operator') {
      const operands = node.children.filter((c) => c.field !== 'operators');
      const operators = node.children.filter((c) => c.field === 'operators');
      if (operands.length !== 2 || operators.length !== 1) return null;
      const a = this.foldUnder(operands[0]!, frame, 0);
      const b = this.foldUnder(operands[1]!, frame, 0);
      if (!a || !b) return null;
      const op = operators[0]!.text.replace(/\s+/g, ' ');
      if (op === 'is' || op === 'is not') {
        if (a.kind === 'object' && b.kind === 'object') return null;
        const same = a.kind === 'none' && b.kind === 'none' ? true : a.kind === 'none' || b.kind === 'none' ? false : null;
        return same === null ? null : op === 'is' ? same : !same;
      }
      if ((op === '==' || op === '!=') && a.kind === 'const' && b.kind === 'const') return op === '==' ? a.value === b.value : a.value !== b.value;
      return null;
    }
    const value = this.foldUnder(node, frame, 0);
    if (!value || value.kind === 'object') return null;
    return value.kind === 'const' ? Boolean(value.value) : false;
  }

  /** A value over parameters bound by a frame: a constant, `None`, or some object that is not `None`; undefined when unknown. */
  private foldUnder(expr: SyntaxNode, frame: Frame | null, depth: number): { kind: 'none' } | { kind: 'const'; value: ConstantValue } | { kind: 'object' } | undefined {
    const node = unwrapParens(expr);
    if (depth > 4) return undefined;
    if (node.type === 'none') return { kind: 'none' };
    if (['integer', 'float', 'string', 'true', 'false', 'concatenated_string'].includes(node.type)) {
      const value = this.sem.fold(node);
      return value === null ? undefined : { kind: 'const', value };
    }
    if (['call', 'binary_operator', 'list', 'tuple', 'dictionary', 'set', 'list_comprehension', 'lambda'].includes(node.type)) return { kind: 'object' };
    if (node.type !== 'identifier') return undefined;
    const bindings = this.sem.bindings(node);
    if (bindings.length !== 1) return undefined;
    const b = bindings[0]!;
    // A name bound once to a value (`n_train = len(loader.dataset)`), or a parameter the frame binds.
    if ((b.kind === 'assign' || b.kind === 'walrus') && b.value && !b.iterated && !b.unpack) return this.foldUnder(b.value, frame, depth + 1);
    const arg = b.kind === 'param' && frame ? frame.args.get(b) : undefined;
    if (!arg?.node) return undefined;
    return this.foldUnder(arg.node, arg.frame, depth + 1);
  }

  /** Right-hand sides of `name[...] = value` stores into the value bound by an assignment, in its scope. */
  private itemStores(b: Binding): SyntaxNode[] {
    const memo = this.memoTable<Binding, SyntaxNode[]>('elbo-scale-mismatch:item-stores');
    const cached = memo.get(b);
    if (cached) return cached;
    const out: SyntaxNode[] = [];
    memo.set(b, out);
    for (const { target, right } of this.itemStoresByName(b.scope.node).get(b.name) ?? []) {
      if (this.sem.bindings(target).includes(b)) out.push(right);
    }
    return out;
  }

  /**
   * Every `name[...] = value` in a scope's subtree, by name, found in one walk per scope (a walk per binding made
   * large modules quadratic).
   */
  private itemStoresByName(scopeNode: SyntaxNode): Map<string, { target: SyntaxNode; right: SyntaxNode }[]> {
    const memo = this.memoTable<SyntaxNode, Map<string, { target: SyntaxNode; right: SyntaxNode }[]>>('elbo-scale-mismatch:item-stores-by-name');
    const cached = memo.get(scopeNode);
    if (cached) return cached;
    const byName = new Map<string, { target: SyntaxNode; right: SyntaxNode }[]>();
    for (const n of scopeNode.subtree()) {
      if (n.type !== 'assignment') continue;
      const left = n.child('left');
      const right = n.child('right');
      const target = left?.type === 'subscript' ? left.child('value') : null;
      if (!right || target?.type !== 'identifier') continue;
      const list = byName.get(target.text) ?? [];
      list.push({ target, right });
      byName.set(target.text, list);
    }
    memo.set(scopeNode, byName);
    return byName;
  }

  /** Element `index` of the tuples a workspace function returns (`train_loader, val_loader = make_loaders(cfg)`). */
  returnedElements(from: SyntaxNode, index: number, frame: Frame | null): Value[] {
    const call = unwrapParens(from);
    if (call.type !== 'call' || (frame?.depth ?? 0) > MAX_DEPTH) return [];
    const resolved = this.resolveCall(call, frame);
    if (!resolved) return [];
    const inner = this.frameFor(call, resolved, frame);
    const out: Value[] = [];
    for (const r of resolved.fn.returns) {
      const t = unwrapParens(r);
      if ((t.type === 'tuple' || t.type === 'expression_list' || t.type === 'list') && t.namedChildren[index]) out.push({ node: t.namedChildren[index]!, frame: inner });
    }
    return out;
  }

  /** True when a parameter binding is the `self` of a method. */
  isSelfBinding(b: Binding): boolean {
    if (b.kind !== 'param' || b.paramIndex !== 0 || !b.definition) return false;
    const fn = this.sem.moduleOf(b.definition).functionByNode.get(b.definition.id);
    return !!fn?.owner && !isStatic(fn);
  }

  /** The type of a value, looking through parameters into the frame or the call sites. */
  typeOf(expr: SyntaxNode, frame: Frame | null, depth = 0): ReturnType<Semantics['typeOf']> {
    const node = unwrapParens(expr);
    if (depth > MAX_DEPTH) return null;
    if (node.type === 'identifier') {
      const bindings = this.sem.bindings(node);
      if (bindings.length > 0 && bindings.every((b) => b.kind === 'param') && !bindings.some((b) => this.isSelfBinding(b))) {
        const own = this.sem.typeOf(node);
        if (own) return own;
        for (const b of bindings) {
          for (const a of this.paramArgs(b, frame)) {
            if (!a.node) continue;
            const t = this.typeOf(a.node, a.frame, depth + 1);
            if (t) return t;
          }
        }
        return null;
      }
      const own = this.sem.typeOf(node);
      if (own) return own;
      for (const b of bindings) {
        if ((b.kind === 'assign' || b.kind === 'walrus') && b.value && !b.iterated && !b.unpack) {
          const t = this.typeOf(b.value, frame, depth + 1);
          if (t) return t;
        }
        if (b.kind === 'for' || b.kind === 'comprehension') {
          // A loop over listed layers (`for layer in (net.first, net.second)`): their common class.
          const elements = this.loopElements(b, frame);
          const types = elements?.map((e) => this.typeOf(e.node, e.frame, depth + 1)) ?? [];
          const first = types[0];
          if (first && types.every((t) => t && (t.kind === 'instance' ? first.kind === 'instance' && t.cls === first.cls : first.kind === 'external' && t.qualifiedName === first.qualifiedName))) return first;
        }
      }
      return null;
    }
    if (node.type === 'attribute') {
      const own = this.sem.typeOf(node);
      if (own) return own;
      const object = node.child('object');
      const attr = node.child('attribute')?.text;
      if (!object || !attr) return null;
      const owner = this.typeOf(object, frame, depth + 1);
      if (owner?.kind === 'instance') {
        for (const a of this.sem.attributeBindings(owner.cls, attr)) {
          if (!a.value) continue;
          const t = this.typeOf(a.value, null, depth + 1);
          if (t) return t;
        }
      }
      return null;
    }
    if (node.type === 'call') {
      const own = this.sem.typeOf(node);
      if (own) return own;
      const callee = this.sem.callee(node);
      if (callee.method && callee.receiver && ['to', 'cuda', 'cpu', 'train', 'eval', 'double', 'float'].includes(callee.method)) return this.typeOf(callee.receiver, frame, depth + 1);
      return null;
    }
    return null;
  }

  /** The loop (for statement or comprehension clause) whose target binds a name, with the iterable and the target path. */
  loopOf(binding: Binding): { iterable: SyntaxNode; path: number[] } | null {
    if (binding.kind !== 'for' && binding.kind !== 'comprehension') return null;
    for (let n: SyntaxNode | null = binding.node.parent; n; n = n.parent) {
      if (n.type === 'for_statement' || n.type === 'for_in_clause') {
        const left = n.child('left');
        const right = n.child('right');
        if (!left || !right || !left.contains(binding.node)) return null;
        const path: number[] = [];
        let cur: SyntaxNode = binding.node;
        while (cur !== left && cur.parent) {
          const parent: SyntaxNode = cur.parent;
          if (['pattern_list', 'tuple_pattern', 'list_pattern', 'tuple', 'list', 'expression_list'].includes(parent.type)) path.unshift(parent.namedChildren.indexOf(cur));
          cur = parent;
        }
        return { iterable: right, path };
      }
    }
    return null;
  }

  /**
   * The values a loop target takes, when the iterable spells them out: items of a literal tuple or list (selected
   * along the target's unpacking path), arguments of `zip`, elements of `enumerate`, and the layers listed in an
   * `nn.ModuleList([...])` / `nn.Sequential(...)` the iterable holds. Null when the elements cannot be listed.
   */
  loopElements(binding: Binding, frame: Frame | null): Value[] | null {
    const loop = this.loopOf(binding);
    if (!loop) return null;
    return this.elementsAlong(loop.iterable, loop.path, frame, 0);
  }

  private elementsAlong(iterable: SyntaxNode, path: number[], frame: Frame | null, depth: number): Value[] | null {
    if (depth > 4) return null;
    const node = unwrapParens(iterable);
    const select = (item: SyntaxNode, f: Frame | null): Value[] => {
      let cur = unwrapParens(item);
      for (const index of path) {
        if (!['tuple', 'list', 'expression_list'].includes(cur.type) || !cur.namedChildren[index]) return [{ node: cur, frame: f }];
        cur = unwrapParens(cur.namedChildren[index]!);
      }
      return [{ node: cur, frame: f }];
    };
    if (node.type === 'tuple' || node.type === 'list') return node.namedChildren.filter((c) => c.type !== 'comment').flatMap((item) => select(item, frame));
    if (node.type === 'call') {
      const callee = this.sem.callee(node);
      const args = (node.child('arguments')?.namedChildren ?? []).filter((a) => a.type !== 'keyword_argument' && a.type !== 'comment');
      if (callee.qualifiedName === 'builtins.zip' && path.length > 0 && args[path[0]!]) return this.elementsAlong(args[path[0]!]!, path.slice(1), frame, depth + 1) ?? [{ node: args[path[0]!]!, frame }];
      if (callee.qualifiedName === 'builtins.enumerate' && path[0] === 1 && args[0]) return this.elementsAlong(args[0], path.slice(1), frame, depth + 1);
      if (callee.qualifiedName && ['torch.nn.ModuleList', 'torch.nn.Sequential', 'torch.nn.modules.container.ModuleList', 'torch.nn.modules.container.Sequential'].includes(callee.qualifiedName)) {
        const first = args[0] ? unwrapParens(args[0]) : null;
        if (callee.qualifiedName.endsWith('ModuleList')) return first && (first.type === 'list' || first.type === 'tuple') ? this.elementsAlong(first, path, frame, depth + 1) : null;
        return args.flatMap((a) => select(a, frame));
      }
    }
    if (node.type === 'identifier' || node.type === 'attribute' || (node.type === 'subscript' && node.childrenOf('subscript')[0]?.type === 'slice')) {
      // A name or attribute holding a literal list or a module container (`self.layers`), or a slice of one.
      const target = node.type === 'subscript' ? node.child('value')! : node;
      const out: Value[] = [];
      for (const v of this.values(target, frame)) {
        if (v.node === target || v.binding) return null;
        const inner = this.elementsAlong(v.node, path, v.frame, depth + 1);
        if (!inner) return null;
        out.push(...inner);
      }
      return out.length > 0 ? out : null;
    }
    return null;
  }

  /** What an iterable is: a data loader (or batch source), batches of indices, a counter, or a module list. */
  iterable(expr: SyntaxNode, frame: Frame | null, depth = 0): IterableInfo {
    const unknown: IterableInfo = { kind: 'unknown', source: null, batchSize: null, batchSizeText: null, enumerated: false };
    const node = unwrapParens(expr);
    if (depth > MAX_DEPTH) return unknown;
    if (node.type === 'call') {
      const callee = this.sem.callee(node);
      if (callee.qualifiedName === 'builtins.enumerate') {
        const inner = this.sem.argument(node, 0);
        return inner ? { ...this.iterable(inner, frame, depth + 1), enumerated: true } : unknown;
      }
      if (callee.qualifiedName && WRAPPING_ITERATORS.includes(callee.qualifiedName)) {
        const inner = this.sem.argument(node, 0);
        return inner ? this.iterable(inner, frame, depth + 1) : unknown;
      }
      if (callee.qualifiedName === 'builtins.range') {
        const args = node.child('arguments')?.namedChildren ?? [];
        if (args.length === 3) {
          const step = args[2]!;
          const value = this.sem.fold(step);
          const meaning = this.scaleOf(step, frame, depth + 1);
          if (meaning.symbols.some((s) => s.symbol === 'B')) return { kind: 'index-starts', source: { node, frame }, batchSize: typeof value === 'number' ? value : (meaning.symbols[0]?.value ?? null), batchSizeText: step.text, enumerated: false };
        }
        return { ...unknown, kind: 'counter' };
      }
      if ((callee.method === 'split' || callee.method === 'chunk') && callee.receiver) {
        const size = this.sem.argument(node, 0, callee.method === 'split' ? 'split_size' : 'chunks');
        if (callee.method === 'split' && size && this.isIndexSource(callee.receiver, frame)) {
          const value = this.sem.fold(size);
          return { kind: 'index-batches', source: { node, frame }, batchSize: typeof value === 'number' ? value : null, batchSizeText: size.text, enumerated: false };
        }
      }
      if (callee.qualifiedName === 'torch.split' || callee.qualifiedName === 'numpy.array_split') {
        const first = this.sem.argument(node, 0);
        const size = this.sem.argument(node, 1);
        if (first && size && this.isIndexSource(first, frame) && callee.qualifiedName === 'torch.split') {
          const value = this.sem.fold(size);
          return { kind: 'index-batches', source: { node, frame }, batchSize: typeof value === 'number' ? value : null, batchSizeText: size.text, enumerated: false };
        }
      }
      if (callee.method && ['modules', 'children', 'named_modules', 'named_children', 'parameters', 'named_parameters'].includes(callee.method)) return { ...unknown, kind: 'modules' };
      if (callee.method === 'batch' && callee.receiver) {
        const size = this.sem.argument(node, 0, 'batch_size');
        const value = size ? this.sem.fold(size) : null;
        return { kind: 'loader', source: { node, frame }, batchSize: typeof value === 'number' ? value : null, batchSizeText: size?.text ?? null, enumerated: false };
      }
    }
    for (const v of this.values(node, frame, depth + 1)) {
      const info = this.loaderInfo(v);
      if (info) return info;
      if (v.node !== node && (v.node.type === 'call' || v.node.type === 'identifier' || v.node.type === 'attribute') && !v.binding) {
        const inner = this.iterable(v.node, v.frame, depth + 1);
        if (inner.kind !== 'unknown') return inner;
      }
    }
    const type = this.typeOf(node, frame, depth + 1);
    if (type && this.isLoaderType(type)) return { kind: 'loader', source: { node, frame }, batchSize: null, batchSizeText: null, enumerated: false };
    return unknown;
  }

  /** Loader facts from a value that constructs a DataLoader. */
  private loaderInfo(v: Value): IterableInfo | null {
    if (v.node.type !== 'call') return null;
    const callee = this.sem.callee(v.node);
    const isLoader = (callee.qualifiedName && DATALOADERS.includes(callee.qualifiedName)) || (callee.symbol?.kind === 'class' && this.sem.isSubclassOf(callee.symbol.cls, DATALOADERS));
    if (!isLoader) return null;
    const size = this.sem.argument(v.node, 1, 'batch_size');
    const sampler = this.sem.argument(v.node, 99, 'batch_sampler');
    const value = size ? this.sem.fold(size) : null;
    // DataLoader's batch_size defaults to 1 (PyTorch's DataLoader documentation; from memory).
    const batchSize = sampler ? null : size ? (typeof value === 'number' ? value : null) : 1;
    return { kind: 'loader', source: v, batchSize, batchSizeText: size?.text ?? null, enumerated: false };
  }

  private isLoaderType(type: NonNullable<ReturnType<Semantics['typeOf']>>): boolean {
    if (type.kind === 'external') return DATALOADERS.includes(type.qualifiedName);
    return this.sem.isSubclassOf(type.cls, DATALOADERS);
  }

  /** True for `torch.randperm(n)`, `torch.arange(n)`, `np.random.permutation(n)` (sources of shuffled indices). */
  private isIndexSource(expr: SyntaxNode, frame: Frame | null): boolean {
    for (const v of this.values(expr, frame)) {
      if (v.node.type !== 'call') continue;
      const callee = this.sem.callee(v.node);
      if (callee.qualifiedName && ['torch.randperm', 'torch.arange', 'numpy.random.permutation', 'numpy.arange'].includes(callee.qualifiedName)) return true;
      if (callee.method === 'permutation') return true;
    }
    return false;
  }

  /** The loop info of a loop-target binding, when its loop iterates batches. */
  private loopBinding(b: Binding, frame: Frame | null): { info: IterableInfo; path: number[] } | null {
    const loop = this.loopOf(b);
    if (!loop) return null;
    const info = this.iterable(loop.iterable, frame);
    return { info, path: loop.path };
  }

  /** Whether a tensor is a minibatch (from a loader, a batch index, a Lightning batch), a full training array, or unknown. */
  tensorKind(expr: SyntaxNode, frame: Frame | null, depth = 0): TensorKind {
    const unknown: TensorKind = { kind: 'unknown', loader: null };
    if (depth > MAX_DEPTH) return unknown;
    const node = unwrapParens(expr);
    const memo = frame === null ? this.memoTable<SyntaxNode, TensorKind>('elbo-scale-mismatch:tensor-kind') : null;
    const cached = memo?.get(node);
    if (cached) return cached;
    memo?.set(node, unknown);
    const result = this.tensorKindUncached(node, frame, depth);
    memo?.set(node, result);
    return result;
  }

  private tensorKindUncached(node: SyntaxNode, frame: Frame | null, depth: number): TensorKind {
    const unknown: TensorKind = { kind: 'unknown', loader: null };
    const combine = (kinds: TensorKind[]): TensorKind => {
      const batch = kinds.find((k) => k.kind === 'batch');
      if (batch) return batch;
      if (kinds.length > 0 && kinds.some((k) => k.kind === 'full')) return kinds.find((k) => k.kind === 'full')!;
      return unknown;
    };
    switch (node.type) {
      case 'identifier':
      case 'attribute': {
        const kinds: TensorKind[] = [];
        for (const v of this.values(node, frame, depth + 1)) {
          if (v.binding) kinds.push(this.bindingKind(v.binding, v.frame, depth + 1));
          else if (v.node !== node) kinds.push(this.tensorKind(v.node, v.frame, depth + 1));
        }
        const combined = combine(kinds);
        if (combined.kind === 'unknown' && node.type === 'identifier' && this.isFullArrayByUse(node)) return { kind: 'full', loader: null };
        return combined;
      }
      case 'subscript': {
        const value = node.child('value');
        const index = node.childrenOf('subscript');
        if (!value) return unknown;
        const base = this.tensorKind(value, frame, depth + 1);
        if (base.kind === 'batch') return { kind: 'batch', loader: base.loader };
        for (const ix of index) {
          const batchIndex = this.batchIndex(ix, frame);
          if (batchIndex) return { kind: 'batch', loader: batchIndex };
        }
        if (base.kind === 'full' && index.every((ix) => ix.type === 'slice' && ix.namedChildren.every((c) => this.sem.fold(c) !== null))) return base;
        return unknown;
      }
      case 'call': {
        const callee = this.sem.callee(node);
        if (callee.qualifiedName === 'builtins.next') {
          const inner = this.sem.argument(node, 0);
          if (inner) {
            const it = this.iterable(inner, frame, depth + 1);
            if (it.kind === 'loader') return { kind: 'batch', loader: it };
          }
          return unknown;
        }
        if (callee.method && callee.receiver && KEEP_ROWS.has(callee.method)) return this.tensorKind(callee.receiver, frame, depth + 1);
        if (callee.qualifiedName && KEEP_ROWS_FUNCTIONS.includes(callee.qualifiedName)) {
          const first = this.sem.argument(node, 0, 'data');
          return first ? this.tensorKind(first, frame, depth + 1) : unknown;
        }
        // A model (or any function) applied to a minibatch gives per-example outputs of that minibatch.
        const args = (node.child('arguments')?.namedChildren ?? []).map((a) => (a.type === 'keyword_argument' ? a.child('value') : a)).filter((a): a is SyntaxNode => !!a);
        const kinds = args.map((a) => this.tensorKind(a, frame, depth + 1));
        if (callee.method && callee.receiver) kinds.push(this.tensorKind(callee.receiver, frame, depth + 1));
        return combine(kinds);
      }
      case 'binary_operator': {
        const kinds = [node.child('left'), node.child('right')].filter((c): c is SyntaxNode => !!c).map((c) => this.tensorKind(c, frame, depth + 1));
        return combine(kinds);
      }
      case 'unary_operator': {
        const arg = node.child('argument');
        return arg ? this.tensorKind(arg, frame, depth + 1) : unknown;
      }
      case 'conditional_expression': {
        const options = node.namedChildren.filter((c) => c.type !== 'comment');
        return combine([options[0], options[2]].filter((c): c is SyntaxNode => !!c).map((c) => this.tensorKind(c, frame, depth + 1)));
      }
      case 'generator_expression':
      case 'list_comprehension': {
        // `(t.to(device) for t in batch)`: the tensors its element expression makes.
        const body = node.child('body');
        const kind = body ? this.tensorKind(body, frame, depth + 1) : unknown;
        return kind.whole ? { kind: kind.kind, loader: kind.loader } : kind;
      }
      default:
        return unknown;
    }
  }

  /** Kind of a leaf binding: loop targets of batch loops, unpacked batches, Lightning's batch parameter. */
  private bindingKind(b: Binding, frame: Frame | null, depth: number): TensorKind {
    const unknown: TensorKind = { kind: 'unknown', loader: null };
    const loop = this.loopBinding(b, frame);
    if (loop) {
      if (loop.info.kind === 'loader' && !(loop.info.enumerated && loop.path[0] === 0)) {
        const whole = loop.info.enumerated ? loop.path.length === 1 : loop.path.length === 0;
        return { kind: 'batch', loader: loop.info, whole };
      }
      // A loop over the tensors of a whole minibatch (`(t.to(device) for t in batch)`): each is a minibatch tensor.
      const loopNode = this.loopOf(b);
      if (loop.info.kind === 'unknown' && loopNode && loopNode.path.length === 0) {
        const container = this.tensorKind(loopNode.iterable, frame, depth + 1);
        if (container.kind === 'batch' && container.whole) return { kind: 'batch', loader: container.loader };
      }
      return unknown;
    }
    if (b.unpack) {
      const from = this.tensorKind(b.unpack.from, frame, depth + 1);
      return from.whole ? { kind: from.kind, loader: from.loader } : from;
    }
    if (b.kind === 'param' && b.definition) {
      const fn = this.sem.moduleOf(b.definition).functionByNode.get(b.definition.id);
      if (fn && fn.owner && ['training_step', 'validation_step', 'test_step'].includes(fn.name) && fn.params.indexOf(b) === 1 && this.sem.isSubclassOf(fn.owner, LIGHTNING_MODULES)) {
        return { kind: 'batch', loader: { kind: 'loader', source: null, batchSize: null, batchSizeText: null, enumerated: false }, whole: true };
      }
    }
    return unknown;
  }

  /** When an index expression selects a minibatch (`idx` from `perm.split(bs)`, `i:i + bs` from `range(0, n, bs)`), the loop. */
  private batchIndex(ix: SyntaxNode, frame: Frame | null, depth = 0): IterableInfo | null {
    // Bounded: indexes nested thousands deep must not overflow the stack.
    if (depth > MAX_DEPTH) return null;
    const node = unwrapParens(ix);
    const ids: SyntaxNode[] = [];
    if (node.type === 'identifier') ids.push(node);
    else if (node.type === 'slice') {
      const first = node.namedChildren[0];
      if (first) for (const d of first.subtree()) if (d.type === 'identifier') ids.push(d);
    } else if (node.type === 'subscript') {
      // perm[i:i + bs] used as an index.
      const inner = node.childrenOf('subscript')[0];
      if (inner) return this.batchIndex(inner, frame, depth + 1);
    } else return null;
    for (const id of ids) {
      for (const v of this.values(id, frame)) {
        const drawn = this.randomIndexDraw(v.node);
        if (drawn) return drawn;
        if (!v.binding) {
          if (v.node.type === 'subscript') {
            const inner = v.node.childrenOf('subscript')[0];
            const r = inner ? this.batchIndex(inner, v.frame, depth + 1) : null;
            if (r) return r;
          }
          continue;
        }
        const loop = this.loopBinding(v.binding, v.frame);
        if (loop && (loop.info.kind === 'index-batches' || loop.info.kind === 'index-starts')) return loop.info;
      }
    }
    return null;
  }

  /** A random draw of minibatch indices: `np.random.choice(n, bs)`, `rng.choice(n, bs)`, `torch.randint(0, n, (bs,))`, `torch.randperm(n)[:bs]`. */
  private randomIndexDraw(node: SyntaxNode): IterableInfo | null {
    const n = unwrapParens(node);
    const info = (size: SyntaxNode | null): IterableInfo => {
      const first = size ? unwrapParens(size) : null;
      const dim = first && (first.type === 'tuple' || first.type === 'list') ? first.namedChildren[0] : first;
      const value = dim ? this.sem.fold(dim) : null;
      return { kind: 'index-batches', source: { node: n, frame: null }, batchSize: typeof value === 'number' ? value : null, batchSizeText: dim?.text ?? null, enumerated: false };
    };
    if (n.type === 'call') {
      const callee = this.sem.callee(n);
      const q = callee.qualifiedName ?? '';
      if (q === 'numpy.random.choice' || (callee.method === 'choice' && callee.receiver)) return info(this.sem.argument(n, 1, 'size'));
      if (q === 'torch.randint' || q === 'numpy.random.randint' || (callee.method === 'integers' && callee.receiver)) {
        const args = (n.child('arguments')?.namedChildren ?? []).filter((a) => a.type !== 'keyword_argument');
        return info(this.sem.argument(n, 99, 'size') ?? args[2] ?? null);
      }
    }
    if (n.type === 'subscript') {
      const value = n.child('value');
      const ix = n.childrenOf('subscript')[0];
      if (value && ix?.type === 'slice' && this.isIndexSource(value, null)) {
        const parts = ix.namedChildren;
        return info(ix.text.trim().startsWith(':') ? (parts[0] ?? null) : (parts[1] ?? null));
      }
    }
    return null;
  }

  /** True when a name holds a full training array: it builds a Dataset or DataLoader, goes to `.fit`, or is cut into minibatches. */
  isFullArrayByUse(identifier: SyntaxNode, depth = 0): boolean {
    const bindings = this.sem.bindings(identifier);
    if (bindings.length === 0 || bindings.some((b) => b.kind === 'param' || b.kind === 'for' || b.kind === 'comprehension')) return false;
    const memo = this.memoTable<Binding, boolean>('elbo-scale-mismatch:full-array');
    const b0 = bindings[0]!;
    if (memo.has(b0)) return memo.get(b0)!;
    memo.set(b0, false);
    let result = false;
    for (const n of this.identifiersByName(b0.scope.node).get(identifier.text) ?? []) {
      if (n === b0.node) continue;
      const reaching = this.sem.bindings(n);
      if (!reaching.some((r) => bindings.includes(r))) continue;
      // Look through conversions (`torch.tensor(X)`, `X.float()`) to where the array goes.
      let use: SyntaxNode = n;
      for (let up = use.parent; up && depth < 3; up = use.parent) {
        if (up.type === 'attribute' && use.field === 'object' && up.parent?.type === 'call' && KEEP_ROWS.has(up.child('attribute')?.text ?? '')) use = up.parent;
        else if (up.type === 'argument_list' && up.parent?.type === 'call' && up.namedChildren[0] === use && KEEP_ROWS_FUNCTIONS.includes(this.sem.callee(up.parent).qualifiedName ?? '')) use = up.parent;
        else break;
      }
      const parent = use.parent;
      if (!parent) continue;
      if (parent.type === 'assignment' && use.field === 'right' && parent.child('left')?.type === 'identifier' && depth < 3) {
        if (this.isFullArrayByUse(parent.child('left')!, depth + 1)) result = true;
      } else if (parent.type === 'argument_list' && parent.parent?.type === 'call') {
        const call = parent.parent;
        const callee = this.sem.callee(call);
        const q = callee.qualifiedName;
        if (q && (DATASET_CALLS.includes(q) || DATALOADERS.includes(q))) result = true;
        else if (callee.symbol?.kind === 'class' && this.sem.isSubclassOf(callee.symbol.cls, DATASET_BASES)) result = true;
        else if (callee.method === 'fit' && parent.namedChildren[0] === use) result = true;
      } else if (parent.type === 'subscript' && use.field === 'value') {
        if (parent.childrenOf('subscript').some((ix) => this.batchIndex(ix, null))) result = true;
      }
      if (result) break;
    }
    memo.set(b0, result);
    return result;
  }

  /** The identifiers of a scope's subtree by name, found in one walk per scope (a walk per binding made large modules quadratic). */
  private identifiersByName(scopeNode: SyntaxNode): Map<string, SyntaxNode[]> {
    const memo = this.memoTable<SyntaxNode, Map<string, SyntaxNode[]>>('elbo-scale-mismatch:identifiers-by-name');
    const cached = memo.get(scopeNode);
    if (cached) return cached;
    const byName = new Map<string, SyntaxNode[]>();
    for (const n of scopeNode.subtree()) {
      if (n.type !== 'identifier') continue;
      const list = byName.get(n.text);
      if (list) list.push(n);
      else byName.set(n.text, [n]);
    }
    memo.set(scopeNode, byName);
    return byName;
  }

  /** True when a value (through names) is a Dataset object: a Dataset subclass instance, TensorDataset, Subset, a random_split part. */
  isDataset(expr: SyntaxNode, frame: Frame | null): boolean {
    for (const v of this.values(expr, frame)) {
      if (v.node.type === 'call') {
        const callee = this.sem.callee(v.node);
        if (callee.qualifiedName && (DATASET_CALLS.includes(callee.qualifiedName) || /^torchvision\.datasets\.\w+$/.test(callee.qualifiedName))) return true;
        if (callee.symbol?.kind === 'class' && this.sem.isSubclassOf(callee.symbol.cls, DATASET_BASES)) return true;
      }
      if (v.binding?.unpack) {
        const from = unwrapParens(v.binding.unpack.from);
        if (from.type === 'call' && this.sem.isCallTo(from, RANDOM_SPLIT)) return true;
      }
      if (v.node.type === 'attribute' && v.node.child('attribute')?.text === 'dataset') {
        const object = v.node.child('object');
        if (object && this.iterable(object, v.frame).kind === 'loader') return true;
      }
    }
    const type = this.typeOf(expr, frame);
    if (type?.kind === 'instance' && this.sem.isSubclassOf(type.cls, DATASET_BASES)) return true;
    return false;
  }

  /** The number of examples a Dataset or array holds, when it folds. */
  lengthOf(expr: SyntaxNode, frame: Frame | null, depth = 0): number | null {
    if (depth > 6) return null;
    for (const v of this.values(expr, frame)) {
      const n = v.node;
      if (n.type === 'call') {
        const callee = this.sem.callee(n);
        const q = callee.qualifiedName ?? '';
        if (q === 'torch.utils.data.TensorDataset' || q === 'torch.utils.data.dataset.TensorDataset') {
          const first = this.sem.argument(n, 0);
          return first ? this.lengthOf(first, v.frame, depth + 1) : null;
        }
        if (/^(torch|numpy|numpy\.random)\.(randn|rand|zeros|ones|empty|full|randint|normal|standard_normal|random|uniform)$/.test(q) || /^numpy\.random\.default_rng/.test(q)) {
          const first = sizeArgument(this.sem, n, q);
          return first;
        }
        if (callee.method && ['normal', 'uniform', 'standard_normal', 'random', 'integers', 'gamma'].includes(callee.method)) {
          const size = this.sem.argument(n, 99, 'size');
          if (size) return firstDimension(this.sem, size);
        }
        if (callee.method && callee.receiver && KEEP_ROWS.has(callee.method)) return this.lengthOf(callee.receiver, v.frame, depth + 1);
        if (q && KEEP_ROWS_FUNCTIONS.includes(q)) {
          const first = this.sem.argument(n, 0, 'data');
          return first ? this.lengthOf(first, v.frame, depth + 1) : null;
        }
        if (callee.symbol?.kind === 'class') {
          const len = this.sem.findMethod(callee.symbol.cls, '__len__');
          for (const r of len?.returns ?? []) {
            const folded = this.sem.fold(r);
            if (typeof folded === 'number') return folded;
          }
        }
      }
      if (n.type === 'binary_operator') {
        // Elementwise arithmetic keeps the rows of its array operands.
        const left = n.child('left');
        const right = n.child('right');
        const rows = (left ? this.lengthOf(left, v.frame, depth + 1) : null) ?? (right ? this.lengthOf(right, v.frame, depth + 1) : null);
        if (rows !== null) return rows;
      }
      if (n.type === 'subscript') {
        const ix = n.childrenOf('subscript')[0];
        const value = n.child('value');
        // x[..., None] and x[:, 0] keep the rows.
        if (value && (ix?.type === 'ellipsis' || (ix?.type === 'slice' && ix.text.trim() === ':'))) return this.lengthOf(value, v.frame, depth + 1);
        if (ix?.type === 'slice' && value) {
          const parts = ix.children.filter((c) => c.type !== 'comment');
          const texts = ix.text.split(':');
          if (texts.length === 2) {
            const lo = texts[0]!.trim() === '' ? 0 : parts[0] ? this.sem.fold(parts[0]) : null;
            const hiNode = texts[0]!.trim() === '' ? parts[0] : parts[1];
            const hi = texts[1]!.trim() === '' ? this.lengthOf(value, v.frame, depth + 1) : hiNode ? this.sem.fold(hiNode) : null;
            if (typeof lo === 'number' && typeof hi === 'number') {
              const whole = this.lengthOf(value, v.frame, depth + 1);
              const top = hi < 0 && whole !== null ? whole + hi : hi;
              return top - lo;
            }
          }
        }
      }
      if (v.binding?.unpack) {
        const from = unwrapParens(v.binding.unpack.from);
        if (from.type === 'call' && this.sem.isCallTo(from, RANDOM_SPLIT)) {
          const lengths = this.sem.argument(from, 1, 'lengths');
          const list = lengths ? unwrapParens(lengths) : null;
          const items = list && (list.type === 'list' || list.type === 'tuple') ? list.namedChildren.map((c) => this.sem.fold(c)) : [];
          const index = v.binding.unpack.index;
          if (items.length > index && items.every((x): x is number => typeof x === 'number')) {
            if (items.every((x) => Number.isInteger(x) && x >= 1)) return items[index]!;
            // Fractions: random_split takes floor(n·f) of each and hands the remainder out one by one from the
            // first part on (PyTorch's random_split documentation and source; from memory).
            const dataset = this.sem.argument(from, 0, 'dataset');
            const total = dataset ? this.lengthOf(dataset, v.frame, depth + 1) : null;
            if (total === null || Math.abs(items.reduce((a, x) => a + x, 0) - 1) > 1e-6) return null;
            const parts = items.map((f) => Math.floor(total * f));
            const remainder = total - parts.reduce((a, x) => a + x, 0);
            for (let i = 0; i < remainder; i++) parts[i % parts.length]! += 1;
            return parts[index]!;
          }
        }
      }
      if (n.type === 'attribute' && n.child('attribute')?.text === 'dataset') {
        const object = n.child('object');
        if (object) {
          const it = this.iterable(object, v.frame, depth + 1);
          const dataset = it.source?.node.type === 'call' ? this.sem.argument(it.source.node, 0, 'dataset') : null;
          if (dataset) return this.lengthOf(dataset, it.source!.frame, depth + 1);
        }
      }
    }
    return null;
  }

  /** The dataset-size expression of a loader (`len(<loader>.dataset)`) as N, with its value when it folds. */
  loaderDatasetLength(info: IterableInfo): number | null {
    const source = info.source;
    if (!source || source.node.type !== 'call' || info.kind !== 'loader') return null;
    const dataset = this.sem.argument(source.node, 0, 'dataset');
    return dataset ? this.lengthOf(dataset, source.frame) : null;
  }

  /** What a name means by itself (dataset-size names, batch-size names, batch-count names), for names whose value is unknown. */
  nameMeaning(name: string): 'N' | 'B' | 'K' | null {
    if (this.datasetNames.has(name)) return 'N';
    if (BATCH_SIZE_NAMES.includes(name)) return 'B';
    if (NUM_BATCH_NAMES.includes(name)) return 'K';
    return null;
  }

  /** The name of an expression for name matching: an identifier, a dotted attribute, or a string dictionary key. */
  private namesOf(node: SyntaxNode): string[] {
    if (node.type === 'identifier') return [node.text];
    if (node.type === 'attribute') {
      const last = node.child('attribute')?.text;
      return [node.text.replace(/\s+/g, ''), ...(last ? [last] : [])];
    }
    if (node.type === 'subscript') {
      const key = node.childrenOf('subscript')[0];
      const folded = key ? this.sem.fold(key) : null;
      if (typeof folded === 'string') return [folded];
    }
    if (node.type === 'call') {
      // cfg.get("n_train", ...) and getattr(cfg, "n_train")
      const callee = this.sem.callee(node);
      if (callee.method === 'get') {
        const key = this.sem.argument(node, 0);
        const folded = key ? this.sem.fold(key) : null;
        if (typeof folded === 'string') return [folded];
      }
      if (callee.qualifiedName === 'builtins.getattr') {
        const key = this.sem.argument(node, 1);
        const folded = key ? this.sem.fold(key) : null;
        if (typeof folded === 'string') return [folded];
      }
    }
    return [];
  }

  /**
   * What a scale expression means: N (training examples), B (examples in the step), K (batches per epoch), a number,
   * a dimensionless schedule (annealing weight), or unknown (opaque). Data flow decides first; names only when the
   * value cannot be followed.
   */
  scaleOf(expr: SyntaxNode, frame: Frame | null, depth = 0): Scale {
    const node = unwrapParens(expr);
    if (depth > MAX_DEPTH) return OPAQUE;
    const memo = frame === null ? this.memoTable<SyntaxNode, Scale>('elbo-scale-mismatch:scale') : null;
    const cached = memo?.get(node);
    if (cached) return cached;
    memo?.set(node, OPAQUE);
    const result = this.scaleUncached(node, frame, depth);
    memo?.set(node, result);
    return result;
  }

  private use(symbolName: SymbolUse['symbol'], node: SyntaxNode, value: number | null, strong: boolean, sources?: SyntaxNode[]): Scale {
    return symbol({ symbol: symbolName, text: node.text, value, strong, ...(sources && sources.length > 0 ? { sources } : {}) });
  }

  /** The expressions that identify a loader's data: the loader construction and the dataset it is given. */
  loaderSources(info: IterableInfo): SyntaxNode[] {
    const source = info.source;
    if (!source || info.kind !== 'loader') return [];
    const out = [source.node];
    const dataset = source.node.type === 'call' ? this.sem.argument(source.node, 0, 'dataset') : null;
    if (dataset) for (const v of this.values(dataset, source.frame)) out.push(v.node);
    return out;
  }

  private scaleUncached(node: SyntaxNode, frame: Frame | null, depth: number): Scale {
    const direct = this.directMeaning(node, frame, depth);
    if (direct) return direct;
    // A learned quantity (a noise precision, a learned temperature) cannot stand for N or B: it is a dimensionless factor.
    if ((node.type === 'identifier' || node.type === 'attribute' || node.type === 'call') && this.isTrainableDerived(node, frame)) return { ...ONE, coef: null };
    switch (node.type) {
      case 'integer':
      case 'float': {
        const v = this.sem.fold(node);
        return typeof v === 'number' ? constant(v) : OPAQUE;
      }
      case 'true':
        return constant(1);
      case 'unary_operator': {
        const arg = node.child('argument');
        const s = arg ? this.scaleOf(arg, frame, depth + 1) : OPAQUE;
        return node.child('operator')?.text === '-' ? times(s, constant(-1)) : s;
      }
      case 'binary_operator':
        return this.binaryScale(node, frame, depth);
      case 'identifier':
        return this.nameScale(node, frame, depth);
      case 'attribute': {
        const attr = node.child('attribute')?.text ?? '';
        if (COUNTER_ATTRIBUTES.has(attr)) return { ...ONE, coef: null, schedule: true };
        const values = this.values(node, frame, depth + 1).filter((v) => v.node !== node);
        if (values.length > 0) {
          const scales = values.map((v) => (v.binding ? this.leafScale(v.binding, v.node, v.frame) : this.scaleOf(v.node, v.frame, depth + 1)));
          const agreed = agree(scales);
          if (agreed && !agreed.opaque) return agreed;
        }
        const byName = this.namedScale(node);
        if (byName) return byName;
        const folded = this.sem.fold(node);
        return typeof folded === 'number' ? constant(folded) : OPAQUE;
      }
      case 'subscript': {
        const folded = this.sem.fold(node);
        const byName = this.namedScale(node, typeof folded === 'number' ? folded : null);
        if (byName) return byName;
        if (typeof folded === 'number') return constant(folded);
        return OPAQUE;
      }
      case 'call':
        return this.callScale(node, frame, depth);
      default:
        return OPAQUE;
    }
  }

  /** True when a value is computed only from trainable tensors (`nn.Parameter`, `requires_grad=True`) and numbers. */
  private isTrainableDerived(expr: SyntaxNode, frame: Frame | null): boolean {
    const stack: { node: SyntaxNode; frame: Frame | null }[] = [{ node: expr, frame }];
    const seen = new Set<SyntaxNode>();
    let trainable = false;
    let steps = 0;
    while (stack.length) {
      if (steps++ > 60) return false;
      const { node: raw, frame: f } = stack.pop()!;
      const node = unwrapParens(raw);
      if (seen.has(node)) continue;
      seen.add(node);
      if (node.type === 'integer' || node.type === 'float') continue;
      if (node.type === 'identifier' || node.type === 'attribute') {
        const values = this.values(node, f).filter((v) => v.node !== node);
        if (values.length === 0 || values.some((v) => v.binding)) return false;
        for (const v of values) stack.push({ node: v.node, frame: v.frame });
        continue;
      }
      if (node.type === 'call') {
        const callee = this.sem.callee(node);
        const q = callee.qualifiedName ?? '';
        const flag = this.sem.argument(node, 99, 'requires_grad');
        if (q === 'torch.nn.Parameter' || q === 'torch.nn.parameter.Parameter' || callee.method === 'requires_grad_' || (flag && this.sem.fold(flag) === true)) {
          trainable = true;
          continue;
        }
        // Elementwise transforms of a trainable tensor (exp, softplus, pow, clamp) stay learned quantities.
        if (callee.method && callee.receiver && ['exp', 'pow', 'clamp', 'sqrt', 'square', 'reciprocal', 'abs'].includes(callee.method)) {
          stack.push({ node: callee.receiver, frame: f });
          continue;
        }
        if (/^torch(\.nn\.functional)?\.(exp|softplus|sigmoid|sqrt|square|clamp|abs|pow)$/.test(q)) {
          const first = this.sem.argument(node, 0);
          if (!first) return false;
          stack.push({ node: first, frame: f });
          continue;
        }
        return false;
      }
      if (node.type === 'binary_operator' || node.type === 'unary_operator') {
        for (const c of node.namedChildren) stack.push({ node: c, frame: f });
        continue;
      }
      return false;
    }
    return trainable;
  }

  /** Marks a named non-unit constant as documented when a comment sits on its binding's line (a deliberate tempering or weight). */
  private documentedConstant(s: Scale, node: SyntaxNode): Scale {
    if (s.coef === null || s.coef === 1 || s.coef === -1) return s;
    return hasCommentOnLine(this.sem, node) ? { ...s, documented: true } : s;
  }

  private binaryScale(node: SyntaxNode, frame: Frame | null, depth: number): Scale {
    const op = node.child('operator')?.text;
    const left = node.child('left');
    const right = node.child('right');
    if (!left || !right) return OPAQUE;
    if (op === '/' || op === '//') {
      const blundell = this.blundellWeight(node, frame, depth);
      if (blundell) return blundell;
      return over(this.scaleOf(left, frame, depth + 1), this.scaleOf(right, frame, depth + 1));
    }
    if (op === '*') return times(this.scaleOf(left, frame, depth + 1), this.scaleOf(right, frame, depth + 1));
    if (op === '**') {
      const e = this.sem.fold(right);
      if (typeof e === 'number') return power(this.scaleOf(left, frame, depth + 1), e);
      return OPAQUE;
    }
    if (op === '+' || op === '-') {
      const a = this.scaleOf(left, frame, depth + 1);
      const b = this.scaleOf(right, frame, depth + 1);
      if (a.opaque || b.opaque) return OPAQUE;
      const sameDims = a.dims.n === b.dims.n && a.dims.b === b.dims.b && a.dims.p === b.dims.p;
      if (!sameDims) return OPAQUE;
      const coef = a.coef === null || b.coef === null ? null : op === '+' ? a.coef + b.coef : a.coef - b.coef;
      return { ...a, coef, schedule: a.schedule || b.schedule, documented: a.documented || b.documented, symbols: [...a.symbols, ...b.symbols] };
    }
    return OPAQUE;
  }

  /** Blundell et al.'s π_i = 2^(K−i) / (2^K − 1): over an epoch it averages 1/K (SOURCES.md §1.4). */
  private blundellWeight(node: SyntaxNode, frame: Frame | null, depth: number): Scale | null {
    const left = unwrapParens(node.child('left')!);
    const right = unwrapParens(node.child('right')!);
    const pow2 = (n: SyntaxNode): SyntaxNode | null => {
      const m = unwrapParens(n);
      if (m.type === 'binary_operator' && m.child('operator')?.text === '**' && this.sem.fold(m.child('left')!) === 2) return m.child('right');
      if (m.type === 'call' && this.sem.isCallTo(m, ['math.pow', 'builtins.pow', 'numpy.power', 'torch.pow'])) {
        const base = this.sem.argument(m, 0);
        if (base && this.sem.fold(base) === 2) return this.sem.argument(m, 1);
      }
      return null;
    };
    const numeratorExp = pow2(left);
    if (!numeratorExp || right.type !== 'binary_operator' || right.child('operator')?.text !== '-' || this.sem.fold(right.child('right')!) !== 1) return null;
    const denominatorExp = pow2(right.child('left')!);
    if (!denominatorExp) return null;
    const k = this.scaleOf(denominatorExp, frame, depth + 1);
    if (k.opaque || !(k.dims.n === 1 && k.dims.b === -1)) return null;
    return { ...power(k, -1), coef: 1, schedule: true };
  }

  private nameScale(node: SyntaxNode, frame: Frame | null, depth: number): Scale {
    const values = this.values(node, frame, depth + 1);
    const scales: Scale[] = [];
    for (const v of values) {
      if (v.binding) scales.push(this.leafScale(v.binding, v.node, v.frame));
      else if (v.node === node) scales.push(OPAQUE);
      else {
        const inner = this.scaleOf(v.node, v.frame, depth + 1);
        // A literal bound to a dataset-size or batch-size name means that quantity, with that value.
        const folded = inner.opaque || inner.symbols.length > 0 ? null : inner.coef;
        const named = this.nameMeaning(node.text);
        if (named && folded !== null) scales.push(symbol({ symbol: named, text: node.text, value: folded, strong: false }));
        else scales.push(inner.coef !== null && !inner.opaque && inner.symbols.length === 0 ? this.documentedConstant(inner, v.node) : inner);
      }
    }
    const agreed = agree(scales);
    if (agreed && !agreed.opaque) return agreed;
    return this.namedScale(node) ?? OPAQUE;
  }

  /** Scale of a leaf binding: loop counters are schedules; other leaves are known only by name. */
  private leafScale(b: Binding, node: SyntaxNode, frame: Frame | null): Scale {
    const loop = this.loopOf(b);
    if (loop) {
      const info = this.iterable(loop.iterable, frame);
      if (info.kind === 'counter' || info.enumerated) return { ...ONE, coef: null, schedule: true };
      return OPAQUE;
    }
    if (b.unpack) {
      const from = unwrapParens(b.unpack.from);
      // n_train, n_features = X_train.shape
      if (from.type === 'attribute' && from.child('attribute')?.text === 'shape' && b.unpack.index === 0) {
        const object = from.child('object');
        if (object) {
          const kind = this.tensorKind(object, frame);
          if (kind.kind === 'batch') return this.use('B', node, kind.loader?.batchSize ?? null, true);
          if (kind.kind === 'full') return this.use('N', node, this.lengthOf(object, frame), true);
        }
      }
    }
    const named = this.nameMeaning(b.name);
    if (named) return symbol({ symbol: named, text: b.name, value: null, strong: false });
    return OPAQUE;
  }

  /** Meaning by name alone (dataset-size names, dotted config names, dictionary keys). */
  private namedScale(node: SyntaxNode, value: number | null = null): Scale | null {
    for (const name of this.namesOf(node)) {
      const meaning = this.nameMeaning(name);
      if (meaning) return symbol({ symbol: meaning, text: node.text, value, strong: false });
    }
    return null;
  }

  private callScale(node: SyntaxNode, frame: Frame | null, depth: number): Scale {
    const callee = this.sem.callee(node);
    const q = callee.qualifiedName;
    const first = this.sem.argument(node, 0);
    if (q && PASS_NUMBER.includes(q) && first) return this.scaleOf(first, frame, depth + 1);
    if (callee.method === 'item' && callee.receiver) return this.scaleOf(callee.receiver, frame, depth + 1);
    if (q === 'builtins.min' || q === 'builtins.max' || q === 'numpy.clip' || q === 'torch.clamp' || q === 'numpy.minimum' || q === 'numpy.maximum') {
      const args = (node.child('arguments')?.namedChildren ?? []).map((a) => (a.type === 'keyword_argument' ? a.child('value') : a)).filter((a): a is SyntaxNode => !!a);
      const scales = args.map((a) => this.scaleOf(a, frame, depth + 1));
      if (scales.every((s) => !s.opaque && s.dims.n === 0 && s.dims.b === 0 && s.dims.p === 0)) return { ...ONE, coef: null, schedule: scales.some((s) => s.schedule) || true };
      return OPAQUE;
    }
    if (q && DIMENSIONLESS_FUNCTIONS.includes(q)) {
      const scales = first ? [this.scaleOf(first, frame, depth + 1)] : [];
      if (scales.every((s) => !s.opaque && s.dims.n === 0 && s.dims.b === 0)) return { ...ONE, coef: null, schedule: true };
      return OPAQUE;
    }
    const resolved = this.resolveCall(node, frame);
    if (resolved && resolved.fn.returns.length > 0) {
      const inner = this.frameFor(node, resolved, frame);
      const scales = resolved.fn.returns.map((r) => this.scaleOf(r, inner, depth + 1));
      const agreed = agree(scales);
      if (agreed) return agreed;
    }
    const folded = this.sem.fold(node);
    if (typeof folded === 'number') return constant(folded);
    return this.namedScale(node) ?? OPAQUE;
  }

  /** Meanings read off an expression's form: `len(...)`, `.shape[0]`, `.size(0)`, `loader.batch_size`. */
  private directMeaning(node: SyntaxNode, frame: Frame | null, depth: number): Scale | null {
    // len(X)
    if (node.type === 'call' && this.sem.isCallTo(node, ['builtins.len'])) {
      const arg = this.sem.argument(node, 0);
      return arg ? this.lengthMeaning(node, arg, frame, depth) : null;
    }
    // X.shape[0], X.size()[0], np.shape(X)[0]
    if (node.type === 'subscript') {
      const value = unwrapParens(node.child('value') ?? node);
      const ix = node.childrenOf('subscript')[0];
      if (!ix || this.sem.fold(ix) !== 0) return null;
      let tensor: SyntaxNode | null = null;
      if (value.type === 'attribute' && value.child('attribute')?.text === 'shape') tensor = value.child('object');
      else if (value.type === 'call') {
        const callee = this.sem.callee(value);
        if (callee.method === 'size' && callee.receiver && !this.sem.argument(value, 0)) tensor = callee.receiver;
        else if (callee.qualifiedName === 'numpy.shape' || callee.qualifiedName === 'tensorflow.shape') tensor = this.sem.argument(value, 0);
      }
      return tensor ? this.rowsMeaning(node, tensor, frame, depth) : null;
    }
    // X.size(0), X.shape(0)-style calls, X.size(dim=0)
    if (node.type === 'call') {
      const callee = this.sem.callee(node);
      if (callee.method === 'size' && callee.receiver) {
        const dim = this.sem.argument(node, 0, 'dim');
        if (dim && this.sem.fold(dim) === 0) return this.rowsMeaning(node, callee.receiver, frame, depth);
      }
    }
    // loader.batch_size
    if (node.type === 'attribute' && node.child('attribute')?.text === 'batch_size') {
      const object = node.child('object');
      if (object) {
        const it = this.iterable(object, frame, depth + 1);
        if (it.kind === 'loader') return this.use('B', node, it.batchSize, true);
      }
    }
    if (node.type === 'attribute' && node.child('attribute')?.text === 'num_training_batches') return this.use('K', node, null, true);
    return null;
  }

  /** `len(X)`: K for a loader, N for a dataset (or a loader's `.dataset`) or a full array, B for a minibatch. */
  private lengthMeaning(node: SyntaxNode, arg: SyntaxNode, frame: Frame | null, depth: number): Scale | null {
    const target = unwrapParens(arg);
    const it = this.iterable(target, frame, depth + 1);
    if (it.kind === 'loader' && it.source?.node.type === 'call') {
      const n = this.loaderDatasetLength(it);
      const k = n !== null && it.batchSize ? Math.ceil(n / it.batchSize) : null;
      return this.use('K', node, k, true, this.loaderSources(it));
    }
    if (target.type === 'attribute' && target.child('attribute')?.text === 'dataset') {
      const object = target.child('object');
      if (object) {
        const loader = this.iterable(object, frame, depth + 1);
        if (loader.kind === 'loader') return this.use('N', node, this.loaderDatasetLength(loader), true, this.loaderSources(loader));
        // `len(<something>.dataset)`: the loader convention (`trainer.datamodule.train_dataloader().dataset`), known by form only.
        return this.use('N', node, null, false);
      }
    }
    if (this.isDataset(target, frame)) return this.use('N', node, this.lengthOf(target, frame), true, this.values(target, frame).map((v) => v.node));
    return this.rowsMeaning(node, target, frame, depth);
  }

  /** Rows of a tensor: B for a minibatch, N for a full training array. */
  private rowsMeaning(node: SyntaxNode, tensor: SyntaxNode, frame: Frame | null, depth: number): Scale | null {
    const kind = this.tensorKind(tensor, frame, depth + 1);
    if (kind.kind === 'batch') return this.use('B', node, kind.loader?.batchSize ?? null, true);
    if (kind.kind === 'full') return this.use('N', node, this.lengthOf(tensor, frame), true);
    return null;
  }

  /** True when a class is a LightningModule. */
  isLightningModule(cls: ClassInfo): boolean {
    return this.sem.isSubclassOf(cls, LIGHTNING_MODULES);
  }
}

/** The scale all alternatives agree on (same meaning), or null. */
function agree(scales: Scale[]): Scale | null {
  if (scales.length === 0) return null;
  const first = scales[0]!;
  for (const s of scales.slice(1)) {
    if (s.opaque !== first.opaque || s.dims.n !== first.dims.n || s.dims.b !== first.dims.b || s.dims.p !== first.dims.p) return OPAQUE;
    if (s.coef !== first.coef && !(s.schedule || first.schedule)) return OPAQUE;
  }
  return first;
}

function isStatic(fn: FunctionInfo): boolean {
  return fn.decorators.some((d) => /^@\s*staticmethod\b/.test(d.text));
}

function isCallableMethod(fn: FunctionInfo): boolean {
  return !!fn.owner && (fn.name === 'forward' || fn.name === 'call' || fn.name === '__call__');
}

/** Constructs that make the code inside them run conditionally or repeatedly (as the semantic model counts them). */
const CONDITIONAL_TYPES = new Set(['if_statement', 'elif_clause', 'else_clause', 'for_statement', 'while_statement', 'try_statement', 'except_clause', 'finally_clause', 'match_statement', 'case_clause', 'conditional_expression', 'boolean_operator']);

/** The conditional constructs between a node and its scope node, innermost first. */
function conditionalChain(node: SyntaxNode, scopeNode: SyntaxNode): SyntaxNode[] {
  const out: SyntaxNode[] = [];
  for (let n = node.parent; n && n !== scopeNode; n = n.parent) if (CONDITIONAL_TYPES.has(n.type)) out.push(n);
  return out;
}

/** True when a node lies inside a function or lambda nested in the scope node. */
function insideNestedFunction(node: SyntaxNode, scopeNode: SyntaxNode): boolean {
  for (let n = node.parent; n && n !== scopeNode; n = n.parent) if (n.type === 'function_definition' || n.type === 'lambda') return true;
  return false;
}

/** Offset at which a binding takes effect: after the value it is bound to has been evaluated. */
function bindingPoint(b: Binding): number {
  const value = b.kind === 'assign' || b.kind === 'augassign' || b.kind === 'walrus' || b.kind === 'with' || b.kind === 'for' || b.kind === 'comprehension' ? (b.value ?? b.unpack?.from ?? null) : null;
  return value ? Math.max(b.node.start, value.end) : b.node.start;
}

/**
 * Start offsets (sorted) of the documenting comments of a node's file, found once per file: tool directives
 * (`# noqa`, `# type: ignore`, suppressions, test markers) document nothing.
 */
function documentingComments(sem: Semantics, node: SyntaxNode): number[] {
  const commentStarts = sem.workspace.memoTable<object, number[]>('elbo-scale-mismatch:comments');
  const cached = commentStarts.get(node.file);
  if (cached) return cached;
  const starts = node.file.nodes.filter((c) => c.type === 'comment' && !/^#\s*(noqa|type:|pragma|noisewise:|fmt:|pylint:|expect\[|\^)/.test(c.text)).map((c) => c.start);
  commentStarts.set(node.file, starts);
  return starts;
}

/** True when a comment sits on the line of a node (or on the line just above it). */
function hasCommentOnLine(sem: Semantics, node: SyntaxNode): boolean {
  const text = node.file.text;
  const lineStart = text.lastIndexOf('\n', node.start - 1) + 1;
  const lineEnd = text.indexOf('\n', node.end);
  const end = lineEnd === -1 ? text.length : lineEnd;
  const prevStart = lineStart > 0 ? text.lastIndexOf('\n', lineStart - 2) + 1 : lineStart;
  const starts = documentingComments(sem, node);
  // The first comment at or after the previous line's start (binary search), then the few up to the line's end.
  for (let i = firstAtLeast(starts, prevStart); i < starts.length && starts[i]! < end; i++) {
    const c = starts[i]!;
    if (c >= lineStart) return true;
    if (text.slice(prevStart, c).trim() === '') return true;
  }
  return false;
}

/** The first dimension of a size argument: `(n, d)`, `[n, d]`, `n`. */
function firstDimension(sem: Semantics, size: SyntaxNode): number | null {
  const s = unwrapParens(size);
  const first = s.type === 'tuple' || s.type === 'list' ? s.namedChildren[0] : s;
  const folded = first ? sem.fold(first) : null;
  return typeof folded === 'number' ? folded : null;
}

/** Rows of an array made by a factory (`torch.randn(n, d)`, `torch.zeros((n, d))`, `np.random.rand(n, d)`, `size=(n, d)`). */
function sizeArgument(sem: Semantics, call: SyntaxNode, q: string): number | null {
  const sizeKw = sem.argument(call, 99, 'size');
  if (sizeKw) return firstDimension(sem, sizeKw);
  if (/\.(normal|uniform|randint)$/.test(q)) return null;
  const first = sem.argument(call, 0);
  return first ? firstDimension(sem, first) : null;
}
