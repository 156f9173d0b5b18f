/**
 * The samples of the conformance suite (src/conformance.ts): seeded draws from the project's scenarios, and
 * the exact transforms the checks apply to them (row permutation, rescaling by powers of two, shifts, an
 * affine map, swapping X and Y, broken copies). Every transform returns a new sample and leaves its input
 * alone, so each check works on values no earlier estimate can have touched.
 */
import type { Quantity, Sample } from '../core/contracts.js';
import { replicateRng, rngFromSeed } from '../core/rng.js';
import { parseScenario } from '../../scenarios/index.js';

/** Base seed of every draw the suite makes: the same estimator always meets the same samples. */
export const CONFORMANCE_SEED = 20260415;

/** A new sample with its own copies of the values (and of the Q sample's). */
export function cloneSample(sample: Sample): Sample {
  const copy: Sample = { ...sample, data: Float64Array.from(sample.data) };
  if (sample.q) copy.q = cloneSample(sample.q);
  return copy;
}

/** The scenario spec whose draws the suite uses for a quantity in dimension d, and the truth it knows. */
export function lawFor(quantity: Quantity, dim: number): string {
  switch (quantity) {
    case 'entropy':
      // Correlated coordinates for d > 1, so an estimator that assumes independent coordinates shows it.
      return dim === 1 ? 'normal:mu=0,sigma=1' : `gaussian:dim=${dim},rho=0.5`;
    // The dependent quantities' laws hold about 0.4–0.9 nats per coordinate pair (or triple, or dimension), so
    // an estimate reported in bits (1.443 times the nats) misses the known value by 0.17–0.39 nats, beyond its
    // tolerance plus the largest error a built-in makes there (src/analysis/conformance.ts).
    case 'mutual-information': {
      const dimX = Math.ceil(dim / 2);
      return `mi-gaussian:dimX=${dimX},dimY=${dim - dimX},rho=0.9,within=0`;
    }
    case 'conditional-mutual-information': {
      // X and Y share Z's influence (rhoXZ, rhoYZ) and keep some of their own (partial correlation 0.6).
      const dimX = Math.ceil(dim / 3);
      const dimY = Math.ceil((dim - dimX) / 2);
      return `cmi-gaussian:dimX=${dimX},dimY=${dimY},dimZ=${dim - dimX - dimY},rhoXY=0.9,rhoXZ=0.5,rhoYZ=0.5`;
    }
    case 'transfer-entropy':
      // Coupling X → Y only, both series with memory: TE(X → Y) = 0.3826 nats (k = l = 1), TE(Y → X) = 0. Not
      // stronger: te-ksg's bias at longer histories grows with the coupling (−0.28 nats at k = l = 3 with cXY = 2).
      return 'te-var1:a=0.5,b=0.5,cXY=1,cYX=0';
    case 'divergence':
      // Q wider than P, so every region holding P points holds Q points too (a plug-in stays finite).
      return `kl-gaussian:dim=${dim},shift=2,sigma=3,rho=0`;
  }
}

/** The correlated divergence pair of the affine check: a linear map then changes more than coordinate scales. */
export function affineLaw(dim: number): string {
  return `kl-gaussian:dim=${dim},shift=0.5,sigma=2,rho=0.5`;
}

/** One seeded draw of n points from a scenario; `replicate` picks an independent stream. */
export function draw(spec: string, n: number, replicate = 0): { sample: Sample; truth: number; id: string } {
  const scenario = parseScenario(spec);
  return { sample: scenario.sample(replicateRng(CONFORMANCE_SEED, scenario.id, n, replicate), n), truth: scenario.truth, id: scenario.id };
}

/** Two independent draws of n points from one uniform law in d dimensions, as P and Q: D(P ‖ Q) = 0. */
export function sameLawPair(dim: number, n: number): { sample: Sample; id: string } {
  const spec = `uniform-box:dim=${dim},width=1,aspect=1`;
  const p = draw(spec, n, 0);
  const q = draw(spec, n, 1);
  return { sample: { ...p.sample, q: q.sample }, id: p.id };
}

/** The rows in a seeded random order (Fisher–Yates); a divergence's P and Q rows each get their own order. */
export function permuteRows(sample: Sample, seed = 'rows'): Sample {
  const { n, dim, data } = sample;
  const rng = rngFromSeed(`hhat-conformance-permutation\n${seed}`);
  const order = new Int32Array(n);
  for (let i = 0; i < n; i++) order[i] = i;
  for (let i = n - 1; i > 0; i--) {
    const j = Math.floor(rng() * (i + 1));
    const t = order[i];
    order[i] = order[j];
    order[j] = t;
  }
  const out = new Float64Array(n * dim);
  for (let i = 0; i < n; i++) out.set(data.subarray(order[i] * dim, order[i] * dim + dim), i * dim);
  const permuted: Sample = { ...sample, data: out };
  if (sample.q) permuted.q = permuteRows(sample.q, `${seed}\nq`);
  return permuted;
}

/**
 * The sample with the rows of its first `columns` columns (X; a transfer-entropy sample's source series)
 * permuted by a seeded shuffle and the rest left in place: whatever tied X to the other columns is gone, so
 * every information measure of X with them (MI, conditional MI, transfer entropy from X) is 0.
 */
export function shuffleLeadingColumns(sample: Sample, columns: number, seed = 'independence'): Sample {
  const { n, dim, data } = sample;
  const shuffled = permuteRows(
    { n, dim: columns, data: Float64Array.from({ length: n * columns }, (_, p) => data[Math.floor(p / columns) * dim + (p % columns)]) },
    seed,
  );
  const out = Float64Array.from(data);
  for (let i = 0; i < n; i++) for (let j = 0; j < columns; j++) out[i * dim + j] = shuffled.data[i * columns + j];
  return { ...sample, data: out };
}

