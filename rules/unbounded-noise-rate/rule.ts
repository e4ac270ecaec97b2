// unbounded-noise-rate: multiplicative Gaussian noise w·(1 + √α·ε) whose variance α (or log α) is trainable with
// nothing bounding it at α ≤ 1, and the noise's std written as α itself where α is a variance.
import { type ClassInfo, defineRule, type Figure, formatNumber, type FunctionInfo, type RuleContext, type Semantics, type SyntaxNode, unwrapParens } from '../../server/src/engine/api';
import { dropRateOfAlpha, signFlipProbability } from './normal-cdf';
import { applyOp, EXP, initialAlpha, IN_PLACE_CLAMPS, type Leaf, LOG, type NoiseSite, type Op, PASS_THROUGH_METHODS, type Quantity, SQRT, upperBoundOfAlpha, walk, withInPlaceBound } from './rate-walk';
import { fixesFor } from './fixes';

/** Calls that draw standard-normal noise ε. */
const NOISE_CALLS = new Set(['torch.randn_like', 'torch.randn', 'numpy.random.randn', 'numpy.random.standard_normal', 'jax.random.normal', 'tensorflow.random.normal']);
const NORMAL_DISTRIBUTIONS = new Set(['torch.distributions.Normal', 'torch.distributions.normal.Normal', 'pyro.distributions.Normal', 'numpyro.distributions.Normal', 'tensorflow_probability.distributions.Normal']);
/** Functions whose first argument is the input and second the weight (a local reparameterisation variance is weight-side). */
const LINEAR_MAPS = new Set(['torch.nn.functional.linear', 'torch.nn.functional.conv1d', 'torch.nn.functional.conv2d', 'torch.nn.functional.conv3d', 'torch.matmul', 'torch.mm']);
/** Kingma et al. (2015) and Molchanov et al. (2017) KL-approximation constants (SOURCES.md §3): they presuppose α is the noise variance. */
const KL_CONSTANTS = [1.16145124, -1.50204118, 0.58629921, 0.63576, 1.8732, 1.48695];

/**
 * How far above 1 a bound on α may lie and still count as α ≤ 1: an epsilon added to the std of a clamped rate
 * (`exp(½·min(log α, 0)) + 1e-8`) moves the bound by about 2·eps. At α = 1.001 the sign-flip probability Φ(−1/√α)
 * differs from Φ(−1) by about 1.2e-4 (φ(1)·(1 − 1/√1.001), from the standard normal density), far below the figures' precision.
 */
const ALPHA_TOLERANCE = 1e-3;

/** The rule: multiplicative Gaussian noise whose trainable variance nothing bounds at α ≤ 1, and α used as its std. */
export const rule = defineRule({
  meta: {
    id: 'unbounded-noise-rate',
    title: 'Trainable multiplicative-noise variance α without a bound at α ≤ 1',
    family: 'variational',
    defaultSeverity: 'warning',
    status: { stage: 'experimental', since: '0.1.0' },
    fix: 'sometimes',
    messages: {
      unbounded:
        '`{name}` is trainable and sets the variance α of multiplicative Gaussian noise on {target}, and nothing bounds it: the single-sample gradient with respect to the noisy {target} has the wrong sign with probability Φ(−1/√α), {phiAtOne} at α = 1 (drop rate 0.5) and approaching 0.5 as α grows, so training stalls. Clamp log α at 0 (α ≤ 1) where it is read, or switch to the additive parameterisation (trainable log σ², α derived from it).',
      'loose-bound':
        '`{name}` sets the variance α of multiplicative Gaussian noise on {target} and is bounded only at α ≤ {alphaMax} (log α ≤ {logAlphaMax}, drop rate {dropMax}): at that bound the single-sample gradient with respect to the noisy {target} has the wrong sign with probability Φ(−1/√α) = {phiMax}. Bound it at α ≤ 1 (log α ≤ 0), where that probability stays at or below {phiAtOne}.',
      'variance-as-std':
        '`{name}` is the variance α of this multiplicative Gaussian noise ({evidence}), but it is used here as the noise\'s standard deviation, so the noise variance is α² instead of α{change}. Use √α as the standard deviation.{boundNote}',
    },
    settings: [],
  },
  summaries: [IN_PLACE_CLAMPS],
  create(context) {
    const sem = context.sem;
    const reported = new Set<SyntaxNode>();

    function handle(site: NoiseSite): void {
      if (reported.has(site.rate)) return;
      const leaves = walk(sem, site.rate, site.outer, null).map((l) => withInPlaceBound(sem, l));
      if (leaves.length === 0 || leaves.some((l) => l.opaque)) return;
      const confusion = site.quantity === 'std' && site.noise ? varianceAsStd(sem, leaves) : null;
      const trainable = leaves.filter((l) => l.trainable);
      const bound = trainable.length > 0 ? upperBoundOfAlpha(trainable, site.quantity) : null;
      if (confusion) {
        reported.add(site.rate);
        reportConfusion(context, site, confusion, bound);
        return;
      }
      if (trainable.length === 0 || bound === null || bound.alphaMax <= 1 + ALPHA_TOLERANCE) return;
      reported.add(site.rate);
      reportUnbounded(context, site, trainable[0]!, bound, trainable.length === leaves.length);
    }

    return {
      binary_operator(node) {
        const op = node.child('operator')?.text;
        if (op === '+' || op === '-') {
          for (const site of sumSites(sem, node)) handle(site);
        } else if (op === '@') {
          const site = linearVarianceSite(sem, node.child('left'), node.child('right'));
          if (site) handle(site);
        }
      },
      call(node) {
        for (const site of callSites(sem, node)) handle(site);
        for (const site of helperSites(sem, node)) handle(site);
      },
    };
  },
});

