// unconstrained-std: a trainable tensor used directly as a standard deviation (reparameterisation noise scale,
// the scale of a Normal, or the σ of a Gaussian KL formula) with nothing keeping it positive.
import {
  assignedName,
  type ClassInfo,
  defineRule,
  type Fix,
  formatNumber,
  type Figure,
  type RuleContext,
  type Semantics,
  type SyntaxNode,
  type TextEdit,
  unwrapParens,
} from '../../server/src/engine/api';

/** Distribution constructors whose second positional argument (or `scale=`) is a standard deviation. */
const NORMAL_LIKE = [
  'torch.distributions.Normal',
  'torch.distributions.normal.Normal',
  'torch.distributions.LogNormal',
  'torch.distributions.Laplace',
  'torch.distributions.Cauchy',
  'pyro.distributions.Normal',
  'pyro.distributions.LogNormal',
  'pyro.distributions.Laplace',
  'numpyro.distributions.Normal',
  'numpyro.distributions.LogNormal',
  'tensorflow_probability.distributions.Normal',
  'tensorflow_probability.distributions.LogNormal',
  'tensorflow_probability.distributions.Laplace',
  'tensorflow_probability.python.distributions.Normal',
  'tfp.distributions.Normal',
];

/** Calls that draw standard-normal noise (ε of the reparameterisation). */
const NOISE_CALLS = ['torch.randn_like', 'torch.randn', 'numpy.random.randn', 'numpy.random.standard_normal', 'jax.random.normal', 'tensorflow.random.normal', 'torch.normal'];

/** Methods that draw noise in place or from a distribution object. */
const NOISE_METHODS = new Set(['normal_', 'standard_normal', 'randn']);

/** Tensor methods that neither create a new value nor constrain one: followed through to their receiver. */
const PASS_THROUGH_METHODS = new Set(['view', 'reshape', 'expand', 'expand_as', 'unsqueeze', 'squeeze', 't', 'to', 'repeat', 'clone', 'contiguous', 'float', 'double', 'half', 'cuda', 'cpu', 'flatten', 'permute', 'transpose', 'view_as', 'reshape_as', 'pow', 'square', 'mul', 'multiply', 'detach']);

/** Library functions that pass their first argument's sign through (no positivity transform). */
const PASS_THROUGH_FUNCTIONS = new Set(['torch.reshape', 'torch.unsqueeze', 'torch.squeeze', 'torch.pow', 'torch.square', 'torch.mul', 'torch.flatten', 'torch.t', 'torch.transpose']);

/** Tensor factories that make a trainable tensor with `requires_grad=True`. */
const TENSOR_FACTORIES = new Set(['torch.tensor', 'torch.zeros', 'torch.ones', 'torch.full', 'torch.empty', 'torch.randn', 'torch.rand', 'torch.zeros_like', 'torch.ones_like', 'torch.full_like', 'torch.as_tensor', 'torch.Tensor', 'torch.FloatTensor', 'torch.linspace', 'torch.arange']);

/** A trainable tensor found at the end of a path with no positivity transform on it. */
interface TrainableSource {
  /** The call that creates the trainable tensor (`nn.Parameter(...)`). */
  declaration: SyntaxNode;
  /** The class attribute it is stored in, when it is one. */
  attribute?: { cls: ClassInfo; name: string };
  /** A readable name for messages. */
  name: string;
  /** The initial-value expression inside the declaration. */
  init: SyntaxNode | null;
}

const MAX_VISIT = 64;

