// Words and numbers for elbo-scale-mismatch findings: the loss form as written, the correct form, the factor the
// KL weight is off by, and the hover figures with their sources.
import { type Figure, formatNumber } from '../../server/src/engine/api';
import { describeDims, type Dims, type Reduction } from './scale';

/** Where the forms and factors come from (shown beside the hover figures). */
export const SOURCE_ESTIMATOR = 'minibatch ELBO (N/B)·Σ log p(y|x,w) − KL: Kingma, Salimans & Welling 2015, Sec. 2.1; the equivalent forms are algebra on it';
/** Where the Pyro plate scale comes from (SOURCES.md §1.5). */
export const SOURCE_PYRO = 'pyro.plate scales every site inside it by size/subsample_size (Pyro 1.9.1, pyro/poutine/subsample_messenger.py)';
/** Where the TFP default divergence comes from (SOURCES.md §1.6). */
export const SOURCE_TFP = 'TFP variational layers add kl_divergence(q, p) unscaled by default (tensorflow_probability/python/layers/dense_variational.py)';

/** The loss as written, in the notation of the rule page: mean(NLL) or ΣNLL plus the KL with its factor. */
export function formText(reduction: Reduction, klRelative: Dims, meanOverWeights: boolean): string {
  const data = reduction === 'mean' ? 'mean(NLL)' : 'ΣNLL';
  const d = { ...klRelative };
  const kl = meanOverWeights ? 'mean_w(KL)' : 'KL';
  const numerator: string[] = [];
  const denominator: string[] = [];
  // Group N/B as K (batches per epoch) in either direction.
  let k = 0;
  if (d.n < 0 && d.b > 0) {
    k = -Math.min(-d.n, d.b);
    d.n -= k;
    d.b += k;
  } else if (d.n > 0 && d.b < 0) {
    k = Math.min(d.n, -d.b);
    d.n -= k;
    d.b += k;
  }
  const put = (name: string, e: number) => {
    if (e === 0) return;
    (e > 0 ? numerator : denominator).push(Math.abs(e) === 1 ? name : `${name}^${Math.abs(e)}`);
  };
  put('N', d.n);
  put('K', k);
  put('B', d.b);
  put('P', d.p);
  const top = numerator.length ? `${numerator.join('·')}·${kl}` : kl;
  return `${data} + ${denominator.length ? `${top}/${denominator.join('·')}` : top}`;
}

/** The correct form for a reduction (SOURCES.md §1.2): mean pairs with KL/N, sum pairs with KL/K. */
export function correctText(reduction: Reduction): string {
  return reduction === 'mean' ? 'mean(NLL) + KL/N' : 'ΣNLL + KL/K (K = N/B batches per epoch)';
}

/** The grouping format of message numbers (built once: constructing a number format is slow). */
const TWO_DECIMALS = new Intl.NumberFormat('en-US', { maximumFractionDigits: 2 });

/** A number for a message: exact when it has at most two decimals (468.75), else four significant digits. */
export function messageNumber(value: number): string {
  if (Number.isFinite(value) && Math.abs(value) < 1e15 && Math.abs(Math.round(value * 100) - value * 100) < 1e-9) return TWO_DECIMALS.format(value);
  return formatNumber(value);
}

/** A relative weight as a factor: 750× for heavy, 64× (of a weak weight) for light. */
export function factorNumber(value: number): string {
  return value >= 1 ? `${messageNumber(value)}×` : `${messageNumber(1 / value)}×`;
}

/** Factor words: the number when N and B fold, else the symbolic factor of SOURCES.md §1.2. */
export function factorWords(dims: Dims, numeric: number | null): { factor: string; strength: 'strongly' | 'weakly'; symbolic: string } | null {
  const d = describeDims(dims);
  if (!d) return null;
  const strength = numeric !== null ? (numeric >= 1 ? 'strongly' : 'weakly') : d.direction === 'heavy' ? 'strongly' : 'weakly';
  return { factor: numeric !== null ? factorNumber(numeric) : d.factor, strength, symbolic: d.factor };
}

/** The sentence with the numbers, when there are any. */
export function numbersSentence(options: { n: number | null; b: number | null; numeric: number | null; strength: 'strongly' | 'weakly' }): string {
  const parts: string[] = [];
  if (options.n !== null) parts.push(`N = ${messageNumber(options.n)}`);
  if (options.b !== null) parts.push(`B = ${messageNumber(options.b)}`);
  if (options.n !== null && options.b !== null) parts.push(`K = N/B = ${messageNumber(options.n / options.b)} batches per epoch`);
  if (options.numeric === null) return parts.length ? ` Found ${parts.join(', ')}.` : '';
  const amount = options.strength === 'strongly' ? `${factorNumber(options.numeric)} its ELBO weight` : `1/${messageNumber(1 / options.numeric)} of its ELBO weight`;
  return ` With ${parts.join(', ')}, the KL gets ${amount}.`;
}

/** Hover figures: N, B, K and the relative KL weight (numbers when they fold), each with where it comes from. */
export function weightFigures(options: { n: number | null; nText: string | null; b: number | null; bText: string | null; numeric: number | null; symbolic: string; strength: 'strongly' | 'weakly' }): Figure[] {
  const figures: Figure[] = [];
  figures.push({ label: 'N (training examples)', value: options.n ?? (options.nText ? `\`${options.nText}\`` : 'not found in scope'), ...(options.nText ? { source: `from \`${options.nText}\`` } : {}) });
  const bFromCode = options.bText !== null && !/^\d+$/.test(options.bText);
  figures.push({ label: 'B (examples per step)', value: options.b ?? (options.bText ? `\`${options.bText}\`` : 'not folded'), ...(bFromCode ? { source: `from \`${options.bText}\`` } : {}) });
  if (options.n !== null && options.b !== null) figures.push({ label: 'K = N/B (batches per epoch)', value: options.n / options.b });
  if (options.numeric !== null) figures.push({ label: 'KL weight relative to the ELBO (×)', value: options.numeric, source: SOURCE_ESTIMATOR });
  else figures.push({ label: 'KL weight relative to the ELBO', value: `${options.symbolic} too ${options.strength === 'strongly' ? 'strong' : 'weak'}`, source: SOURCE_ESTIMATOR });
  return figures;
}

/** Shortens code for a message. */
export function excerpt(text: string, max = 60): string {
  const flat = text.replace(/\s+/g, ' ').trim();
  return flat.length > max ? `${flat.slice(0, max - 1)}…` : flat;
}
