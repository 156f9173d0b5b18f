/**
 * Prewhitening for the multivariate kernel estimate: z = L⁻¹(x − x̄), with L the Cholesky factor of the
 * sample covariance (divisor n − 1). A Gaussian kernel with covariance h²Σ̂ on x is a spherical kernel of
 * width h on z, and the entropy moves by exactly ½ log det Σ̂ = Σ_k log L_kk under the linear map.
 */
import type { Sample } from '../../src/core/contracts.js';
import { EstimateError } from '../../src/core/errors.js';

/**
 * A column whose variance left after regressing on the earlier columns is below this fraction of its own
 * variance makes the covariance singular for our purpose: whitening would amplify rounding by > 10⁶.
 */
export const SINGULAR_VARIANCE_FRACTION = 1e-12;

export interface Whitened {
  /** Whitened points, row-major n × dim. */
  z: Float64Array;
  /** ½ log det of the sample covariance. */
  halfLogDet: number;
}

export function whiten(sample: Sample): Whitened {
  const { n, dim, data } = sample;
  const mean = new Float64Array(dim);
  for (let i = 0; i < n; i++) for (let k = 0; k < dim; k++) mean[k] += data[i * dim + k];
  for (let k = 0; k < dim; k++) mean[k] /= n;
  const covariance = new Float64Array(dim * dim);
  const centred = new Float64Array(dim);
  for (let i = 0; i < n; i++) {
    for (let k = 0; k < dim; k++) centred[k] = data[i * dim + k] - mean[k];
    for (let a = 0; a < dim; a++) for (let b = 0; b <= a; b++) covariance[a * dim + b] += centred[a] * centred[b];
  }
  for (let a = 0; a < dim; a++) for (let b = 0; b <= a; b++) covariance[a * dim + b] /= n - 1;

  // Cholesky of the correlation matrix, so the singularity test is scale free; then L = D^½ L_R.
  const scale = new Float64Array(dim);
  for (let k = 0; k < dim; k++) {
    const variance = covariance[k * dim + k];
    if (!(variance > 0)) {
      throw new EstimateError(
        'invalid-input',
        `kernel: column ${k + 1} is constant, so the sample covariance is singular; drop the column (the entropy of a point mass is −∞)`,
      );
    }
    if (!Number.isFinite(variance)) {
      throw new EstimateError('numeric', `kernel: the variance of column ${k + 1} overflows; rescale the data`);
    }
    scale[k] = Math.sqrt(variance);
  }
  const factor = new Float64Array(dim * dim);
  let halfLogDet = 0;
  for (let a = 0; a < dim; a++) {
    for (let b = 0; b <= a; b++) {
      let value = covariance[a * dim + b] / (scale[a] * scale[b]);
      for (let k = 0; k < b; k++) value -= factor[a * dim + k] * factor[b * dim + k];
      if (a === b) {
        if (!(value > SINGULAR_VARIANCE_FRACTION)) {
          throw new EstimateError(
            'invalid-input',
            `kernel: the sample covariance is singular (column ${a + 1} is a linear combination of earlier columns, or n ≤ d); the points lie on a lower-dimensional subspace, so drop dependent columns`,
          );
        }
        factor[a * dim + a] = Math.sqrt(value);
        halfLogDet += Math.log(factor[a * dim + a]) + Math.log(scale[a]);
      } else {
        factor[a * dim + b] = value / factor[b * dim + b];
      }
    }
  }
  for (let a = 0; a < dim; a++) for (let b = 0; b <= a; b++) factor[a * dim + b] *= scale[a];

  const z = new Float64Array(n * dim);
  for (let i = 0; i < n; i++) {
    const row = i * dim;
    for (let a = 0; a < dim; a++) {
      let value = data[row + a] - mean[a];
      for (let b = 0; b < a; b++) value -= factor[a * dim + b] * z[row + b];
      z[row + a] = value / factor[a * dim + a];
    }
  }
  return { z, halfLogDet };
}