export const rule = defineRule({
  meta: {
    id: 'unconstrained-std',
    title: 'Trainable standard deviation without a positivity transform',
    family: 'variational',
    defaultSeverity: 'warning',
    status: { stage: 'experimental', since: '0.1.0' },
    fix: 'sometimes',
    messages: {
      noise:
        '`{name}` is trainable and scales the reparameterisation noise directly: nothing keeps this standard deviation positive, so gradient steps can drive it to zero or below. Store log σ and use `.exp()`, or store ρ and use softplus(ρ).',
      scale:
        '`{name}` is trainable and is the scale of a {distribution} directly: nothing keeps it positive, so a gradient step can make the scale zero or negative (an invalid distribution or a NaN log-density). Store log σ and use `.exp()`, or store ρ and use softplus(ρ).',
      kl: '`{name}` is trainable and enters this Gaussian KL as σ directly (log σ and σ²): nothing keeps it positive, so log σ can become NaN. Store log σ and use `.exp()`, or store ρ and use softplus(ρ).',
      argument:
        '`{name}` is trainable and is passed to `{callee}`, which uses it directly as a standard deviation: nothing keeps it positive. Store log σ and use `.exp()`, or store ρ and use softplus(ρ).',
    },
    settings: [],
  },
  create(context) {
    const sem = context.sem;
    const summaries = sem.workspace.memoTable<SyntaxNode, Set<number>>('unconstrained-std:params');

    /** Reports a scale expression when a trainable source reaches it unconstrained. */
    function check(candidate: SyntaxNode, reportAt: SyntaxNode, messageId: string, data: Record<string, string>): void {
      const sources = trainableSources(sem, candidate);
      if (sources.length === 0) return;
      const source = sources[0]!;
      context.report({
        node: reportAt,
        messageId,
        data: { name: source.name, ...data },
        figures: figuresFor(sem, source),
        fixes: source.attribute ? cachedFixes(source) : [],
        related: [context.related(source.declaration, `\`${source.name}\` is declared here as a trainable tensor`)],
      });
    }

    /** Fixes depend only on the declaration (every finding of one parameter gets the same rewrite). */
    const fixMemo = sem.workspace.memoTable<SyntaxNode, Fix[]>('unconstrained-std:fixes');
    function cachedFixes(source: TrainableSource): Fix[] {
      let fixes = fixMemo.get(source.declaration);
      if (!fixes) {
        fixes = fixesFor(context, source);
        fixMemo.set(source.declaration, fixes);
      }
      return fixes;
    }

    /** Logarithms and squares seen during the walk, per enclosing statement, paired at the end into KL formulas. */
    const klParts = new Map<SyntaxNode, { logs: SyntaxNode[]; squares: SyntaxNode[] }>();
    const note = (node: SyntaxNode, kind: 'logs' | 'squares', argument: SyntaxNode) => {
      const statement = node.closest('expression_statement', 'return_statement');
      if (!statement) return;
      let parts = klParts.get(statement);
      if (!parts) {
        parts = { logs: [], squares: [] };
        klParts.set(statement, parts);
      }
      parts[kind].push(argument);
    };

    return {
      binary_operator(node) {
        const squared = squareArgument(sem, node);
        if (squared) note(node, 'squares', squared);
        if (node.child('operator')?.text !== '*') return;
        const left = node.child('left');
        const right = node.child('right');
        if (!left || !right) return;
        if (isNoise(sem, right) && !isNoise(sem, left)) check(left, unwrapParens(left), 'noise', {});
        else if (isNoise(sem, left) && !isNoise(sem, right)) check(right, unwrapParens(right), 'noise', {});
      },
      call(node) {
        const logged = logArgument(sem, node);
        if (logged) note(node, 'logs', logged);
        const squared = squareArgument(sem, node);
        if (squared) note(node, 'squares', squared);
        if (sem.isCallTo(node, NORMAL_LIKE)) {
          const scale = sem.argument(node, 1, 'scale');
          if (scale) check(scale, unwrapParens(scale), 'scale', { distribution: distributionName(sem, node) });
          return;
        }
        if (sem.isCallTo(node, ['torch.normal'])) {
          const std = sem.argument(node, 1, 'std');
          if (std && sem.fold(std) === null) check(std, unwrapParens(std), 'scale', { distribution: 'torch.normal draw' });
          return;
        }
        const callee = sem.callee(node);
        const fn = callee.symbol?.kind === 'function' ? callee.symbol.fn : null;
        if (!fn) return;
        const params = stdParameters(sem, fn.node, summaries);
        if (params.size === 0) return;
        const offset = callee.boundMethod ? 1 : 0;
        for (const index of params) {
          const param = fn.params[index];
          const arg = sem.argument(node, index - offset, param?.name);
          if (arg) check(arg, unwrapParens(arg), 'argument', { callee: fn.name });
        }
      },
      'file:end'() {
        // A Gaussian KL formula: the same trainable σ appears as log σ (or log σ²) and as σ² in one statement.
        for (const parts of klParts.values()) {
          if (parts.logs.length === 0 || parts.squares.length === 0) continue;
          const logs = new Map<string, SyntaxNode>();
          const squares = new Map<string, SyntaxNode>();
          for (const logged of parts.logs) for (const k of candidateKeys(sem, logged)) if (!logs.has(k.key)) logs.set(k.key, k.node);
          for (const squared of parts.squares) for (const k of candidateKeys(sem, squared)) if (!squares.has(k.key)) squares.set(k.key, k.node);
          for (const [key, node] of logs) {
            const square = squares.get(key);
            if (!square) continue;
            const first = square.start < node.start ? square : node;
            check(first, first, 'kl', {});
          }
        }
      },
    };
  },
});

