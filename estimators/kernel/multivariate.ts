/**
 * Leave-one-out spherical Gaussian kernel sums on whitened points z (row-major n × d):
 *   log S_i, S_i = Σ_{j≠i} exp(−|z_i − z_j|²/(2h²)).
 *
 * Three ways. Blocked: every pair, in blocks that stay in cache, with no cutoff, so its sums leave nothing out.
 * Cell list: pairs farther apart than r = c·h (c from truncation.ts) are skipped, by a uniform grid of cells of
 * side r/k (a pair within r lies in cells at most k apart along every axis); 'auto' takes it only for large n
 * where it prunes at least half of the pairs (small bandwidths). Each unordered pair is visited once and added
 * to both points. With the rules' bandwidths, which shrink only like n^(−1/(d+4)), r keeps 40–50% of all
 * pairs at n = 10⁴–10⁵ in d = 3, so the exact paths are close to O(n²).
 * Grid (d = 2, 3; grid.ts): the Gaussian split into three narrower ones, spread onto a grid, convolved and
 * read back, linear in n with a derived relative error bound of 2e-6 per log S_i; 'auto' takes it where its
 * estimated cost is lower (from about n = 10⁴ at the rule's h in d = 3).
 *
 * A point whose cell-list or grid sum is below 1 (including 0: nothing within r), or whose blocked sum is
 * below MIN_UNTRUNCATED_SUM, is summed again without truncation: over all n points while few points are
 * involved (FULL_PASS_MAX_TERMS), else from its neighbourhood (neighbourhood.ts: the cell list, or the kd-tree
 * for far points); in log space relative to its nearest neighbour where the plain sum is below the double
 * range. That keeps the truncation bound n·exp(−c²/2) valid for it and gives a far outlier its exact log S_i
 * however far below the double range S_i lies. Whitened coordinates are at most about √n, so squared
 * distances cannot overflow; only a bandwidth so small that (distance/h)² overflows leaves no double, and
 * log S_i is then −∞. When h² is not a normal double (h < 1.5e-154 or h > 1.3e154) the exponent scale would
 * be rounded to 0 or ∞, so every point takes the log-space sum over all n instead.
 */
import { KnnIndex } from '../../src/math/knn.js';
import { type GridPlan, gridLogKernelSums, isInside, planGrid } from './grid.js';
import { type CellIndex, isolatedLogKernelSums, outsidePairSums } from './neighbourhood.js';
import { kernelCutoff } from './truncation.js';
import { expNonPositive } from '../../src/math/exp.js';
import { PAIR_SUMS_DIMS, pairSums } from '../../src/math/pair-sums.js';

export type MultivariatePath = 'auto' | 'cells' | 'blocked' | 'grid';

/** Dimensions the grid path serves: a window costs (nodes per axis)^d, already 4096 nodes at d = 3. */
export const GRID_MIN_DIM = 2;
export const GRID_MAX_DIM = 3;

/**
 * Below these sizes 'auto' does not even plan the grid (sorting every column costs about 5% of a small
 * estimate): the grid wins from about n = 1200 in d = 2 and 10⁴ in d = 3 at the rules' bandwidths.
 */
const GRID_MIN_POINTS: Record<number, number> = { 2: 256, 3: 2048 };

/**
 * Above this dimension 'auto' builds no cell list: its 3^d − 1 neighbouring cells prune little, and the points
 * it leaves with a sum below 1 cost a log-space pass each, so at d = 5 blocked brute force was faster at every
 * size and bandwidth measured (n = 500–20000, the rule's h and h/2: 1.3–5× faster).
 */
export const MAX_CELL_LIST_DIM = 3;

/**
 * Cells per cutoff radius along an axis: finer cells fit the ball of radius r more closely (fewer distance
 * evaluations) at the price of more neighbour cells to look up. For d = 3 at n = 20000, 1, 2 and 3 were
 * within 10% of each other: the exponentials inside r dominate.
 */
function cellsPerRadius(dim: number): number {
  return dim <= 2 ? 3 : dim === 3 ? 2 : 1;
}

/**
 * The cell list is used when it examines at most this fraction of the n(n−1)/2 pairs and n is above
 * CELL_LIST_MIN_POINTS. Its pair loop costs what the blocked one does, but it pays for its index and for a
 * log-space pass over all points for each point whose kept sum is below 1, which small bandwidths make
 * common. Measured (d = 3, normal data, rule's h × 0.25…1): blocked was faster at every n ≤ 5000
 * (n = 2000, h/4: 21 against 84 ms), the cell list from n = 10⁴ at h/2 (150 against 447 ms).
 */
