import { CholeskyDecomposition, Matrix } from 'ml-matrix';

export interface CholeskyFactor {
  dim: number;
  /** Lower-triangular L with LLᵀ = Σ, row-major. */
  lower: Float64Array;
  /** log det Σ = 2 Σ log L_ii. */
  logDeterminant: number;
}

/** Cholesky factor of a symmetric positive-definite matrix (ml-matrix); undefined when it is not SPD. */
export function cholesky(matrix: readonly (readonly number[])[]): CholeskyFactor | undefined {
  const dim = matrix.length;
  const decomposition = new CholeskyDecomposition(new Matrix(matrix.map((row) => [...row])));
  if (!decomposition.isPositiveDefinite()) return undefined;
  const l = decomposition.lowerTriangularMatrix;
  const lower = new Float64Array(dim * dim);
  let logDeterminant = 0;
  for (let i = 0; i < dim; i++) {
    for (let j = 0; j <= i; j++) lower[i * dim + j] = l.get(i, j);
    const diagonal = l.get(i, i);
    if (!(diagonal > 0)) return undefined;
    logDeterminant += 2 * Math.log(diagonal);
  }
  return { dim, lower, logDeterminant };
}

/** out = L·z for lower-triangular row-major L. */
export function lowerTimes(lower: Float64Array, dim: number, z: Float64Array, out: Float64Array, outOffset = 0): void {
  for (let i = 0; i < dim; i++) {
    let sum = 0;
    const row = i * dim;
    for (let j = 0; j <= i; j++) sum += lower[row + j] * z[j];
    out[outOffset + i] = sum;
  }
}

/** Solves L·y = b in place (forward substitution). */
export function solveLower(lower: Float64Array, dim: number, b: Float64Array): void {
  for (let i = 0; i < dim; i++) {
    let sum = b[i];
    const row = i * dim;
    for (let j = 0; j < i; j++) sum -= lower[row + j] * b[j];
    b[i] = sum / lower[row + i];
  }
}