/** Parameters of a workspace function that reach a standard-deviation use with no transform (a function summary). */
function stdParameters(sem: Semantics, fnNode: SyntaxNode, memo: Map<SyntaxNode, Set<number>>): Set<number> {
  const cached = memo.get(fnNode);
  if (cached) return cached;
  const result = new Set<number>();
  memo.set(fnNode, result);
  const fnSem = sem;
  const module = fnSem.moduleOf(fnNode);
  const fn = module.functionByNode.get(fnNode.id);
  if (!fn) return result;
  const record = (candidate: SyntaxNode) => {
    for (const index of parameterSources(fnSem, candidate, fn.params)) result.add(index);
  };
  for (const n of (fnNode.child('body') ?? fnNode).subtree()) {
    if (n.type === 'binary_operator' && n.child('operator')?.text === '*') {
      const left = n.child('left');
      const right = n.child('right');
      if (left && right) {
        if (isNoise(fnSem, right)) record(left);
        else if (isNoise(fnSem, left)) record(right);
      }
    } else if (n.type === 'call' && fnSem.isCallTo(n, NORMAL_LIKE)) {
      const scale = fnSem.argument(n, 1, 'scale');
      if (scale) record(scale);
    }
  }
  return result;
}

/** Indexes of function parameters that a scale expression comes from without a positivity transform. */
function parameterSources(sem: Semantics, candidate: SyntaxNode, params: { node: SyntaxNode }[]): number[] {
  const out: number[] = [];
  walkScale(sem, candidate, (origin) => {
    const index = params.findIndex((p) => p.node === origin);
    if (index >= 0) out.push(index);
  });
  return out;
}

/** Trainable tensors a scale expression comes from with no positivity transform on the way. */
export function trainableSources(sem: Semantics, candidate: SyntaxNode): TrainableSource[] {
  const out: TrainableSource[] = [];
  walkScale(sem, candidate, (origin, attribute) => {
    const source = asTrainable(sem, origin, attribute);
    if (source && !out.some((s) => s.declaration === source.declaration)) out.push(source);
  });
  return out;
}

/**
 * Walks from a scale expression back to where its value is made, through arithmetic that keeps the sign
 * (products with constants, powers, sums, indexing, reshaping methods), names, attributes, properties and helper
 * returns. Any other call (exp, softplus, sigmoid, abs, clamp, an unknown function) ends the path: it is a
 * transform, and an unknown one is given the benefit of the doubt.
 */
