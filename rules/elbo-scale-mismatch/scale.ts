// Scale algebra of elbo-scale-mismatch: factors as monomials in N (training examples), B (examples per step) and
// P (number of weights), and the KL weight of a loss relative to the minibatch ELBO (SOURCES.md §1.2).

/** Exponents of N, B and P in a factor; K = N/B (batches per epoch) is n = 1, b = −1. */
export interface Dims {
  n: number;
  b: number;
  p: number;
}

/**
 * A multiplicative factor found in code: a numeric coefficient (null when it is dimensionless but not a known
 * number, such as an annealing weight) times N^n·B^b·P^p. `opaque` marks a factor whose meaning is unknown (it
 * could hide N or B), so no verdict can be based on it.
 */
export interface Scale {
  coef: number | null;
  dims: Dims;
  opaque: boolean;
  /** The factor contains a schedule (annealing / warm-up weight) rather than a fixed number. */
  schedule: boolean;
  /** A non-unit constant weight that the code documents with a comment (a deliberate tempering). */
  documented: boolean;
  /** Expressions read as N, B or K on the way, for messages, figures and fixes. */
  symbols: SymbolUse[];
}

/** One expression that was read as N, B, K or P. */
export interface SymbolUse {
  symbol: 'N' | 'B' | 'K' | 'P';
  /** Source text of the expression. */
  text: string;
  /** Its value when it folds to a number. */
  value: number | null;
  /** True when the meaning comes from data flow (a loader, a dataset, an array shape), false when only from a name. */
  strong: boolean;
  /** For N and K read off a loader or a dataset: the expressions that identify that data (the loader call, the dataset). */
  sources?: unknown[];
}

/** The dimensionless factor 1. */
export const ONE: Scale = { coef: 1, dims: { n: 0, b: 0, p: 0 }, opaque: false, schedule: false, documented: false, symbols: [] };

/** A factor whose meaning is unknown. */
export const OPAQUE: Scale = { ...ONE, coef: null, opaque: true };

/** A numeric constant. */
export function constant(value: number): Scale {
  return { ...ONE, coef: value };
}

/** A factor that stands for one of the symbols. */
export function symbol(use: SymbolUse): Scale {
  const dims = use.symbol === 'N' ? { n: 1, b: 0, p: 0 } : use.symbol === 'B' ? { n: 0, b: 1, p: 0 } : use.symbol === 'K' ? { n: 1, b: -1, p: 0 } : { n: 0, b: 0, p: 1 };
  return { ...ONE, dims, symbols: [use] };
}

/** Product of two factors. */
export function times(a: Scale, b: Scale): Scale {
  return {
    coef: a.coef === null || b.coef === null ? null : a.coef * b.coef,
    dims: { n: a.dims.n + b.dims.n, b: a.dims.b + b.dims.b, p: a.dims.p + b.dims.p },
    opaque: a.opaque || b.opaque,
    schedule: a.schedule || b.schedule,
    documented: a.documented || b.documented,
    symbols: [...a.symbols, ...b.symbols],
  };
}

/** A factor raised to a numeric power. */
export function power(a: Scale, exponent: number): Scale {
  return {
    ...a,
    coef: a.coef === null ? null : a.coef ** exponent,
    dims: { n: a.dims.n * exponent, b: a.dims.b * exponent, p: a.dims.p * exponent },
  };
}

/** Quotient of two factors. */
export function over(a: Scale, b: Scale): Scale {
  return times(a, power(b, -1));
}

/** True when the factor carries no N, B or P. */
export function isDimensionless(dims: Dims): boolean {
  return dims.n === 0 && dims.b === 0 && dims.p === 0;
}

/** The data term's reduction over the minibatch: a per-example mean divides the batch sum by B. */
export type Reduction = 'mean' | 'sum';

/**
 * The KL weight of a loss `cD·D + cK·KL` relative to the minibatch ELBO, where D is the data term reduced by
 * `reduction` and KL the total KL: the ELBO needs the batch-summed data term and the KL in the ratio N/B : 1
 * (SOURCES.md §1.1–1.2), so the relative weight is cK·N / (cD·B) for a sum and cK·N / cD for a mean.
 */