/** A helper parameter that sets a noise rate inside the helper: which one, and the steps from it to the rate. */
interface RateParameter {
  index: number;
  /** The parameter that carries the noisy value, when it is one. */
  signalIndex: number;
  ops: Op[];
  quantity: Quantity;
  noise: SyntaxNode | null;
}

/** Noise sites at a call of a workspace helper: the arguments that become a noise rate inside it. */
function helperSites(sem: Semantics, call: SyntaxNode): NoiseSite[] {
  const callee = sem.callee(call);
  if (callee.symbol?.kind !== 'function') return [];
  const fn = callee.symbol.fn;
  const offset = callee.boundMethod ? 1 : 0;
  const out: NoiseSite[] = [];
  for (const entry of rateParameters(sem, fn)) {
    if (entry.index < offset) continue;
    const arg = sem.argument(call, entry.index - offset, fn.params[entry.index]?.name);
    if (!arg) continue;
    const signal = entry.signalIndex >= offset ? sem.argument(call, entry.signalIndex - offset, fn.params[entry.signalIndex]?.name) : null;
    out.push({ rate: unwrapParens(arg), quantity: entry.quantity, outer: entry.ops, signal, noise: entry.noise, rewrite: null });
  }
  return out;
}

/** Parameters of a workspace function that set a multiplicative-noise rate in its body (a memoised summary). */
function rateParameters(sem: Semantics, fn: FunctionInfo): RateParameter[] {
  const memo = sem.workspace.memoTable<SyntaxNode, RateParameter[]>('unbounded-noise-rate:params');
  const cached = memo.get(fn.node);
  if (cached) return cached;
  const result: RateParameter[] = [];
  memo.set(fn.node, result);
  const body = fn.node.child('body');
  if (!body) return result;
  for (const n of body.subtree()) {
    let sites: NoiseSite[] = [];
    if (n.type === 'binary_operator') {
      const op = n.child('operator')?.text;
      if (op === '+' || op === '-') sites = sumSites(sem, n);
      else if (op === '@') {
        const site = linearVarianceSite(sem, n.child('left'), n.child('right'));
        sites = site ? [site] : [];
      }
    } else if (n.type === 'call') sites = [...callSites(sem, n), ...helperSites(sem, n)];
    for (const site of sites) {
      const leaves = walk(sem, site.rate, site.outer, null);
      if (leaves.some((l) => l.opaque || l.trainable)) continue;
      for (const leaf of leaves) {
        const index = fn.params.findIndex((p) => p.node === leaf.node);
        const signal = site.signal ? unwrapParens(site.signal) : null;
        const signalIndex = signal?.type === 'identifier' ? fn.params.findIndex((p) => sem.bindings(signal).some((b) => b.node === p.node)) : -1;
        if (index >= 0 && !result.some((r) => r.index === index)) result.push({ index, signalIndex, ops: leaf.ops, quantity: site.quantity, noise: site.noise });
      }
    }
  }
  return result;
}

/** Sites in a sum: `1 + s·ε` (the noise factor) and `θ + s·|θ|·ε` (noise relative to the mean). */
function sumSites(sem: Semantics, sum: SyntaxNode): NoiseSite[] {
  const left = sum.child('left');
  const right = sum.child('right');
  if (!left || !right) return [];
  const out: NoiseSite[] = [];
  const isPlus = sum.child('operator')?.text === '+';
  for (const [one, other] of [
    [left, right],
    [right, left],
  ] as const) {
    if (one === right && !isPlus) continue;
    const product = noiseProduct(sem, other);
    if (!product) continue;
    if (sem.fold(one) === 1 && product.others.length === 1) {
      const factor = enclosingProductOperand(sum);
      out.push({ rate: product.others[0]!, quantity: 'std', outer: product.constant, signal: factor?.signal ?? null, noise: product.noise, rewrite: factor ? { node: factor.product, shape: 'product' } : null });
      continue;
    }
    // θ + s·|θ|·ε: one factor of the std is the other summand (possibly through abs), or θ + √(α·θ²)·ε.
    const relative = relativeStd(sem, product.others, product.constant, one);
    if (relative) out.push({ ...relative, signal: one, noise: product.noise, rewrite: relative.quantity === 'std' ? { node: unwrapParens(other), shape: 'relative' } : null });
  }
  return out;
}