const CELL_LIST_MAX_PAIR_FRACTION = 0.5;
const CELL_LIST_MIN_POINTS = 4096;

/** Points per block in the brute-force loop: two blocks of coordinates stay in L1/L2 cache. */
const BLOCK_SIZE = 256;

/**
 * The smallest blocked (untruncated) sum taken as it is. Terms that underflow are off by at most 2^−1074 each
 * (exp.ts), so n of them move a sum of at least 2^−1000 by a relative n·2^−74 (5e-12 at n = 10^11, beyond any
 * n the pair loops see); below it the sum is taken again in log space relative to the nearest neighbour.
 */
const MIN_UNTRUNCATED_SUM = 2 ** -1000;

/** The smallest normal double, 2^−1022: below it h² has lost precision. */
const MIN_NORMAL = 2 ** -1022;

export interface MultivariateKernelSums {
  /** log S_i, in the input order. */
  logSums: Float64Array;
  path: 'cells' | 'blocked' | 'grid';
  /** Points summed exactly from their neighbourhoods because their truncated or grid sum was below 1. */
  fallbackPoints: number;
}

/*
 * The pair loops add exp(−|z_i − z_j|²/(2h²)) for every pair of points in [fromA, toA) × [fromB, toB) (j > i
 * when the ranges coincide), each term to both points. They test no radius: an exponential costs less than
 * the mispredicted branch a radius test takes on about half the pairs (d = 3, n = 2000: 6.0 against 8.5 ns a
 * pair, one row at a time), and a term left in is never an error.
 * A term below the double range rounds to 0 or a subnormal (absolute error ≤ 2^−1074), see exp.ts.
 * For d = 2..5 the loops are WebAssembly (src/math/pair-sums.ts), two rows p, p + 1 against each q in the two
 * lanes of a SIMD register: two rows at once was 1.5× the speed of one at d = 3 in JavaScript already, the two
 * exponentials being independent work, and the SIMD loop is another 1.2–1.5×. The squared distance is summed
 * in axis order as in the loop over axes below (other dimensions); q receives its two terms added together.
 */
function pairTerms(z: Float64Array, dim: number, fromA: number, toA: number, fromB: number, toB: number, exponentScale: number, sums: Float64Array): void {
  const same = fromA === fromB;
  for (let p = fromA; p < toA; p++) {
    const rowP = p * dim;
    let sumP = 0;
    for (let q = same ? p + 1 : fromB; q < toB; q++) {
      const rowQ = q * dim;
      let distanceSquared = 0;
      for (let k = 0; k < dim; k++) {
        const difference = z[rowP + k] - z[rowQ + k];
        distanceSquared += difference * difference;
      }
      const term = expNonPositive(exponentScale * distanceSquared);
      sumP += term;
      sums[q] += term;
    }
    sums[p] += sumP;
  }
}

/** The pair loop over these points into `sums`: WebAssembly for d = 2..5 (src/math/pair-sums.ts), else the loop over axes. */
function pairAccumulator(
  z: Float64Array,
  n: number,
  dim: number,
  sums: Float64Array,
): { add(fromA: number, toA: number, fromB: number, toB: number, exponentScale: number): void; finish(): void } {
  if (PAIR_SUMS_DIMS.includes(dim)) {
    const pairs = pairSums(z, n, dim);
    return { add: pairs.add, finish: () => pairs.addTo(sums) };
  }
  return { add: (fromA, toA, fromB, toB, exponentScale) => pairTerms(z, dim, fromA, toA, fromB, toB, exponentScale, sums), finish: () => undefined };
}

function blockedSums(z: Float64Array, n: number, dim: number, exponentScale: number, sums: Float64Array): void {
  const pairs = pairAccumulator(z, n, dim, sums);
  for (let fromA = 0; fromA < n; fromA += BLOCK_SIZE) {
    const toA = Math.min(fromA + BLOCK_SIZE, n);
    for (let fromB = fromA; fromB < n; fromB += BLOCK_SIZE) pairs.add(fromA, toA, fromB, Math.min(fromB + BLOCK_SIZE, n), exponentScale);
  }
  pairs.finish();
}

