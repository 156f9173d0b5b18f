/**
 * Gaussian mixtures fitted by EM, with the number of components chosen by BIC.
 *
 *   const { best, fits } = selectMixture(data, n, dim, { maxComponents: 6, restarts: 4, seed: 'lab-7' });
 *   best.weights, best.means (K × d), best.covariances (K × d × d), best.logLikelihood, best.bic
 *
 * EM: Dempster, Laird & Rubin (1977), J. R. Statist. Soc. B 39(1), 1–38; the mixture updates as in
 * McLachlan & Peel, Finite Mixture Models (2000), §2.8. Full covariances, each with a ridge λ·I added in the
 * M-step, which bounds the likelihood away from the singular spikes it otherwise has (a component shrinking
 * onto one point). Starts: k-means++ seeding (Arthur & Vassilvitskii 2007, SODA, 1027–1035) refined by up
 * to 10 Lloyd iterations; each start is seeded from (seed, K, restart), so a fit is reproducible. The best
 * of the restarts by log-likelihood is kept. BIC (Schwarz 1978, Ann. Statist. 6(2), 461–464):
 *   BIC = −2 log L + p log n,  p = (K − 1) + K·d + K·d(d + 1)/2.
 *
 * The caller passes standardised data (each coordinate centred and divided by its SD), so the ridge and the
 * k-means++ distances mean the same thing in every coordinate.
 */
import { EigenvalueDecomposition, Matrix } from 'ml-matrix';
import type { Rng } from '../../core/contracts.js';
import { rngFromSeed } from '../../core/rng.js';

export interface MixtureFit {
  dim: number;
  components: number;
  weights: Float64Array;
  /** K × d, row-major. */
  means: Float64Array;
  /** K × d × d, row-major per component. */
  covariances: Float64Array;
  logLikelihood: number;
  parameters: number;
  bic: number;
  iterations: number;
  converged: boolean;
  /** The restart the fit came from. */
  restart: number;
}

export interface MixtureOptions {
  /** Independent starts per K (default 3). */
  restarts?: number;
  /** EM iterations per start (default 300). */
  maxIterations?: number;
  /** Stop when the log-likelihood gains less than this per point (default 1e-5: a BIC moves by n·1e-5 at most). */
  tolerance?: number;
  /** λ added to every covariance's diagonal (default 1e-6, in units of the data's variance). */
  ridge?: number;
  seed: string;
}

export const DEFAULT_RIDGE = 1e-6;
const LOG_2PI = Math.log(2 * Math.PI);

/** Free parameters of a K-component full-covariance mixture in d dimensions. */
export function mixtureParameters(components: number, dim: number): number {
  return components - 1 + components * dim + (components * dim * (dim + 1)) / 2;
}

/** In-place Cholesky of a d × d SPD matrix (row-major, lower triangle written); false when not SPD. */
function choleskyInPlace(matrix: Float64Array, offset: number, dim: number, lower: Float64Array, lowerOffset: number): boolean {
  for (let i = 0; i < dim; i++) {
    for (let j = 0; j <= i; j++) {
      let sum = matrix[offset + i * dim + j];
      for (let k = 0; k < j; k++) sum -= lower[lowerOffset + i * dim + k] * lower[lowerOffset + j * dim + k];
      if (i === j) {
        if (!(sum > 0)) return false;
        lower[lowerOffset + i * dim + i] = Math.sqrt(sum);
      } else {
        lower[lowerOffset + i * dim + j] = sum / lower[lowerOffset + j * dim + j];
      }
    }
    for (let j = i + 1; j < dim; j++) lower[lowerOffset + i * dim + j] = 0;
  }
  return true;
}

/** k-means++ centres (k × d): the first uniformly, each next with probability ∝ squared distance to the nearest chosen. */
export function kmeansPlusPlus(data: Float64Array, n: number, dim: number, k: number, rng: Rng): Float64Array {
  const centres = new Float64Array(k * dim);
  const nearest = new Float64Array(n).fill(Infinity);
  let pick = Math.min(n - 1, Math.floor(rng() * n));
  for (let c = 0; c < k; c++) {
    for (let j = 0; j < dim; j++) centres[c * dim + j] = data[pick * dim + j];
    let total = 0;
    for (let i = 0; i < n; i++) {
      let distance = 0;
      for (let j = 0; j < dim; j++) distance += (data[i * dim + j] - centres[c * dim + j]) ** 2;
      if (distance < nearest[i]) nearest[i] = distance;
      total += nearest[i];
    }
    if (c + 1 === k) break;
    if (!(total > 0)) {
      pick = Math.min(n - 1, Math.floor(rng() * n));
      continue;
    }
    let target = rng() * total;
    pick = n - 1;
    for (let i = 0; i < n; i++) {
      target -= nearest[i];
      if (target < 0) {
        pick = i;
        break;
      }
    }
  }
  return centres;
}

