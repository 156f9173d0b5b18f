import type { Sample } from './contracts.js';
import { EstimateError } from './errors.js';

/** Wraps row-major values as a sample; checks the length. */
export function makeSample(data: Float64Array, dim: number): Sample {
  if (dim < 1 || !Number.isInteger(dim)) throw new RangeError(`dim must be a positive integer, got ${dim}`);
  if (data.length % dim !== 0) throw new RangeError(`data length ${data.length} is not a multiple of dim ${dim}`);
  return { n: data.length / dim, dim, data };
}

/** Copy of column j. */
export function column(sample: Sample, j: number): Float64Array {
  const out = new Float64Array(sample.n);
  for (let i = 0, p = j; i < sample.n; i++, p += sample.dim) out[i] = sample.data[p];
  return out;
}

/** Sorted copy of a one-dimensional sample's values. */
export function sortedValues(sample: Sample): Float64Array {
  if (sample.dim !== 1) throw new RangeError('sortedValues needs a one-dimensional sample');
  return Float64Array.from(sample.data).sort();
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
      throw new EstimateError('invalid-input', `${id}: value ${data[p]} at row ${Math.floor(p / dim) + 1}, column ${(p % dim) + 1}; only finite numbers are allowed`);
    }
  }
}
