// unbounded-noise-rate, the data flow: from a noise std (or variance) back to the tensor that makes it, recording the
// monotone steps on the way, so the rule can tell a trainable α or log α from a fixed or derived one and compute its bound.
import { assignedName, type ClassInfo, type FileAnalysis, type FunctionInfo, type Semantics, type SyntaxNode, defineFileSummary, summaryOf, unwrapParens } from '../../server/src/engine/api';

/** A monotone step from the trainable tensor outwards to the noise std (or variance). */
export type Op =
  | { kind: 'exp' }
  | { kind: 'log' }
  | { kind: 'sqrt' }
  | { kind: 'pow'; k: number }
  | { kind: 'scale'; c: number }
  | { kind: 'shift'; c: number }
  | { kind: 'clamp'; max: number | null; maxNode: SyntaxNode | null; call: SyntaxNode }
  | { kind: 'sigmoid' }
  | { kind: 'tanh' }
  | { kind: 'softplus' }
  /** The odds p/(1 − p + eps) of a rate p (α of Gaussian dropout from its drop rate); `node` is the quotient. */
  | { kind: 'odds'; eps: number; node: SyntaxNode };

/** A trainable tensor declaration. */
export interface Trainable {
  declaration: SyntaxNode;
  /** The initial-value expression, when there is one. */
  init: SyntaxNode | null;
  name: string;
  attribute: { cls: ClassInfo; name: string } | null;
  /** `torch` for PyTorch parameters (the only framework the fixes rewrite). */
  framework: 'torch' | 'other';
}

/** Where a walk from a noise-rate expression ends: a trainable tensor, or any other value. */
export interface Leaf {
  node: SyntaxNode;
  trainable: Trainable | null;
  /** Steps from the leaf value outwards to the quantity that was walked (inner first). */
  ops: Op[];
  /** The expression that read the trainable tensor (where a clamp can be inserted). */
  read: SyntaxNode | null;
  /** True when an unknown call on the path may bound or transform the value (then nothing is said). */
  opaque: boolean;
}

/** A call-site binding of a helper's parameter to the argument expression (and the caller's own bindings). */
interface Frame {
  bindings: Map<SyntaxNode, { expr: SyntaxNode; frame: Frame | null }>;
}

/** Whether the walked quantity is the noise's standard deviation (α = s²) or its variance factor (α itself). */
export type Quantity = 'std' | 'variance';

/** One recognised multiplicative-noise site. */
export interface NoiseSite {
  /** The std or variance-factor expression (reported). */
  rate: SyntaxNode;
  quantity: Quantity;
  /** Constant factor already applied outside the rate expression (e.g. 0.5 in `1 + 0.5 * s * eps`). */
  outer: Op[];
  /** What the noise multiplies, when known: for the message and the additive rewrite. */
  signal: SyntaxNode | null;
  /** The noise expression ε, when there is one (not for a variance inside a local reparameterisation). */
  noise: SyntaxNode | null;
  /** The node the additive rewrite replaces, and how. */
  rewrite: { node: SyntaxNode; shape: 'product' | 'relative' | 'scale' | 'variance' } | null;
}

/** Exponential functions (qualified names). */
export const EXP = new Set(['torch.exp', 'numpy.exp', 'jax.numpy.exp', 'tensorflow.exp', 'tensorflow.math.exp', 'math.exp']);
/** Natural logarithms (qualified names). */
export const LOG = new Set(['torch.log', 'numpy.log', 'jax.numpy.log', 'tensorflow.math.log', 'math.log']);
/** Square roots (qualified names). */
export const SQRT = new Set(['torch.sqrt', 'numpy.sqrt', 'jax.numpy.sqrt', 'tensorflow.sqrt', 'tensorflow.math.sqrt', 'math.sqrt']);
const SIGMOID = new Set(['torch.sigmoid', 'torch.nn.functional.sigmoid', 'torch.special.expit', 'jax.nn.sigmoid', 'tensorflow.sigmoid', 'tensorflow.math.sigmoid']);
const TANH = new Set(['torch.tanh', 'torch.nn.functional.tanh', 'jax.numpy.tanh', 'tensorflow.tanh']);
const SOFTPLUS = new Set(['torch.nn.functional.softplus', 'jax.nn.softplus', 'tensorflow.nn.softplus']);
const CLAMP_FUNCTIONS = new Set(['torch.clamp', 'torch.clip', 'numpy.clip', 'jax.numpy.clip', 'tensorflow.clip_by_value']);
const MINIMUM_FUNCTIONS = new Set(['torch.minimum', 'torch.clamp_max', 'numpy.minimum', 'jax.numpy.minimum', 'tensorflow.minimum', 'tensorflow.math.minimum', 'builtins.min']);
/** Tensor methods that pass a value through unchanged in sign and size order. */
export const PASS_THROUGH_METHODS = new Set(['view', 'reshape', 'expand', 'expand_as', 'unsqueeze', 'squeeze', 't', 'to', 'repeat', 'clone', 'contiguous', 'float', 'double', 'half', 'cuda', 'cpu', 'flatten', 'view_as', 'reshape_as', 'detach', 'abs', 'type_as']);
const PASS_THROUGH_FUNCTIONS = new Set(['torch.reshape', 'torch.unsqueeze', 'torch.squeeze', 'torch.flatten', 'torch.abs', 'builtins.abs', 'builtins.float']);
const TENSOR_FACTORIES = new Set(['torch.tensor', 'torch.zeros', 'torch.ones', 'torch.full', 'torch.empty', 'torch.randn', 'torch.rand', 'torch.zeros_like', 'torch.ones_like', 'torch.full_like', 'torch.as_tensor']);