interface CellList extends CellIndex {
  /** Pairs of neighbouring cells (a, b) with b after a, flattened. */
  neighbourPairs: Int32Array;
  /** Pairs of points the cell list will examine. */
  examinedPairs: number;
}

/** Each axis's smallest and largest coordinate over the points. */
function pointBounds(z: Float64Array, n: number, dim: number): { lower: Float64Array; upper: Float64Array } {
  const lower = new Float64Array(dim).fill(Infinity);
  const upper = new Float64Array(dim).fill(-Infinity);
  for (let i = 0; i < n; i++) {
    for (let k = 0; k < dim; k++) {
      const v = z[i * dim + k];
      if (v < lower[k]) lower[k] = v;
      if (v > upper[k]) upper[k] = v;
    }
  }
  return { lower, upper };
}

/** Cells per axis and mixed-radix strides (axis 0 fastest); undefined when the cell count is not an exact integer in a double. */
function gridShape(lower: Float64Array, upper: Float64Array, dim: number, side: number): { cellsPerAxis: Float64Array; stride: Float64Array } | undefined {
  const cellsPerAxis = new Float64Array(dim);
  const stride = new Float64Array(dim);
  let totalCells = 1;
  for (let k = 0; k < dim; k++) {
    cellsPerAxis[k] = Math.floor((upper[k] - lower[k]) / side) + 1;
    stride[k] = totalCells;
    totalCells *= cellsPerAxis[k];
  }
  return totalCells < 2 ** 52 ? { cellsPerAxis, stride } : undefined;
}

/** The key of each point's cell, each coordinate clamped to its axis's last cell. */
function pointCellKeys(
  z: Float64Array,
  n: number,
  dim: number,
  side: number,
  lower: Float64Array,
  cellsPerAxis: Float64Array,
  stride: Float64Array,
): Float64Array {
  const keys = new Float64Array(n);
  for (let i = 0; i < n; i++) {
    let key = 0;
    for (let k = 0; k < dim; k++) {
      const cell = Math.min(Math.floor((z[i * dim + k] - lower[k]) / side), cellsPerAxis[k] - 1);
      key += cell * stride[k];
    }
    keys[i] = key;
  }
  return keys;
}

/** The points ordered by cell key (ties by index) and copied so each occupied cell's points are contiguous. */
function groupByCell(z: Float64Array, n: number, dim: number, keys: Float64Array): Pick<CellIndex, 'order' | 'ordered' | 'cellStart' | 'cellKeys'> {
  const order = new Uint32Array(n);
  for (let i = 0; i < n; i++) order[i] = i;
  order.sort((a, b) => keys[a] - keys[b] || a - b);

  const ordered = new Float64Array(n * dim);
  const startList: number[] = [];
  const cellKeyList: number[] = [];
  for (let p = 0; p < n; p++) {
    const i = order[p];
    for (let k = 0; k < dim; k++) ordered[p * dim + k] = z[i * dim + k];
    if (p === 0 || keys[i] !== keys[order[p - 1]]) {
      startList.push(p);
      cellKeyList.push(keys[i]);
    }
  }
  const cellCount = startList.length;
  const cellStart = new Int32Array(cellCount + 1);
  cellStart.set(startList);
  cellStart[cellCount] = n;
  return { order, ordered, cellStart, cellKeys: Float64Array.from(cellKeyList) };
}

/** The cell offsets that can hold points within r of each other, each unordered pair of cells once. */
function neighbourOffsets(dim: number, cellsPerRadius: number, stride: Float64Array): number[][] {
  // Offsets in {−k..k}^d whose key difference is positive (each unordered neighbour pair once) and whose
  // cells can hold points within r of each other: nearest gap side·sqrt(Σ max(|o|−1, 0)²) ≤ r.
  const offsets: number[][] = [];
  const width = 2 * cellsPerRadius + 1;
  const total = width ** dim;
  for (let code = 0; code < total; code++) {
    const offset: number[] = [];
    let delta = 0;
    let gapSquared = 0;
    for (let k = 0, c = code; k < dim; k++, c = Math.floor(c / width)) {
      const o = (c % width) - cellsPerRadius;
      offset.push(o);
      delta += o * stride[k];
      const gap = Math.max(Math.abs(o) - 1, 0);
      gapSquared += gap * gap;
    }
    if (delta > 0 && gapSquared <= cellsPerRadius * cellsPerRadius) offsets.push(offset);
  }
  return offsets;
}

