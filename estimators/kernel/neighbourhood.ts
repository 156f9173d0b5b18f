/**
 * Exact Gaussian kernel sums for a few chosen whitened points, from their neighbourhoods in a kd-tree
 * (src/math/knn.ts) instead of a pass over all n points: the points whose truncated or gridded sum is below 1
 * (isolated points, far tails, outliers) and the points outside the grid's box.
 *
 * An isolated point's sum is taken relative to its nearest neighbour, as in the 1-D exact path: with
 * u_j = |z_i − z_j|/h and u_min the smallest,
 *   log S_i = −u_min²/2 + log Σ_{u_j² ≤ u_min² + c²} exp(−(u_j − u_min)(u_j + u_min)/2).
 * The nearest term is exactly 1, so the kept sum is ≥ 1 and the dropped terms (each < exp(−c²/2) relative
 * to it, at most n of them) change log S_i by less than n·exp(−c²/2), the truncation bound of
 * truncation.ts; a far outlier gets its exact log S_i however far below the double range S_i lies, and no
 * h² is formed. Only u_min² overflowing leaves no double: log S_i is then −∞.
 *
 * Neighbourhoods come from the cell list of the exact path when the query's ball spans few cells (the
 * common case: a tail point's ball is about the cutoff radius), else from the kd-tree, which reads the m
 * points within the radius as the m nearest (m counted first); it keeps its current best m in a sorted
 * array, O(m²) at worst, which is right for far outliers (a thin shell, m small). Where even that would
 * cost more than looking at every point (m² > n: d > 5, where there is no cell list, and the ball holds
 * much of the sample), the points are scanned.
 */
import { KnnIndex } from '../../src/math/knn.js';
import { nextPowerOfTwo } from '../../src/math/fft.js';
import { expNonPositive } from '../../src/math/exp.js';

/** A uniform grid of cells over the points, keyed in mixed radix (axis 0 fastest), as multivariate.ts builds it. */
export interface CellIndex {
  dim: number;
  side: number;
  lower: Float64Array;
  cellsPerAxis: Float64Array;
  stride: Float64Array;
  /** Keys of the occupied cells, increasing. */
  cellKeys: Float64Array;
  /** Cell c holds ordered points cellStart[c] .. cellStart[c+1]−1. */
  cellStart: Int32Array;
  /** ordered point p is input point order[p]. */
  order: Uint32Array;
  /** Points reordered so each cell's points are contiguous, row-major. */
  ordered: Float64Array;
}

/** The searches available: the kd-tree always, the cell list when the dimension has one. */
export interface NeighbourSearch {
  tree: KnnIndex;
  cells?: CellIndex;
}

/** A query ball spanning more cells than this goes to the kd-tree. */
const MAX_QUERY_CELLS = 4096;

/** Neighbourhoods as compressed rows: query q's neighbours are entries start[q] .. start[q+1]−1. */
interface Neighbourhoods {
  start: Int32Array;
  /** Neighbour indices (input order), the query point itself included. */
  neighbours: Int32Array;
  /** Their distances. */
  distances: Float64Array;
}

function rowsOf(z: Float64Array, dim: number, points: Int32Array): Float64Array {
  const queries = new Float64Array(points.length * dim);
  for (let q = 0; q < points.length; q++) for (let k = 0; k < dim; k++) queries[q * dim + k] = z[points[q] * dim + k];
  return queries;
}

/** Cells a ball of this radius spans, or Infinity beyond MAX_QUERY_CELLS. */
function cellsSpanned(cells: CellIndex, radius: number): number {
  let count = 1;
  for (let k = 0; k < cells.dim; k++) {
    count *= Math.min(Math.floor((2 * radius) / cells.side) + 2, cells.cellsPerAxis[k]);
    if (!(count <= MAX_QUERY_CELLS)) return Infinity;
  }
  return count;
}

/** The cell of the key, by binary search, or −1 when unoccupied. */
function findCell(cellKeys: Float64Array, key: number): number {
  let lo = 0;
  let hi = cellKeys.length - 1;
  while (lo <= hi) {
    const mid = (lo + hi) >>> 1;
    if (cellKeys[mid] < key) lo = mid + 1;
    else if (cellKeys[mid] > key) hi = mid - 1;
    else return mid;
  }
  return -1;
}