const MAX_DEPTH = 24;
const MAX_LEAVES = 32;

/**
 * Walks from a noise-rate expression back to where its value is made, recording the monotone steps on the way
 * (exp, sqrt, powers, constant scale and shift, clamps, sigmoid): through local names, attributes declared in
 * `__init__` (also in base classes in other files), properties, and helper functions and methods (their returns,
 * with their parameters bound to the call's arguments). A sum or product of two non-constant values ends the walk
 * at that value (α derived from several tensors is not a trainable α).
 */
export function walk(sem: Semantics, start: SyntaxNode, outer: Op[], frame: Frame | null): Leaf[] {
  const leaves: Leaf[] = [];
  const add = (l: Leaf): void => {
    leaves.push(l);
  };
  const seen = new Set<string>();
  const visit = (raw: SyntaxNode, ops: Op[], fr: Frame | null, read: SyntaxNode | null, depth: number): void => {
    if (leaves.length >= MAX_LEAVES) return;
    const node = unwrapParens(raw);
    const key = `${node.file.text.length}:${node.start}:${node.end}:${ops.length}`;
    if (depth > MAX_DEPTH || seen.has(key)) {
      leaves.push({ node, trainable: null, ops, read, opaque: true });
      return;
    }
    seen.add(key);
    const leaf = (trainable: Trainable | null, opaque = false): void => add({ node, trainable, ops, read: trainable ? read : null, opaque });
    const constant = sem.fold(node);
    if (typeof constant === 'number') return leaf(null);
    switch (node.type) {
      case 'binary_operator': {
        const op = node.child('operator')?.text;
        const left = node.child('left');
        const right = node.child('right');
        if (!left || !right) return leaf(null);
        const lv = sem.fold(left);
        const rv = sem.fold(right);
        if (op === '*' && (typeof lv === 'number' || typeof rv === 'number')) {
          const c = (typeof lv === 'number' ? lv : rv) as number;
          if (c <= 0) return leaf(null, true);
          return visit(typeof lv === 'number' ? right : left, [{ kind: 'scale', c }, ...ops], fr, read, depth + 1);
        }
        if (op === '/' && typeof rv === 'number' && rv > 0) return visit(left, [{ kind: 'scale', c: 1 / rv }, ...ops], fr, read, depth + 1);
        if (op === '/') {
          // p / (1 - p): the odds of p, which maps [0, 1) onto [0, ∞) (α from a drop rate).
          const eps = oddsDenominator(sem, left, right);
          if (eps !== null) return visit(left, [{ kind: 'odds', eps, node }, ...ops], fr, read, depth + 1);
        }
        if (op === '+' && (typeof lv === 'number' || typeof rv === 'number')) {
          const c = (typeof lv === 'number' ? lv : rv) as number;
          return visit(typeof lv === 'number' ? right : left, [{ kind: 'shift', c }, ...ops], fr, read, depth + 1);
        }
        if (op === '-' && typeof rv === 'number') return visit(left, [{ kind: 'shift', c: -rv }, ...ops], fr, read, depth + 1);
        if (op === '**' && typeof rv === 'number' && rv > 0) return visit(left, [{ kind: 'pow', k: rv }, ...ops], fr, read, depth + 1);
        return leaf(null);
      }
      case 'subscript': {
        const value = node.child('value');
        return value ? visit(value, ops, fr, read, depth + 1) : leaf(null);
      }
      case 'call':
        return visitCall(node, ops, fr, read, depth);
      case 'identifier':
        return visitName(node, ops, fr, depth);
      case 'attribute':
        return visitAttribute(node, ops, fr, depth);
      default:
        return leaf(null);
    }
  };

  const visitCall = (node: SyntaxNode, ops: Op[], fr: Frame | null, read: SyntaxNode | null, depth: number): void => {
    const callee = sem.callee(node);
    const q = callee.qualifiedName;
    const first = callee.method && callee.receiver && !q ? callee.receiver : sem.argument(node, 0);
    const step = (op: Op | null, inner: SyntaxNode | null) => {
      if (!inner) return add({ node, trainable: null, ops, read: null, opaque: true });
      visit(inner, op ? [op, ...ops] : ops, fr, read, depth + 1);
    };
    const isMethod = (name: string) => callee.method === name && !!callee.receiver && !q;
    if ((q && EXP.has(q)) || isMethod('exp')) return step({ kind: 'exp' }, first);
    if ((q && LOG.has(q)) || isMethod('log')) return step({ kind: 'log' }, first);
    if ((q && SQRT.has(q)) || isMethod('sqrt')) return step({ kind: 'sqrt' }, first);
    if ((q && SIGMOID.has(q)) || isMethod('sigmoid')) return step({ kind: 'sigmoid' }, first);
    if ((q && TANH.has(q)) || isMethod('tanh')) return step({ kind: 'tanh' }, first);
    if ((q && SOFTPLUS.has(q)) || isMethod('softplus')) return step({ kind: 'softplus' }, first);
    if (isMethod('pow') || q === 'torch.pow') {
      const e = isMethod('pow') ? sem.argument(node, 0, 'exponent') : sem.argument(node, 1, 'exponent');
      const k = e ? sem.fold(e) : null;
      if (typeof k === 'number' && k > 0) return step({ kind: 'pow', k }, first);
      return add({ node, trainable: null, ops, read: null, opaque: true });
    }
    if (isMethod('clamp') || isMethod('clip') || (q && CLAMP_FUNCTIONS.has(q))) {
      const offset = isMethod('clamp') || isMethod('clip') ? 0 : 1;
      const maxNode = sem.argument(node, offset + 1, q === 'numpy.clip' || q === 'jax.numpy.clip' ? 'a_max' : q === 'tensorflow.clip_by_value' ? 'clip_value_max' : 'max');
      if (maxNode && unwrapParens(maxNode).type !== 'none') {
        const m = sem.fold(maxNode);
        if (typeof m !== 'number') return add({ node, trainable: null, ops, read: null, opaque: true });
        return step({ kind: 'clamp', max: m, maxNode, call: node }, first);
      }
      return step({ kind: 'clamp', max: null, maxNode: null, call: node }, first);
    }
    if (isMethod('clamp_max') || (q && MINIMUM_FUNCTIONS.has(q)) || isMethod('minimum')) {
      const args = isMethod('clamp_max') || isMethod('minimum') ? [callee.receiver!, sem.argument(node, 0)] : [sem.argument(node, 0), sem.argument(node, 1)];
      const [a, b] = args;
      if (!a || !b) return add({ node, trainable: null, ops, read: null, opaque: true });
      const av = sem.fold(a) ?? constantFill(sem, a);
      const bv = sem.fold(b) ?? constantFill(sem, b);
      if (typeof bv === 'number') return step({ kind: 'clamp', max: bv, maxNode: b, call: node }, a);
      if (typeof av === 'number') return step({ kind: 'clamp', max: av, maxNode: a, call: node }, b);
      return add({ node, trainable: null, ops, read: null, opaque: true });
    }
    if (callee.method && callee.receiver && !q && ['mul', 'multiply', 'div', 'divide', 'true_divide', 'add', 'sub', 'subtract'].includes(callee.method)) {
      const arg = sem.argument(node, 0, 'other');
      const c = arg ? sem.fold(arg) : null;
      if (typeof c !== 'number' && arg && ['div', 'divide', 'true_divide'].includes(callee.method)) {
        const eps = oddsDenominator(sem, callee.receiver, arg);
        if (eps !== null) return step({ kind: 'odds', eps, node }, callee.receiver);
      }
      if (typeof c !== 'number') return add({ node, trainable: null, ops, read: null, opaque: false });
      const m = callee.method;
      if (m === 'mul' || m === 'multiply') return c > 0 ? step({ kind: 'scale', c }, callee.receiver) : add({ node, trainable: null, ops, read: null, opaque: true });
      if (m === 'add') return step({ kind: 'shift', c }, callee.receiver);
      if (m === 'sub' || m === 'subtract') return step({ kind: 'shift', c: -c }, callee.receiver);
      return c > 0 ? step({ kind: 'scale', c: 1 / c }, callee.receiver) : add({ node, trainable: null, ops, read: null, opaque: true });
    }
    if (isMethod('clamp_min')) return step({ kind: 'clamp', max: null, maxNode: null, call: node }, callee.receiver);
    if ((callee.method && callee.receiver && !q && PASS_THROUGH_METHODS.has(callee.method)) || (q && PASS_THROUGH_FUNCTIONS.has(q))) return step(null, first);
    const trainable = asTrainable(sem, node);
    if (trainable) return add({ node, trainable, ops, read, opaque: false });
    // A workspace helper: follow its returns with its parameters bound to this call's arguments.
    if (callee.symbol?.kind === 'function') {
      const fn = callee.symbol.fn;
      const bindings = new Map<SyntaxNode, { expr: SyntaxNode; frame: Frame | null }>();
      const offset = callee.boundMethod ? 1 : 0;
      if (callee.boundMethod && callee.receiver && fn.params[0]) bindings.set(fn.params[0].node, { expr: callee.receiver, frame: fr });
      fn.params.forEach((p, i) => {
        if (i < offset) return;
        const arg = sem.argument(node, i - offset, p.name);
        if (arg) bindings.set(p.node, { expr: arg, frame: fr });
      });
      if (fn.returns.length === 0) return add({ node, trainable: null, ops, read: null, opaque: true });
      for (const r of fn.returns) visit(r, ops, { bindings }, null, depth + 1);
      return;
    }
    if (q && /^torch\.(zeros|ones|full|tensor|empty)/.test(q)) return add({ node, trainable: null, ops, read: null, opaque: false });
    // Any other call may transform or bound the value: say nothing.
    leaves.push({ node, trainable: null, ops, read: null, opaque: true });
  };

  const visitName = (node: SyntaxNode, ops: Op[], fr: Frame | null, depth: number): void => {
    const bindings = sem.bindings(node);
    if (bindings.length === 0) return add({ node, trainable: null, ops, read: null, opaque: false });
    for (const b of bindings) {
      if (b.kind === 'param') {
        const bound = fr?.bindings.get(b.node);
        if (bound) visit(bound.expr, ops, bound.frame, null, depth + 1);
        else leaves.push({ node: b.node, trainable: null, ops, read: null, opaque: false });
        continue;
      }
      if ((b.kind === 'assign' || b.kind === 'walrus') && b.value && !b.iterated) {
        const value = unwrapParens(b.value);
        const trainable = value.type === 'call' ? asTrainable(sem, value) : null;
        if (trainable) leaves.push({ node: value, trainable, ops, read: node, opaque: false });
        else visit(value, ops, fr, null, depth + 1);
        continue;
      }
      leaves.push({ node: b.node, trainable: null, ops, read: null, opaque: b.kind !== 'import' && b.kind !== 'def' && b.kind !== 'class' });
    }
  };

  const visitAttribute = (node: SyntaxNode, ops: Op[], fr: Frame | null, depth: number): void => {
    const object = node.child('object');
    const attr = node.child('attribute')?.text;
    if (!object || !attr) return add({ node, trainable: null, ops, read: null, opaque: false });
    const type = typeOfInFrame(sem, object, fr);
    if (type?.kind !== 'instance') return add({ node, trainable: null, ops, read: null, opaque: false });
    const getter = sem.findMethod(type.cls, attr);
    if (getter && isPropertyGetter(getter)) {
      const bindings = new Map<SyntaxNode, { expr: SyntaxNode; frame: Frame | null }>();
      if (getter.params[0]) bindings.set(getter.params[0].node, { expr: object, frame: fr });
      for (const r of getter.returns) visit(r, ops, { bindings }, null, depth + 1);
      return;
    }
    const assigned = sem.attributeBindings(type.cls, attr);
    if (assigned.length === 0) return add({ node, trainable: null, ops, read: null, opaque: false });
    for (const a of assigned) {
      if (!a.value) {
        leaves.push({ node: a.target, trainable: null, ops, read: null, opaque: false });
        continue;
      }
      const value = unwrapParens(a.value);
      const trainable = value.type === 'call' ? asTrainable(sem, value, { cls: a.cls, name: attr }) : null;
      if (trainable) leaves.push({ node: value, trainable, ops, read: node, opaque: false });
      else visit(value, ops, null, null, depth + 1);
    }
  };

  visit(start, outer, frame, null, 0);
  return leaves;
}

