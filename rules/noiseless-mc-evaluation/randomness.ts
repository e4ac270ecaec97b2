// Where a PyTorch model's randomness comes from, resolved from its class across files: randomness that eval mode
// switches off (the nn.Dropout family, `F.dropout(training=self.training)`, noise under `if self.training`) and
// randomness that stays on (weight sampling, `F.dropout` with its default `training=True`, unguarded draws).
import { type ClassInfo, type FunctionInfo, type Semantics, type SyntaxNode, unwrapParens } from '../../server/src/engine/api';

/** One source of randomness, for messages and related locations. */
export interface RandomSource {
  node: SyntaxNode;
  /** Short description, e.g. "`nn.Dropout` layers". */
  what: string;
}

/** The randomness of a model, split by whether eval mode switches it off. */
export interface Randomness {
  modeDependent: RandomSource[];
  modeIndependent: RandomSource[];
  /** Parts whose randomness cannot be told (an unknown library layer, an unresolved submodule). */
  unknown: RandomSource[];
  /** Library dropout classes found (qualified names), switched back on by the fix. */
  dropoutClasses: Set<string>;
  /** Workspace classes whose own forward has mode-dependent randomness, switched back on by the fix. */
  customClasses: Set<ClassInfo>;
}

/** Library module classes whose randomness is dropout that eval mode turns off. */
export const DROPOUT_CLASSES = new Set(['Dropout', 'Dropout1d', 'Dropout2d', 'Dropout3d', 'AlphaDropout', 'FeatureAlphaDropout']);
/** Library layers with internal dropout (switched by eval mode) when their dropout rate is not zero. */
const LAYERS_WITH_DROPOUT: Record<string, { keyword: string; defaultRate: number }> = {
  RNN: { keyword: 'dropout', defaultRate: 0 },
  LSTM: { keyword: 'dropout', defaultRate: 0 },
  GRU: { keyword: 'dropout', defaultRate: 0 },
  MultiheadAttention: { keyword: 'dropout', defaultRate: 0 },
  TransformerEncoderLayer: { keyword: 'dropout', defaultRate: 0.1 },
  TransformerDecoderLayer: { keyword: 'dropout', defaultRate: 0.1 },
  Transformer: { keyword: 'dropout', defaultRate: 0.1 },
};
/** Containers whose randomness is that of the modules given to them. */
const CONTAINERS = new Set(['Sequential', 'ModuleList', 'ModuleDict', 'TransformerEncoder', 'TransformerDecoder']);
const FUNCTIONAL_DROPOUT = new Set(['torch.nn.functional.dropout', 'torch.nn.functional.dropout1d', 'torch.nn.functional.dropout2d', 'torch.nn.functional.dropout3d', 'torch.nn.functional.alpha_dropout', 'torch.nn.functional.feature_alpha_dropout']);
const RANDOM_CALLS = new Set(['torch.randn', 'torch.randn_like', 'torch.rand', 'torch.rand_like', 'torch.randint', 'torch.randint_like', 'torch.normal', 'torch.bernoulli', 'torch.multinomial', 'torch.poisson', 'torch.randperm']);
const RANDOM_METHODS = new Set(['normal_', 'uniform_', 'bernoulli_', 'exponential_', 'cauchy_', 'log_normal_', 'geometric_', 'random_', 'rsample', 'sample']);
/** Library namespaces whose classes are known not to be stochastic modules. */
const KNOWN_SAFE_PREFIXES = ['numpy.', 'math.', 'collections.', 'builtins.', 'typing.', 'dataclasses.', 'torch.distributions.', 'pathlib.', 'functools.'];

const MAX_DEPTH = 10;

function empty(): Randomness {
  return { modeDependent: [], modeIndependent: [], unknown: [], dropoutClasses: new Set(), customClasses: new Set() };
}

function merge(into: Randomness, from: Randomness): void {
  into.modeDependent.push(...from.modeDependent);
  into.modeIndependent.push(...from.modeIndependent);
  into.unknown.push(...from.unknown);
  for (const c of from.dropoutClasses) into.dropoutClasses.add(c);
  for (const c of from.customClasses) into.customClasses.add(c);
}

/** The short library name of a torch.nn class (`torch.nn.modules.dropout.Dropout` → `Dropout`), or null. */
function torchNnClass(qualifiedName: string | null): string | null {
  if (!qualifiedName) return null;
  const m = /^torch\.nn\.(?:modules\.\w+\.)?([A-Z]\w*)$/.exec(qualifiedName);
  return m ? m[1]! : null;
}

