/**
 * Remainders of Stirling's series for log Γ and ψ, and log1p(t) − t, so that closed-form entropies and
 * divergences built from differences of log Γ and ψ at large arguments can be written without the leading
 * x log x terms that cancel.
 */

const HALF_LOG_2PI = 0.5 * Math.log(2 * Math.PI);

/** B₂, B₄, …, B₂₀. */
const BERNOULLI_EVEN = [1 / 6, -1 / 30, 1 / 42, -1 / 30, 5 / 66, -691 / 2730, 7 / 6, -3617 / 510, 43867 / 798, -174611 / 330];

/**
 * Below this the series is not used: at x = 10 its tenth term is below 2e-19 relative, and the recurrences
 * below step any smaller x up to it without cancellation.
 */
export const STIRLING_SERIES_MIN = 10;

/** The series in y = 1/x² with coefficients c, by Horner's rule from the smallest term. */
function seriesInInverseSquare(coefficients: readonly number[], y: number): number {
  let sum = 0;
  for (let n = coefficients.length - 1; n >= 0; n--) sum = sum * y + coefficients[n];
  return sum;
}

const LOG_GAMMA_COEFFICIENTS = BERNOULLI_EVEN.map((b, i) => b / ((2 * i + 2) * (2 * i + 1)));
const DIGAMMA_COEFFICIENTS = BERNOULLI_EVEN.map((b, i) => -b / (2 * i + 2));

/**
 * u = 1/(2y + 1) turns r(y) − r(y+1) = (y + ½) log1p(1/y) − 1 into atanh(u)/u − 1 = Σ_{j≥1} u^{2j}/(2j + 1),
 * whose terms are all positive. Below y = 1 the series converges slowly and u rounds near 1, so the step is
 * formed from y itself (there the two sides of the subtraction differ by more than 4%).
 */
function logGammaRemainderStep(y: number): number {
  if (y < 1) return (y + 0.5) * (Math.log1p(y) - Math.log(y)) - 1;
  const u = 1 / (2 * y + 1);
  const u2 = u * u;
  let power = u2;
  let sum = 0;
  for (let j = 1; j < 60; j++) {
    const term = power / (2 * j + 1);
    sum += term;
    if (term < 1e-18 * sum) break;
    power *= u2;
  }
  return sum;
}

/** s(y) − s(y+1) = log1p(1/y) − 1/(2y) − 1/(2y + 2) = 2 atanh(u) − 2u/(1 − u²) = −2 Σ_{j≥1} (2j/(2j+1)) u^{2j+1}. */
function digammaRemainderStep(y: number): number {
  if (y < 1) return Math.log1p(y) - Math.log(y) - 0.5 / y - 0.5 / (y + 1);
  const u = 1 / (2 * y + 1);
  const u2 = u * u;
  let power = u * u2;
  let sum = 0;
  for (let j = 1; j < 60; j++) {
    const term = ((2 * j) / (2 * j + 1)) * power;
    sum += term;
    if (term < 1e-18 * sum) break;
    power *= u2;
  }
  return -2 * sum;
}

/**
 * r(x) = log Γ(x) − [(x − ½) log x − x + ½ log 2π] for x > 0: Stirling's series for x ≥ STIRLING_SERIES_MIN,
 * otherwise the series at x + n plus the n steps r(y) − r(y+1), each free of cancellation, so r keeps its
 * relative accuracy even where it is much smaller than log Γ(x).
 */
export function logGammaStirlingRemainder(x: number): number {
  if (!(x > 0)) return NaN;
  const [steps, shifted] = stepsUp(x, logGammaRemainderStep);
  return steps + seriesInInverseSquare(LOG_GAMMA_COEFFICIENTS, 1 / (shifted * shifted)) / shifted;
}

/** Σ step(y) over y = x, x + 1, … below STIRLING_SERIES_MIN, and the first y at or above it. */
function stepsUp(x: number, step: (y: number) => number): [sum: number, shifted: number] {
  let shifted = x;
  let sum = 0;
  while (shifted < STIRLING_SERIES_MIN) {
    sum += step(shifted);
    shifted += 1;
  }
  return [sum, shifted];
}