function walkScale(sem: Semantics, start: SyntaxNode, visit: (origin: SyntaxNode, attribute?: { cls: ClassInfo; name: string }) => void): void {
  const seen = new Set<SyntaxNode>();
  const stack: { node: SyntaxNode; attribute?: { cls: ClassInfo; name: string } }[] = [{ node: start }];
  let steps = 0;
  while (stack.length && steps++ < MAX_VISIT) {
    const { node: raw, attribute } = stack.pop()!;
    const node = unwrapParens(raw);
    if (seen.has(node)) continue;
    seen.add(node);
    switch (node.type) {
      case 'binary_operator': {
        const op = node.child('operator')?.text;
        const left = node.child('left');
        const right = node.child('right');
        if (op === '**' || op === '/' || op === '//') {
          if (left) stack.push({ node: left });
        } else if (op === '*' || op === '+' || op === '-') {
          if (left) stack.push({ node: left });
          if (right) stack.push({ node: right });
        }
        break;
      }
      case 'unary_operator':
        if (node.child('operator')?.text === '-' || node.child('operator')?.text === '+') {
          const arg = node.child('argument');
          if (arg) stack.push({ node: arg });
        }
        break;
      case 'subscript': {
        const value = node.child('value');
        if (value) stack.push({ node: value, attribute });
        break;
      }
      case 'call': {
        const callee = sem.callee(node);
        if (callee.method && callee.receiver && PASS_THROUGH_METHODS.has(callee.method)) {
          stack.push({ node: callee.receiver });
          break;
        }
        if (callee.qualifiedName && PASS_THROUGH_FUNCTIONS.has(callee.qualifiedName)) {
          const first = sem.argument(node, 0);
          if (first) stack.push({ node: first });
          break;
        }
        // A helper function, property or argument-less method may just return a parameter: follow its returns.
        const origins = sem.origins(node);
        if (origins.length === 1 && origins[0]!.node === node) visit(node, attribute);
        else for (const o of origins) stack.push({ node: o.node, attribute: o.attribute ?? attribute });
        break;
      }
      case 'identifier':
      case 'attribute': {
        const origins = sem.origins(node);
        for (const o of origins) {
          if (o.node === node || o.parameter) visit(o.parameter ? o.parameter.node : o.node, o.attribute ?? attribute);
          else stack.push({ node: o.node, attribute: o.attribute ?? attribute });
        }
        break;
      }
      default:
        visit(node, attribute);
    }
  }
}

/** The trainable tensor a value-creating expression makes, if it makes one. */
function asTrainable(sem: Semantics, origin: SyntaxNode, attribute?: { cls: ClassInfo; name: string }): TrainableSource | null {
  if (origin.type !== 'call') return null;
  const callee = sem.callee(origin);
  const name = attribute?.name ?? assignedName(origin) ?? 'this tensor';
  const q = callee.qualifiedName;
  if (q === 'torch.nn.Parameter' || q === 'torch.nn.parameter.Parameter') {
    const flag = sem.argument(origin, 1, 'requires_grad');
    if (flag && sem.fold(flag) === false) return null;
    return { declaration: origin, attribute, name, init: sem.argument(origin, 0, 'data') };
  }
  if (q === 'tensorflow.Variable') {
    const flag = sem.argument(origin, 99, 'trainable');
    if (flag && sem.fold(flag) === false) return null;
    return { declaration: origin, attribute, name, init: sem.argument(origin, 0, 'initial_value') };
  }
  if (q === 'pyro.param' || q === 'numpyro.param') {
    // A constrained Pyro parameter (constraint=positive) is transformed by Pyro itself.
    if (sem.argument(origin, 2, 'constraint')) return null;
    const label = sem.argument(origin, 0);
    const folded = label ? sem.fold(label) : null;
    return { declaration: origin, attribute, name: typeof folded === 'string' ? folded : name, init: sem.argument(origin, 1, 'init_tensor') };
  }
  if (callee.method === 'param' && callee.receiver && sem.isSelf(unwrapParens(callee.receiver))) {
    // Flax: self.param(name, init_fn, shape) inside a flax.linen.Module.
    const cls = sem.selfClass(origin);
    if (cls && sem.isSubclassOf(cls, ['flax.linen.Module', 'flax.nnx.Module'])) {
      const label = sem.argument(origin, 0);
      const folded = label ? sem.fold(label) : null;
      return { declaration: origin, attribute, name: typeof folded === 'string' ? folded : name, init: null };
    }
    return null;
  }
  if (callee.method === 'requires_grad_') {
    const flag = sem.argument(origin, 0, 'requires_grad');
    if (flag && sem.fold(flag) === false) return null;
    return { declaration: origin, attribute, name, init: callee.receiver };
  }
  if (q && TENSOR_FACTORIES.has(q)) {
    const flag = sem.argument(origin, 99, 'requires_grad');
    if (flag && sem.fold(flag) === true) return { declaration: origin, attribute, name, init: null };
  }
  return null;
}