/** Sites in calls: `Normal(θ, s·|θ|)`, `Normal(1, s).rsample()`, and a local reparameterisation variance `F.linear(x², α·w²)`. */
function callSites(sem: Semantics, call: SyntaxNode): NoiseSite[] {
  const callee = sem.callee(call);
  const q = callee.qualifiedName;
  if (q && LINEAR_MAPS.has(q)) {
    const site = linearVarianceSite(sem, sem.argument(call, 0, 'input'), sem.argument(call, 1, 'weight'));
    return site ? [site] : [];
  }
  if (callee.method === 'matmul' && callee.receiver) {
    const site = linearVarianceSite(sem, callee.receiver, sem.argument(call, 0));
    return site ? [site] : [];
  }
  if (q && NORMAL_DISTRIBUTIONS.has(q)) {
    const loc = sem.argument(call, 0, 'loc');
    const scale = sem.argument(call, 1, 'scale');
    if (!loc || !scale) return [];
    if (isOneValued(sem, loc)) {
      // Normal(1, s): multiplicative noise drawn from a distribution object (a noise factor when sampled).
      return [{ rate: unwrapParens(scale), quantity: 'std', outer: [], signal: null, noise: call, rewrite: null }];
    }
    const factors = flattenProduct(sem, scale);
    const relative = relativeStd(sem, factors.others, factors.constant, loc);
    if (relative) return [{ ...relative, signal: loc, noise: call, rewrite: relative.quantity === 'std' ? { node: unwrapParens(scale), shape: 'scale' } : null }];
  }
  return [];
}

/** `A @ V`, `F.linear(A, V)`: A is a square of the input and V has a factor that is a square of the weight. */
function linearVarianceSite(sem: Semantics, input: SyntaxNode | null, weight: SyntaxNode | null): NoiseSite | null {
  if (!input || !weight) return null;
  if (!squareBase(sem, resolveLocal(sem, input))) return null;
  let v = resolveLocal(sem, weight);
  // `(α·w²).t()`, `.T`, `.transpose(...)` keep the product; an added epsilon (`α·w² + 1e-8`) does not bound it.
  for (let i = 0; i < 3; i++) {
    v = stripAddedConstant(sem, v);
    if (v.type === 'call') {
      const c = sem.callee(v);
      if (c.receiver && (c.method === 't' || c.method === 'transpose' || c.method === 'permute')) {
        v = resolveLocal(sem, c.receiver);
        continue;
      }
    }
    if (v.type === 'attribute' && v.child('attribute')?.text === 'T' && v.child('object')) {
      v = resolveLocal(sem, v.child('object')!);
      continue;
    }
    break;
  }
  const product = flattenProduct(sem, v);
  if (product.noise) return null;
  const squares = product.others.filter((f) => squareBase(sem, f) !== null);
  const rest = product.others.filter((f) => squareBase(sem, f) === null);
  if (squares.length !== 1 || rest.length !== 1) return null;
  const weightBase = squareBase(sem, squares[0]!)!;
  return { rate: rest[0]!, quantity: 'variance', outer: product.constant, signal: weightBase, noise: null, rewrite: { node: v, shape: 'variance' } };
}

/** The factor `(1 + s·ε)` and the product it is an operand of (`w * (1 + s·ε)`), with the other operand. */
function enclosingProductOperand(sum: SyntaxNode): { product: SyntaxNode; signal: SyntaxNode } | null {
  let n = sum;
  while (n.parent?.type === 'parenthesized_expression') n = n.parent;
  const parent = n.parent;
  if (parent?.type !== 'binary_operator' || parent.child('operator')?.text !== '*') return null;
  const other = n.field === 'left' ? parent.child('right') : parent.child('left');
  return other ? { product: parent, signal: other } : null;
}

/** A product with exactly one standard-normal factor: the noise, constant factors (as a scale op), and the others. */
function noiseProduct(sem: Semantics, expr: SyntaxNode): { noise: SyntaxNode; constant: Op[]; others: SyntaxNode[] } | null {
  const product = flattenProduct(sem, expr);
  if (!product.noise || product.others.length === 0) return null;
  return { noise: product.noise, constant: product.constant, others: product.others };
}

/** Splits a product tree into its standard-normal factor, its constant factor and its other factors. */
function flattenProduct(sem: Semantics, expr: SyntaxNode): { noise: SyntaxNode | null; constant: Op[]; others: SyntaxNode[] } {
  const factors: SyntaxNode[] = [];
  const stack = [unwrapParens(expr)];
  while (stack.length) {
    const n = stack.pop()!;
    if (n.type === 'binary_operator' && n.child('operator')?.text === '*') {
      const r = n.child('right');
      const l = n.child('left');
      if (r) stack.push(unwrapParens(r));
      if (l) stack.push(unwrapParens(l));
    } else factors.push(n);
  }
  let c = 1;
  let noise: SyntaxNode | null = null;
  const others: SyntaxNode[] = [];
  for (const f of factors) {
    const v = sem.fold(f);
    if (typeof v === 'number') c *= v;
    else if (!noise && isNoise(sem, f)) noise = f;
    else others.push(f);
  }
  return { noise, constant: c === 1 ? [] : [{ kind: 'scale', c }], others };
}

/**
 * Factors of a std expression, following local names bound once to a product (`sigma = s * theta.abs()`) and
 * looking through an added non-negative constant (`s * theta.abs() + 1e-8`: an epsilon keeps the std positive but
 * bounds nothing). Constant factors found inside are multiplied into `scale`.
 */
function expandFactors(sem: Semantics, factors: SyntaxNode[]): { factors: SyntaxNode[]; scale: number } {
  const out: SyntaxNode[] = [];
  let scale = 1;
  for (const f of factors) {
    const resolved = stripAddedConstant(sem, resolveLocal(sem, f));
    if (resolved.type === 'binary_operator' && resolved.child('operator')?.text === '*') {
      const inner = flattenProduct(sem, resolved);
      if (!inner.noise) {
        out.push(...inner.others);
        for (const op of inner.constant) if (op.kind === 'scale') scale *= op.c;
        continue;
      }
    }
    out.push(f);
  }
  return { factors: out, scale };
}

