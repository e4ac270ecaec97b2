// Decomposes an optimised loss into its additive terms for elbo-scale-mismatch: the data term (torch losses with
// their reduction, hand-written likelihoods, `-dist.log_prob(y)`), the KL-like term (kl_divergence, KL methods of
// the model found through the workspace, closed-form Gaussian KLs, log q − log p estimates), and the factors on each.
import { type Semantics, type SyntaxNode, unwrapParens } from '../../server/src/engine/api';
import { type Flow, type Frame, type Value } from './flow';
import { constant, ONE, over, type Scale, times } from './scale';

/** One additive term of a loss. */
export interface Term {
  /** `data`: the likelihood term; `kl`: a KL-to-prior term; `wlogp`: a log-density of sampled weights (half of log q − log p). */
  kind: 'data' | 'kl' | 'wlogp';
  /** The recognised expression (the loss call, the KL call, the reduction). */
  core: SyntaxNode;
  /**
   * Data terms: the reduction over the minibatch (null while still per example). KL terms: `sum` for the total
   * KL, `mean` for a KL averaged over the weights, null while still per weight.
   */
  reduction: 'mean' | 'sum' | null;
  /** Product of the factors met on the way from the loss to the term. */
  scale: Scale;
  sign: 1 | -1;
  /** Tensors the data term is computed from (to tell minibatch training from full-batch training). */
  inputs: Value[];
  /** The reduction call that set `reduction` (`.mean()` of a KL averaged over the weights), when there is one. */
  reducer?: SyntaxNode;
  /** A KL written out in closed form: number literals multiplied onto it in the same expression belong to the formula (the ½). */
  closedForm?: boolean;
}

/**
 * Where data terms and KL terms are first added together. The combination carries its own terms (as they are
 * transformed on the way up to the optimised root), so that each `+` is judged with the scale facts that reach it,
 * whichever alternative definition of a name it comes from.
 */
export interface Combination {
  node: SyntaxNode;
  /** The operand holding the data term and the one holding the KL term (null for combinations such as `sum([...])`). */
  dataSide: SyntaxNode | null;
  klSide: SyntaxNode | null;
  /** Cores of the data terms and of the KL terms this combination adds. */
  dataCores: SyntaxNode[];
  klCores: SyntaxNode[];
  /** The data terms and the KL terms this combination adds, with the factors and reductions applied up to the root. */
  data: Term[];
  kl: Term[];
  /** True when the data operand also holds KL terms (then the data operand must not be rescaled). */
  dataSideHasKl: boolean;
}

/** The terms of an expression and every place where data terms meet KL terms. */
export interface Expansion {
  terms: Term[];
  combos: Combination[];
}

const EMPTY: Expansion = { terms: [], combos: [] };

/** Records the combinations made by adding two operands (each KL term is combined once, where it first meets data). */
function combine(node: SyntaxNode, l: Expansion, r: Expansion, left: SyntaxNode | null, right: SyntaxNode | null): Combination[] {
  const combos = [...l.combos, ...r.combos];
  const covered = new Set(combos.flatMap((c) => c.klCores));
  const add = (data: Expansion, kl: Expansion, dataSide: SyntaxNode | null, klSide: SyntaxNode | null) => {
    const klTerms = kl.terms.filter((t) => t.kind === 'kl' && !covered.has(t.core));
    const dataTerms = data.terms.filter((t) => t.kind === 'data');
    if (klTerms.length === 0 || dataTerms.length === 0) return;
    combos.push({ node, dataSide, klSide, dataCores: dataTerms.map((t) => t.core), klCores: klTerms.map((t) => t.core), data: dataTerms, kl: klTerms, dataSideHasKl: has(data, 'kl') || has(kl, 'data') });
    for (const t of klTerms) covered.add(t.core);
  };
  if (has(l, 'data') && has(r, 'kl')) add(l, r, left, right);
  if (has(r, 'data') && has(l, 'kl')) add(r, l, right, left);
  return combos;
}

/** Applies a change to every term of an expansion, the terms held by its combinations included. */
function mapTerms(e: Expansion, change: (t: Term) => Term): Expansion {
  if (e.terms.length === 0 && e.combos.length === 0) return e;
  return { terms: e.terms.map(change), combos: e.combos.map((c) => ({ ...c, data: c.data.map(change), kl: c.kl.map(change) })) };
}

