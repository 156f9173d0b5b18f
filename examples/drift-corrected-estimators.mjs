/**
 * A worked example of an estimator module: plain JavaScript, nothing imported, loaded with
 * `hhat bench --estimator-module examples/drift-corrected-estimators.mjs`.
 *
 * The setting: a lab records membrane-potential traces and summarises stretches of them by their
 * differential entropy. Over a long recording the baseline creeps (electrode and junction potentials drift
 * with temperature), which stretches the sample along a slow trend and inflates any entropy estimate. The lab
 * removes a least-squares polynomial in recording order before estimating, and wants to know what that
 * correction costs on data that has no drift: on hhat's drift-free scenarios the corrected estimator should
 * match the plain Kozachenko–Leonenko estimator within Monte-Carlo noise.
 *
 * A module exports `estimators` (an array; `export default [...]` or a single `export default {...}` work
 * too). Each estimator is an object with:
 *   id         lowercase hyphenated words; a built-in's id replaces the built-in (to test an edited copy)
 *   family     a family name, for catalogs
 *   quantity   'entropy', 'mutual-information' or 'divergence' (always in nats)
 *   summary    one line for catalogs
 *   settings   [{ name, meaning, default, kind: 'integer' | 'number' | 'choice' | 'choice-or-integer' |
 *              'choice-or-number', choices?, min?, max?, minExclusive? }]; hhat validates the values a user
 *              gives (`detrended-kozachenko-leonenko:k=5,drift=quadratic`) before calling estimate
 *   dims       [min, max] supported dimensions (max may be Infinity)
 *   reference  the paper or book that defines the method, or where your lab describes it
 *   estimate(sample, settings)  the estimate in nats; sample is { n, dim, data: Float64Array } with point i
 *              at data[i*dim .. i*dim+dim-1], in recording order. On input the method cannot handle (NaN,
 *              too few points, a dimension outside dims), throw an Error named 'EstimateError' with a code
 *              (the small class below): hhat counts it as a failed replicate, keeps the message and goes on.
 *   resolve(sample, settings)   optional: replace keywords such as 'auto' with the values actually used
 *   tuning(settings, n)         optional: the tuning grid a robustness run measures at sample size n,
 *              [{ setting: 'k', values: [...] }]; each value is validated like a typed one
 *   defaultFor optional: { estimate: true } joins the set `hhat estimate` runs without --estimator
 * Settings reach estimate() validated and complete: every declared name, numbers as numbers.
 *   lacks      optional: the invariances the method lacks by design, each with its reason (here: the row
 *              order, which carries the drift); `hhat check` reports those checks as not applicable
 *
 * `hhat check examples/drift-corrected-estimators.mjs` runs the conformance suite on this module.
 */

/**
 * A refusal hhat recognises without importing anything from it: an Error named 'EstimateError' whose code is
 * one of 'too-few-points', 'ties', 'dimension', 'invalid-input', 'numeric'.
 */
class EstimateError extends Error {
  constructor(code, message) {
    super(message);
    this.name = 'EstimateError';
    this.code = code;
  }
}

const EULER_GAMMA = 0.5772156649015329;

/** ψ(m) for a whole number m ≥ 1: −γ + 1 + 1/2 + … + 1/(m−1). */
function digammaInteger(m) {
  let sum = -EULER_GAMMA;
  for (let j = 1; j < m; j++) sum += 1 / j;
  return sum;
}

/** log of the volume of the Euclidean unit ball in d dimensions, by V_d = (2π/d)·V_{d−2}, V_0 = 1, V_1 = 2. */
function logUnitBallVolume(d) {
  let log = d % 2 === 0 ? 0 : Math.log(2);
  for (let j = d % 2 === 0 ? 2 : 3; j <= d; j += 2) log += Math.log((2 * Math.PI) / j);
  return log;
}

/**
 * Removes a least-squares polynomial trend in the row index from every column, keeping the column mean.
 * The basis 1, t, t² − mean(t²) on a centred, evenly spaced t is orthogonal, so each coefficient is a single
 * projection and an exact trend of that degree is removed exactly (up to rounding).
 */
function detrend(sample, degree) {
  const { n, dim } = sample;
  const out = Float64Array.from(sample.data.subarray(0, n * dim));
  if (degree === 0) return out;
  const t = new Float64Array(n);
  for (let i = 0; i < n; i++) t[i] = (2 * i - (n - 1)) / Math.max(1, n - 1);
  let meanT2 = 0;
  for (let i = 0; i < n; i++) meanT2 += (t[i] * t[i]) / n;
  const basis = [t];
  if (degree >= 2) basis.push(t.map((x) => x * x - meanT2));
  for (const p of basis) {
    let norm = 0;
    for (let i = 0; i < n; i++) norm += p[i] * p[i];
    if (norm === 0) continue;
    for (let j = 0; j < dim; j++) {
      let projection = 0;
      for (let i = 0; i < n; i++) projection += p[i] * out[i * dim + j];
      const coefficient = projection / norm;
      for (let i = 0; i < n; i++) out[i * dim + j] -= coefficient * p[i];
    }
  }
  return out;
}