/** Hard assignments after up to `iterations` Lloyd steps from the given centres (centres updated in place). */
function lloyd(data: Float64Array, n: number, dim: number, k: number, centres: Float64Array, iterations: number): Int32Array {
  const labels = new Int32Array(n).fill(-1);
  const sums = new Float64Array(k * dim);
  const counts = new Float64Array(k);
  for (let iteration = 0; iteration < iterations; iteration++) {
    let changed = false;
    for (let i = 0; i < n; i++) {
      let best = 0;
      let bestDistance = Infinity;
      for (let c = 0; c < k; c++) {
        let distance = 0;
        for (let j = 0; j < dim; j++) distance += (data[i * dim + j] - centres[c * dim + j]) ** 2;
        if (distance < bestDistance) {
          bestDistance = distance;
          best = c;
        }
      }
      if (labels[i] !== best) {
        labels[i] = best;
        changed = true;
      }
    }
    if (!changed) break;
    sums.fill(0);
    counts.fill(0);
    for (let i = 0; i < n; i++) {
      counts[labels[i]]++;
      for (let j = 0; j < dim; j++) sums[labels[i] * dim + j] += data[i * dim + j];
    }
    for (let c = 0; c < k; c++) if (counts[c] > 0) for (let j = 0; j < dim; j++) centres[c * dim + j] = sums[c * dim + j] / counts[c];
  }
  return labels;
}

/**
 * M-step from responsibilities (n × K): weights, means, covariances with the ridge. Returns false when a
 * component holds fewer than d + 1 points' worth of weight (its covariance would rest on the ridge alone).
 */
function maximise(data: Float64Array, n: number, dim: number, k: number, resp: Float64Array, ridge: number, fit: MixtureFit): boolean {
  const { weights, means, covariances } = fit;
  weights.fill(0);
  means.fill(0);
  covariances.fill(0);
  for (let i = 0; i < n; i++) {
    for (let c = 0; c < k; c++) {
      const r = resp[i * k + c];
      weights[c] += r;
      for (let j = 0; j < dim; j++) means[c * dim + j] += r * data[i * dim + j];
    }
  }
  for (let c = 0; c < k; c++) {
    if (!(weights[c] >= dim + 1)) return false;
    for (let j = 0; j < dim; j++) means[c * dim + j] /= weights[c];
  }
  const centred = new Float64Array(dim);
  for (let i = 0; i < n; i++) {
    for (let c = 0; c < k; c++) {
      const r = resp[i * k + c];
      if (r === 0) continue;
      for (let j = 0; j < dim; j++) centred[j] = data[i * dim + j] - means[c * dim + j];
      const base = c * dim * dim;
      for (let a = 0; a < dim; a++) for (let b = 0; b <= a; b++) covariances[base + a * dim + b] += r * centred[a] * centred[b];
    }
  }
  for (let c = 0; c < k; c++) {
    const base = c * dim * dim;
    for (let a = 0; a < dim; a++) {
      for (let b = 0; b <= a; b++) {
        const value = covariances[base + a * dim + b] / weights[c] + (a === b ? ridge : 0);
        covariances[base + a * dim + b] = value;
        covariances[base + b * dim + a] = value;
      }
    }
    weights[c] /= n;
  }
  return true;
}

/** E-step: responsibilities into `resp`, returns the log-likelihood (−Infinity when a covariance is not SPD). */
function expectation(
  data: Float64Array,
  n: number,
  dim: number,
  k: number,
  fit: MixtureFit,
  resp: Float64Array,
  lowers: Float64Array,
  logNorms: Float64Array,
): number {
  for (let c = 0; c < k; c++) {
    if (!choleskyInPlace(fit.covariances, c * dim * dim, dim, lowers, c * dim * dim)) return -Infinity;
    let logDet = 0;
    for (let j = 0; j < dim; j++) logDet += 2 * Math.log(lowers[c * dim * dim + j * dim + j]);
    logNorms[c] = Math.log(fit.weights[c]) - 0.5 * logDet - 0.5 * dim * LOG_2PI;
  }
  const residual = new Float64Array(dim);
  let logLikelihood = 0;
  for (let i = 0; i < n; i++) {
    let max = -Infinity;
    for (let c = 0; c < k; c++) {
      const lowerBase = c * dim * dim;
      let quadratic = 0;
      for (let a = 0; a < dim; a++) {
        let sum = data[i * dim + a] - fit.means[c * dim + a];
        for (let b = 0; b < a; b++) sum -= lowers[lowerBase + a * dim + b] * residual[b];
        const y = sum / lowers[lowerBase + a * dim + a];
        residual[a] = y;
        quadratic += y * y;
      }
      const term = logNorms[c] - 0.5 * quadratic;
      resp[i * k + c] = term;
      if (term > max) max = term;
    }
    let sum = 0;
    for (let c = 0; c < k; c++) sum += Math.exp(resp[i * k + c] - max);
    const logSum = max + Math.log(sum);
    logLikelihood += logSum;
    for (let c = 0; c < k; c++) resp[i * k + c] = Math.exp(resp[i * k + c] - logSum);
  }
  return logLikelihood;
}