const LOSS_FUNCTIONS = ['cross_entropy', 'nll_loss', 'mse_loss', 'l1_loss', 'smooth_l1_loss', 'huber_loss', 'binary_cross_entropy', 'binary_cross_entropy_with_logits', 'gaussian_nll_loss', 'poisson_nll_loss'];
const LOSS_CLASSES = ['CrossEntropyLoss', 'NLLLoss', 'MSELoss', 'L1Loss', 'SmoothL1Loss', 'HuberLoss', 'BCELoss', 'BCEWithLogitsLoss', 'GaussianNLLLoss', 'PoissonNLLLoss'];
const TORCH_LOSS_FUNCTIONS = LOSS_FUNCTIONS.map((n) => `torch.nn.functional.${n}`);
const TORCH_LOSS_CLASSES = LOSS_CLASSES.flatMap((n) => [`torch.nn.${n}`, `torch.nn.modules.loss.${n}`]);
const KL_DIVERGENCE = ['torch.distributions.kl_divergence', 'torch.distributions.kl.kl_divergence', 'pyro.distributions.kl_divergence', 'pyro.distributions.kl.kl_divergence'];
/** Library functions that return the summed KL of a model's Bayesian layers (from memory: bayesian-torch's helper). */
const LIBRARY_KL_FUNCTIONS = ['bayesian_torch.models.dnn_to_bnn.get_kl_loss'];
/** Distillation / divergence-between-outputs losses: never a KL to the prior. */
const NOT_PRIOR_KL = ['torch.nn.functional.kl_div', 'torch.nn.KLDivLoss', 'torch.nn.modules.loss.KLDivLoss'];
const REDUCTION_METHODS = new Set(['mean', 'sum', 'nanmean', 'nansum']);
const REDUCTION_FUNCTIONS: Record<string, 'mean' | 'sum'> = { 'torch.mean': 'mean', 'torch.sum': 'sum', 'numpy.mean': 'mean', 'numpy.sum': 'sum', 'torch.nanmean': 'mean', 'torch.nansum': 'sum' };
/** Methods and functions that stop the gradient (the value is no longer optimised). */
const GRADIENT_STOPS = new Set(['item', 'detach', 'tolist', 'numpy', 'data']);
const PASS_THROUGH = new Set(['to', 'cuda', 'cpu', 'float', 'double', 'half', 'squeeze', 'unsqueeze', 'view', 'reshape', 'flatten', 'contiguous', 'clone']);
/** Method names that a weak hint reads as "returns the KL of this module" when the receiver's class is a library class. */
const KL_METHOD_NAMES = new Set(['kl', 'kl_loss', 'kl_divergence', 'nn_kl_divergence', 'get_kl', 'kld', 'kl_div_loss']);

const MAX_DEPTH = 16;

/** Leaf classes of an expression: whether it is computed from data (minibatch, model outputs) and/or trainable parameters. */
interface LeafClasses {
  data: boolean;
  param: boolean;
}

/** Expands losses into terms. */
export class Expander {
  /** While the workspace KL-member index is being built, expansions go to a scratch table (they may see it half built). */
  private scratch: Map<SyntaxNode, Expansion> | null = null;

  constructor(readonly flow: Flow) {}

  private get sem(): Semantics {
    return this.flow.sem;
  }

  /** The terms of an expression evaluated in a frame. */
  expand(expr: SyntaxNode, frame: Frame | null, depth = 0): Expansion {
    const node = unwrapParens(expr);
    if (depth > MAX_DEPTH) return EMPTY;
    const memo = frame === null ? (this.scratch ?? this.flow.memoTable<SyntaxNode, Expansion>('elbo-scale-mismatch:expand')) : null;
    const cached = memo?.get(node);
    if (cached) return cached;
    memo?.set(node, EMPTY);
    const result = this.expandUncached(node, frame, depth);
    memo?.set(node, result);
    return result;
  }

  private expandUncached(node: SyntaxNode, frame: Frame | null, depth: number): Expansion {
    switch (node.type) {
      case 'binary_operator':
        return this.binary(node, frame, depth);
      case 'unary_operator': {
        const arg = node.child('argument');
        if (!arg) return EMPTY;
        const inner = this.expand(arg, frame, depth + 1);
        return node.child('operator')?.text === '-' ? negate(inner) : inner;
      }
      case 'identifier':
      case 'attribute':
        return this.name(node, frame, depth);
      case 'call':
        return this.call(node, frame, depth);
      case 'conditional_expression': {
        const options = node.namedChildren.filter((c) => c.type !== 'comment');
        return alternatives([options[0], options[2]].filter((c): c is SyntaxNode => !!c && !this.flow.deadUnder(c, frame)).map((c) => this.expand(c, frame, depth + 1)));
      }
      case 'subscript':
        return this.subscript(node, frame, depth);
      default:
        return EMPTY;
    }
  }

  private binary(node: SyntaxNode, frame: Frame | null, depth: number): Expansion {
    const op = node.child('operator')?.text;
    const left = node.child('left');
    const right = node.child('right');
    if (!left || !right) return EMPTY;
    if (op === '+' || op === '-') {
      const l = this.expand(left, frame, depth + 1);
      const r0 = this.expand(right, frame, depth + 1);
      // A closed form written out here (its operands hold no terms of their own, unlike `total + (...).sum()`).
      if (l.terms.length === 0 && r0.terms.length === 0 && this.isGaussianKlShape(node, frame)) return { terms: [{ kind: 'kl', core: node, reduction: null, scale: ONE, sign: 1, inputs: [], closedForm: true }], combos: [] };
      const r = op === '-' ? negate(r0) : r0;
      const all = [...l.terms, ...r.terms];
      const merged = mergeLogDensities(all, node);
      // log q − log p formed here is a new KL term: it meets data only further up.
      if (merged !== all) return { terms: merged, combos: [...l.combos, ...r.combos] };
      return { terms: all, combos: combine(node, l, r, left, right) };
    }
    if (op === '*') {
      const l = this.expand(left, frame, depth + 1);
      const r = this.expand(right, frame, depth + 1);
      if (l.terms.length && !r.terms.length) return scaleBy(l, this.flow.scaleOf(right, frame), node);
      if (r.terms.length && !l.terms.length) return scaleBy(r, this.flow.scaleOf(left, frame), node);
      return EMPTY;
    }
    if (op === '/') {
      const l = this.expand(left, frame, depth + 1);
      if (!l.terms.length) return EMPTY;
      if (this.expand(right, frame, depth + 1).terms.length) return EMPTY;
      return scaleBy(l, over(ONE, this.flow.scaleOf(right, frame)), node);
    }
    return EMPTY;
  }