/** Occupied neighbour cells as flattened pairs (a, b), b after a, and the point pairs the sums will examine. */
function neighbourCellPairs(
  cellKeys: Float64Array,
  cellStart: Int32Array,
  dim: number,
  cellsPerAxis: Float64Array,
  stride: Float64Array,
  offsets: number[][],
): { neighbourPairs: Int32Array; examinedPairs: number } {
  const cellCount = cellKeys.length;
  const pairs: number[] = [];
  let examinedPairs = 0;
  const cellCoordinate = new Float64Array(dim);
  for (let a = 0; a < cellCount; a++) {
    const countA = cellStart[a + 1] - cellStart[a];
    examinedPairs += (countA * (countA - 1)) / 2;
    let rest = cellKeys[a];
    for (let k = dim - 1; k >= 0; k--) {
      cellCoordinate[k] = Math.floor(rest / stride[k]);
      rest -= cellCoordinate[k] * stride[k];
    }
    for (const offset of offsets) {
      let key = cellKeys[a];
      let inside = true;
      for (let k = 0; k < dim; k++) {
        const c = cellCoordinate[k] + offset[k];
        if (c < 0 || c >= cellsPerAxis[k]) {
          inside = false;
          break;
        }
        key += offset[k] * stride[k];
      }
      if (!inside) continue;
      let lo = a + 1;
      let hi = cellCount - 1;
      while (lo <= hi) {
        const mid = (lo + hi) >>> 1;
        if (cellKeys[mid] < key) lo = mid + 1;
        else hi = mid - 1;
      }
      if (lo < cellCount && cellKeys[lo] === key) {
        pairs.push(a, lo);
        examinedPairs += countA * (cellStart[lo + 1] - cellStart[lo]);
      }
    }
  }
  return { neighbourPairs: Int32Array.from(pairs), examinedPairs };
}

/** Builds the cell list, or returns undefined when the grid index would not fit in a double. */
function buildCellList(z: Float64Array, n: number, dim: number, radius: number, cellsPerRadius: number): CellList | undefined {
  const side = radius / cellsPerRadius;
  const { lower, upper } = pointBounds(z, n, dim);
  const shape = gridShape(lower, upper, dim, side);
  if (!shape) return undefined;
  const { cellsPerAxis, stride } = shape;
  const keys = pointCellKeys(z, n, dim, side, lower, cellsPerAxis, stride);
  const { order, ordered, cellStart, cellKeys } = groupByCell(z, n, dim, keys);
  const offsets = neighbourOffsets(dim, cellsPerRadius, stride);
  const { neighbourPairs, examinedPairs } = neighbourCellPairs(cellKeys, cellStart, dim, cellsPerAxis, stride, offsets);
  return { dim, side, lower, cellsPerAxis, stride, cellKeys, ordered, order, cellStart, neighbourPairs, examinedPairs };
}

/**
 * log S_i over all j ≠ i, without truncation (scratch: length n). First the plain sum Σ_j exp(s·|z_i − z_j|²),
 * s = −1/(2h²) (`exponentScale`, NaN when h² is not a normal double): taken when it is at least
 * MIN_UNTRUNCATED_SUM, as for the blocked sums. Otherwise relative to the nearest neighbour: in bandwidths,
 * u_j = |z_i − z_j|/h, log S_i = −u_min²/2 + log Σ_j exp(−(u_j − u_min)(u_j + u_min)/2): the nearest term is
 * exactly 1, so the sum is ≥ 1, and no h² is formed, so any h > 0 works.
 */
export function fullLogKernelSum(z: Float64Array, n: number, dim: number, i: number, bandwidth: number, exponentScale: number, scratch: Float64Array): number {
  let nearestSquared = Infinity;
  let direct = 0;
  const rowI = i * dim;
  for (let j = 0; j < n; j++) {
    if (j === i) continue;
    let distanceSquared = 0;
    for (let k = 0; k < dim; k++) {
      const difference = z[rowI + k] - z[j * dim + k];
      distanceSquared += difference * difference;
    }
    scratch[j] = distanceSquared;
    direct += expNonPositive(exponentScale * distanceSquared);
    if (distanceSquared < nearestSquared) nearestSquared = distanceSquared;
  }
  if (direct >= MIN_UNTRUNCATED_SUM) return Math.log(direct);
  const nearest = Math.sqrt(nearestSquared) / bandwidth;
  // −u_min²/2 is below every double: nothing finite to return, and ∞ − ∞ below would make NaN.
  if (nearest * nearest === Infinity) return -Infinity;
  let sum = 0;
  for (let j = 0; j < n; j++) {
    if (j === i) continue;
    const u = Math.sqrt(scratch[j]) / bandwidth;
    sum += expNonPositive(-0.5 * (u - nearest) * (u + nearest));
  }
  return Math.log(sum) - 0.5 * nearest * nearest;
}