function emptyFit(dim: number, k: number, restart: number): MixtureFit {
  return {
    dim,
    components: k,
    weights: new Float64Array(k),
    means: new Float64Array(k * dim),
    covariances: new Float64Array(k * dim * dim),
    logLikelihood: -Infinity,
    parameters: mixtureParameters(k, dim),
    bic: Infinity,
    iterations: 0,
    converged: false,
    restart,
  };
}

/** One EM run from a k-means++ start. A start that collapses a component returns logLikelihood −Infinity. */
function emFromStart(
  data: Float64Array,
  n: number,
  dim: number,
  k: number,
  rng: Rng,
  restart: number,
  options: Required<Omit<MixtureOptions, 'seed' | 'restarts'>>,
): MixtureFit {
  const fit = emptyFit(dim, k, restart);
  const centres = kmeansPlusPlus(data, n, dim, k, rng);
  const labels = lloyd(data, n, dim, k, centres, 10);
  const resp = new Float64Array(n * k);
  for (let i = 0; i < n; i++) resp[i * k + labels[i]] = 1;
  if (!maximise(data, n, dim, k, resp, options.ridge, fit)) return fit;
  const lowers = new Float64Array(k * dim * dim);
  const logNorms = new Float64Array(k);
  let previous = -Infinity;
  for (let iteration = 1; iteration <= options.maxIterations; iteration++) {
    const logLikelihood = expectation(data, n, dim, k, fit, resp, lowers, logNorms);
    fit.iterations = iteration;
    if (!Number.isFinite(logLikelihood)) {
      fit.logLikelihood = -Infinity;
      return fit;
    }
    fit.logLikelihood = logLikelihood;
    // EM never lowers the likelihood; a gain below the tolerance (or a rounding-level loss) means converged.
    if (logLikelihood - previous < options.tolerance * n) {
      fit.converged = true;
      break;
    }
    previous = logLikelihood;
    if (!maximise(data, n, dim, k, resp, options.ridge, fit)) {
      fit.logLikelihood = -Infinity;
      return fit;
    }
  }
  if (!fit.converged) {
    // Out of iterations right after an M-step: measure the likelihood of the parameters being returned.
    const logLikelihood = expectation(data, n, dim, k, fit, resp, lowers, logNorms);
    fit.logLikelihood = Number.isFinite(logLikelihood) ? logLikelihood : -Infinity;
  }
  return fit;
}

/** The best of `restarts` EM runs with K components, by log-likelihood; its BIC filled in. */
export function fitMixture(data: Float64Array, n: number, dim: number, components: number, options: MixtureOptions): MixtureFit {
  const settings = {
    maxIterations: options.maxIterations ?? 300,
    tolerance: options.tolerance ?? 1e-5,
    ridge: options.ridge ?? DEFAULT_RIDGE,
  };
  const restarts = components === 1 ? 1 : (options.restarts ?? 3);
  let best = emptyFit(dim, components, 0);
  for (let restart = 0; restart < restarts; restart++) {
    const rng = rngFromSeed(`hhat-advise-em-v1\n${options.seed}\nK=${components}\nrestart=${restart}`);
    const fit = emFromStart(data, n, dim, components, rng, restart, settings);
    if (fit.logLikelihood > best.logLikelihood) best = fit;
  }
  best.bic = Number.isFinite(best.logLikelihood) ? -2 * best.logLikelihood + best.parameters * Math.log(n) : Infinity;
  return best;
}

/** The largest K worth trying: at most `maxComponents`, and at least 5 points per free parameter. */
export function componentLimit(n: number, dim: number, maxComponents: number): number {
  let k = 1;
  while (k < maxComponents && mixtureParameters(k + 1, dim) * 5 <= n) k++;
  return k;
}

/**
 * Fits K = 1, 2, … up to the limit and keeps the lowest BIC. The search stops early once two K in a row
 * beyond the best have a higher BIC: past the right K the criterion rises by about p·log n per component
 * while the likelihood barely moves, and those redundant fits are the slow ones for EM.
 */
export function selectMixture(
  data: Float64Array,
  n: number,
  dim: number,
  options: MixtureOptions & { maxComponents?: number },
): { best: MixtureFit; fits: MixtureFit[]; limit: number } {
  const limit = componentLimit(n, dim, options.maxComponents ?? 6);
  const fits: MixtureFit[] = [];
  let best: MixtureFit | undefined;
  for (let k = 1; k <= limit; k++) {
    const fit = fitMixture(data, n, dim, k, options);
    fits.push(fit);
    if (!best || fit.bic < best.bic) best = fit;
    if (k - best.components >= 2) break;
  }
  return { best: best!, fits, limit };
}

/** Eigenvalues of a small symmetric matrix (row-major d × d), ascending (ml-matrix's symmetric decomposition). */
export function symmetricEigenvalues(matrix: ArrayLike<number>, dim: number): number[] {
  const rows = Array.from({ length: dim }, (_, r) => Array.from({ length: dim }, (_, c) => matrix[r * dim + c]));
  return new EigenvalueDecomposition(new Matrix(rows), { assumeSymmetric: true }).realEigenvalues.sort((x, y) => x - y);
}