  private name(node: SyntaxNode, frame: Frame | null, depth: number): Expansion {
    const values = this.flow.values(node, frame);
    const options: Expansion[] = [];
    for (const v of values) {
      if (v.binding) {
        if (v.binding.kind === 'augassign' && v.binding.value) options.push(this.augmented(v.binding.value, v.frame, depth + 1));
        else if (v.binding.unpack) options.push(this.unpacked(v.binding.unpack.from, v.binding.unpack.index, v.frame, depth + 1));
        continue;
      }
      if (v.node === node) {
        if (node.type === 'attribute') options.push(this.attributeFallback(node, frame));
        continue;
      }
      if (v.frame && this.flow.deadUnder(v.node, v.frame)) continue;
      if (v.node.type === 'augmented_assignment') options.push(this.augmented(v.node, null, depth + 1));
      else options.push(this.expand(v.node, v.frame, depth + 1));
    }
    return alternatives(options);
  }

  /** `loss += beta * kl`, `kl += layer.kl()`, `loss /= n`: the previous value combined with the right-hand side. */
  private augmented(node: SyntaxNode, frame: Frame | null, depth: number): Expansion {
    const left = node.child('left');
    const right = node.child('right');
    const op = node.child('operator')?.text;
    if (!left || !right || left.type !== 'identifier') return EMPTY;
    const previous = alternatives(
      this.flow
        .reachingBindings(left)
        .filter((b) => b.node !== left)
        .map((b) => {
          if (b.kind === 'augassign' && b.value) return this.augmented(b.value, frame, depth + 1);
          if ((b.kind === 'assign' || b.kind === 'walrus') && b.value && !b.unpack) return this.expand(b.value, frame, depth + 1);
          if (b.unpack) return this.unpacked(b.unpack.from, b.unpack.index, frame, depth + 1);
          return EMPTY;
        }),
    );
    if (op === '+=' || op === '-=') {
      const r0 = this.expand(right, frame, depth + 1);
      const r = op === '-=' ? negate(r0) : r0;
      return { terms: mergeLogDensities([...previous.terms, ...r.terms], node), combos: combine(node, previous, r, left, right) };
    }
    if (op === '*=') return scaleBy(previous, this.flow.scaleOf(right, frame));
    if (op === '/=') return scaleBy(previous, over(ONE, this.flow.scaleOf(right, frame)));
    return EMPTY;
  }

  /** Element `index` of what a call returns (`logits, kl = model(x)`). */
  private unpacked(from: SyntaxNode, index: number, frame: Frame | null, depth: number): Expansion {
    const call = unwrapParens(from);
    if (call.type !== 'call') return EMPTY;
    const resolved = this.flow.resolveCall(call, frame);
    if (!resolved) return EMPTY;
    const inner = this.flow.frameFor(call, resolved, frame);
    const options: Expansion[] = [];
    for (const r of resolved.fn.returns) {
      for (const v of this.flow.values(r, inner)) {
        const t = unwrapParens(v.node);
        if (t.type === 'tuple' || t.type === 'expression_list' || t.type === 'list') {
          const item = t.namedChildren[index];
          if (item) options.push(this.expand(item, v.frame, depth + 1));
        }
      }
    }
    return alternatives(options);
  }

  private subscript(node: SyntaxNode, frame: Frame | null, depth: number): Expansion {
    // model(x)[1] or outputs["kl"] where the call returns a literal tuple or dict.
    const value = node.child('value');
    const key = node.childrenOf('subscript')[0];
    if (!value || !key) return EMPTY;
    const folded = this.sem.fold(key);
    if (folded === null) return EMPTY;
    const options: Expansion[] = [];
    for (const v of this.flow.values(value, frame)) {
      const target = unwrapParens(v.node);
      if (typeof folded === 'number' && target.type === 'call') options.push(this.unpacked(target, folded, v.frame, depth + 1));
      if (typeof folded === 'string' && target.type === 'dictionary') {
        for (const pair of target.namedChildren) {
          const k = pair.child('key');
          const val = pair.child('value');
          if (k && val && this.sem.fold(k) === folded) options.push(this.expand(val, v.frame, depth + 1));
        }
      }
    }
    return alternatives(options);
  }