/** Appends the points within `radius` (inclusive) of query q found by scanning the cells its ball spans. */
function cellQuery(cells: CellIndex, queries: Float64Array, q: number, radius: number, found: number[], foundDistances: number[]): void {
  const { dim, side, lower, cellsPerAxis, stride, cellKeys, cellStart, order, ordered } = cells;
  const from = new Float64Array(dim);
  const to = new Float64Array(dim);
  const at = new Float64Array(dim);
  const radiusSquared = radius * radius;
  for (let k = 0; k < dim; k++) {
    const x = queries[q * dim + k];
    from[k] = Math.max(0, Math.floor((x - radius - lower[k]) / side));
    to[k] = Math.min(cellsPerAxis[k] - 1, Math.floor((x + radius - lower[k]) / side));
    if (from[k] > to[k]) return;
    at[k] = from[k];
  }
  for (;;) {
    let key = 0;
    for (let k = 0; k < dim; k++) key += at[k] * stride[k];
    const cell = findCell(cellKeys, key);
    if (cell >= 0) {
      for (let p = cellStart[cell]; p < cellStart[cell + 1]; p++) {
        let distanceSquared = 0;
        for (let k = 0; k < dim; k++) {
          const difference = queries[q * dim + k] - ordered[p * dim + k];
          distanceSquared += difference * difference;
        }
        if (distanceSquared <= radiusSquared) {
          found.push(order[p]);
          foundDistances.push(Math.sqrt(distanceSquared));
        }
      }
    }
    let k = 0;
    while (k < dim && at[k] === to[k]) at[k] = from[k++];
    if (k === dim) return;
    at[k]++;
  }
}

/** Appends the points within `radius` (inclusive) of query q by a pass over all of them. */
function scanQuery(z: Float64Array, n: number, dim: number, queries: Float64Array, q: number, radius: number, found: number[], foundDistances: number[]): void {
  const radiusSquared = radius * radius;
  for (let j = 0; j < n; j++) {
    let distanceSquared = 0;
    for (let k = 0; k < dim; k++) {
      const difference = queries[q * dim + k] - z[j * dim + k];
      distanceSquared += difference * difference;
    }
    if (distanceSquared <= radiusSquared) {
      found.push(j);
      foundDistances.push(Math.sqrt(distanceSquared));
    }
  }
}

/**
 * The indexed points within radii[q] (inclusive) of each query (see the file comment for which search).
 * kd-tree queries are grouped by the power of two at or above their count, one k-nearest search per group,
 * each row cut at its count (the count nearest are exactly those within the radius).
 */
function neighbourhoods(search: NeighbourSearch, z: Float64Array, queries: Float64Array, radii: Float64Array): Neighbourhoods {
  const { tree, cells } = search;
  const { n, dim } = tree;
  const queryCount = radii.length;
  const rows: Array<{ neighbours: number[]; distances: number[] }> = [];
  const byTree: number[] = [];
  for (let q = 0; q < queryCount; q++) {
    const row = { neighbours: [] as number[], distances: [] as number[] };
    rows.push(row);
    if (radii[q] < 0) continue;
    if (cells && cellsSpanned(cells, radii[q]) <= MAX_QUERY_CELLS) cellQuery(cells, queries, q, radii[q], row.neighbours, row.distances);
    else byTree.push(q);
  }
  if (byTree.length > 0) {
    const treeQueries = new Float64Array(byTree.length * dim);
    const treeRadii = new Float64Array(byTree.length);
    for (let t = 0; t < byTree.length; t++) {
      for (let a = 0; a < dim; a++) treeQueries[t * dim + a] = queries[byTree[t] * dim + a];
      treeRadii[t] = radii[byTree[t]];
    }
    const counts = tree.countWithin(treeQueries, treeRadii, { inclusive: true });
    const groups = new Map<number, number[]>();
    for (let t = 0; t < byTree.length; t++) {
      const q = byTree[t];
      if (counts[t] === 0) continue;
      if (counts[t] * counts[t] > n) {
        scanQuery(z, n, dim, queries, q, radii[q], rows[q].neighbours, rows[q].distances);
        continue;
      }
      const k = Math.min(nextPowerOfTwo(counts[t]), n);
      let members = groups.get(k);
      if (!members) groups.set(k, (members = []));
      members.push(t);
    }
    for (const [k, members] of groups) {
      const groupQueries = new Float64Array(members.length * dim);
      for (let g = 0; g < members.length; g++) for (let a = 0; a < dim; a++) groupQueries[g * dim + a] = treeQueries[members[g] * dim + a];
      const found = tree.nearest(groupQueries, k, { indices: true });
      const foundIndices = found.indices as Int32Array;
      for (let g = 0; g < members.length; g++) {
        const t = members[g];
        const row = rows[byTree[t]];
        for (let e = g * k; e < g * k + counts[t]; e++) {
          row.neighbours.push(foundIndices[e]);
          row.distances.push(found.distances[e]);
        }
      }
    }
  }
  const start = new Int32Array(queryCount + 1);
  for (let q = 0; q < queryCount; q++) start[q + 1] = start[q] + rows[q].neighbours.length;
  const neighbours = new Int32Array(start[queryCount]);
  const distances = new Float64Array(start[queryCount]);
  for (let q = 0; q < queryCount; q++) {
    neighbours.set(rows[q].neighbours, start[q]);
    distances.set(rows[q].distances, start[q]);
  }
  return { start, neighbours, distances };
}