/** An in-place clamp found anywhere in the workspace: of an attribute by name, or of parameters selected by a name test. */
interface InPlaceClamp {
  /** The attribute name (`log_alpha` in `layer.log_alpha.data.clamp_(max=0)`), or null for a name test. */
  attribute: string | null;
  /** Strings a guarding condition looks for in a parameter's name (`'log_alpha' in name`). */
  nameTests: string[];
  /**
   * The classes whose instances the clamp applies to, when the code tells (`self.log_alpha` in a method,
   * `m.log_alpha` under `isinstance(m, C)`, a typed receiver); null when it does not (then any class with the attribute).
   */
  classes: ClassInfo[] | null;
  max: number;
  maxNode: SyntaxNode;
  node: SyntaxNode;
}

/**
 * In-place bounds applied outside the forward pass, e.g. after each optimiser step:
 * `self.log_alpha.data.clamp_(max=0.0)`, `p.data.clamp_(max=0)` under `if 'log_alpha' in name:`, and
 * `x.data = torch.clamp(x.data, max=…)`. They bound the trainable tensor itself.
 */
function clampsIn(sem: Semantics, analysis: FileAnalysis): InPlaceClamp[] {
  const memo = sem.workspace.memoTable<string, InPlaceClamp[]>('unbounded-noise-rate:in-place');
  const cached = memo.get(analysis.file.absPath);
  if (cached) return cached;
  const out: InPlaceClamp[] = [];
  memo.set(analysis.file.absPath, out);
  for (const n of analysis.syntax.nodes) {
    let target: SyntaxNode | null = null;
    let maxNode: SyntaxNode | null = null;
    if (n.type === 'call') {
      const fn = n.child('function');
      const f = fn ? unwrapParens(fn) : null;
      const method = f?.type === 'attribute' ? f.child('attribute')?.text : null;
      if (!f || !method || !['clamp_', 'clip_', 'clamp_max_'].includes(method)) continue;
      target = f.child('object');
      maxNode = method === 'clamp_max_' ? sem.argument(n, 0, 'max') : sem.argument(n, 1, 'max');
    } else if (n.type === 'assignment') {
      const right = n.child('right');
      const left = n.child('left');
      if (!right || !left || unwrapParens(right).type !== 'call') continue;
      const call = unwrapParens(right);
      const callee = sem.callee(call);
      if (callee.qualifiedName === 'torch.clamp' || callee.qualifiedName === 'torch.clip') maxNode = sem.argument(call, 2, 'max');
      else if (callee.method === 'clamp' || callee.method === 'clip') maxNode = sem.argument(call, 1, 'max');
      else continue;
      target = left;
    }
    if (!target || !maxNode) continue;
    const max = sem.fold(maxNode);
    if (typeof max !== 'number') continue;
    let t = unwrapParens(target);
    if (t.type === 'attribute' && t.child('attribute')?.text === 'data' && t.child('object')) t = unwrapParens(t.child('object')!);
    if (t.type === 'attribute') out.push({ attribute: t.child('attribute')?.text ?? null, nameTests: [], classes: receiverClasses(sem, t.child('object'), n), max, maxNode, node: n });
    else if (t.type === 'identifier') {
      const tests: string[] = [];
      for (let a: SyntaxNode | null = n.parent; a; a = a.parent) {
        if (a.type === 'function_definition') break;
        if (a.type !== 'if_statement' && a.type !== 'elif_clause') continue;
        const cond = a.child('condition');
        if (!cond) continue;
        for (const x of cond.subtree()) if (x.type === 'string_content') tests.push(x.text);
      }
      if (tests.length > 0) out.push({ attribute: null, nameTests: tests, classes: null, max, maxNode, node: n });
    }
  }
  return out;
}