/** `e + c` or `c + e` with a constant c ≥ 0 (an epsilon) → e; anything else unchanged (parentheses removed). */
function stripAddedConstant(sem: Semantics, expr: SyntaxNode): SyntaxNode {
  let n = unwrapParens(expr);
  for (let i = 0; i < 4 && n.type === 'binary_operator' && n.child('operator')?.text === '+'; i++) {
    const left = n.child('left');
    const right = n.child('right');
    if (!left || !right) break;
    const lv = sem.fold(left);
    const rv = sem.fold(right);
    if (typeof rv === 'number' && rv >= 0) n = unwrapParens(left);
    else if (typeof lv === 'number' && lv >= 0) n = unwrapParens(right);
    else break;
  }
  return n;
}

/** `sqrt(v)`, `v.sqrt()`, `v ** 0.5`, `v.pow(0.5)`, `torch.pow(v, 0.5)` → v; otherwise null. */
function sqrtOperand(sem: Semantics, expr: SyntaxNode): SyntaxNode | null {
  const n = unwrapParens(expr);
  if (n.type === 'binary_operator' && n.child('operator')?.text === '**') return sem.fold(n.child('right')!) === 0.5 ? n.child('left') : null;
  if (n.type !== 'call') return null;
  const callee = sem.callee(n);
  if (callee.qualifiedName && SQRT.has(callee.qualifiedName)) return sem.argument(n, 0);
  if (callee.method === 'sqrt' && callee.receiver && !callee.qualifiedName) return callee.receiver;
  if (callee.method === 'pow' && callee.receiver && !callee.qualifiedName) {
    const e = sem.argument(n, 0, 'exponent');
    return e && sem.fold(e) === 0.5 ? callee.receiver : null;
  }
  if (callee.qualifiedName === 'torch.pow') {
    const e = sem.argument(n, 1, 'exponent');
    return e && sem.fold(e) === 0.5 ? sem.argument(n, 0, 'input') : null;
  }
  return null;
}

/**
 * A std relative to the noisy value θ, from its factors: `s·|θ|` (the std s·|θ|, α = s²), possibly plus an epsilon,
 * or `√(α·θ² + eps)` (the variance α·θ², α itself). Returns the rate expression, what it is, and the constant steps.
 */
function relativeStd(sem: Semantics, factors: SyntaxNode[], constant: Op[], signal: SyntaxNode): { rate: SyntaxNode; quantity: Quantity; outer: Op[] } | null {
  const outerScale = constant.reduce((c, op) => (op.kind === 'scale' ? c * op.c : c), 1);
  const expanded = expandFactors(sem, factors);
  const isSignal = (f: SyntaxNode) => sameValue(stripAbs(sem, stripAddedConstant(sem, f)), signal);
  const scaleOps = (c: number): Op[] => (c === 1 ? [] : [{ kind: 'scale', c }]);
  if (expanded.factors.length === 2) {
    const signalIndex = expanded.factors.findIndex(isSignal);
    if (signalIndex >= 0) return { rate: expanded.factors[1 - signalIndex]!, quantity: 'std', outer: scaleOps(outerScale * expanded.scale) };
    return null;
  }
  if (expanded.factors.length !== 1) return null;
  const variance = sqrtOperand(sem, stripAddedConstant(sem, resolveLocal(sem, expanded.factors[0]!)));
  if (!variance) return null;
  const inner = expandFactors(sem, [variance]);
  if (inner.factors.length !== 2) return null;
  const squareIndex = inner.factors.findIndex((f) => {
    const base = squareBase(sem, resolveLocal(sem, f));
    return base !== null && sameValue(stripAbs(sem, base), signal);
  });
  if (squareIndex < 0) return null;
  // A constant c outside the square root scales the variance by c².
  const c = outerScale * expanded.scale;
  return { rate: inner.factors[1 - squareIndex]!, quantity: 'variance', outer: scaleOps(c * c * inner.scale) };
}

/** Follows a local name bound once (in the same function) to its value expression. */
function resolveLocal(sem: Semantics, expr: SyntaxNode): SyntaxNode {
  let n = unwrapParens(expr);
  for (let i = 0; i < 6 && n.type === 'identifier'; i++) {
    const bindings = sem.bindings(n);
    if (bindings.length !== 1) break;
    const b = bindings[0]!;
    if (b.kind !== 'assign' || !b.value || b.iterated || b.scope.kind === 'module') break;
    n = unwrapParens(b.value);
  }
  return n;
}

