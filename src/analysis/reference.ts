/**
 * Entropy relative to a reference density m: −∫ρ log(ρ/m) = h(ρ) + E_ρ[log m(X)], which is minus the
 * Kullback–Leibler divergence from m. Unlike h, it does not depend on the coordinates when m is carried along
 * by the same change of variables, but the choice of m remains a choice:
 *
 *   unit:W       m = 1/W^d, bins of width W in data units: the value is h − d·log W, the entropy in units of W
 *   uniform:a,b  m uniform on the box [a, b]^d: h − d·log(b − a) (every point must lie in the box)
 *   gaussian     m the Gaussian with the sample's mean and (maximum-likelihood) covariance: the value is
 *                h − ½ log((2πe)^d det Σ̂) = minus the negentropy, ≤ 0, zero exactly for Gaussian data
 *
 * For the gaussian reference the sample average of log m is exactly −½ log((2πe)^d det Σ̂), since the
 * average of (x − x̄)ᵀΣ̂⁻¹(x − x̄) over the sample is d when Σ̂ is the maximum-likelihood covariance.
 */
import type { Sample } from '../core/contracts.js';
import { UsageError } from '../core/errors.js';
import { cholesky } from '../math/linalg.js';
import { parseNumber } from '../core/spec.js';

export type Reference = { kind: 'unit'; width: number } | { kind: 'uniform'; low: number; high: number } | { kind: 'gaussian' };

export function parseReference(text: string): Reference {
  const trimmed = text.trim();
  if (trimmed === 'gaussian') return { kind: 'gaussian' };
  const colon = trimmed.indexOf(':');
  const kind = colon < 0 ? trimmed : trimmed.slice(0, colon);
  const args =
    colon < 0
      ? []
      : trimmed
          .slice(colon + 1)
          .split(',')
          .map((a) => a.trim());
  if (kind === 'unit') {
    const width = args.length === 1 ? parseNumber(args[0]) : undefined;
    if (width === undefined || !(width > 0) || !Number.isFinite(width))
      throw new UsageError(`--reference ${text}: write unit:W with a bin width W > 0 in data units`);
    return { kind: 'unit', width };
  }
  if (kind === 'uniform') {
    const [low, high] = args.map(parseNumber);
    if (args.length !== 2 || low === undefined || high === undefined || !(low < high) || !Number.isFinite(low) || !Number.isFinite(high)) {
      throw new UsageError(`--reference ${text}: write uniform:a,b with finite a < b (the box [a, b] in every coordinate)`);
    }
    return { kind: 'uniform', low, high };
  }
  throw new UsageError(`--reference ${text} is not allowed; use unit:W, uniform:a,b or gaussian`);
}

export function describeReference(reference: Reference): string {
  switch (reference.kind) {
    case 'unit':
      return `unit:${reference.width}`;
    case 'uniform':
      return `uniform:${reference.low},${reference.high}`;
    default:
      return 'gaussian';
  }
}

/** ½ log((2πe)^d det Σ̂) with the maximum-likelihood covariance of the sample. */
export function gaussianLogNormaliser(sample: Sample): number {
  const { n, dim, data } = sample;
  const mean = new Float64Array(dim);
  for (let i = 0; i < n; i++) for (let j = 0; j < dim; j++) mean[j] += data[i * dim + j] / n;
  const covariance = Array.from({ length: dim }, () => new Array<number>(dim).fill(0));
  for (let i = 0; i < n; i++) {
    for (let j = 0; j < dim; j++) {
      const dj = data[i * dim + j] - mean[j];
      for (let k = 0; k <= j; k++) covariance[j][k] += (dj * (data[i * dim + k] - mean[k])) / n;
    }
  }
  for (let j = 0; j < dim; j++) for (let k = 0; k < j; k++) covariance[k][j] = covariance[j][k];
  const factor = cholesky(covariance);
  if (!factor)
    throw new UsageError(
      '--reference gaussian: the sample covariance is singular (a constant or collinear column); this reference needs a full-rank covariance',
    );
  return 0.5 * (dim * Math.log(2 * Math.PI * Math.E) + factor.logDeterminant);
}

/** E_sample[log m(X)]: what turns an entropy estimate into an estimate relative to m. */
export function meanLogReference(reference: Reference, sample: Sample): number {
  switch (reference.kind) {
    case 'unit':
      return -sample.dim * Math.log(reference.width);
    case 'uniform': {
      for (let p = 0; p < sample.data.length; p++) {
        const v = sample.data[p];
        if (v < reference.low || v > reference.high) {
          throw new UsageError(
            `--reference uniform:${reference.low},${reference.high}: point ${Math.floor(p / sample.dim) + 1} has ${v} outside the box, where m = 0 and the relative entropy is −∞; widen the box`,
          );
        }
      }
      return -sample.dim * Math.log(reference.high - reference.low);
    }
    default:
      return -gaussianLogNormaliser(sample);
  }
}

/** The reference carried along by y = c·x (every coordinate), so the relative value keeps its meaning. */
export function rescaleReference(reference: Reference, c: number): Reference {
  switch (reference.kind) {
    case 'unit':
      return { kind: 'unit', width: reference.width * Math.abs(c) };
    case 'uniform': {
      const [a, b] = [reference.low * c, reference.high * c].sort((x, y) => x - y);
      return { kind: 'uniform', low: a, high: b };
    }
    default:
      // The Gaussian fitted to c·x is the pushforward of the one fitted to x: it carries itself along.
      return reference;
  }
}