/** The randomness of a workspace module class: its submodules (attributes) and its forward and helpers. */
export function classRandomness(sem: Semantics, cls: ClassInfo, depth = 0): Randomness {
  const memo = sem.workspace.memoTable<SyntaxNode, Randomness>('noiseless-mc-evaluation:class');
  const cached = memo.get(cls.node);
  if (cached) return cached;
  const result = empty();
  memo.set(cls.node, result);
  if (depth > MAX_DEPTH) {
    result.unknown.push({ node: cls.node, what: `\`${cls.name}\`` });
    return result;
  }
  if (sem.isSubclassOf(cls, ['flax.linen.Module', 'flax.nnx.Module', 'tensorflow.keras.Model', 'tensorflow.keras.layers.Layer', 'keras.Model', 'keras.layers.Layer'])) {
    result.unknown.push({ node: cls.node, what: `\`${cls.name}\`` });
    return result;
  }
  for (const c of sem.ancestry(cls)) {
    for (const [, bindings] of c.attributes) {
      for (const a of bindings) if (a.value) merge(result, moduleRandomness(sem, a.value, depth + 1));
    }
  }
  const before = result.modeDependent.length;
  for (const name of ['forward', '__call__']) {
    const method = sem.findMethod(cls, name);
    if (method) merge(result, functionRandomness(sem, method, cls, new Set(), depth + 1));
  }
  if (result.modeDependent.length > before) result.customClasses.add(cls);
  return result;
}

/** The randomness of a value used as a module: a constructor call, a container, a helper that builds one. */
export function moduleRandomness(sem: Semantics, expr: SyntaxNode, depth = 0, frame: Map<SyntaxNode, SyntaxNode> | null = null): Randomness {
  const out = empty();
  const node = unwrapParens(expr);
  if (depth > MAX_DEPTH) return out;
  switch (node.type) {
    case 'list':
    case 'tuple':
      for (const e of node.namedChildren) merge(out, moduleRandomness(sem, e, depth + 1, frame));
      return out;
    case 'list_comprehension':
    case 'generator_expression': {
      const body = node.child('body');
      if (body) merge(out, moduleRandomness(sem, body, depth + 1));
      return out;
    }
    case 'dictionary':
      for (const pair of node.namedChildren) {
        const v = pair.child('value');
        if (v) merge(out, moduleRandomness(sem, v, depth + 1));
      }
      return out;
    case 'list_splat': {
      const inner = node.namedChildren[0];
      if (inner) merge(out, moduleRandomness(sem, inner, depth + 1));
      return out;
    }
    case 'identifier': {
      const type = sem.typeOf(node);
      if (type?.kind === 'instance') return sem.isModuleClass(type.cls) ? classRandomness(sem, type.cls, depth + 1) : out;
      for (const b of sem.bindings(node)) {
        const passed = b.kind === 'param' ? frame?.get(b.node) : undefined;
        if (passed) merge(out, moduleRandomness(sem, passed, depth + 1));
        else if ((b.kind === 'assign' || b.kind === 'walrus') && b.value && !b.iterated) merge(out, moduleRandomness(sem, b.value, depth + 1, frame));
      }
      return out;
    }
    case 'attribute': {
      const type = sem.typeOf(node);
      if (type?.kind === 'instance' && sem.isModuleClass(type.cls)) return classRandomness(sem, type.cls, depth + 1);
      return out;
    }
    case 'call':
      return callRandomness(sem, node, depth);
    default:
      return out;
  }
}