/**
 * Exact log S_i, relative to the nearest neighbour, for each of `points` (see the file comment), written
 * into logSums. `cutoff` is c in bandwidths (truncation.ts).
 */
export function isolatedLogKernelSums(
  search: NeighbourSearch,
  z: Float64Array,
  bandwidth: number,
  cutoff: number,
  points: Int32Array,
  logSums: Float64Array,
): void {
  if (points.length === 0) return;
  const { tree } = search;
  const queries = rowsOf(z, tree.dim, points);
  // The two nearest indexed points of an indexed point are itself and its nearest other (or a twin: 0 either way).
  const nearestTwo = tree.nearest(queries, 2).distances;
  const nearest = new Float64Array(points.length);
  const radii = new Float64Array(points.length);
  for (let q = 0; q < points.length; q++) {
    const u = nearestTwo[2 * q + 1] / bandwidth;
    nearest[q] = u;
    // −u_min²/2 is below every double: nothing finite to return, and ∞ − ∞ below would make NaN.
    radii[q] = u * u === Infinity ? -1 : bandwidth * Math.sqrt(u * u + cutoff * cutoff);
  }
  const { start, neighbours, distances } = neighbourhoods(search, z, queries, radii);
  for (let q = 0; q < points.length; q++) {
    const i = points[q];
    const u = nearest[q];
    if (radii[q] < 0) {
      logSums[i] = -Infinity;
      continue;
    }
    let sum = 0;
    for (let e = start[q]; e < start[q + 1]; e++) {
      if (neighbours[e] === i) continue;
      const v = distances[e] / bandwidth;
      sum += expNonPositive(-0.5 * (v - u) * (v + u));
    }
    logSums[i] = Math.log(sum) - 0.5 * u * u;
  }
}

/**
 * Truncated pair sums (pairs within `radius`) of the points outside the grid's box: each outside point's
 * own sum into `sums`, and its terms to inside points into `extra` (the grid has only the inside points).
 */
export function outsidePairSums(
  search: NeighbourSearch,
  z: Float64Array,
  radius: number,
  exponentScale: number,
  outside: Int32Array,
  isOutside: Uint8Array,
  sums: Float64Array,
  extra: Float64Array,
): void {
  if (outside.length === 0) return;
  const dim = search.tree.dim;
  const radiusSquared = radius * radius;
  const { start, neighbours } = neighbourhoods(search, z, rowsOf(z, dim, outside), new Float64Array(outside.length).fill(radius));
  for (let q = 0; q < outside.length; q++) {
    const i = outside[q];
    let sum = 0;
    for (let e = start[q]; e < start[q + 1]; e++) {
      const j = neighbours[e];
      if (j === i) continue;
      // The same squared distance and test as the exact paths' pair loops.
      let distanceSquared = 0;
      for (let k = 0; k < dim; k++) {
        const difference = z[i * dim + k] - z[j * dim + k];
        distanceSquared += difference * difference;
      }
      if (distanceSquared > radiusSquared) continue;
      const term = expNonPositive(exponentScale * distanceSquared);
      sum += term;
      if (!isOutside[j]) extra[j] += term;
    }
    sums[i] = sum;
  }
}