/** True when an expression is standard-normal noise (ε), through names and reshaping methods. */
export function isNoise(sem: Semantics, expr: SyntaxNode, depth = 0): boolean {
  if (depth > 8) return false;
  const node = unwrapParens(expr);
  if (node.type === 'call') {
    const callee = sem.callee(node);
    if (callee.qualifiedName && NOISE_CALLS.includes(callee.qualifiedName)) {
      if (callee.qualifiedName === 'torch.normal') {
        // torch.normal(0, 1, size) is ε; torch.normal(mu, sigma) is already a sample.
        const mean = sem.argument(node, 0, 'mean');
        const std = sem.argument(node, 1, 'std');
        return !!mean && !!std && sem.fold(mean) === 0 && sem.fold(std) === 1;
      }
      return true;
    }
    if (callee.method && NOISE_METHODS.has(callee.method)) return true;
    if (callee.method && (callee.method === 'sample' || callee.method === 'rsample') && callee.receiver) {
      // Normal(0, 1).sample(...) is standard-normal noise.
      for (const o of sem.origins(callee.receiver)) {
        if (o.node.type === 'call' && sem.isCallTo(o.node, NORMAL_LIKE)) {
          const loc = sem.argument(o.node, 0, 'loc');
          const scale = sem.argument(o.node, 1, 'scale');
          if (loc && scale && isZeros(sem, loc) && isOnes(sem, scale)) return true;
        }
      }
      return false;
    }
    if (callee.method && callee.receiver && PASS_THROUGH_METHODS.has(callee.method)) return isNoise(sem, callee.receiver, depth + 1);
    return false;
  }
  if (node.type === 'identifier' || node.type === 'attribute') {
    const origins = sem.origins(node);
    return origins.some((o) => o.node !== node && !o.parameter && isNoise(sem, o.node, depth + 1));
  }
  return false;
}

function isZeros(sem: Semantics, node: SyntaxNode): boolean {
  const v = sem.fold(node);
  if (v === 0) return true;
  const n = unwrapParens(node);
  return n.type === 'call' && sem.isCallTo(n, ['torch.zeros', 'torch.zeros_like', '.new_zeros']);
}

function isOnes(sem: Semantics, node: SyntaxNode): boolean {
  const v = sem.fold(node);
  if (v === 1) return true;
  const n = unwrapParens(node);
  return n.type === 'call' && sem.isCallTo(n, ['torch.ones', 'torch.ones_like', '.new_ones']);
}

function distributionName(sem: Semantics, call: SyntaxNode): string {
  const q = sem.callee(call).qualifiedName ?? 'Normal';
  return `${q.split('.').pop()} distribution`;
}

/** The argument of a logarithm (`torch.log(x)`, `x.log()`, `math.log(x)`). */
function logArgument(sem: Semantics, node: SyntaxNode): SyntaxNode | null {
  if (node.type !== 'call') return null;
  const callee = sem.callee(node);
  if (callee.qualifiedName === 'torch.log' || callee.qualifiedName === 'numpy.log' || callee.qualifiedName === 'jax.numpy.log' || callee.qualifiedName === 'tensorflow.math.log' || callee.qualifiedName === 'tensorflow.log') return sem.argument(node, 0);
  if (callee.method === 'log' && callee.receiver) return callee.receiver;
  return null;
}