/** The base of a square (`x ** 2`, `x * x`, `x.pow(2)`, `x.square()`, `torch.square(x)`), or null. */
function squareBase(sem: Semantics, expr: SyntaxNode): SyntaxNode | null {
  const n = unwrapParens(expr);
  if (n.type === 'binary_operator') {
    const op = n.child('operator')?.text;
    const left = n.child('left');
    const right = n.child('right');
    if (op === '**' && left && right && sem.fold(right) === 2) return unwrapParens(left);
    if (op === '*' && left && right && unwrapParens(left).text === unwrapParens(right).text) return unwrapParens(left);
    return null;
  }
  if (n.type === 'call') {
    const callee = sem.callee(n);
    if (callee.method === 'pow' && callee.receiver) {
      const e = sem.argument(n, 0);
      if (e && sem.fold(e) === 2) return unwrapParens(callee.receiver);
    }
    if (callee.method === 'square' && callee.receiver) return unwrapParens(callee.receiver);
    if (callee.qualifiedName === 'torch.square') {
      const a = sem.argument(n, 0);
      return a ? unwrapParens(a) : null;
    }
  }
  return null;
}

/** `abs(x)`, `x.abs()`, `torch.abs(x)` → x; anything else unchanged. */
function stripAbs(sem: Semantics, expr: SyntaxNode): SyntaxNode {
  const n = unwrapParens(expr);
  if (n.type !== 'call') return n;
  const callee = sem.callee(n);
  if (callee.method === 'abs' && callee.receiver) return unwrapParens(callee.receiver);
  if (callee.qualifiedName === 'torch.abs' || callee.qualifiedName === 'builtins.abs') {
    const a = sem.argument(n, 0);
    if (a) return unwrapParens(a);
  }
  return n;
}

/** True when two expressions are the same value in the same function (the same name or attribute chain). */
function sameValue(a: SyntaxNode, b: SyntaxNode): boolean {
  const x = unwrapParens(a);
  const y = unwrapParens(b);
  if (x.type !== y.type || (x.type !== 'identifier' && x.type !== 'attribute')) return false;
  return x.text.replace(/\s+/g, '') === y.text.replace(/\s+/g, '');
}

/** 1, `torch.ones(...)`, `torch.ones_like(x)`. */
function isOneValued(sem: Semantics, expr: SyntaxNode): boolean {
  if (sem.fold(expr) === 1) return true;
  const n = unwrapParens(expr);
  return n.type === 'call' && sem.isCallTo(n, ['torch.ones', 'torch.ones_like', '.new_ones', 'jax.numpy.ones_like', 'jax.numpy.ones']);
}

/** True when an expression is standard-normal noise ε, through local names and reshaping methods. */
function isNoise(sem: Semantics, expr: SyntaxNode, depth = 0): boolean {
  if (depth > 6) return false;
  const n = unwrapParens(expr);
  if (n.type === 'call') {
    const callee = sem.callee(n);
    if (callee.qualifiedName && NOISE_CALLS.has(callee.qualifiedName)) return true;
    if (callee.qualifiedName === 'torch.normal' || callee.qualifiedName === 'numpy.random.normal') {
      const mean = sem.argument(n, 0, callee.qualifiedName === 'torch.normal' ? 'mean' : 'loc');
      const std = sem.argument(n, 1, callee.qualifiedName === 'torch.normal' ? 'std' : 'scale');
      return !!mean && !!std && sem.fold(mean) === 0 && sem.fold(std) === 1;
    }
    if (callee.method === 'normal_' && callee.receiver) {
      const mean = sem.argument(n, 0, 'mean');
      const std = sem.argument(n, 1, 'std');
      return (!mean || sem.fold(mean) === 0) && (!std || sem.fold(std) === 1);
    }
    if ((callee.method === 'sample' || callee.method === 'rsample') && callee.receiver) {
      const dist = resolveLocal(sem, callee.receiver);
      if (dist.type === 'call' && sem.callee(dist).qualifiedName && NORMAL_DISTRIBUTIONS.has(sem.callee(dist).qualifiedName!)) {
        const loc = sem.argument(dist, 0, 'loc');
        const scale = sem.argument(dist, 1, 'scale');
        return !!loc && !!scale && isZeroValued(sem, loc) && isOneValued(sem, scale);
      }
      return false;
    }
    if (callee.method && callee.receiver && PASS_THROUGH_METHODS.has(callee.method) && callee.method !== 'abs') return isNoise(sem, callee.receiver, depth + 1);
    return false;
  }
  if (n.type === 'identifier') {
    const resolved = resolveLocal(sem, n);
    return resolved !== n && isNoise(sem, resolved, depth + 1);
  }
  return false;
}

function isZeroValued(sem: Semantics, expr: SyntaxNode): boolean {
  if (sem.fold(expr) === 0) return true;
  const n = unwrapParens(expr);
  return n.type === 'call' && sem.isCallTo(n, ['torch.zeros', 'torch.zeros_like', '.new_zeros']);
}

/** Figures common to the findings: α at a given value, its drop rate and sign-flip probability. */
function alphaFigures(label: string, alpha: number): Figure[] {
  return [
    { label: `${label} α`, value: formatNumber(alpha) },
    { label: `${label} drop rate p = α/(1 + α)`, value: formatNumber(dropRateOfAlpha(alpha)), source: 'α = p/(1 − p), Kingma et al. 2015, Sec. 3' },
    { label: `${label} gradient sign-flip probability Φ(−1/√α)`, value: formatNumber(signFlipProbability(alpha)), source: 'P(1 + √α·ε < 0), ε ~ N(0, 1)' },
  ];
}

/** What the noise is applied to, for the message: a trainable weight, or activations. */
function targetWord(sem: Semantics, site: NoiseSite): string {
  if (site.quantity === 'variance') return 'weights';
  if (!site.signal) return 'values';
  const leaves = walk(sem, site.signal, [], null);
  return leaves.length > 0 && leaves.every((l) => l.trainable) ? 'weights' : 'activations';
}