/** What a file's in-place clamps bound, as plain data that outlives the file's syntax tree (see `fileSummary`). */
interface ClampSummary {
  attribute: string | null;
  nameTests: string[];
}

/** Each file's in-place clamps, by the names they bound. */
export const IN_PLACE_CLAMPS = defineFileSummary<ClampSummary[]>({
  name: 'unbounded-noise-rate:in-place-clamps',
  compute: (sem, analysis) => clampsIn(sem, analysis).map((c) => ({ attribute: c.attribute, nameTests: c.nameTests })),
});

/**
 * In-place clamps anywhere in the workspace that may bound a trainable tensor of this name. Each file is scanned
 * once (its summary is kept across cache trims); only files with a clamp of a matching name are analysed again here.
 */
function inPlaceClampsFor(sem: Semantics, name: string): InPlaceClamp[] {
  // The files whose summary has a clamp at all, listed once per memo lifetime.
  const memo = sem.workspace.memoTable<string, { absPath: string; clamps: ClampSummary[] }[]>('unbounded-noise-rate:clamping-files');
  let clamping = memo.get('all');
  if (!clamping) {
    clamping = [];
    for (const file of sem.workspace.allFiles()) {
      const clamps = summaryOf(sem, IN_PLACE_CLAMPS, file.absPath);
      if (clamps && clamps.length > 0) clamping.push({ absPath: file.absPath, clamps });
    }
    memo.set('all', clamping);
  }
  const out: InPlaceClamp[] = [];
  for (const { absPath, clamps } of clamping) {
    if (!clamps.some((c) => clampMatches(c, name))) continue;
    const analysis = sem.workspace.analysis(absPath);
    if (analysis) out.push(...clampsIn(sem, analysis).filter((c) => clampMatches(c, name)));
  }
  return out;
}