  private call(node: SyntaxNode, frame: Frame | null, depth: number): Expansion {
    const callee = this.sem.callee(node);
    const q = callee.qualifiedName;
    const method = callee.method;
    if (method && GRADIENT_STOPS.has(method)) return EMPTY;
    if (q === 'builtins.float' || q === 'builtins.int') return EMPTY;
    if (q && NOT_PRIOR_KL.includes(q)) return EMPTY;
    if (method && PASS_THROUGH.has(method) && callee.receiver) return this.expand(callee.receiver, frame, depth + 1);
    // Reductions.
    if (method && REDUCTION_METHODS.has(method) && callee.receiver) {
      const dim = this.sem.argument(node, 0, 'dim') ?? this.sem.argument(node, 99, 'axis');
      return this.reduce(node, callee.receiver, method.endsWith('sum') ? 'sum' : 'mean', dim, frame, depth);
    }
    if (q && REDUCTION_FUNCTIONS[q]) {
      const inner = this.sem.argument(node, 0, 'input');
      const dim = this.sem.argument(node, 1, 'dim') ?? this.sem.argument(node, 99, 'axis');
      return inner ? this.reduce(node, inner, REDUCTION_FUNCTIONS[q]!, dim, frame, depth) : EMPTY;
    }
    if (q === 'builtins.sum') return this.builtinSum(node, frame, depth);
    if (q === 'torch.stack' || q === 'torch.cat' || q === 'torch.hstack') return this.stacked(node, frame, depth);
    // Data terms.
    if (q && TORCH_LOSS_FUNCTIONS.includes(q)) return this.lossTerm(node, node, frame);
    const fnNode = node.child('function');
    if (fnNode && !q && (fnNode.type === 'identifier' || fnNode.type === 'attribute')) {
      // criterion(out, y) / self.criterion(out, y): a name or attribute holding a loss module.
      for (const v of this.flow.values(fnNode, frame)) {
        if (v.node.type !== 'call') continue;
        const ctor = this.sem.callee(v.node).qualifiedName;
        if (ctor && TORCH_LOSS_CLASSES.includes(ctor)) return this.lossTerm(node, v.node, frame);
        if (ctor && NOT_PRIOR_KL.includes(ctor)) return EMPTY;
      }
    }
    if (method === 'log_prob' && callee.receiver) return this.logProb(node, callee.receiver, frame, depth);
    // KL terms.
    if (q && KL_DIVERGENCE.includes(q)) {
      const a = this.sem.argument(node, 0, 'p');
      const b = this.sem.argument(node, 1, 'q');
      if (!a || !b) return EMPTY;
      const classes = this.leafClasses([a, b], frame);
      if (classes.data || !classes.param) return EMPTY;
      return { terms: [{ kind: 'kl', core: node, reduction: null, scale: ONE, sign: 1, inputs: [] }], combos: [] };
    }
    if (q && LIBRARY_KL_FUNCTIONS.includes(q)) return { terms: [{ kind: 'kl', core: node, reduction: 'sum', scale: ONE, sign: 1, inputs: [] }], combos: [] };
    // Workspace functions and methods: expand their returns with the parameters bound to this call's arguments.
    const resolved = this.flow.resolveCall(node, frame);
    if (resolved) {
      if (resolved.fn.returns.length === 0) return EMPTY;
      const inner = this.flow.frameFor(node, resolved, frame);
      // Returns on branches this call's arguments rule out (`if n_data is None: return …`) are not taken.
      return alternatives(resolved.fn.returns.filter((r) => !this.flow.deadUnder(r, inner)).map((r) => this.expand(r, inner, depth + 1)));
    }
    if (fnNode?.type === 'attribute' && method && callee.receiver) return this.methodFallback(node, method, callee.receiver, frame);
    return EMPTY;
  }

  /** Applies a reduction (`.mean()`, `.sum(-1)`, `torch.sum(x)`) to the terms of its input. */
  private reduce(node: SyntaxNode, inner: SyntaxNode, kind: 'mean' | 'sum', dim: SyntaxNode | null, frame: Frame | null, depth: number): Expansion {
    const dimValue = dim ? this.sem.fold(dim) : null;
    const overBatch = dim === null || dimValue === 0;
    const expanded = this.expand(inner, frame, depth + 1);
    if (expanded.terms.length > 0) {
      return mapTerms(expanded, (t) => {
        if (t.reduction !== null) return t;
        if (t.kind === 'data') return overBatch ? { ...t, reduction: kind, reducer: node } : t;
        // KL per weight: a sum totals it, a mean averages it over the weights.
        if (kind === 'mean') return { ...t, reduction: 'mean', reducer: node };
        return overBatch ? { ...t, reduction: 'sum', reducer: node } : t;
      });
    }
    if (this.isGaussianKlShape(inner, frame)) return { terms: [{ kind: 'kl', core: node, reduction: kind === 'mean' ? 'mean' : overBatch ? 'sum' : null, scale: ONE, sign: 1, inputs: [], reducer: node, closedForm: true }], combos: [] };
    if (this.isDataElementwise(inner, frame)) return { terms: [{ kind: 'data', core: node, reduction: overBatch ? kind : null, scale: ONE, sign: 1, inputs: [{ node: inner, frame }] }], combos: [] };
    return EMPTY;
  }

  /** `sum(m.kl() for m in model.modules())`, `sum([nll, kl])`, `sum(loss_fn(...) for _ in range(S))`. */
  private builtinSum(node: SyntaxNode, frame: Frame | null, depth: number): Expansion {
    const args = node.child('arguments');
    if (!args) return EMPTY;
    if (args.type === 'generator_expression') return this.sumOver(args, frame, depth);
    const first = args.namedChildren[0];
    if (!first) return EMPTY;
    const list = unwrapParens(first);
    if (list.type === 'list' || list.type === 'tuple') {
      const parts = list.namedChildren.map((c) => this.expand(c, frame, depth + 1));
      let acc: Expansion = EMPTY;
      for (const p of parts) acc = { terms: [...acc.terms, ...p.terms], combos: combine(node, acc, p, null, null) };
      return acc;
    }
    if (list.type === 'generator_expression' || list.type === 'list_comprehension') return this.sumOver(list, frame, depth);
    return EMPTY;
  }