/** The base of a square (`x ** 2`, `x.pow(2)`, `x * x`, `torch.square(x)`). */
function squareArgument(sem: Semantics, node: SyntaxNode): SyntaxNode | null {
  if (node.type === 'binary_operator') {
    const op = node.child('operator')?.text;
    const left = node.child('left');
    const right = node.child('right');
    if (op === '**' && left && right && sem.fold(right) === 2) return left;
    if (op === '*' && left && right && unwrapParens(left).text === unwrapParens(right).text && left.text.length > 0) return left;
    return null;
  }
  if (node.type === 'call') {
    const callee = sem.callee(node);
    if (callee.method === 'pow' && callee.receiver) {
      const e = sem.argument(node, 0);
      if (e && sem.fold(e) === 2) return callee.receiver;
    }
    if (callee.method === 'square' && callee.receiver) return callee.receiver;
    if (callee.qualifiedName === 'torch.square') return sem.argument(node, 0);
  }
  return null;
}

/** Keys identifying which trainable tensor an expression inside a KL formula is (to pair log σ with σ²). */
function candidateKeys(sem: Semantics, expr: SyntaxNode, depth = 0): { key: string; node: SyntaxNode }[] {
  // Bounded: a quotient of thousands of factors must not overflow the stack.
  if (depth > MAX_VISIT) return [];
  // log σ² is log of a square: look through the square to σ.
  const inner = squareArgument(sem, unwrapParens(expr)) ?? expr;
  const target = unwrapParens(inner);
  if (target.type === 'binary_operator' && ['/', '*'].includes(target.child('operator')?.text ?? '')) {
    // log(a / b) = log a − log b: both sides are logged.
    return [target.child('left'), target.child('right')].flatMap((side) => (side ? candidateKeys(sem, side, depth + 1) : []));
  }
  if (target.type !== 'identifier' && target.type !== 'attribute') return [];
  return trainableSources(sem, target).map((s) => ({ key: `${s.declaration.file.text.length}:${s.declaration.start}`, node: target }));
}

/** Figures for the hover: the initial σ when it folds, and its log / inverse-softplus (the fixes' initial values). */
function figuresFor(sem: Semantics, source: TrainableSource): Figure[] {
  const s0 = source.init ? initialConstant(sem, source.init) : null;
  if (s0 === null) return [];
  const figures: Figure[] = [{ label: 'initial σ', value: formatNumber(s0) }];
  if (s0 > 0) {
    figures.push({ label: 'log σ₀ (initial value for the exp fix)', value: formatNumber(Math.log(s0)), source: 'σ = exp(s)' });
    figures.push({ label: 'softplus⁻¹(σ₀) (initial value for the softplus fix)', value: formatNumber(inverseSoftplus(s0)), source: 'σ = log(1 + exp(ρ)), Blundell et al. 2015, Sec. 3.2' });
  } else figures.push({ label: 'note', value: 'the initial σ is not positive: no transform can represent it' });
  return figures;
}

/** softplus⁻¹(y) = log(exp(y) − 1), computed stably. */
export function inverseSoftplus(y: number): number {
  return y > 20 ? y + Math.log(-Math.expm1(-y)) : Math.log(Math.expm1(y));
}

/** The constant a declaration's initial value fills the tensor with, when it is one constant. */
function initialConstant(sem: Semantics, init: SyntaxNode): number | null {
  const shape = constantFill(sem, init);
  return shape ? shape.value : null;
}

