import type { Sample } from './contracts.js';
import { EstimateError } from './errors.js';
import { rngFromSeed } from './rng.js';

/**
 * A sample with the fields of `sample` (xDim, yDim, Q) and these rows. Built field by field, not by spreading
 * `sample`: V8 gave spread copies maps of their own, and each new map made the estimators that read samples
 * compile again. Plain samples get the map of the scenarios' own `{ n, dim, data }`.
 */
export function withRows(sample: Sample, n: number, data: Float64Array, q: Sample | undefined = sample.q): Sample {
  const out: Sample = { n, dim: sample.dim, data };
  if (sample.xDim !== undefined) out.xDim = sample.xDim;
  if (sample.yDim !== undefined) out.yDim = sample.yDim;
  if (q !== undefined) out.q = q;
  return out;
}

/** Copy of column j. */
/** A copy of the sample's values (and of its Q sample), sharing nothing that could be written. */
export function copyOfSample(sample: Sample): Sample {
  return withRows(sample, sample.n, sample.data.slice(0, sample.n * sample.dim), sample.q && copyOfSample(sample.q));
}

export function column(sample: Sample, j: number): Float64Array {
  const out = new Float64Array(sample.n);
  for (let i = 0, p = j; i < sample.n; i++, p += sample.dim) out[i] = sample.data[p];
  return out;
}

/** Sorted copy of a one-dimensional sample's values. */
export function sortedValues(sample: Sample): Float64Array {
  if (sample.dim !== 1) throw new RangeError('sortedValues needs a one-dimensional sample');
  return sample.data.slice().sort();
}

/** Columns [from, to) of a sample as a new sample. */
export function selectColumns(sample: Sample, columns: readonly number[]): Sample {
  const dim = columns.length;
  const data = new Float64Array(sample.n * dim);
  for (let i = 0; i < sample.n; i++) {
    for (let j = 0; j < dim; j++) data[i * dim + j] = sample.data[i * sample.dim + columns[j]];
  }
  return { n: sample.n, dim, data };
}

/** Throws EstimateError('invalid-input'), naming estimator `id` and the row and column, at the first non-finite value. */
export function checkFiniteValues(id: string, sample: Sample): void {
  const { data, n, dim } = sample;
  for (let p = 0; p < n * dim; p++) {
    if (!Number.isFinite(data[p])) {
      throw new EstimateError(
        'invalid-input',
        `${id}: value ${data[p]} at row ${Math.floor(p / dim) + 1}, column ${(p % dim) + 1}; only finite numbers are allowed`,
      );
    }
  }
}

/**
 * A uniform sample of m of the n rows, without replacement, in their original order: each row gets a key
 * from `rng` and the m rows with the smallest keys are kept. The m smallest of n independent uniform keys
 * are a uniformly random m-subset, and with the same keys a smaller subsample is part of every larger one,
 * so estimators cut to different sizes still share rows (their comparison stays paired). `xDim` carries
 * over; a divergence's Q sample is not touched.
 */
export function uniformRowSubsample(sample: Sample, m: number, rng: () => number): Sample {
  const { n, dim, data } = sample;
  if (!Number.isInteger(m) || m < 0 || m > n) throw new RangeError(`a subsample of ${m} rows needs 0 ≤ m ≤ n = ${n}`);
  const keys = new Float64Array(n);
  for (let i = 0; i < n; i++) keys[i] = rng();
  // The m-th smallest key (53-bit keys: ties have probability about n²·2⁻⁵³).
  const threshold = m === 0 ? -1 : Float64Array.from(keys).sort()[m - 1];
  const out = new Float64Array(m * dim);
  for (let i = 0, kept = 0; i < n && kept < m; i++) {
    if (keys[i] <= threshold) {
      for (let j = 0, from = i * dim, to = kept * dim; j < dim; j++) out[to + j] = data[from + j];
      kept++;
    }
  }
  return withRows(sample, m, out);
}

/**
 * `rows` of the sample's rows by uniformRowSubsample, keys drawn from a stream seeded by `seed` alone, so
 * smaller subsamples of one sample and seed lie inside larger ones (a divergence's Q sample likewise, cut in
 * proportion, from its own stream); the sample itself when rows ≥ n.
 */
export function seededRowSubsample(sample: Sample, rows: number, seed: string): Sample {
  if (rows >= sample.n) return sample;
  const cut = uniformRowSubsample(sample, rows, rngFromSeed(`hhat-row-subsample\n${seed}`));
  if (!sample.q) return cut;
  const qRows = Math.min(sample.q.n, Math.max(1, Math.round((sample.q.n * rows) / sample.n)));
  return withRows(cut, cut.n, cut.data, uniformRowSubsample(sample.q, qRows, rngFromSeed(`hhat-row-subsample\n${seed}\nq`)));
}

/**
 * Rows 0, t, 2t, … of a sample (`xDim` and `yDim` kept; a divergence's Q sample thinned alike): the rows of a serial
 * sample that are t steps apart in time. The same sample comes back when t = 1.
 */
export function thinRows(sample: Sample, t: number): Sample {
  if (t === 1) return sample;
  const { dim } = sample;
  const n = Math.ceil(sample.n / t);
  const data = new Float64Array(n * dim);
  for (let i = 0; i < n; i++) for (let j = 0; j < dim; j++) data[i * dim + j] = sample.data[i * t * dim + j];
  // Every field but the rows themselves carries over (xDim, yDim; Q is thinned alike).
  return withRows(sample, n, data, sample.q ? thinRows(sample.q, t) : undefined);
}

/**
 * The rows of an n × xDim array (X's columns) as dense label codes 0..L−1 in order of first appearance: rows equal
 * in every coordinate share a code, −0 and +0 alike (a Map's number keys already treat them as one).
 */
export function labelCodes(x: Float64Array, n: number, xDim: number): { codes: Int32Array; count: number } {
  const seen = new Map<number | string, number>();
  const codes = new Int32Array(n);
  for (let i = 0; i < n; i++) {
    const key = xDim === 1 ? x[i] : Array.from(x.subarray(i * xDim, (i + 1) * xDim), (v) => (v === 0 ? 0 : v)).join(',');
    let code = seen.get(key);
    if (code === undefined) seen.set(key, (code = seen.size));
    codes[i] = code;
  }
  return { codes, count: seen.size };
}