function callRandomness(sem: Semantics, call: SyntaxNode, depth: number): Randomness {
  const out = empty();
  const callee = sem.callee(call);
  const symbol = callee.symbol;
  if (symbol?.kind === 'class') {
    if (sem.isModuleClass(symbol.cls)) return classRandomness(sem, symbol.cls, depth + 1);
    return out;
  }
  if (symbol?.kind === 'function') {
    // A helper that builds or passes through a module: its returns, with its parameters bound to this call's arguments.
    const fn = symbol.fn;
    const frame = new Map<SyntaxNode, SyntaxNode>();
    const offset = callee.boundMethod ? 1 : 0;
    fn.params.forEach((p, i) => {
      const arg = i < offset ? callee.receiver : sem.argument(call, i - offset, p.name);
      if (arg) frame.set(p.node, arg);
    });
    for (const r of fn.returns) merge(out, moduleRandomness(sem, r, depth + 1, frame));
    return out;
  }
  const q = callee.qualifiedName;
  const nnClass = torchNnClass(q);
  if (nnClass) {
    if (DROPOUT_CLASSES.has(nnClass)) {
      const p = sem.argument(call, 0, 'p');
      const rate = p ? sem.fold(p) : 0.5;
      if (rate === 0) return out;
      out.modeDependent.push({ node: call, what: `\`nn.${nnClass}\`` });
      out.dropoutClasses.add(`torch.nn.${nnClass}`);
      return out;
    }
    const layer = LAYERS_WITH_DROPOUT[nnClass];
    if (layer) {
      const arg = sem.argument(call, 99, layer.keyword);
      const rate = arg ? sem.fold(arg) : layer.defaultRate;
      if (rate === 0) return out;
      out.modeDependent.push({ node: call, what: `the dropout inside \`nn.${nnClass}\`` });
      out.dropoutClasses.add(nnClass === 'MultiheadAttention' || /^(RNN|LSTM|GRU)$/.test(nnClass) ? `torch.nn.${nnClass}` : 'torch.nn.Dropout');
      if (nnClass === 'Transformer') out.dropoutClasses.add('torch.nn.MultiheadAttention');
      return out;
    }
    if (CONTAINERS.has(nnClass)) {
      const args = call.child('arguments')?.namedChildren ?? [];
      for (const a of args) merge(out, moduleRandomness(sem, a.type === 'keyword_argument' ? (a.child('value') ?? a) : a, depth + 1));
      return out;
    }
    return out;
  }
  if (q && /\.[A-Z]\w*$/.test(q) && !q.startsWith('torch.') && !KNOWN_SAFE_PREFIXES.some((p) => q.startsWith(p))) out.unknown.push({ node: call, what: `\`${q.split('.').pop()}\`` });
  return out;
}

/** Randomness drawn in a function body (forward and the helpers it calls). */
function functionRandomness(sem: Semantics, fn: FunctionInfo, cls: ClassInfo, visited: Set<SyntaxNode>, depth: number): Randomness {
  const out = empty();
  if (visited.has(fn.node) || depth > MAX_DEPTH) return out;
  visited.add(fn.node);
  const body = fn.node.child('body');
  if (!body) return out;
  for (const n of bodyNodes(body)) {
    if (n.type !== 'call') continue;
    const callee = sem.callee(n);
    const q = callee.qualifiedName;
    const inner = n.child('function');
    if (inner && unwrapParens(inner).type === 'call' && DROPOUT_CLASSES.has(torchNnClass(sem.callee(unwrapParens(inner)).qualifiedName) ?? '')) {
      // `nn.Dropout(p)(x)`: a fresh module is in training mode, so this dropout is always on.
      out.modeIndependent.push({ node: n, what: 'a dropout module created inside `forward` (always in training mode)' });
      continue;
    }
    if (q && (FUNCTIONAL_DROPOUT.has(q) || q === 'torch.dropout')) {
      const flag = q === 'torch.dropout' ? sem.argument(n, 2, 'train') : sem.argument(n, 2, 'training');
      const name = `\`F.${q.split('.').pop()!}\``;
      if (flag && sem.fold(flag) === false) continue;
      if (isTrainingGuarded(sem, n, body)) out.modeDependent.push({ node: n, what: `${name} in \`${cls.name}\`, under \`if self.training\`` });
      else if (!flag) out.modeIndependent.push({ node: n, what: `${name} in \`${cls.name}\` with its default \`training=True\`` });
      else if (trainingPolarity(sem, flag) === 1) out.modeDependent.push({ node: n, what: `${name} in \`${cls.name}\` with \`training=self.training\`` });
      else out.modeIndependent.push({ node: n, what: `${name} in \`${cls.name}\` with \`training=${flag.text}\`` });
      continue;
    }
    if ((q && RANDOM_CALLS.has(q)) || (callee.method && callee.receiver && !q && RANDOM_METHODS.has(callee.method))) {
      const what = `\`${q ? q.replace(/^torch\./, 'torch.') : `.${callee.method}()`}\``;
      if (isTrainingGuarded(sem, n, body)) out.modeDependent.push({ node: n, what: `the ${what} noise of \`${cls.name}\`, guarded by \`self.training\`` });
      else out.modeIndependent.push({ node: n, what: `the ${what} noise of \`${cls.name}\`, drawn on every call` });
      continue;
    }
    if (callee.symbol?.kind === 'function') merge(out, functionRandomness(sem, callee.symbol.fn, cls, visited, depth + 1));
  }
  return out;
}

