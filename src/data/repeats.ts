/**
 * Repeated values in a sample. Spacing and nearest-neighbour estimators take logs of distances between
 * points, so exact repeats (from rounding at recording time, censoring, or pasted rows) push them toward
 * -Infinity. Estimators refer users here when they meet ties; the smallest gap between distinct values
 * hints at the resolution the data were recorded with.
 *
 * Cost: per column, one radix sort of the values and one of the row codes, each linear in n.
 */
import type { Sample } from '../core/contracts.js';

export interface ColumnRepeats {
  /** Distinct values in the column. */
  distinct: number;
  /** Values equal to at least one other value of the column (so a pair of equal values counts 2). */
  tiedValues: number;
  /** Size of the largest group of equal values (1 when there are no ties). */
  largestGroup: number;
  /** Smallest positive difference between sorted distinct values; NaN when there are fewer than two. */
  smallestGap: number;
}

export interface RepeatReport {
  n: number;
  /** Rows equal in every column to an earlier row (n minus the number of distinct rows). */
  repeatedRows: number;
  columns: ColumnRepeats[];
}

const hostLittleEndian = new Uint8Array(new Uint16Array([1]).buffer)[0] === 1;

/**
 * Indices 0..n-1 in ascending order of value, by a least-significant-digit radix sort on the IEEE 754 bit
 * patterns: four passes of 16 bits, each moving the keys along with the indices so reads stay sequential,
 * and skipping a pass whose digit is the same for every value. Flipping the sign bit of positives and every
 * bit of negatives makes unsigned bit order the numeric order, with -0 just before +0. Linear in n, all in
 * typed arrays, no comparator calls.
 */
export function sortedOrder(values: Float64Array): Uint32Array {
  const n = values.length;
  const raw = new Uint32Array(values.buffer, values.byteOffset, n * 2);
  const highWord = hostLittleEndian ? 1 : 0;
  let high = new Uint32Array(n);
  let low = new Uint32Array(n);
  let order = new Uint32Array(n);
  const counts = new Int32Array(4 * 65536);
  for (let i = 0; i < n; i++) {
    let h = raw[2 * i + highWord];
    let l = raw[2 * i + 1 - highWord];
    if (h & 0x80000000) {
      h = ~h >>> 0;
      l = ~l >>> 0;
    } else {
      h = (h | 0x80000000) >>> 0;
    }
    high[i] = h;
    low[i] = l;
    order[i] = i;
    counts[l & 0xffff]++;
    counts[65536 + (l >>> 16)]++;
    counts[131072 + (h & 0xffff)]++;
    counts[196608 + (h >>> 16)]++;
  }
  let nextHigh = new Uint32Array(n);
  let nextLow = new Uint32Array(n);
  let nextOrder = new Uint32Array(n);
  for (let pass = 0; pass < 4; pass++) {
    const base = pass * 65536;
    const shift = (pass & 1) * 16;
    const fromHigh = pass >= 2;
    const first = ((fromHigh ? high[0] : low[0]) >>> shift) & 0xffff;
    if (n === 0 || counts[base + first] === n) continue;
    let total = 0;
    for (let d = 0; d < 65536; d++) {
      const count = counts[base + d];
      counts[base + d] = total;
      total += count;
    }
    for (let i = 0; i < n; i++) {
      const digit = ((fromHigh ? high[i] : low[i]) >>> shift) & 0xffff;
      const to = counts[base + digit]++;
      nextHigh[to] = high[i];
      nextLow[to] = low[i];
      nextOrder[to] = order[i];
    }
    [high, nextHigh] = [nextHigh, high];
    [low, nextLow] = [nextLow, low];
    [order, nextOrder] = [nextOrder, order];
  }
  return order;
}

/**
 * Counts exact repeats per column and across whole rows. Expects finite values (the readers guarantee it).
 * -0 and +0 count as one value, as they compare equal.
 */
export function findRepeats(sample: Sample): RepeatReport {
  const { n, dim, data } = sample;
  const columns: ColumnRepeats[] = [];
  const column = new Float64Array(n);
  const rank = new Float64Array(n);
  // Row identity as a dense integer code, refined column by column: rows share a code exactly when they
  // agree on every column seen so far. Codes stay below n, so code * distinct + rank stays exact below 2^53.
  const rowCode = new Float64Array(n);
  let rowCodes = n > 0 ? 1 : 0;
  for (let j = 0; j < dim; j++) {
    for (let i = 0; i < n; i++) column[i] = data[i * dim + j];
    const order = sortedOrder(column);
    let distinct = 0;
    let tiedValues = 0;
    let largestGroup = 0;
    let smallestGap = NaN;
    for (let start = 0; start < n;) {
      const value = column[order[start]];
      let stop = start;
      while (stop < n && column[order[stop]] === value) rank[order[stop++]] = distinct;
      const group = stop - start;
      if (group > 1) tiedValues += group;
      if (group > largestGroup) largestGroup = group;
      if (distinct > 0) {
        const gap = value - column[order[start - 1]];
        if (!(gap >= smallestGap)) smallestGap = gap;
      }
      distinct++;
      start = stop;
    }
    columns.push({ distinct, tiedValues, largestGroup, smallestGap });
    if (j === 0) {
      rowCode.set(rank);
      rowCodes = distinct;
    } else if (rowCodes < n) {
      // Once every row has its own code, later columns cannot make two rows equal; skip the work.
      for (let i = 0; i < n; i++) rowCode[i] = rowCode[i] * distinct + rank[i];
      const codeOrder = sortedOrder(rowCode);
      rowCodes = 0;
      for (let start = 0; start < n;) {
        const code = rowCode[codeOrder[start]];
        let stop = start;
        while (stop < n && rowCode[codeOrder[stop]] === code) rank[codeOrder[stop++]] = rowCodes;
        rowCodes++;
        start = stop;
      }
      rowCode.set(rank);
    }
  }
  return { n, repeatedRows: n - rowCodes, columns };
}

/**
 * The report as short lines for people, e.g.
 * `"x": 12 of 500 values are tied (largest group 3); 491 distinct; smallest gap 0.0100`.
 */
export function describeRepeats(report: RepeatReport, columnNames?: readonly string[]): string[] {
  const lines: string[] = [];
  lines.push(
    report.repeatedRows === 0
      ? `no repeated rows among ${report.n}`
      : `${report.repeatedRows} of ${report.n} rows ${report.repeatedRows === 1 ? 'repeats' : 'repeat'} an earlier row exactly`,
  );
  report.columns.forEach((c, j) => {
    const name = columnNames?.[j] ?? `column ${j + 1}`;
    const ties = c.tiedValues === 0 ? 'no tied values' : `${c.tiedValues} of ${report.n} values are tied (largest group ${c.largestGroup})`;
    const gap = Number.isNaN(c.smallestGap) ? 'no gap (one distinct value)' : `smallest gap ${c.smallestGap.toPrecision(3)}`;
    lines.push(`${JSON.stringify(name)}: ${ties}; ${c.distinct} distinct; ${gap}`);
  });
  return lines;
}