/** s(x) = ψ(x) − log x + 1/(2x) for x > 0, computed as logGammaStirlingRemainder computes r. */
export function digammaStirlingRemainder(x: number): number {
  if (!(x > 0)) return NaN;
  const [steps, shifted] = stepsUp(x, digammaRemainderStep);
  const y = 1 / (shifted * shifted);
  return steps + seriesInInverseSquare(DIGAMMA_COEFFICIENTS, y) * y;
}

/** log1p(t) − t for t > −1, by its Taylor series where the subtraction would cancel. */
export function log1pMinusIdentity(t: number): number {
  if (!(Math.abs(t) < 0.25)) return Math.log1p(t) - t;
  // Σ_{n≥2} (−1)^{n+1} tⁿ/n
  let power = t * t;
  let sum = 0;
  for (let n = 2; n < 80; n++) {
    const term = power / n;
    sum += n % 2 === 0 ? -term : term;
    if (Math.abs(term) <= 1e-18 * Math.abs(sum)) break;
    power *= t;
  }
  return sum;
}

/**
 * g(x) = x + log Γ(x) + (1 − x) ψ(x), the entropy of Gamma(x, 1), as ½ log x + ½ log 2π + ½ − 1/(2x) + r(x) + (1 − x) s(x):
 * the x log x and x terms of log Γ and (1 − x)ψ cancel analytically, so no large terms are formed.
 */
export function gammaEntropyUnitScale(x: number): number {
  return 0.5 * Math.log(x) + HALF_LOG_2PI + 0.5 - 0.5 / x + logGammaStirlingRemainder(x) + (1 - x) * digammaStirlingRemainder(x);
}

/**
 * log Γ(x) − x ψ(x) + x = −½ log x + ½ log 2π + ½ + r(x) − x s(x), the per-argument part of the Student-t
 * mutual information, without its large x log x and x terms.
 */
export function logGammaMinusXDigammaPlusX(x: number): number {
  return -0.5 * Math.log(x) + HALF_LOG_2PI + 0.5 + logGammaStirlingRemainder(x) - x * digammaStirlingRemainder(x);
}

/**
 * u(x) = r(x) − x s(x) for x ≥ STIRLING_SERIES_MIN has the series Σ B₂ₙ/((2n − 1) x^{2n−1}); this returns the
 * mixed second difference u(a) − u(a + p) − u(a + q) + u(a + p + q). Its leading 1/x term is differenced in closed
 * form, pq(2a + p + q)/(a(a + p)(a + q)(a + p + q)), because the naive difference of four nearly equal values
 * would lose all its digits when p, q ≪ a; the later terms are smaller by 1/a² and differenced directly.
 */
export function stirlingSecondDifference(a: number, p: number, q: number): number {
  const ap = a + p;
  const aq = a + q;
  const apq = a + p + q;
  const leading = (BERNOULLI_EVEN[0] * p * q * (2 * a + p + q)) / (a * ap * aq * apq);
  const rest = (x: number) => {
    const y = 1 / (x * x);
    let sum = 0;
    for (let n = BERNOULLI_EVEN.length - 1; n >= 1; n--) sum = sum * y + BERNOULLI_EVEN[n] / (2 * n + 1);
    return (sum * y) / x;
  };
  return leading + (rest(a) - rest(ap) - rest(aq) + rest(apq));
}

/** t(y) − t(y+1) = 1/y² − 1/y + 1/(y+1) − 1/(2y²) + 1/(2(y+1)²) = ½(1/y − 1/(y+1))², a positive step. */
function trigammaRemainderStep(y: number): number {
  const gap = 1 / (y * (y + 1));
  return 0.5 * gap * gap;
}

/**
 * x² t(x), where t(x) = ψ′(x) − 1/x − 1/(2x²) for x > 0 (its series is Σ B₂ₙ/x^{2n+1}), computed as
 * logGammaStirlingRemainder computes r. Variances of log densities built from ψ′ cancel their 1/x and 1/x² parts
 * analytically with it; it is scaled by x² so that x up to the largest double neither overflows nor underflows.
 */
export function trigammaStirlingRemainderScaled(x: number): number {
  if (!(x > 0)) return NaN;
  const [steps, shifted] = stepsUp(x, trigammaRemainderStep);
  const series = seriesInInverseSquare(BERNOULLI_EVEN, 1 / (shifted * shifted)) / shifted;
  // Above the series' threshold there are no steps and shifted = x: the series is already x² t(x).
  return shifted === x ? series : x * x * (steps + series / (shifted * shifted));
}