/**
 * Exact pair sums: by the cell list when it prunes enough (every pair in neighbouring cells, which holds
 * every pair within the radius), else every pair by blocked brute force.
 */
function exactPairSums(
  z: Float64Array,
  n: number,
  dim: number,
  exponentScale: number,
  path: MultivariatePath,
  cells: CellList | undefined,
  sums: Float64Array,
): 'cells' | 'blocked' {
  const worthIt = cells !== undefined && (path === 'cells' || cellListPays(n, cells.examinedPairs));
  if (!cells || !worthIt) {
    blockedSums(z, n, dim, exponentScale, sums);
    return 'blocked';
  }
  const { ordered, order, cellStart, neighbourPairs } = cells;
  const orderedSums = new Float64Array(n);
  const pairs = pairAccumulator(ordered, n, dim, orderedSums);
  const cellCount = cellStart.length - 1;
  for (let c = 0; c < cellCount; c++) {
    const from = cellStart[c];
    const to = cellStart[c + 1];
    pairs.add(from, to, from, to, exponentScale);
  }
  for (let e = 0; e < neighbourPairs.length; e += 2) {
    const a = neighbourPairs[e];
    const b = neighbourPairs[e + 1];
    pairs.add(cellStart[a], cellStart[a + 1], cellStart[b], cellStart[b + 1], exponentScale);
  }
  pairs.finish();
  for (let p = 0; p < n; p++) sums[order[p]] = orderedSums[p];
  return 'cells';
}

function cellListPays(n: number, examinedPairs: number): boolean {
  return n > CELL_LIST_MIN_POINTS && examinedPairs <= CELL_LIST_MAX_PAIR_FRACTION * ((n * (n - 1)) / 2);
}

/**
 * Costs in CPU seconds (Node 20, this project's 2-core machine): a pair of the exact loops (6.4–7 ns at
 * d = 2, 3, n = 2000, quiet machine; 9–11 ns at n = 5000–10⁴), a pair an outside point's neighbourhood search
 * examines (12–29 ns, measured under a load of about 3.5 when the neighbourhood searches were written), and a
 * grid node a point's window touches (d = 2: about 2.5 ns, its fixed costs included; d = 3: 1.5 ns, fitted to
 * the grid's times at n = 3000–10⁴). The grid is chosen where its estimated cost is lower than the exact path's:
 * in d = 3 from about n = 10⁴, in d = 2 from about 1200 (quiet machine, after the two-row pair loops).
 */
const SECONDS_PER_PAIR = 5e-9;
const SECONDS_PER_EXAMINED_PAIR = 1.5e-8;
const SECONDS_PER_WINDOW_NODE: Record<number, number> = { 2: 2.5e-9, 3: 1.5e-9 };

/** Estimated seconds of the exact path 'auto' would take: the cell list where it pays, else every pair. */
function exactSeconds(n: number, cells: CellList | undefined): number {
  const pairs = cells && cellListPays(n, cells.examinedPairs) ? cells.examinedPairs : (n * (n - 1)) / 2;
  return pairs * SECONDS_PER_PAIR;
}

/** Estimated seconds of the grid path: windows, convolution passes, and the outside points' neighbourhoods. */
function gridSeconds(plan: GridPlan, n: number, examinedPairs: number): number {
  const { dim, window, taps, totalNodes, insideCount } = plan;
  const windows = insideCount * (2 * window ** dim + dim * window * window);
  const convolution = totalNodes * dim * (2 * taps + 1);
  // An outside point's neighbourhood: about twice the pairs per point the cell list examines, at k-NN cost.
  const outside = (n - insideCount) * 4 * (examinedPairs / n);
  return (windows + convolution) * SECONDS_PER_WINDOW_NODE[dim] + outside * SECONDS_PER_EXAMINED_PAIR;
}