function clampMatches(c: { attribute: string | null; nameTests: string[] }, name: string): boolean {
  return c.attribute !== null ? c.attribute === name : c.nameTests.some((t) => t.length > 0 && name.includes(t));
}

/**
 * The classes an in-place clamp's receiver is an instance of: `self` in a method, a value of a known workspace class,
 * or a name narrowed by an enclosing `if isinstance(name, C)` (or a tuple of classes). Null when unknown.
 */
function receiverClasses(sem: Semantics, receiver: SyntaxNode | null, at: SyntaxNode): ClassInfo[] | null {
  if (!receiver) return null;
  const r = unwrapParens(receiver);
  if (r.type === 'identifier' && sem.isSelf(r)) {
    const cls = sem.selfClass(r);
    return cls ? [cls] : null;
  }
  const type = sem.typeOf(r);
  if (type?.kind === 'instance') return [type.cls];
  if (r.type !== 'identifier') return null;
  for (let a: SyntaxNode | null = at.parent; a; a = a.parent) {
    if (a.type === 'function_definition' || a.type === 'class_definition') break;
    if (a.type !== 'if_statement' && a.type !== 'elif_clause') continue;
    const condition = a.child('condition');
    const call = condition ? unwrapParens(condition) : null;
    if (call?.type !== 'call' || sem.callee(call).qualifiedName !== 'builtins.isinstance') continue;
    const subject = sem.argument(call, 0);
    const kinds = sem.argument(call, 1);
    if (!subject || !kinds || unwrapParens(subject).text !== r.text) continue;
    const k = unwrapParens(kinds);
    const out: ClassInfo[] = [];
    for (const e of k.type === 'tuple' ? k.namedChildren : [k]) {
      const symbol = sem.symbol(e);
      // A library class (or anything unresolved) in the test: the clamp may reach any class, say nothing narrower.
      if (symbol?.kind !== 'class') return null;
      out.push(symbol.cls);
    }
    return out.length ? out : null;
  }
  return null;
}