  /** `torch.stack([layer.kl() for layer in ...])`: a stack of KL terms (to be summed) holds those KL terms; anything else is left alone. */
  private stacked(node: SyntaxNode, frame: Frame | null, depth: number): Expansion {
    const first = this.sem.argument(node, 0, 'tensors');
    if (!first) return EMPTY;
    const list = unwrapParens(first);
    let inner: Expansion = EMPTY;
    if (list.type === 'list' || list.type === 'tuple') inner = { terms: list.namedChildren.flatMap((c) => this.expand(c, frame, depth + 1).terms), combos: [] };
    else if (list.type === 'list_comprehension' || list.type === 'generator_expression') {
      const body = list.child('body');
      inner = body ? this.expand(body, frame, depth + 1) : EMPTY;
    }
    if (inner.terms.length === 0 || inner.combos.length > 0 || !inner.terms.every((t) => t.kind === 'kl')) return EMPTY;
    return inner;
  }

  /** The sum of a comprehension: over modules it totals their KLs; over a counter (Monte Carlo samples) it is a constant factor. */
  private sumOver(comprehension: SyntaxNode, frame: Frame | null, depth: number): Expansion {
    const body = comprehension.child('body');
    if (!body) return EMPTY;
    const inner = this.expand(body, frame, depth + 1);
    const clause = comprehension.children.find((c) => c.type === 'for_in_clause');
    const iterable = clause?.child('right');
    if (!iterable || inner.terms.length === 0) return inner;
    const info = this.flow.iterable(iterable, frame);
    if (info.kind === 'modules') return mapTerms(inner, (t) => (t.kind === 'kl' && t.reduction === null ? { ...t, reduction: 'sum' } : t));
    if (info.kind === 'counter') {
      const rangeArgs = unwrapParens(iterable).child('arguments')?.namedChildren ?? [];
      const count = rangeArgs.length === 1 ? this.sem.fold(rangeArgs[0]!) : null;
      return scaleBy(inner, typeof count === 'number' ? constant(count) : { ...ONE, coef: null });
    }
    // Attributes or lists of layers (`self.layers`): a sum of KL terms is still the total KL.
    if (inner.terms.every((t) => t.kind === 'kl')) return inner;
    return EMPTY;
  }

  /** A torch loss function or loss module call: a data term with the reduction its `reduction` argument selects. */
  private lossTerm(call: SyntaxNode, config: SyntaxNode, frame: Frame | null): Expansion {
    const reductionArg = this.sem.argument(config, 99, 'reduction');
    const folded = reductionArg ? this.sem.fold(reductionArg) : 'mean';
    let reduction: 'mean' | 'sum' | null;
    if (folded === 'mean' || folded === 'sum') reduction = folded;
    else if (folded === 'none') reduction = null;
    else if (reductionArg) return EMPTY;
    else reduction = 'mean';
    // Deprecated size_average / reduce arguments.
    const sizeAverage = this.sem.argument(config, 99, 'size_average');
    const reduce = this.sem.argument(config, 99, 'reduce');
    if (reduce && this.sem.fold(reduce) === false) reduction = null;
    else if (sizeAverage && this.sem.fold(sizeAverage) === false) reduction = 'sum';
    const inputs = [this.sem.argument(call, 0, 'input'), this.sem.argument(call, 1, 'target')].filter((a): a is SyntaxNode => !!a).map((node) => ({ node, frame }));
    return { terms: [{ kind: 'data', core: call, reduction, scale: ONE, sign: 1, inputs }], combos: [] };
  }

  /** `dist.log_prob(x)`: a data log-likelihood when data is involved, a log-density of sampled weights otherwise. */
  private logProb(call: SyntaxNode, receiver: SyntaxNode, frame: Frame | null, depth: number): Expansion {
    const arg = this.sem.argument(call, 0, 'value') ?? this.sem.argument(call, 0);
    if (!arg) return EMPTY;
    // A workspace distribution class whose log_prob returns a sum is already reduced over its elements.
    const resolved = this.flow.resolveCall(call, frame);
    const reduction = resolved && resolved.fn.returns.length > 0 && resolved.fn.returns.every((r) => this.isSumReduction(r, depth)) ? 'sum' : null;
    const classes = this.leafClasses([arg, receiver], frame);
    if (classes.data) return { terms: [{ kind: 'data', core: call, reduction, scale: ONE, sign: -1, inputs: [{ node: arg, frame }, { node: receiver, frame }] }], combos: [] };
    const weight = this.leafClasses([arg], frame);
    if (weight.param) return { terms: [{ kind: 'wlogp', core: call, reduction, scale: ONE, sign: 1, inputs: [] }], combos: [] };
    return EMPTY;
  }

  /** True when an expression is a sum over all elements (`(...).sum()`, `torch.sum(...)`), looking through names. */
  private isSumReduction(expr: SyntaxNode, depth: number): boolean {
    if (depth > MAX_DEPTH) return false;
    const node = unwrapParens(expr);
    if (node.type === 'call') {
      const callee = this.sem.callee(node);
      if (callee.method === 'sum' && !this.sem.argument(node, 0, 'dim')) return true;
      if (callee.qualifiedName === 'torch.sum' && !this.sem.argument(node, 1, 'dim')) return true;
    }
    if (node.type === 'identifier') {
      const values = this.flow.values(node, null).filter((v) => v.node !== node && !v.binding);
      return values.length > 0 && values.every((v) => this.isSumReduction(v.node, depth + 1));
    }
    return false;
  }