function reportUnbounded(context: RuleContext, site: NoiseSite, leaf: Leaf, bound: { alphaMax: number; leaf: Leaf }, allTrainable: boolean): void {
  const sem = context.sem;
  const trainable = bound.leaf.trainable ?? leaf.trainable!;
  const phiAtOne = formatNumber(signFlipProbability(1));
  const figures: Figure[] = [];
  const initial = initialAlpha(sem, bound.leaf, site.quantity);
  if (initial !== null && initial > 0) figures.push(...alphaFigures('initial', initial));
  const related = [context.related(trainable.declaration, `\`${trainable.name}\` is declared here as a trainable tensor`)];
  if (bound.alphaMax === Number.POSITIVE_INFINITY) {
    figures.push({ label: 'gradient sign-flip probability at α = 1 (drop rate 0.5)', value: phiAtOne, source: 'Φ(−1), standard normal table' });
    figures.push({ label: 'gradient sign-flip probability as α → ∞', value: 0.5 });
    context.report({
      node: site.rate,
      messageId: 'unbounded',
      data: { name: trainable.name, target: targetWord(sem, site), phiAtOne },
      figures,
      fixes: allTrainable ? fixesFor(context, site, bound.leaf) : [],
      related,
    });
    return;
  }
  figures.push(...alphaFigures('largest allowed', bound.alphaMax));
  context.report({
    node: site.rate,
    messageId: 'loose-bound',
    data: {
      name: trainable.name,
      target: targetWord(sem, site),
      alphaMax: formatNumber(bound.alphaMax),
      logAlphaMax: formatNumber(Math.log(bound.alphaMax)),
      dropMax: formatNumber(dropRateOfAlpha(bound.alphaMax)),
      phiMax: formatNumber(signFlipProbability(bound.alphaMax)),
      phiAtOne,
    },
    figures,
    fixes: allTrainable ? fixesFor(context, site, bound.leaf) : [],
    related,
    severity: 'information',
  });
}

/** Why a value is a variance: evidence found in the code. */
interface Confusion {
  leaf: Leaf;
  evidence: string;
  name: string;
}

/**
 * The std written as α itself where α is a variance: the walk reaches α with no square root on the way (α raw, or
 * exp of log α), and the code elsewhere treats that α as a variance (its square root is a noise std, it enters a
 * Gaussian-dropout KL approximation, it is initialised as p/(1 − p), or its documentation says variance).
 */
function varianceAsStd(sem: Semantics, leaves: Leaf[]): Confusion | null {
  for (const leaf of leaves) {
    // α computed as the odds p/(1 − p) of a drop rate is the Gaussian-dropout variance by construction.
    const oddsAt = leaf.ops.map((op) => op.kind).lastIndexOf('odds');
    if (oddsAt >= 0) {
      const odds = leaf.ops[oddsAt]!;
      const after = leaf.ops.slice(oddsAt + 1).filter((op) => op.kind !== 'clamp');
      if (after.length === 0 && odds.kind === 'odds') return { leaf, evidence: ODDS_EVIDENCE, name: leafName(odds.node) };
      continue;
    }
    const shape = leaf.ops.filter((op) => op.kind !== 'clamp').map((op) => op.kind);
    const raw = shape.length === 0;
    const viaExp = shape.length === 1 && shape[0] === 'exp';
    if (!raw && !viaExp) continue;
    const evidence = varianceEvidence(sem, leaf, viaExp);
    const name = leaf.trainable?.name ?? leafName(leaf.node);
    if (evidence) return { leaf, evidence, name: viaExp ? `exp(${name})` : name };
  }
  return null;
}

const ODDS_EVIDENCE = 'it is computed as p/(1 − p), the variance of Gaussian dropout with drop rate p';

function leafName(node: SyntaxNode): string {
  const parent = node.parent;
  if (parent?.type === 'assignment') {
    const left = parent.child('left');
    if (left?.type === 'attribute') return left.child('attribute')?.text ?? 'α';
    if (left?.type === 'identifier') return left.text;
  }
  return node.type === 'identifier' ? node.text : 'α';
}

function varianceEvidence(sem: Semantics, leaf: Leaf, viaExp: boolean): string | null {
  const key = leaf.trainable?.declaration ?? leaf.node;
  const memo = sem.workspace.memoTable<SyntaxNode, string | null>(`unbounded-noise-rate:evidence:${viaExp}`);
  if (memo.has(key)) return memo.get(key)!;
  memo.set(key, null);
  const found = findVarianceEvidence(sem, leaf, key, viaExp);
  memo.set(key, found);
  return found;
}