/** A leaf whose trainable tensor is clamped in place elsewhere gets that clamp as its first step. */
export function withInPlaceBound(sem: Semantics, leaf: Leaf): Leaf {
  const name = leaf.trainable?.attribute?.name ?? leaf.trainable?.name;
  if (!leaf.trainable || !name) return leaf;
  let best: InPlaceClamp | null = null;
  const owner = leaf.trainable.attribute?.cls ?? null;
  // A clamp on instances of known classes bounds only an attribute of those classes (or of their bases and subclasses).
  const related = (classes: ClassInfo[] | null) => classes === null || owner === null || classes.some((c) => sem.ancestry(c).some((a) => sameClass(a, owner)) || sem.ancestry(owner).some((a) => sameClass(a, c)));
  for (const c of inPlaceClampsFor(sem, name)) {
    if (related(c.classes) && (!best || c.max < best.max)) best = c;
  }
  if (!best) return leaf;
  return { ...leaf, ops: [{ kind: 'clamp', max: best.max, maxNode: best.maxNode, call: best.node }, ...leaf.ops] };
}

/**
 * True when two class records describe the same class definition. A memoised record may come from an earlier analysis
 * of its file (the workspace re-analyses files it evicted from its cache), so identity alone is not enough.
 */
function sameClass(a: ClassInfo, b: ClassInfo): boolean {
  return a === b || (a.qualifiedName === b.qualifiedName && a.node.start === b.node.start && a.node.end === b.node.end);
}

/** The type of an expression, seeing through a helper's `self` bound to the caller's receiver. */
function typeOfInFrame(sem: Semantics, expr: SyntaxNode, frame: Frame | null): ReturnType<Semantics['typeOf']> {
  // A bounded loop out through the caller frames, not recursion.
  let n = unwrapParens(expr);
  for (let fr = frame, steps = 0; fr && n.type === 'identifier' && steps < MAX_DEPTH; steps++) {
    const b = sem.bindings(n);
    const bound = b.length === 1 && b[0]!.kind === 'param' ? fr.bindings.get(b[0]!.node) : undefined;
    if (!bound) break;
    n = unwrapParens(bound.expr);
    fr = bound.frame;
  }
  return sem.typeOf(n);
}

function isPropertyGetter(fn: FunctionInfo): boolean {
  return fn.decorators.some((d) => /^@\s*(property|functools\.cached_property|cached_property)\s*$/.test(d.text.trim()));
}

