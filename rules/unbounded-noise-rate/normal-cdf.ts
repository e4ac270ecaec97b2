// The standard normal CDF Φ (through the complementary error function) for the gradient sign-flip figures of
// unbounded-noise-rate: Φ(−1/√α) is the probability that a noise factor 1 + √α·ε is negative.

const TWO_OVER_SQRT_PI = 2 / Math.sqrt(Math.PI);
const ONE_OVER_SQRT_PI = 1 / Math.sqrt(Math.PI);

/**
 * At or below this argument erfc uses the power series of erf, above it the continued fraction (each is accurate to
 * about 1e−15 relative on its side; checked against Python's math.erfc in tests/noise-rate.test.ts).
 */
const SERIES_LIMIT = 1;
/** Levels of the continued fraction, evaluated from the tail: enough for double precision from x = 1 upwards. */
const FRACTION_LEVELS = 200;

/**
 * erf(x) for 0 ≤ x ≤ 1 from the series erf(x) = (2/√π)·exp(−x²)·Σ 2ⁿ·x²ⁿ⁺¹ / (1·3·…·(2n+1)), whose terms are all
 * positive (no cancellation), summed until they no longer change the total.
 */
function erfSeries(x: number): number {
  let term = x;
  let sum = x;
  const x2 = x * x;
  for (let n = 1; n < 200; n++) {
    term *= (2 * x2) / (2 * n + 1);
    const next = sum + term;
    if (next === sum) break;
    sum = next;
  }
  return TWO_OVER_SQRT_PI * Math.exp(-x2) * sum;
}

/**
 * erfc(x) for x > 1 from the continued fraction erfc(x) = exp(−x²)/√π · 1/(x + ½/(x + 1/(x + (3/2)/(x + …)))),
 * evaluated from the tail.
 */
function erfcContinuedFraction(x: number): number {
  let tail = x;
  for (let n = FRACTION_LEVELS; n >= 1; n--) tail = x + n / 2 / tail;
  return (ONE_OVER_SQRT_PI * Math.exp(-x * x)) / tail;
}

/** The complementary error function erfc(x) = 1 − erf(x), accurate to about 1e−15 relative over the real line. */
export function erfc(x: number): number {
  if (Number.isNaN(x)) return Number.NaN;
  if (x < 0) return 2 - erfc(-x);
  if (x === Number.POSITIVE_INFINITY) return 0;
  if (x <= SERIES_LIMIT) return 1 - erfSeries(x);
  return erfcContinuedFraction(x);
}

/** The standard normal cumulative distribution function Φ(z) = ½·erfc(−z/√2). */
export function normalCdf(z: number): number {
  if (z === Number.NEGATIVE_INFINITY) return 0;
  if (z === Number.POSITIVE_INFINITY) return 1;
  return 0.5 * erfc(-z / Math.SQRT2);
}

/**
 * The probability that the noise factor 1 + √α·ε (ε standard normal) is negative, which flips the sign of the
 * single-sample gradient with respect to the value it multiplies: Φ(−1/√α). It is 0 for α = 0 and tends to ½ as α
 * grows without bound.
 */
export function signFlipProbability(alpha: number): number {
  if (!(alpha > 0)) return 0;
  if (alpha === Number.POSITIVE_INFINITY) return 0.5;
  return normalCdf(-1 / Math.sqrt(alpha));
}

/** The Bernoulli drop rate whose Gaussian-dropout variance is α: p = α/(1 + α) (Kingma et al. 2015, Sec. 3). */
export function dropRateOfAlpha(alpha: number): number {
  if (alpha === Number.POSITIVE_INFINITY) return 1;
  return alpha / (1 + alpha);
}