/** Recognises constant fills: `torch.full(shape, c)`, `torch.ones(...) * c`, `c * torch.ones(...)`, `torch.tensor(c)`, a number. */
function constantFill(sem: Semantics, init: SyntaxNode, depth = 0): { value: number; node: SyntaxNode; kind: 'number' | 'full' | 'ones' | 'scaled-ones' | 'tensor' } | null {
  // Bounded: chains of `* 2` or `.float()` thousands long must not overflow the stack.
  if (depth > MAX_VISIT) return null;
  const n = unwrapParens(init);
  const folded = sem.fold(n);
  if (typeof folded === 'number') return { value: folded, node: n, kind: 'number' };
  if (n.type === 'call') {
    const callee = sem.callee(n);
    if (callee.qualifiedName === 'torch.full' || callee.qualifiedName === 'torch.full_like') {
      const fill = sem.argument(n, 1, 'fill_value');
      const v = fill ? sem.fold(fill) : null;
      if (typeof v === 'number' && fill) return { value: v, node: fill, kind: 'full' };
    }
    if (callee.qualifiedName === 'torch.ones' || callee.qualifiedName === 'torch.ones_like') return { value: 1, node: n, kind: 'ones' };
    if (callee.qualifiedName === 'torch.tensor' || callee.qualifiedName === 'torch.as_tensor') {
      const data = sem.argument(n, 0, 'data');
      const v = data ? sem.fold(data) : null;
      if (typeof v === 'number' && data) return { value: v, node: data, kind: 'tensor' };
    }
    if (callee.method && PASS_THROUGH_METHODS.has(callee.method) && callee.method !== 'pow' && callee.method !== 'square' && callee.receiver) return constantFill(sem, callee.receiver, depth + 1);
  }
  if (n.type === 'binary_operator' && n.child('operator')?.text === '*') {
    const left = n.child('left')!;
    const right = n.child('right')!;
    const lv = sem.fold(left);
    const rv = sem.fold(right);
    const other = typeof lv === 'number' ? right : typeof rv === 'number' ? left : null;
    const k = typeof lv === 'number' ? lv : typeof rv === 'number' ? rv : null;
    if (other && k !== null) {
      const inner = constantFill(sem, other, depth + 1);
      if (inner && (inner.kind === 'ones' || inner.kind === 'full')) return { value: inner.value * k, node: n, kind: 'scaled-ones' };
    }
  }
  return null;
}

/** Expression text that calls softplus from a file, using its own imports. */
function softplusCall(sem: Semantics, at: SyntaxNode, arg: string): string | null {
  const functional = sem.moduleAlias(at, 'torch.nn.functional');
  if (functional) return `${functional}.softplus(${arg})`;
  const torch = sem.moduleAlias(at, 'torch');
  if (torch) return `${torch}.nn.functional.softplus(${arg})`;
  const direct = sem.moduleAlias(at, 'torch.nn.functional.softplus');
  if (direct) return `${direct}(${arg})`;
  return null;
}

/** How each reference to the attribute has to change. */
interface AttributeUse {
  node: SyntaxNode;
  kind: 'read' | 'raw' | 'declaration';
}

/** The two fixes (log σ with exp; ρ with softplus), each one edit over the declaration and every use in the class hierarchy. */
function fixesFor(context: RuleContext, source: TrainableSource): Fix[] {
  const sem = context.sem;
  const attribute = source.attribute!;
  const q = sem.callee(source.declaration).qualifiedName;
  if (q !== 'torch.nn.Parameter' && q !== 'torch.nn.parameter.Parameter') return [];
  const uses = attributeUses(sem, attribute.cls, attribute.name);
  if (!uses) return [];
  const declarations = uses.filter((u) => u.kind === 'declaration');
  if (declarations.length !== 1) return [];
  const init = source.init;
  if (!init) return [];
  const fixes: Fix[] = [];
  const names = new Set<string>();
  for (const c of sem.subclassesOf(attribute.cls)) for (const a of sem.ancestry(c)) for (const k of a.attributes.keys()) names.add(k);
  const fresh = (base: string) => {
    let candidate = base;
    for (let i = 2; names.has(candidate); i++) candidate = `${base}_${i}`;
    return candidate;
  };
  const logName = fresh(`log_${attribute.name}`);
  const rhoName = fresh(`${attribute.name}_rho`);
  const rawUses = uses.some((u) => u.kind === 'raw');

  const build = (newName: string, transformInit: (value: number) => number, wrapInit: (text: string) => string | null, read: (objectText: string, at: SyntaxNode) => string | null): TextEdit[] | null => {
    const edits: TextEdit[] = [];
    const fill = constantFill(sem, init);
    if (fill && fill.value > 0) {
      const value = literal(transformInit(fill.value));
      if (fill.kind === 'full' || fill.kind === 'number' || fill.kind === 'tensor') edits.push(context.replace(fill.node, value));
      else {
        const wrapped = wrapInit(init.text);
        if (!wrapped) return null;
        edits.push(context.replace(init, wrapped));
      }
    } else {
      const wrapped = wrapInit(init.text);
      if (!wrapped) return null;
      edits.push(context.replace(init, wrapped));
    }
    for (const use of uses) {
      const attr = use.node.child('attribute')!;
      if (use.kind === 'read') {
        const object = use.node.child('object')!;
        const text = read(`${object.text}.${newName}`, use.node);
        if (!text) return null;
        edits.push(context.replace(use.node, text));
      } else edits.push(context.replace(attr, newName));
    }
    return edits;
  };

  const torchName = sem.moduleAlias(init, 'torch');
  const logEdits = build(
    logName,
    Math.log,
    (text) => (torchName ? `${torchName}.log(${text})` : null),
    (text) => `${text}.exp()`,
  );
  const safeInit = (() => {
    const fill = constantFill(sem, init);
    return fill !== null && fill.value > 0;
  })();
  if (logEdits) fixes.push({ title: `Store log ${attribute.name} as \`${logName}\` and use \`.exp()\``, safety: safeInit && !rawUses ? 'safe' : 'review', edits: logEdits });
  const rhoEdits = build(
    rhoName,
    inverseSoftplus,
    (text) => (torchName ? `${torchName}.log(${torchName}.expm1(${text}))` : null),
    (text, at) => softplusCall(sem, at, text),
  );
  if (rhoEdits) fixes.push({ title: `Store ρ as \`${rhoName}\` and use softplus(ρ)`, safety: 'review', edits: rhoEdits });
  return fixes;
}