/**
 * Distance from every point to its k-th nearest other point (Euclidean), by brute force: O(n² d), which is
 * fine for the few thousand points of a trace segment. The k smallest squared distances seen so far are
 * kept sorted in a small typed array per point.
 */
function kthNeighbourDistances(data, n, dim, k) {
  const distances = new Float64Array(n);
  const nearest = new Float64Array(k);
  for (let i = 0; i < n; i++) {
    nearest.fill(Infinity);
    for (let j = 0; j < n; j++) {
      if (j === i) continue;
      let squared = 0;
      for (let c = 0; c < dim; c++) {
        const delta = data[i * dim + c] - data[j * dim + c];
        squared += delta * delta;
      }
      if (squared >= nearest[k - 1]) continue;
      let slot = k - 1;
      while (slot > 0 && nearest[slot - 1] > squared) {
        nearest[slot] = nearest[slot - 1];
        slot--;
      }
      nearest[slot] = squared;
    }
    distances[i] = Math.sqrt(nearest[k - 1]);
  }
  return distances;
}

const DRIFT_DEGREE = { none: 0, linear: 1, quadratic: 2 };

export const detrendedKozachenkoLeonenko = {
  id: 'detrended-kozachenko-leonenko',
  family: 'nearest-neighbour',
  quantity: 'entropy',
  summary: 'Kozachenko–Leonenko k-NN estimator after removing a polynomial baseline drift in recording order',
  settings: [
    { name: 'k', meaning: 'neighbour order: each point uses the distance to its k-th nearest other point', default: 3, kind: 'integer', min: 1 },
    {
      name: 'drift',
      meaning: 'baseline trend removed from each column before estimating, as a polynomial in the row index',
      default: 'linear',
      kind: 'choice',
      choices: ['none', 'linear', 'quadratic'],
    },
  ],
  dims: [1, 8],
  reference:
    'Kozachenko, L. F. & Leonenko, N. N. (1987). Sample estimate of the entropy of a random vector. Problems of Information Transmission 23(2), 95–101; ' +
    'drift removal: least-squares polynomial in the sample index, as in the lab’s recording protocol.',
  // What a robustness run (--robustness) varies: k from 1 to 10, each below n; drift is a choice, not a tuning.
  tuning: (settings, n) => [{ setting: 'k', values: [1, 2, 3, 4, 5, 6, 7, 8, 9, 10].filter((k) => k < n) }],
  // Detrending fits the drift along the recording order, so reordering the rows changes the estimate; with
  // drift=none the order does not matter.
  lacks: {
    rowOrder: (settings) =>
      settings.drift === 'none' ? undefined : `drift=${settings.drift} removes a trend fitted in recording order, so the order of the rows is part of the data`,
  },
  estimate(sample, settings) {
    const k = settings.k;
    const { n, dim, data } = sample;
    const id = 'detrended-kozachenko-leonenko';
    if (dim < 1 || dim > 8) throw new EstimateError('dimension', `${id} supports 1 ≤ d ≤ 8; the sample has d = ${dim}`);
    if (n <= k) throw new EstimateError('too-few-points', `${id}: ${n} points; k = ${k} needs at least ${k + 1}`);
    for (let p = 0; p < n * dim; p++) {
      if (!Number.isFinite(data[p])) {
        throw new EstimateError(
          'invalid-input',
          `${id}: value ${data[p]} at row ${Math.floor(p / dim) + 1}, column ${(p % dim) + 1}; only finite numbers are allowed`,
        );
      }
    }
    const detrended = detrend(sample, DRIFT_DEGREE[settings.drift]);
    const distances = kthNeighbourDistances(detrended, n, dim, k);
    let sumLog = 0;
    let repeated = 0;
    for (let i = 0; i < n; i++) {
      if (distances[i] === 0) repeated++;
      else sumLog += Math.log(distances[i]);
    }
    if (repeated) {
      throw new EstimateError(
        'ties',
        `${id}: ${repeated} of ${n} points have ${k} or more exact copies (after drift removal); add recording-resolution jitter or raise k`,
      );
    }
    return digammaInteger(n) - digammaInteger(k) + logUnitBallVolume(dim) + (dim * sumLog) / n;
  },
};

export const estimators = [detrendedKozachenkoLeonenko];
