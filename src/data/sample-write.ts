/**
 * Samples out to files: `.npy` (float64, little-endian, C order), CSV and JSON, each produced as a sequence of
 * chunks (one sample, or a block of rows) so that a writer can stream many replicates without holding them all.
 * Numbers are written in the shortest form that reads back to the same double (ECMAScript's Number-to-String,
 * which is exactly that), so a CSV or JSON file round-trips bit for bit.
 *
 *   writeFileAtomic('draws.npy', npyChunks([3, n, dim], samples.map((s) => s.data)));
 */
import { float64Bytes, npyFloat64Header } from './npy-write.js';

/**
 * Column names of a sample: x1..xd, or for mutual information X's x1..x_xDim then Y's y1..y_(d−xDim), or for
 * conditional mutual information (yDim given) x1..x_xDim, y1..y_yDim, then Z's z1..z_(d−xDim−yDim).
 */
export function sampleColumnNames(dim: number, xDim?: number, yDim?: number): string[] {
  if (xDim === undefined) return Array.from({ length: dim }, (_, j) => `x${j + 1}`);
  const yEnd = yDim === undefined ? dim : xDim + yDim;
  return Array.from({ length: dim }, (_, j) => (j < xDim ? `x${j + 1}` : j < yEnd ? `y${j - xDim + 1}` : `z${j - yEnd + 1}`));
}

/**
 * A double as text that reads back to the same double: String(x) is the shortest such decimal; −0 is written
 * "-0.0" because String(−0) is "0" and Python's json reads "-0" as the integer 0.
 */
export function exactNumberText(x: number): string {
  return Object.is(x, -0) ? '-0.0' : String(x);
}

const LITTLE_ENDIAN_HOST = new Uint8Array(new Float64Array([1]).buffer)[7] === 0x3f;

/** The array's values as little-endian float64 bytes (its own bytes on a little-endian machine: no copy). */
function littleEndianBytes(data: Float64Array): Uint8Array {
  if (LITTLE_ENDIAN_HOST) return float64Bytes(data);
  const bytes = new Uint8Array(data.length * 8);
  const view = new DataView(bytes.buffer);
  for (let i = 0; i < data.length; i++) view.setFloat64(i * 8, data[i], true);
  return bytes;
}

/**
 * A `.npy` file of the given shape, whose values are the arrays in order (C order: the last axis varies
 * fastest, so stacking row-major n × d samples gives shape (R, n, d)). Refuses arrays that do not fill the shape.
 */
export function* npyChunks(shape: readonly number[], arrays: Iterable<Float64Array>): Generator<Uint8Array> {
  const expected = shape.reduce((a, b) => a * b, 1);
  yield npyFloat64Header(shape);
  let count = 0;
  for (const data of arrays) {
    count += data.length;
    if (count > expected) break;
    yield littleEndianBytes(data);
  }
  if (count !== expected) throw new Error(`npy shape (${shape.join(', ')}) holds ${expected} values; ${count > expected ? 'more' : 'only'} ${count} given`);
}

/** Rows per text chunk: keeps each string small whatever n is. */
const ROWS_PER_CHUNK = 4096;

export interface LabelledSample {
  replicate: number;
  dim: number;
  data: Float64Array;
}

/** The sample's rows in blocks of ROWS_PER_CHUNK, each row as its values in exact text joined by commas. */
function* rowBlocks(dim: number, data: Float64Array): Generator<string[]> {
  const n = data.length / dim;
  const fields = new Array<string>(dim);
  for (let start = 0; start < n; start += ROWS_PER_CHUNK) {
    const end = Math.min(n, start + ROWS_PER_CHUNK);
    const rows = new Array<string>(end - start);
    for (let i = start; i < end; i++) {
      for (let j = 0; j < dim; j++) fields[j] = exactNumberText(data[i * dim + j]);
      rows[i - start] = fields.join(',');
    }
    yield rows;
  }
}

/**
 * CSV with a header of column names; with `replicateColumn`, a first column `replicate` says which replicate
 * each row belongs to (several replicates in one table).
 */
export function* csvChunks(names: readonly string[], samples: Iterable<LabelledSample>, replicateColumn: boolean): Generator<string> {
  yield `${replicateColumn ? 'replicate,' : ''}${names.join(',')}\n`;
  for (const { replicate, dim, data } of samples) {
    const prefix = replicateColumn ? `${replicate},` : '';
    for (const rows of rowBlocks(dim, data)) yield `${prefix}${rows.join(`\n${prefix}`)}\n`;
  }
}

/** Rows of a sample as JSON: `[[x11,x12],\n[x21,x22]]`, one row per line. */
function* jsonRows(dim: number, data: Float64Array): Generator<string> {
  let first = true;
  yield '[';
  for (const rows of rowBlocks(dim, data)) {
    yield `${first ? '' : ',\n'}[${rows.join('],\n[')}]`;
    first = false;
  }
  yield ']';
}

export interface LabelledDraw extends LabelledSample {
  /** A divergence's sample from Q. */
  q?: { dim: number; data: Float64Array };
}

/**
 * A JSON object: the fields of `head`, then `samples`, one entry per replicate holding `replicate`, `data` (rows)
 * and, for a divergence, `q` (rows of the sample from Q).
 */
export function* jsonChunks(head: Record<string, unknown>, samples: Iterable<LabelledDraw>): Generator<string> {
  const opening = JSON.stringify(head, null, 2);
  yield `${opening.slice(0, opening.lastIndexOf('}')).trimEnd()},\n  "samples": [`;
  let first = true;
  for (const { replicate, dim, data, q } of samples) {
    yield `${first ? '' : ','}\n{"replicate": ${replicate}, "data": `;
    yield* jsonRows(dim, data);
    if (q) {
      yield ',\n"q": ';
      yield* jsonRows(q.dim, q.data);
    }
    yield '}';
    first = false;
  }
  yield '\n  ]\n}\n';
}