/**
 * Every value of column j times factors[j] and plus shifts[j] (both samples of a divergence alike). With
 * powers of two as factors and no shift the new values are exact.
 */
export function mapColumns(sample: Sample, factors: readonly number[], shifts: readonly number[]): Sample {
  const { n, dim, data } = sample;
  const out = new Float64Array(n * dim);
  for (let p = 0; p < n * dim; p++) out[p] = data[p] * factors[p % dim] + shifts[p % dim];
  const mapped: Sample = { ...sample, data: out };
  if (sample.q) mapped.q = mapColumns(sample.q, factors, shifts);
  return mapped;
}

/**
 * An invertible affine map x → Ax + b of dimension d: A lower bidiagonal, A_jj = 1 + j/2 and A_j,j−1 = 0.75,
 * so it shears and stretches unequally (det A = Π (1 + j/2) ≠ 0); b_j = 1 − j/2.
 */
export function affineMap(dim: number): { matrix: Float64Array; shift: Float64Array } {
  const matrix = new Float64Array(dim * dim);
  const shift = new Float64Array(dim);
  for (let j = 0; j < dim; j++) {
    matrix[j * dim + j] = 1 + j / 2;
    if (j > 0) matrix[j * dim + j - 1] = 0.75;
    shift[j] = 1 - j / 2;
  }
  return { matrix, shift };
}

/** Every row x of the sample (and of its Q sample) replaced by Ax + b. */
export function applyAffine(sample: Sample, matrix: Float64Array, shift: Float64Array): Sample {
  const { n, dim, data } = sample;
  const out = new Float64Array(n * dim);
  for (let i = 0; i < n; i++) {
    for (let r = 0; r < dim; r++) {
      let sum = shift[r];
      for (let c = 0; c < dim; c++) sum += matrix[r * dim + c] * data[i * dim + c];
      out[i * dim + r] = sum;
    }
  }
  const mapped: Sample = { ...sample, data: out };
  if (sample.q) mapped.q = applyAffine(sample.q, matrix, shift);
  return mapped;
}

/**
 * Y's columns first, then X's: the sample of (Y, X), with xDim the old Y dimension. A conditional-MI sample
 * (yDim given) keeps its Z columns last: the sample of (Y, X, Z).
 */
export function swapParts(sample: Sample): Sample {
  const { n, dim, data } = sample;
  const xDim = sample.xDim ?? 1;
  const yDim = sample.yDim ?? dim - xDim;
  const end = xDim + yDim;
  const out = new Float64Array(n * dim);
  for (let i = 0; i < n; i++) {
    const row = i * dim;
    out.set(data.subarray(row + xDim, row + end), row);
    out.set(data.subarray(row, row + xDim), row + yDim);
    out.set(data.subarray(row + end, row + dim), row + end);
  }
  return { ...sample, data: out, xDim: yDim, ...(sample.yDim !== undefined ? { yDim: xDim } : {}) };
}

/** A copy with one value replaced (row and column from 0). */
export function withValue(sample: Sample, row: number, column: number, value: number): Sample {
  const copy = cloneSample(sample);
  copy.data[row * sample.dim + column] = value;
  return copy;
}

/** The first `rows` rows (a divergence's Q sample kept whole). */
export function firstRows(sample: Sample, rows: number): Sample {
  return { ...sample, n: rows, data: sample.data.slice(0, rows * sample.dim), ...(sample.q ? { q: cloneSample(sample.q) } : {}) };
}

/** The sample's n rows in d columns: the first columns of each row, or extra columns of seeded uniform values. */
export function withDimension(sample: Sample, dim: number): Sample {
  const { n } = sample;
  const rng = rngFromSeed('hhat-conformance-extra-column');
  const out = new Float64Array(n * dim);
  for (let i = 0; i < n; i++) for (let j = 0; j < dim; j++) out[i * dim + j] = j < sample.dim ? sample.data[i * sample.dim + j] : rng();
  const reshaped: Sample = { n, dim, data: out };
  if (sample.xDim !== undefined) reshaped.xDim = Math.min(sample.xDim, dim);
  if (sample.yDim !== undefined) reshaped.yDim = sample.yDim;
  if (sample.q) reshaped.q = withDimension(sample.q, dim);
  return reshaped;
}

/** Where two samples differ in any value, shape or split, as one line; null when they are bit-for-bit the same. */
export function firstDifference(before: Sample, after: Sample, which = ''): string | null {
  if (before.n !== after.n || before.dim !== after.dim || before.xDim !== after.xDim || before.yDim !== after.yDim) {
    return `${which}sample shape changed: n ${before.n} → ${after.n}, d ${before.dim} → ${after.dim}, xDim ${before.xDim} → ${after.xDim}, yDim ${before.yDim} → ${after.yDim}`;
  }
  for (let p = 0; p < before.n * before.dim; p++) {
    if (!Object.is(before.data[p], after.data[p])) {
      return `${which}row ${Math.floor(p / before.dim) + 1}, column ${(p % before.dim) + 1} was ${before.data[p]}, is now ${after.data[p]}`;
    }
  }
  if (before.q && after.q) return firstDifference(before.q, after.q, 'Q sample: ');
  if (Boolean(before.q) !== Boolean(after.q)) return `${which}the Q sample was ${before.q ? 'removed' : 'added'}`;
  return null;
}