function findVarianceEvidence(sem: Semantics, leaf: Leaf, key: SyntaxNode, viaExp: boolean): string | null {
  const init = leaf.trainable ? leaf.trainable.init : leaf.node;
  if (init && isOddsForm(sem, init, viaExp)) return viaExp ? 'it is initialised as log(p/(1 − p)), the log-variance of Gaussian dropout with drop rate p' : ODDS_EVIDENCE;
  const cls = leaf.trainable?.attribute?.cls ?? classOfNode(sem, leaf.node);
  if (!cls) return null;
  const attrName = leaf.trainable?.attribute?.name ?? attributeAssignedFrom(leaf.node);
  // Elsewhere in the class its square root is a noise std, or it enters a KL approximation for Gaussian dropout.
  for (const c of sem.subclassesOf(cls)) {
    for (const method of c.methods.values()) {
      const body = method.node.child('body');
      if (!body || method.name === '__init__') continue;
      let usesKl = false;
      let reads = false;
      for (const n of body.subtree()) {
        if (n.type === 'float' && KL_CONSTANTS.some((k) => Math.abs(Number(n.text) - Math.abs(k)) < 1e-6)) usesKl = true;
        if (n.type !== 'attribute') {
          if ((n.type === 'call' || (n.type === 'binary_operator' && n.child('operator')?.text === '**')) && sqrtOfAlpha(sem, n, key, viaExp)) return `its square root is the noise standard deviation in \`${method.name}\``;
          continue;
        }
        const object = n.child('object');
        const attr = n.child('attribute')?.text;
        if (!object || !attr || !sem.isSelf(unwrapParens(object))) continue;
        if (attr === attrName) reads = true;
        if (klConstantOfClassAttribute(sem, c, attr)) usesKl = true;
      }
      if (usesKl && reads) return `it enters the Gaussian-dropout KL approximation in \`${method.name}\`, which takes α as the noise variance`;
    }
  }
  if (documentsVariance(cls, leaf)) return 'its documentation calls it a variance';
  return null;
}

/** The attribute a value is assigned to (`self.alpha = value` → `alpha`), if it is one. */
function attributeAssignedFrom(node: SyntaxNode): string | null {
  const parent = node.parent;
  if (parent?.type !== 'assignment' || node.field !== 'right') return null;
  const left = parent.child('left');
  return left?.type === 'attribute' ? (left.child('attribute')?.text ?? null) : null;
}

/** True when a class attribute (`C1 = 1.16145124`) folds to a KL-approximation constant. */
function klConstantOfClassAttribute(sem: Semantics, cls: ClassInfo, attr: string): boolean {
  for (const c of sem.ancestry(cls)) {
    for (const b of c.scope.bindings.get(attr) ?? []) {
      if (!b.value) continue;
      const v = sem.fold(b.value);
      if (typeof v === 'number' && KL_CONSTANTS.some((k) => Math.abs(v - k) < 1e-6)) return true;
    }
    for (const a of c.attributes.get(attr) ?? []) {
      if (!a.value) continue;
      const v = sem.fold(a.value);
      if (typeof v === 'number' && KL_CONSTANTS.some((k) => Math.abs(v - k) < 1e-6)) return true;
    }
  }
  return false;
}

/** True when an expression is `sqrt(α)` / `α ** 0.5` / `exp(0.5·log α)` of the given leaf. */
function sqrtOfAlpha(sem: Semantics, node: SyntaxNode, key: SyntaxNode, viaExp: boolean): boolean {
  if (node.type === 'call') {
    const callee = sem.callee(node);
    const isSqrt = (callee.qualifiedName && SQRT.has(callee.qualifiedName)) || (callee.method === 'sqrt' && !callee.qualifiedName);
    const isExp = (callee.qualifiedName && EXP.has(callee.qualifiedName)) || (callee.method === 'exp' && !callee.qualifiedName);
    if (!isSqrt && !isExp) return false;
    const leaves = walk(sem, node, [], null);
    return leaves.some((l) => (l.trainable?.declaration ?? l.node) === key && isHalfPower(l.ops, viaExp));
  }
  if (node.type === 'binary_operator' && node.child('operator')?.text === '**') {
    const leaves = walk(sem, node, [], null);
    return leaves.some((l) => (l.trainable?.declaration ?? l.node) === key && isHalfPower(l.ops, viaExp));
  }
  return false;
}

function isHalfPower(ops: Op[], viaExp: boolean): boolean {
  const shape = ops.filter((op) => op.kind !== 'clamp');
  if (viaExp) {
    if (shape.length === 2 && shape[0]!.kind === 'scale' && Math.abs(shape[0]!.c - 0.5) < 1e-12 && shape[1]!.kind === 'exp') return true;
    return shape.length === 2 && shape[0]!.kind === 'exp' && (shape[1]!.kind === 'sqrt' || (shape[1]!.kind === 'pow' && Math.abs(shape[1]!.k - 0.5) < 1e-12));
  }
  return shape.length === 1 && (shape[0]!.kind === 'sqrt' || (shape[0]!.kind === 'pow' && Math.abs(shape[0]!.k - 0.5) < 1e-12));
}