  /** An attribute that cannot be followed by type: a KL attribute of some module class in the workspace (e.g. `m.kl` over `model.modules()`). */
  private attributeFallback(node: SyntaxNode, frame: Frame | null): Expansion {
    const name = node.child('attribute')?.text;
    const object = node.child('object');
    if (!name || !object || this.flow.typeOf(object, frame)) return EMPTY;
    return this.workspaceKlMember(name, node) ? { terms: [{ kind: 'kl', core: node, reduction: 'sum', scale: ONE, sign: 1, inputs: [] }], combos: [] } : EMPTY;
  }

  /** A method on a receiver whose class is unknown or a library class: a KL method of a workspace module class, or a KL-named library method. */
  private methodFallback(node: SyntaxNode, method: string, receiver: SyntaxNode, frame: Frame | null): Expansion {
    const type = this.flow.typeOf(receiver, frame);
    const hasArgs = (node.child('arguments')?.namedChildren.length ?? 0) > 0;
    const kl: Expansion = { terms: [{ kind: 'kl', core: node, reduction: 'sum', scale: ONE, sign: 1, inputs: [] }], combos: [] };
    if (!type) return this.workspaceKlMember(method, node) ? kl : EMPTY;
    // A module whose method comes from a library base class: the name is the only hint left (weak, zero-argument only).
    const moduleLike = type.kind === 'instance' ? this.sem.isModuleClass(type.cls) : /^torch\.nn\.|^torchbnn\.|^blitz\.|^bayesian_torch\./.test(type.qualifiedName);
    if (moduleLike && !hasArgs && KL_METHOD_NAMES.has(method)) return kl;
    return EMPTY;
  }

  /**
   * True when some module class of the program around a node (the files importing the node's file and the files they
   * import) has a method or attribute of this name that computes a KL.
   */
  workspaceKlMember(name: string, at: SyntaxNode): boolean {
    const from = this.sem.workspace.analysisOfNode(at)?.file.absPath ?? this.sem.analysis.file.absPath;
    const memo = this.flow.memoTable<string, boolean>('elbo-scale-mismatch:kl-members');
    const key = `${from}\u0000${name}`;
    if (memo.has(key)) return memo.get(key)!;
    memo.set(key, false);
    const result = this.flow.programFiles(from).some((file) => this.fileKlMember(file, name));
    memo.set(key, result);
    return result;
  }

  /** True when a module class of one file has a KL-computing method or attribute of this name (looked up in the file's member index first). */
  private fileKlMember(file: string, name: string): boolean {
    if (!this.moduleMemberNames(file).has(name)) return false;
    const memo = this.flow.memoTable<string, boolean>('elbo-scale-mismatch:file-kl-members');
    const key = `${file}\u0000${name}`;
    if (memo.has(key)) return memo.get(key)!;
    memo.set(key, false);
    let result = false;
    const outer = this.scratch;
    this.scratch ??= new Map();
    try {
      for (const cls of this.sem.workspace.analysis(file)?.module.classes ?? []) {
        if (!this.sem.isModuleClass(cls)) continue;
        const method = cls.methods.get(name);
        if (method && method.returns.some((r) => this.expand(r, null).terms.some((t) => t.kind === 'kl'))) result = true;
        for (const a of cls.attributes.get(name) ?? []) {
          if (a.value && this.expand(a.value.type === 'augmented_assignment' ? (a.value.child('right') ?? a.value) : a.value, null).terms.some((t) => t.kind === 'kl')) result = true;
        }
        if (result) break;
      }
    } finally {
      this.scratch = outer;
    }
    memo.set(key, result);
    return result;
  }

  /** Names of the methods and attributes of a file's classes (computed once per file). */
  private moduleMemberNames(file: string): Set<string> {
    const memo = this.flow.memoTable<string, Set<string>>('elbo-scale-mismatch:member-names');
    const cached = memo.get(file);
    if (cached) return cached;
    const names = new Set<string>();
    for (const cls of this.sem.workspace.analysis(file)?.module.classes ?? []) {
      for (const m of cls.methods.keys()) names.add(m);
      for (const a of cls.attributes.keys()) names.add(a);
    }
    memo.set(file, names);
    return names;
  }

  /**
   * A closed-form Gaussian KL written out (SOURCES.md §5): a sum of several terms with a logarithm (or log-variance
   * and its exponential) and a square, computed from trainable parameters and not from data.
   */
  isGaussianKlShape(expr: SyntaxNode, frame: Frame | null): boolean {
    const node = unwrapParens(expr);
    const leaves = additiveLeaves(node);
    if (leaves.length < 2) return false;
    let log = false;
    let square = false;
    let exp = false;
    // The formula's parts may sit in names (`var_ratio = (sd / prior_sd) ** 2`, `sd = log_sd.exp()`).
    for (const n of this.reachableNodes(node, frame)) {
      if (n.type === 'call') {
        const callee = this.sem.callee(n);
        const q = callee.qualifiedName ?? '';
        if (/\.log$|\.log1p$/.test(q) || callee.method === 'log' || callee.method === 'log1p') log = true;
        if (/\.exp$/.test(q) || callee.method === 'exp') exp = true;
        if (q === 'torch.square' || callee.method === 'square' || (callee.method === 'pow' && this.sem.fold(this.sem.argument(n, 0) ?? n) === 2)) square = true;
      }
      if (n.type === 'binary_operator' && n.child('operator')?.text === '**' && this.sem.fold(n.child('right') ?? n) === 2) square = true;
    }
    if (!((log && (square || exp)) || (exp && square))) return false;
    const classes = this.leafClasses([node], frame);
    return classes.param && !classes.data;
  }