/** Formats a transformed initial value as a Python float literal. */
function literal(value: number): string {
  const text = String(Number(value.toPrecision(10)));
  return /[.eE]/.test(text) ? text : `${text}.0`;
}

/**
 * Every reference to `<instance>.<name>` for instances of the class and its subclasses in the workspace, classified:
 * the declaration (`self.name = nn.Parameter(...)`), reads of the value (rewritten with the transform), and raw
 * uses that must keep the raw parameter (in-place methods, `.data`, `.grad`, optimiser lists). Null when some
 * reference cannot be rewritten (another assignment to the attribute).
 */
function attributeUses(sem: Semantics, cls: ClassInfo, name: string): AttributeUse[] | null {
  const hierarchy = new Set<ClassInfo>([...sem.subclassesOf(cls)]);
  const files = new Set<string>();
  for (const c of hierarchy) {
    const owner = sem.workspace.analysisOfNode(c.node);
    if (owner) for (const f of sem.workspace.dependentsOf(owner.file.absPath)) files.add(f);
  }
  const uses: AttributeUse[] = [];
  for (const file of [...files].sort()) {
    for (const node of sem.attributesNamed(file, name)) {
      const object = node.child('object');
      if (!object) continue;
      const type = sem.typeOf(object);
      if (type?.kind !== 'instance' || !hierarchy.has(type.cls)) continue;
      const parent = node.parent;
      if (parent?.type === 'assignment' && node.field === 'left') {
        const right = parent.child('right');
        if (right && right.type === 'call' && sem.isCallTo(right, ['torch.nn.Parameter', 'torch.nn.parameter.Parameter'])) uses.push({ node, kind: 'declaration' });
        else return null;
        continue;
      }
      if (parent?.type === 'augmented_assignment' && node.field === 'left') return null;
      if (parent?.type === 'attribute' && node.field === 'object' && /^(data|grad|requires_grad|shape|dtype|device)$/.test(parent.child('attribute')?.text ?? '')) {
        uses.push({ node, kind: 'raw' });
        continue;
      }
      if (parent?.type === 'attribute' && node.field === 'object' && (parent.child('attribute')?.text ?? '').endsWith('_')) {
        uses.push({ node, kind: 'raw' });
        continue;
      }
      if (parent && (parent.type === 'list' || parent.type === 'tuple') && parent.parent?.type === 'argument_list') {
        uses.push({ node, kind: 'raw' });
        continue;
      }
      uses.push({ node, kind: 'read' });
    }
  }
  return uses;
}