/** Nodes of a function body in preorder, without descending into nested functions, lambdas or classes. */
export function bodyNodes(body: SyntaxNode): SyntaxNode[] {
  const out: SyntaxNode[] = [];
  const stack: SyntaxNode[] = [body];
  while (stack.length) {
    const n = stack.pop()!;
    out.push(n);
    if (n !== body && (n.type === 'function_definition' || n.type === 'class_definition' || n.type === 'lambda')) continue;
    for (let i = n.children.length - 1; i >= 0; i--) stack.push(n.children[i]!);
  }
  return out;
}

/**
 * +1 when a condition holds only while the module is training (`self.training`, `self.training and …`,
 * `self.training is True`), −1 for its negation, 0 when it cannot be told.
 */
export function trainingPolarity(sem: Semantics, cond: SyntaxNode, depth = 0): number {
  // Bounded: `not not … self.training` thousands deep must not overflow the stack.
  if (depth > 16) return 0;
  const n = unwrapParens(cond);
  if (n.type === 'attribute') {
    const object = n.child('object');
    return n.child('attribute')?.text === 'training' && object && sem.isSelf(unwrapParens(object)) ? 1 : 0;
  }
  if (n.type === 'not_operator') {
    const arg = n.child('argument');
    return arg ? -trainingPolarity(sem, arg, depth + 1) : 0;
  }
  if (n.type === 'boolean_operator') {
    const op = n.child('operator')?.text;
    const left = n.child('left');
    const right = n.child('right');
    if (!left || !right) return 0;
    const l = trainingPolarity(sem, left, depth + 1);
    const r = trainingPolarity(sem, right, depth + 1);
    if (op === 'and' && (l === 1 || r === 1)) return 1;
    if (op === 'or' && (l === -1 || r === -1)) return -1;
    return 0;
  }
  if (n.type === 'comparison_operator') {
    const parts = n.namedChildren;
    const ops = n.children.filter((c) => c.field === 'operators' || c.field === 'operator').map((c) => c.text);
    if (parts.length === 2 && ops.length === 1) {
      const p = trainingPolarity(sem, parts[0]!, depth + 1);
      const v = sem.fold(parts[1]!);
      if (p !== 0 && typeof v === 'boolean' && (ops[0] === 'is' || ops[0] === '==')) return v ? p : -p;
    }
  }
  return 0;
}

/**
 * True when a node inside a function body runs only in training mode: inside `if self.training:`, the else branch
 * of `if not self.training:`, `a if self.training else b`, `self.training and a`, or after an early
 * `if not self.training: return …`.
 */
export function isTrainingGuarded(sem: Semantics, node: SyntaxNode, body: SyntaxNode): boolean {
  for (let n: SyntaxNode = node; n !== body && n.parent; n = n.parent) {
    const p = n.parent;
    if (p.type === 'if_statement' || p.type === 'elif_clause') {
      const cond = p.child('condition');
      if (cond && n.field === 'consequence' && trainingPolarity(sem, cond) === 1) return true;
    }
    if (p.type === 'else_clause' && p.parent?.type === 'if_statement') {
      const cond = p.parent.child('condition');
      const hasElif = p.parent.children.some((c) => c.type === 'elif_clause');
      if (cond && !hasElif && trainingPolarity(sem, cond) === -1) return true;
    }
    if (p.type === 'conditional_expression') {
      const [whenTrue, cond] = p.namedChildren;
      if (whenTrue && cond && n === whenTrue && trainingPolarity(sem, cond) === 1) return true;
    }
    if (p.type === 'boolean_operator' && p.child('operator')?.text === 'and' && n.field === 'right') {
      const left = p.child('left');
      if (left && trainingPolarity(sem, left) === 1) return true;
    }
    if (p.type === 'block' || p === body) {
      for (const sibling of p.namedChildren) {
        if (sibling === n || sibling.start >= n.start) break;
        if (sibling.type !== 'if_statement' || sibling.children.some((c) => c.type === 'elif_clause' || c.type === 'else_clause')) continue;
        const cond = sibling.child('condition');
        const consequence = sibling.child('consequence');
        const last = consequence?.namedChildren[consequence.namedChildren.length - 1];
        if (cond && last && (last.type === 'return_statement' || last.type === 'raise_statement') && trainingPolarity(sem, cond) === -1) return true;
      }
    }
  }
  return false;
}