  /** A per-example likelihood expression (squared error, log-softmax, log-probabilities) computed from data. */
  isDataElementwise(expr: SyntaxNode, frame: Frame | null): boolean {
    let shape = false;
    for (const n of this.reachableNodes(expr, frame)) {
      if (n.type === 'binary_operator' && n.child('operator')?.text === '**' && this.sem.fold(n.child('right') ?? n) === 2) shape = true;
      if (n.type === 'call') {
        const callee = this.sem.callee(n);
        const q = callee.qualifiedName ?? '';
        if (/log_softmax$|logsigmoid$|\.log$/.test(q) || ['log_softmax', 'log', 'log_prob', 'square'].includes(callee.method ?? '') || q === 'torch.square' || q === 'torch.abs' || callee.method === 'abs') shape = true;
        if (callee.method === 'pow' && this.sem.fold(this.sem.argument(n, 0) ?? n) === 2) shape = true;
      }
      if (shape) break;
    }
    return shape && this.leafClasses([expr], frame).data;
  }

  /** The nodes of an expression and of the values its names hold (a few steps deep), for shape tests. */
  private *reachableNodes(expr: SyntaxNode, frame: Frame | null): Generator<SyntaxNode> {
    const queue: { node: SyntaxNode; frame: Frame | null; depth: number }[] = [{ node: expr, frame, depth: 0 }];
    const seen = new Set<SyntaxNode>();
    while (queue.length) {
      const { node, frame: f, depth } = queue.shift()!;
      for (const n of unwrapParens(node).subtree()) {
        if (seen.has(n)) continue;
        seen.add(n);
        yield n;
        if (n.type === 'identifier' && depth < 3 && n.field !== 'attribute' && n.field !== 'name') {
          for (const v of this.flow.values(n, f)) if (v.node !== n && !v.binding) queue.push({ node: v.node, frame: v.frame, depth: depth + 1 });
        }
      }
    }
  }

  /** Whether an expression is computed from data (minibatches, model outputs) and/or from trainable parameters. */
  leafClasses(exprs: SyntaxNode[], frame: Frame | null, depth = 0): LeafClasses {
    const out: LeafClasses = { data: false, param: false };
    // Bounded: a model applied to its own output thousands of times must not overflow the stack.
    if (depth > MAX_DEPTH) return out;
    const stack: { node: SyntaxNode; frame: Frame | null }[] = exprs.map((node) => ({ node, frame }));
    const seen = new Set<SyntaxNode>();
    let steps = 0;
    while (stack.length && steps++ < 300) {
      const { node: raw, frame: f } = stack.pop()!;
      const node = unwrapParens(raw);
      if (seen.has(node)) continue;
      seen.add(node);
      switch (node.type) {
        case 'identifier':
        case 'attribute': {
          if (this.flow.tensorKind(node, f).kind === 'batch') {
            out.data = true;
            break;
          }
          for (const v of this.flow.values(node, f)) {
            if (v.binding) {
              if (v.binding.unpack) stack.push({ node: v.binding.unpack.from, frame: v.frame });
              // A loop over listed tensors (`for mu, rho in ((self.w_mu, self.w_rho), ...)`): the listed tensors.
              for (const e of this.flow.loopElements(v.binding, v.frame) ?? []) stack.push(e);
              continue;
            }
            if (v.node !== node) stack.push({ node: v.node, frame: v.frame });
          }
          break;
        }
        case 'call': {
          const callee = this.sem.callee(node);
          const q = callee.qualifiedName ?? '';
          if (q === 'torch.nn.Parameter' || q === 'torch.nn.parameter.Parameter' || q === 'pyro.param' || q === 'tensorflow.Variable' || callee.method === 'requires_grad_' || ((callee.method === 'parameters' || callee.method === 'named_parameters') && callee.receiver && this.flow.typeOf(callee.receiver, f)?.kind === 'instance')) {
            out.param = true;
            break;
          }
          const requiresGrad = this.sem.argument(node, 99, 'requires_grad');
          if (requiresGrad && this.sem.fold(requiresGrad) === true) {
            out.param = true;
            break;
          }
          if (this.flow.tensorKind(node, f).kind === 'batch') {
            out.data = true;
            break;
          }
          const resolved = this.flow.resolveCall(node, f);
          if (resolved && (resolved.fn.name === 'forward' || resolved.fn.name === 'call' || resolved.fn.name === '__call__') && (node.child('arguments')?.namedChildren.length ?? 0) > 0) {
            // A model applied to inputs: its output is data-dependent.
            out.data = out.data || this.leafClasses((node.child('arguments')?.namedChildren ?? []).map((a) => (a.type === 'keyword_argument' ? (a.child('value') ?? a) : a)), f, depth + 1).data;
            if (!out.data) out.param = true;
            break;
          }
          if (resolved && resolved.fn.returns.length > 0) {
            const inner = this.flow.frameFor(node, resolved, f);
            for (const r of resolved.fn.returns) stack.push({ node: r, frame: inner });
            break;
          }
          const type = callee.symbol?.kind === 'class' ? null : this.flow.typeOf(node.child('function') ?? node, f);
          if (type?.kind === 'external' && /^torch\.nn\.(?!functional)/.test(type.qualifiedName)) {
            // An nn.Linear / nn.Sequential called on inputs.
            for (const a of node.child('arguments')?.namedChildren ?? []) stack.push({ node: a, frame: f });
            break;
          }
          for (const a of node.child('arguments')?.namedChildren ?? []) stack.push({ node: a.type === 'keyword_argument' ? (a.child('value') ?? a) : a, frame: f });
          if (callee.receiver) stack.push({ node: callee.receiver, frame: f });
          break;
        }
        case 'subscript': {
          if (this.flow.tensorKind(node, f).kind === 'batch') {
            out.data = true;
            break;
          }
          const value = node.child('value');
          if (value) stack.push({ node: value, frame: f });
          break;
        }
        case 'keyword_argument': {
          const value = node.child('value');
          if (value) stack.push({ node: value, frame: f });
          break;
        }
        case 'integer':
        case 'float':
        case 'string':
        case 'true':
        case 'false':
        case 'none':
          break;
        default:
          for (const c of node.namedChildren) stack.push({ node: c, frame: f });
      }
      if (out.data) break;
    }
    return out;
  }
}