/** The trainable tensor a value-creating call makes, if it makes one. */
function asTrainable(sem: Semantics, call: SyntaxNode, attribute: { cls: ClassInfo; name: string } | null = null): Trainable | null {
  const callee = sem.callee(call);
  const q = callee.qualifiedName;
  const name = attribute?.name ?? assignedName(call) ?? 'this tensor';
  if (q === 'torch.nn.Parameter' || q === 'torch.nn.parameter.Parameter') {
    const flag = sem.argument(call, 1, 'requires_grad');
    if (flag && sem.fold(flag) === false) return null;
    return { declaration: call, init: sem.argument(call, 0, 'data'), name, attribute, framework: 'torch' };
  }
  if (q === 'tensorflow.Variable') {
    const flag = sem.argument(call, 99, 'trainable');
    if (flag && sem.fold(flag) === false) return null;
    return { declaration: call, init: sem.argument(call, 0, 'initial_value'), name, attribute, framework: 'other' };
  }
  if (callee.method === 'param' && callee.receiver && sem.isSelf(unwrapParens(callee.receiver))) {
    const cls = sem.selfClass(call);
    if (cls && sem.isSubclassOf(cls, ['flax.linen.Module', 'flax.nnx.Module'])) {
      const label = sem.argument(call, 0);
      const folded = label ? sem.fold(label) : null;
      return { declaration: call, init: null, name: typeof folded === 'string' ? folded : name, attribute, framework: 'other' };
    }
    return null;
  }
  if (callee.method === 'add_weight' && callee.receiver && sem.isSelf(unwrapParens(callee.receiver))) {
    // Keras: self.add_weight(...) inside a Layer is trainable unless trainable=False.
    const cls = sem.selfClass(call);
    if (!cls || !sem.isSubclassOf(cls, ['tensorflow.keras.layers.Layer', 'keras.layers.Layer', 'tensorflow.keras.Model', 'keras.Model', 'tf_keras.layers.Layer'])) return null;
    const flag = sem.argument(call, 99, 'trainable');
    if (flag && sem.fold(flag) === false) return null;
    const label = sem.argument(call, 99, 'name');
    const folded = label ? sem.fold(label) : null;
    return { declaration: call, init: null, name: attribute?.name ?? (typeof folded === 'string' ? folded : name), attribute, framework: 'other' };
  }
  if (callee.method === 'requires_grad_' && callee.receiver) {
    const flag = sem.argument(call, 0, 'requires_grad');
    if (flag && sem.fold(flag) === false) return null;
    return { declaration: call, init: callee.receiver, name, attribute, framework: 'other' };
  }
  if (q && TENSOR_FACTORIES.has(q)) {
    const flag = sem.argument(call, 99, 'requires_grad');
    if (flag && sem.fold(flag) === true) return { declaration: call, init: null, name, attribute, framework: 'other' };
  }
  return null;
}

/** Applies a monotone step to a value (used for upper bounds and initial values). */
export function applyOp(op: Op, x: number): number {
  switch (op.kind) {
    case 'exp':
      return Math.exp(x);
    case 'log':
      return x <= 0 ? Number.NEGATIVE_INFINITY : Math.log(x);
    case 'sqrt':
      return x <= 0 ? 0 : Math.sqrt(x);
    case 'pow':
      return x <= 0 ? 0 : x ** op.k;
    case 'scale':
      return x * op.c;
    case 'shift':
      return x + op.c;
    case 'clamp':
      return op.max === null ? x : Math.min(x, op.max);
    case 'sigmoid':
      return 1 / (1 + Math.exp(-x));
    case 'tanh':
      return Math.tanh(x);
    case 'softplus':
      return x > 30 ? x : Math.log1p(Math.exp(x));
    case 'odds':
      // Increasing on (−∞, 1 + eps), where the denominator reaches 0 and the odds grow without limit.
      return x >= 1 + op.eps ? Number.POSITIVE_INFINITY : x / (1 - x + op.eps);
  }
}

/** Inverse of a monotone step (for the clamp bound on the trainable tensor that makes α = 1). */
export function invertOp(op: Op, y: number): number {
  switch (op.kind) {
    case 'exp':
      return y <= 0 ? Number.NEGATIVE_INFINITY : Math.log(y);
    case 'log':
      return Math.exp(y);
    case 'sqrt':
      return y * y;
    case 'pow':
      return y ** (1 / op.k);
    case 'scale':
      return y / op.c;
    case 'shift':
      return y - op.c;
    case 'clamp':
      return y;
    case 'sigmoid':
      return y <= 0 || y >= 1 ? Number.NaN : Math.log(y / (1 - y));
    case 'tanh':
      return Math.abs(y) >= 1 ? Number.NaN : Math.atanh(y);
    case 'softplus':
      return y <= 0 ? Number.NaN : y > 30 ? y : Math.log(Math.expm1(y));
    case 'odds':
      return y <= -1 ? Number.NaN : (y * (1 + op.eps)) / (1 + y);
  }
}

/** α from the walked quantity: a std s gives α = s², a variance factor is α. */
function alphaOf(quantity: Quantity, value: number): number {
  return quantity === 'std' ? value * value : value;
}

/** The largest α the trainable paths allow (Infinity when nothing bounds it). */
export function upperBoundOfAlpha(leaves: Leaf[], quantity: Quantity): { alphaMax: number; leaf: Leaf } | null {
  let best: { alphaMax: number; leaf: Leaf } | null = null;
  for (const leaf of leaves) {
    let upper = Number.POSITIVE_INFINITY;
    for (const op of leaf.ops) upper = applyOp(op, upper);
    if (Number.isNaN(upper)) continue;
    const alphaMax = alphaOf(quantity, upper);
    if (!best || alphaMax > best.alphaMax) best = { alphaMax, leaf };
  }
  return best;
}