export function relativeKlWeight(options: { data: Scale; reduction: Reduction; kl: Scale }): Scale {
  const perBatchSum = options.reduction === 'mean' ? over(options.data, symbol({ symbol: 'B', text: 'B', value: null, strong: true })) : options.data;
  const ratio = over(times(options.kl, symbol({ symbol: 'N', text: 'N', value: null, strong: true })), times(perBatchSum, symbol({ symbol: 'B', text: 'B', value: null, strong: true })));
  return { ...ratio, symbols: [...options.data.symbols, ...options.kl.symbols] };
}

/** Substitutes B = N (full-batch training: every step sees the whole training set). */
export function fullBatch(dims: Dims): Dims {
  return { n: dims.n + dims.b, b: 0, p: dims.p };
}

/** Evaluates N^n·B^b·P^p for known N and B (P must not appear). */
export function evaluateDims(dims: Dims, values: { n: number; b: number }): number | null {
  if (dims.p !== 0) return null;
  return values.n ** dims.n * values.b ** dims.b;
}

/** Words for the factor a KL weight is off by, as SOURCES.md §1.2 names them: N×, K× (= N/B), B×, P×. */
export function describeDims(dims: Dims): { factor: string; direction: 'heavy' | 'light' } | null {
  if (isDimensionless(dims)) return null;
  const sign = dims.n > 0 || (dims.n === 0 && (dims.b > 0 || (dims.b === 0 && dims.p > 0))) ? 1 : -1;
  const d = { n: dims.n * sign, b: dims.b * sign, p: dims.p * sign };
  // Group N/B into K where the exponents allow it.
  let k = 0;
  if (d.n > 0 && d.b < 0) {
    k = Math.min(d.n, -d.b);
    d.n -= k;
    d.b += k;
  }
  const numerator: string[] = [];
  const denominator: string[] = [];
  const term = (name: string, e: number) => {
    if (e === 0) return;
    const list = e > 0 ? numerator : denominator;
    list.push(Math.abs(e) === 1 ? name : `${name}^${Math.abs(e)}`);
  };
  term('N', d.n);
  term('K', k);
  term('B', d.b);
  term('P', d.p);
  const top = numerator.length ? numerator.join('·') : '1';
  const factor = denominator.length ? `${top}/${denominator.join('·')}` : top;
  return { factor: `${factor}×`, direction: sign > 0 ? 'heavy' : 'light' };
}

/** The factor Pyro's `plate(name, size, subsample_size)` multiplies the log-density of its sites by: size/subsample_size (SOURCES.md §1.5). */
export function pyroPlateScale(size: number, subsampleSize: number): number {
  return size / subsampleSize;
}

/**
 * Reads a bare number on a KL term as the quantity it equals (`/ 32` with batches of 32 is `/ B`), so that a
 * hard-coded batch size, dataset size or batch count is judged as what it stands for.
 */
export function readLiteralAs(kl: Scale, values: { n: number | null; b: number | null }): Scale {
  if (kl.opaque || kl.coef === null || kl.coef === 0 || kl.symbols.length > 0 || kl.dims.n !== 0 || kl.dims.b !== 0) return kl;
  const inverse = 1 / Math.abs(kl.coef);
  const close = (x: number | null) => x !== null && Math.abs(inverse - x) <= 1e-9 * Math.max(1, x);
  const use = (name: 'N' | 'B' | 'K', value: number) => ({ ...over(kl, symbol({ symbol: name, text: String(value), value, strong: false })), coef: Math.sign(kl.coef!) });
  if (values.n !== null && close(values.n)) return use('N', values.n);
  if (values.n !== null && values.b !== null && (close(values.n / values.b) || close(Math.ceil(values.n / values.b)))) return use('K', inverse);
  if (values.b !== null && close(values.b)) return use('B', values.b);
  return kl;
}