/** `p / (1 - p)` (or its log when the walk went through exp). */
function isOddsForm(sem: Semantics, expr: SyntaxNode, viaLog: boolean): boolean {
  let n = unwrapParens(expr);
  // Look inside constant fills: torch.full(shape, value), value * torch.ones(...).
  if (n.type === 'call') {
    const callee = sem.callee(n);
    if (callee.qualifiedName === 'torch.full' || callee.qualifiedName === 'torch.full_like') {
      const fill = sem.argument(n, 1, 'fill_value');
      if (fill) n = unwrapParens(fill);
    } else if (callee.qualifiedName === 'torch.tensor' || callee.qualifiedName === 'torch.as_tensor') {
      const data = sem.argument(n, 0, 'data');
      if (data) n = unwrapParens(data);
    }
  }
  if (viaLog) {
    if (n.type !== 'call') return false;
    const callee = sem.callee(n);
    if (!(callee.qualifiedName && LOG.has(callee.qualifiedName))) return false;
    const arg = sem.argument(n, 0);
    return !!arg && isOddsForm(sem, arg, false);
  }
  if (n.type !== 'binary_operator' || n.child('operator')?.text !== '/') return false;
  const num = unwrapParens(n.child('left')!);
  const den = unwrapParens(n.child('right')!);
  if (den.type !== 'binary_operator' || den.child('operator')?.text !== '-') return false;
  return sem.fold(den.child('left')!) === 1 && unwrapParens(den.child('right')!).text === num.text;
}

function classOfNode(sem: Semantics, node: SyntaxNode): ClassInfo | null {
  return sem.moduleOf(node).enclosingClass(node);
}

/** The class docstring, or a comment on (or just above) the declaration line, calls the value a variance. */
function documentsVariance(cls: ClassInfo, leaf: Leaf): boolean {
  const body = cls.node.child('body');
  const first = body?.namedChildren[0];
  const docstring = first?.type === 'expression_statement' && first.namedChildren[0]?.type === 'string' ? first.namedChildren[0].text : '';
  const name = leaf.trainable?.name ?? leafName(leaf.node);
  const text = leaf.node.file.text;
  const lineStart = text.lastIndexOf('\n', leaf.node.start) + 1;
  const prevStart = text.lastIndexOf('\n', Math.max(0, lineStart - 2)) + 1;
  const lineEnd = text.indexOf('\n', leaf.node.end);
  const around = text.slice(prevStart, lineEnd < 0 ? text.length : lineEnd);
  const comments = around.split('\n').map((l) => (l.includes('#') ? l.slice(l.indexOf('#')) : '')).join(' ');
  if (/\bvariance\b/i.test(comments)) return true;
  // In a docstring, the name (or α) near the word "variance".
  const escaped = name.replace(/[.*+?^${}()|[\]\\]/g, '\\$&');
  return new RegExp(`(\\b${escaped}\\b|α)[^.\\n]{0,60}\\bvariance\\b|\\bvariance\\b[^.\\n]{0,60}(\\b${escaped}\\b|α)`, 'i').test(docstring);
}

function reportConfusion(context: RuleContext, site: NoiseSite, confusion: Confusion, bound: { alphaMax: number; leaf: Leaf } | null): void {
  const sem = context.sem;
  const figures: Figure[] = [];
  let change = '';
  const a0 = confusion.leaf.trainable ? initialAlpha(sem, confusion.leaf, 'variance') : fixedAlpha(sem, confusion.leaf);
  if (a0 !== null && a0 > 0) {
    figures.push({ label: 'α (the intended noise variance)', value: formatNumber(a0) });
    figures.push({ label: 'intended noise std √α', value: formatNumber(Math.sqrt(a0)), source: 'Gaussian dropout N(1, α), Kingma et al. 2015, Sec. 3' });
    figures.push({ label: 'noise std used here (α)', value: formatNumber(a0) });
    figures.push({ label: 'noise variance used here (α²)', value: formatNumber(a0 * a0) });
    change = `: ${formatNumber(a0 * a0)} instead of ${formatNumber(a0)} at α = ${formatNumber(a0)}, ${a0 < 1 ? `${formatNumber(1 / a0)}× too little noise` : a0 > 1 ? `${formatNumber(a0)}× too much noise` : 'the same only at α = 1'}`;
  }
  const unbounded = confusion.leaf.trainable !== null && bound !== null && bound.alphaMax === Number.POSITIVE_INFINITY;
  const rate = site.rate;
  const primary = ['identifier', 'attribute', 'call', 'subscript', 'parenthesized_expression'].includes(rate.type);
  const sqrtText = `${primary ? rate.text : `(${rate.text})`} ** 0.5`;
  context.report({
    node: rate,
    messageId: 'variance-as-std',
    data: { name: confusion.name, evidence: confusion.evidence, change, boundNote: unbounded ? ' Nothing bounds this trainable α either, so the noise can grow without limit.' : '' },
    figures,
    fixes: [{ title: 'Use √α (`** 0.5`) as the noise standard deviation', safety: 'review', edits: [context.replace(rate, sqrtText)] }],
    related: confusion.leaf.trainable ? [context.related(confusion.leaf.trainable.declaration, `\`${confusion.name}\` is declared here`)] : [],
  });
}

/** α of a non-trainable leaf when it folds (a constant Gaussian-dropout rate): the leaf's value through its steps. */
function fixedAlpha(sem: Semantics, leaf: Leaf): number | null {
  let v = sem.fold(leaf.node);
  if (typeof v !== 'number') {
    // p / (1 - p) with p bound to a constant (a parameter default or a literal).
    const n = unwrapParens(leaf.node);
    if (n.type === 'binary_operator' && n.child('operator')?.text === '/') {
      const p = sem.fold(n.child('left')!);
      if (typeof p === 'number' && p < 1) v = p / (1 - p);
    }
  }
  if (typeof v !== 'number') return null;
  let out = v;
  for (const op of leaf.ops) out = applyOp(op, out);
  return Number.isFinite(out) ? out : null;
}