/**
 * Isolated points are summed over all n points while that costs at most this many terms in all: at small n
 * one pass each is cheaper than building a kd-tree and searching neighbourhoods (d = 5, n = 500, where 226
 * points are isolated at the rule's h: 5.7 ms a call against 15 ms; n = 2000: 74 ms against 97 ms).
 */
const FULL_PASS_MAX_TERMS = 2 ** 23;

/** log S_i for every whitened point (see the file comment). */
export function multivariateLogKernelSums(z: Float64Array, n: number, dim: number, bandwidth: number, path: MultivariatePath = 'auto'): MultivariateKernelSums {
  const radius = kernelCutoff(n) * bandwidth;
  const exponentScale = -0.5 / (bandwidth * bandwidth);
  const sums = new Float64Array(n);
  const logSums = new Float64Array(n);
  const bandwidthSquared = bandwidth * bandwidth;
  if (!(bandwidthSquared >= MIN_NORMAL && bandwidthSquared < Infinity)) {
    // Every point: the truncated pass cannot be formed (see the file comment), and so neither can the grid.
    const scratch = new Float64Array(n);
    for (let i = 0; i < n; i++) logSums[i] = fullLogKernelSum(z, n, dim, i, bandwidth, NaN, scratch);
    return { logSums, path: 'blocked', fallbackPoints: n };
  }

  const gridDims = dim >= GRID_MIN_DIM && dim <= GRID_MAX_DIM;
  const worthPlanning = path === 'grid' || (path === 'auto' && n >= GRID_MIN_POINTS[dim]);
  const plan = worthPlanning && gridDims ? planGrid(z, n, dim, bandwidth) : undefined;
  // The cell list also serves the exact neighbourhoods of isolated and outside points (neighbourhood.ts).
  const tryCells = path === 'cells' || ((path === 'auto' || path === 'grid') && dim <= MAX_CELL_LIST_DIM && n > CELL_LIST_MIN_POINTS);
  const cells = tryCells ? buildCellList(z, n, dim, radius, cellsPerRadius(dim)) : undefined;
  const useGrid = plan !== undefined && (path === 'grid' || gridSeconds(plan, n, cells?.examinedPairs ?? (n * (n - 1)) / 2) < exactSeconds(n, cells));

  let tree: KnnIndex | undefined;
  let used: MultivariateKernelSums['path'];
  if (plan && useGrid) {
    used = 'grid';
    const outsideList: number[] = [];
    const isOutside = new Uint8Array(n);
    for (let i = 0; i < n; i++) {
      if (!isInside(z, i, dim, plan.lower, plan.upper)) {
        isOutside[i] = 1;
        outsideList.push(i);
      }
    }
    let extra: Float64Array | undefined;
    if (outsideList.length > 0) {
      tree = new KnnIndex(z, dim);
      extra = new Float64Array(n);
      outsidePairSums({ tree, cells }, z, radius, exponentScale, Int32Array.from(outsideList), isOutside, sums, extra);
    }
    gridLogKernelSums(z, n, bandwidth, plan, extra, logSums);
    // Outside points: their exact truncated sums; inside points whose grid sum fell below 1 stay NaN.
    for (const i of outsideList) logSums[i] = sums[i] >= 1 ? Math.log(sums[i]) : NaN;
  } else {
    used = exactPairSums(z, n, dim, exponentScale, path, cells, sums);
    // The blocked sums leave nothing out, so only a sum near the bottom of the double range needs the log-space
    // pass; the cell list's leave out pairs beyond the radius, whose bound needs S_i ≥ 1 (truncation.ts).
    const smallest = used === 'blocked' ? MIN_UNTRUNCATED_SUM : 1;
    for (let i = 0; i < n; i++) logSums[i] = sums[i] >= smallest ? Math.log(sums[i]) : NaN;
  }

  const isolated: number[] = [];
  for (let i = 0; i < n; i++) if (Number.isNaN(logSums[i])) isolated.push(i);
  if (isolated.length > 0 && isolated.length * n <= FULL_PASS_MAX_TERMS) {
    const scratch = new Float64Array(n);
    for (const i of isolated) logSums[i] = fullLogKernelSum(z, n, dim, i, bandwidth, exponentScale, scratch);
  } else if (isolated.length > 0) {
    tree ??= new KnnIndex(z, dim);
    isolatedLogKernelSums({ tree, cells }, z, bandwidth, kernelCutoff(n), Int32Array.from(isolated), logSums);
  }
  return { logSums, path: used, fallbackPoints: isolated.length };
}