function has(e: Expansion, kind: Term['kind']): boolean {
  return e.terms.some((t) => t.kind === kind);
}

function negate(e: Expansion): Expansion {
  return mapTerms(e, (t) => ({ ...t, sign: (t.sign === 1 ? -1 : 1) as 1 | -1 }));
}

function scaleBy(e: Expansion, s: Scale, at?: SyntaxNode): Expansion {
  const literal = !s.opaque && s.symbols.length === 0 && s.coef !== null && !s.schedule;
  return mapTerms(e, (t) => {
    // A per-example data term times an unknown tensor (one-hot targets, masks, class weights) stays per example.
    if (s.opaque && t.reduction === null) return t;
    // The ½ of a closed-form KL written in the same expression is part of the KL, not a weight on it.
    if (t.closedForm && literal && at && at.contains(t.core) && t.scale.coef === 1 && t.scale.symbols.length === 0) return t;
    return { ...t, scale: times(t.scale, s) };
  });
}

/**
 * The alternatives a value may take (the reaching definitions of a name, the branches of a conditional, the returns
 * of a function), all kept: every combination of every alternative is judged on its own, and the terms of the
 * alternatives are pooled (the same term reached along several paths counts once).
 */
function alternatives(options: Expansion[]): Expansion {
  const nonEmpty = options.filter((o) => o.terms.length > 0 || o.combos.length > 0);
  if (nonEmpty.length <= 1) return nonEmpty[0] ?? EMPTY;
  const terms: Term[] = [];
  const seenTerms = new Set<string>();
  const combos: Combination[] = [];
  const seenCombos = new Set<Combination>();
  for (const o of nonEmpty) {
    for (const t of o.terms) {
      const key = termKey(t);
      if (seenTerms.has(key)) continue;
      seenTerms.add(key);
      terms.push(t);
    }
    for (const c of o.combos) {
      if (seenCombos.has(c)) continue;
      seenCombos.add(c);
      combos.push(c);
    }
  }
  return { terms, combos };
}

/** Numbers for syntax files, so that a node can be named in a key. */
const fileIds = new WeakMap<object, number>();
let nextFileId = 0;

/** Identity of a term for pooling alternatives: its core, kind, reduction, sign and factor. */
function termKey(t: Term): string {
  const s = t.scale;
  let file = fileIds.get(t.core.file);
  if (file === undefined) {
    file = nextFileId++;
    fileIds.set(t.core.file, file);
  }
  return `${file}:${t.core.id}:${t.kind}:${t.reduction}:${t.sign}:${s.coef}:${s.dims.n}:${s.dims.b}:${s.dims.p}:${s.opaque}:${s.schedule}:${s.documented}`;
}

/** log q(w) − log p(w) (two log-densities of sampled weights with opposite signs) is a Monte Carlo KL estimate. */
function mergeLogDensities(terms: Term[], at: SyntaxNode): Term[] {
  const positive = terms.filter((t) => t.kind === 'wlogp' && t.sign === 1);
  const negative = terms.filter((t) => t.kind === 'wlogp' && t.sign === -1);
  if (positive.length === 0 || negative.length === 0) return terms;
  const rest = terms.filter((t) => t.kind !== 'wlogp');
  const reduction = positive.every((t) => t.reduction === 'sum') && negative.every((t) => t.reduction === 'sum') ? 'sum' : positive.some((t) => t.reduction === 'mean') ? 'mean' : positive[0]!.reduction;
  return [...rest, { kind: 'kl', core: at, reduction, scale: positive[0]!.scale, sign: 1, inputs: [] }];
}

/**
 * The operands of a chain of `+` / `-` (and unary minus), parentheses removed, in source order. Iterative: a sum of
 * thousands of terms nests that deep.
 */
function additiveLeaves(node: SyntaxNode): SyntaxNode[] {
  const out: SyntaxNode[] = [];
  const stack: SyntaxNode[] = [node];
  while (stack.length > 0) {
    const n = unwrapParens(stack.pop()!);
    if (n.type === 'binary_operator' && ['+', '-'].includes(n.child('operator')?.text ?? '')) stack.push(n.child('right')!, n.child('left')!);
    else if (n.type === 'unary_operator' && n.child('argument')) stack.push(n.child('argument')!);
    else out.push(n);
  }
  return out;
}