/** The initial α, when the trainable tensor's initial value is one constant. */
export function initialAlpha(sem: Semantics, leaf: Leaf, quantity: Quantity): number | null {
  const init = leaf.trainable?.init;
  if (!init) return null;
  const t0 = constantFill(sem, init);
  if (t0 === null) return null;
  let v = t0;
  for (const op of leaf.ops) v = applyOp(op, v);
  const a = alphaOf(quantity, v);
  return Number.isFinite(a) ? a : null;
}

/** The constant an initial value fills the tensor with (`torch.full(shape, c)`, `c * torch.ones(...)`, a number). */
function constantFill(sem: Semantics, init: SyntaxNode, depth = 0): number | null {
  // Bounded: chains of `* 2` or `.float()` thousands long must not overflow the stack.
  if (depth > MAX_DEPTH) return null;
  const n = unwrapParens(init);
  const v = sem.fold(n);
  if (typeof v === 'number') return v;
  if (n.type === 'call') {
    const callee = sem.callee(n);
    const q = callee.qualifiedName;
    if (q === 'torch.full' || q === 'torch.full_like') {
      const fill = sem.argument(n, 1, 'fill_value');
      const f = fill ? sem.fold(fill) : null;
      return typeof f === 'number' ? f : null;
    }
    if (q === 'torch.ones' || q === 'torch.ones_like') return 1;
    if (q === 'torch.zeros' || q === 'torch.zeros_like') return 0;
    if (q === 'torch.tensor' || q === 'torch.as_tensor') {
      const data = sem.argument(n, 0, 'data');
      const f = data ? sem.fold(data) : null;
      return typeof f === 'number' ? f : null;
    }
    if (callee.method && callee.receiver && ['float', 'double', 'to', 'clone'].includes(callee.method)) return constantFill(sem, callee.receiver, depth + 1);
    if (callee.method === 'fill_' && callee.receiver) {
      const f = sem.argument(n, 0);
      const fv = f ? sem.fold(f) : null;
      return typeof fv === 'number' ? fv : null;
    }
  }
  if (n.type === 'binary_operator') {
    const op = n.child('operator')?.text;
    const left = n.child('left');
    const right = n.child('right');
    if (!left || !right) return null;
    const lv = sem.fold(left);
    const rv = sem.fold(right);
    if (op === '*' && typeof lv === 'number') {
      const inner = constantFill(sem, right, depth + 1);
      return inner === null ? null : lv * inner;
    }
    if (op === '*' && typeof rv === 'number') {
      const inner = constantFill(sem, left, depth + 1);
      return inner === null ? null : rv * inner;
    }
    if ((op === '+' || op === '-') && typeof rv === 'number') {
      const inner = constantFill(sem, left, depth + 1);
      return inner === null ? null : op === '+' ? inner + rv : inner - rv;
    }
  }
  return null;
}

/**
 * For a quotient `p / d`: when d is `a - p` with a ≥ 1, or `(a - p) + c` with c ≥ 0 (the same p, read the same way),
 * the quotient is the odds p/(1 − p + eps); returns that eps, else null.
 */
function oddsDenominator(sem: Semantics, numerator: SyntaxNode, denominator: SyntaxNode): number | null {
  let d = unwrapParens(denominator);
  let extra = 0;
  if (d.type === 'binary_operator' && d.child('operator')?.text === '+') {
    const l = d.child('left');
    const r = d.child('right');
    const lv = l ? sem.fold(l) : null;
    const rv = r ? sem.fold(r) : null;
    if (typeof rv === 'number' && l) {
      extra = rv;
      d = unwrapParens(l);
    } else if (typeof lv === 'number' && r) {
      extra = lv;
      d = unwrapParens(r);
    } else return null;
  }
  if (d.type !== 'binary_operator' || d.child('operator')?.text !== '-') return null;
  const a = sem.fold(d.child('left')!);
  const subtracted = d.child('right');
  if (typeof a !== 'number' || !subtracted || !sameOperand(sem, numerator, subtracted)) return null;
  const eps = a - 1 + extra;
  return eps >= 0 ? eps : null;
}

/** True when two expressions read the same value: the same text, with every name in them bound the same way. */
function sameOperand(sem: Semantics, a: SyntaxNode, b: SyntaxNode): boolean {
  const x = unwrapParens(a);
  const y = unwrapParens(b);
  if (x.text.replace(/\s+/g, '') !== y.text.replace(/\s+/g, '')) return false;
  const names = (n: SyntaxNode) => n.subtree().filter((c) => c.type === 'identifier' && !(c.parent?.type === 'attribute' && c.field === 'attribute'));
  const xs = names(x);
  const ys = names(y);
  if (xs.length !== ys.length) return false;
  return xs.every((n, i) => {
    const bx = sem.bindings(n);
    const by = sem.bindings(ys[i]!);
    return bx.length === by.length && bx.every((bnd) => by.includes(bnd));
  });
}
