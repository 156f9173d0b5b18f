/**
 * Leave-one-out spherical Gaussian kernel sums S_i = Σ_{j≠i} exp(−|z_i − z_j|²/(2h²)) in d = 2 and 3 on a
 * regular grid, in time linear in n, by splitting the Gaussian into three:
 *
 *   exp(−|x − y|²/(2h²)) = (h√(2π))^d ∫∫ φ_a(x − u) φ_b(u − v) φ_a(v − y) du dv,   2a² + b² = h²,
 *
 * (φ_s the centred normal density of variance s² per axis; variances add under convolution). Each point y
 * is spread onto the grid with weights exp(−(y − g)²/(2a²)) per axis, the grid is convolved with the b-kernel
 * by separable 1-D passes, and each x reads the result back with its own a-weights; the point's own
 * contribution, read back the same way, is subtracted exactly. Both integrals become grid sums (the
 * trapezoid rule on an infinite grid), and every weight table is a product of 1-D tables.
 *
 * Error bound (derived here; h = 1 below, c² = a² + b² = 1 − a²). Per axis:
 *
 * 1. Discretisation, relative per pair. For fixed u the inner integrand φ_b(u − v) φ_a(v − y) is a Gaussian
 *    in v of standard deviation s_v = ab/c; by Poisson summation its grid sum with step δ is its integral
 *    times 1 + Σ_{k≠0} exp(−2π²k²s_v²/δ²) cos(…), so within a factor 1 ± η(s_v/δ), η(t) = 2Σ_{k≥1}
 *    exp(−2π²k²t²). The outer integrand φ_a(x − u) φ_c(u − y) has width s_u = ac ≥ s_v, so it adds 1 ± η(s_u/δ).
 *    Every term is positive, so each pair term, and hence each S_i, is off by a factor within
 *    ((1 + η(s_v/δ))(1 + η(s_u/δ)))^d of exact: a relative error, however small S_i is.
 * 2. Truncation, absolute per pair. Spread weights are kept within R_a of a point and b-kernel taps within
 *    R_b. The dropped grid terms are positive; bounding a monotone Gaussian tail's grid sum by its integral
 *    from one step further in, the dropped part of one axis's factor is at most
 *      (1 + η)·(4 Φ̄((R_a − δ)/a)/c + 2 Φ̄((R_b − δ)/b)/a),
 *    and of the d-fold product at most d times that (the other factors are ≤ 1 + η). Summed over n − 1
 *    pairs this is an absolute error on S_i; the caller redoes exactly every point whose grid sum is below
 *    1, so on the points kept it is also a relative error.
 *
 * (For a grid sum of a decreasing Gaussian tail, sum ≤ first term + integral/δ: the e^{−z²/2} terms in
 * gridWidths.) With GRID_TOLERANCE ε for each part, δ is chosen so that 2d·η ≤ ε and R_a, R_b so that
 * n·d·(dropped part) ≤ ε: log S_i is then within 2ε = 2e-6 (plus rounding) of exact on every point the grid
 * answers, so Ĥ, their mean, is too. Measured against the exact path at n = 20000 (bench/kernel.ts: normal,
 * skewed and clustered samples, d = 2 and 3, at the rule's h, h/4 and 4h) |ΔĤ| was ≤ 2e-8, and on single
 * log S_i at n = 1000–5000 ≤ 2e-7 (test/kernel.test.ts): the aliasing terms oscillate in sign across pairs
 * and the tail bounds take the worst pair at every distance.
 *
 * Cost and the split a = αh: per point, a window of W^d nodes is written and read (W = 16 at ε = 1e-6,
 * n ≤ 10⁶), the grid has (range/δ)^d nodes, and the convolution 2·taps + 1 operations per node and axis.
 * W ∝ (a/s_v)·√(log n) barely shrinks below α ≈ 0.45 while δ ∝ s_v, so the grid grows like α^−d; above it
 * W grows. At α = 0.45, δ = 0.43h; the grid for 10⁵ normal points in d = 3 is about 130³ nodes (15 MiB).
 * Everything is linear in n but the grid, which grows like h^−d ∝ n^(d/(d+4)) with the rules' bandwidths,
 * and the few points summed exactly.
 *
 * Spreading points with a Gaussian onto a grid is the Gaussian gridding of non-uniform FFTs (Dutt & Rokhlin,
 * SIAM J. Sci. Comput. 14:1368–1393, 1993; Greengard & Lee, SIAM Review 46:443–454, 2004; both recalled
 * from memory); here no Fourier transform is needed, since the target is itself a Gaussian.
 *
 * Only points inside a box get the grid: the whole sample when the grid fits MAX_GRID_NODES, else the box
 * between the per-axis order statistics t and n − 1 − t with the smallest t that fits. The caller sums the
 * rest exactly and adds their terms to the inside points.
 */
import { normalCdf } from '../../src/math/special.js';

/** Bound on each of the two parts of the grid's relative error on a log kernel sum (see the file comment). */
export const GRID_TOLERANCE = 1e-6;

/** a/h. */
export const SPREAD_FRACTION = 0.45;

/** Largest grid, in nodes (Float64: 32 MiB); beyond it the box is trimmed. */
export const MAX_GRID_NODES = 1 << 22;

export interface GridPlan {
  dim: number;
  /** Spread and convolution widths and the grid step, in whitened units. */
  spreadWidth: number;
  convolutionWidth: number;
  step: number;
  /** Nodes in a point's spread window per axis (covers ±R_a). */
  window: number;
  /** b-kernel taps either side of the centre (covers ±R_b). */
  taps: number;
  /** exp(−(kδ)²/(2b²)) for k = 0..taps. */
  convolutionWeights: Float64Array;
  /** Per-axis origin (node 0) and node count. */
  origin: Float64Array;
  nodes: Int32Array;
  totalNodes: number;
  /** The box the grid serves, per axis. */
  lower: Float64Array;
  upper: Float64Array;
  /** Points inside the box. */
  insideCount: number;
}

/** η(t) = 2 Σ_{k≥1} exp(−2π²k²t²): the Poisson-summation aliasing factor of a Gaussian of width tδ. */
export function aliasingFactor(t: number): number {
  let sum = 0;
  for (let k = 1; k < 50; k++) {
    const term = Math.exp(-2 * Math.PI * Math.PI * k * k * t * t);
    sum += term;
    if (term < 1e-300 || term < sum * 1e-17) break;
  }
  return 2 * sum;
}

/** The smallest z ≥ 0 (to 1e-12) with tail(z) ≤ target, for a decreasing tail bound, by bisection. */
function solveDecreasing(tail: (z: number) => number, target: number): number {
  let lo = 0;
  let hi = 40;
  for (let iteration = 0; iteration < 100; iteration++) {
    const mid = 0.5 * (lo + hi);
    if (tail(mid) > target) lo = mid;
    else hi = mid;
  }
  return hi;
}

/** Grid step, widths and window sizes for n points at bandwidth h (no box yet). */
function gridWidths(
  n: number,
  dim: number,
  bandwidth: number,
  tolerance: number,
): Omit<GridPlan, 'origin' | 'nodes' | 'totalNodes' | 'lower' | 'upper' | 'insideCount'> {
  const alpha = SPREAD_FRACTION;
  const a = alpha;
  const b = Math.sqrt(1 - 2 * alpha * alpha);
  const c = Math.sqrt(1 - alpha * alpha);
  const narrowest = (a * b) / c; // s_v ≤ s_u = a·c
  // Discretisation: ((1 + η)²)^d − 1 ≤ e^{2dη} − 1 ≤ ε once 2dη ≤ ε/(1 + ε); η(t) is within 1e-20 of 2e^{−2π²t²} here.
  const t = Math.sqrt(Math.log((4 * dim * (1 + tolerance)) / tolerance) / (2 * Math.PI * Math.PI));
  const step = narrowest / t;
  // Truncation: n·d·(dropped part of one axis's factor) ≤ ε, half to the spread tails, half to the taps.
  const eta = aliasingFactor(t);
  const perAxis = tolerance / (2 * n * dim * (1 + eta) ** dim);
  const spreadTail = (z: number): number => 4 * ((step * Math.exp(-0.5 * z * z)) / (a * c * Math.sqrt(2 * Math.PI)) + normalCdf(-z) / c);
  const tapsTail = (z: number): number => 2 * ((step * Math.exp(-0.5 * z * z)) / (a * b * Math.sqrt(2 * Math.PI)) + normalCdf(-z) / a);
  const reachA = a * solveDecreasing(spreadTail, perAxis); // R_a, in bandwidths
  const reachB = b * solveDecreasing(tapsTail, perAxis);
  const window = 2 * Math.ceil(reachA / step);
  const taps = Math.ceil(reachB / step);
  const convolutionWeights = new Float64Array(taps + 1);
  for (let k = 0; k <= taps; k++) convolutionWeights[k] = Math.exp((-0.5 * (k * step * k * step)) / (b * b));
  return {
    dim,
    spreadWidth: a * bandwidth,
    convolutionWidth: b * bandwidth,
    step: step * bandwidth,
    window,
    taps,
    convolutionWeights,
  };
}

/** Nodes per axis of a grid serving the box (written into `nodes`), and their product. */
function nodesFor(lower: Float64Array, upper: Float64Array, step: number, window: number, nodes: Int32Array): number {
  let total = 1;
  for (let k = 0; k < lower.length; k++) {
    // Node 0 sits window/2 steps below the box, so every inside point's window starts at node ≥ 1.
    nodes[k] = Math.floor((upper[k] - lower[k]) / step) + window + 2;
    total *= nodes[k];
  }
  return total;
}

/**
 * The grid for these points and bandwidth, or undefined when no box between quartiles fits maxNodes (the
 * bandwidth is too small for the data's spread: the exact path is then cheap anyway).
 */
export function planGrid(
  z: Float64Array,
  n: number,
  dim: number,
  bandwidth: number,
  maxNodes = MAX_GRID_NODES,
  tolerance = GRID_TOLERANCE,
): GridPlan | undefined {
  const widths = gridWidths(n, dim, bandwidth, tolerance);
  const columns: Float64Array[] = [];
  for (let k = 0; k < dim; k++) {
    const column = new Float64Array(n);
    for (let i = 0; i < n; i++) column[i] = z[i * dim + k];
    columns.push(column.sort());
  }
  const lower = new Float64Array(dim);
  const upper = new Float64Array(dim);
  const nodes = new Int32Array(dim);
  const boxAt = (trimmed: number): number => {
    for (let k = 0; k < dim; k++) {
      lower[k] = columns[k][trimmed];
      upper[k] = columns[k][n - 1 - trimmed];
    }
    return nodesFor(lower, upper, widths.step, widths.window, nodes);
  };
  let trimmed = 0;
  if (!(boxAt(0) <= maxNodes)) {
    // Smallest number of points trimmed from each end of every axis whose box fits.
    let lo = 0;
    let hi = Math.floor(n / 4);
    if (!(boxAt(hi) <= maxNodes)) return undefined;
    while (hi - lo > 1) {
      const mid = (lo + hi) >>> 1;
      if (boxAt(mid) <= maxNodes) hi = mid;
      else lo = mid;
    }
    trimmed = hi;
  }
  const totalNodes = boxAt(trimmed);
  const origin = new Float64Array(dim);
  for (let k = 0; k < dim; k++) origin[k] = lower[k] - (widths.window / 2) * widths.step;
  let insideCount = 0;
  for (let i = 0; i < n; i++) if (isInside(z, i, dim, lower, upper)) insideCount++;
  // Written out, not spread from `widths`: V8 gave each spread copy a map of its own, so every plan was a new
  // shape to the functions that read it, and they were compiled again and again.
  const { spreadWidth, convolutionWidth, step, window, taps, convolutionWeights } = widths;
  return { dim, spreadWidth, convolutionWidth, step, window, taps, convolutionWeights, origin, nodes, totalNodes, lower, upper, insideCount };
}

export function isInside(z: Float64Array, i: number, dim: number, lower: Float64Array, upper: Float64Array): boolean {
  for (let k = 0; k < dim; k++) {
    const v = z[i * dim + k];
    if (!(v >= lower[k] && v <= upper[k])) return false;
  }
  return true;
}

/**
 * Fills `weights` (length window) with exp(−(x − g_m)²/(2a²)) for the window's nodes and returns the first
 * node's index.
 */
function axisWeights(x: number, origin: number, step: number, window: number, exponentScale: number, weights: Float64Array): number {
  const position = (x - origin) / step;
  const first = Math.floor(position) - window / 2 + 1;
  for (let m = 0; m < window; m++) {
    const offset = (first + m - position) * step;
    weights[m] = Math.exp(exponentScale * offset * offset);
  }
  return first;
}

/**
 * The point's own contribution along one axis, Σ_m Σ_l A_m B_{m−l} A_l over its window (the same
 * truncations as the grid), unscaled.
 */
function axisSelf(weights: Float64Array, window: number, convolutionWeights: Float64Array, taps: number): number {
  let total = 0;
  for (let m = 0; m < window; m++) {
    let inner = 0;
    const from = Math.max(0, m - taps);
    const to = Math.min(window - 1, m + taps);
    for (let l = from; l <= to; l++) inner += convolutionWeights[m > l ? m - l : l - m] * weights[l];
    total += weights[m] * inner;
  }
  return total;
}

/** Convolves every line of the grid along `axis` with the symmetric taps, in place (skipping empty lines). */
function convolveAxis(grid: Float64Array, nodes: Int32Array, axis: number, convolutionWeights: Float64Array, taps: number): void {
  const length = nodes[axis];
  let stride = 1;
  for (let k = 0; k < axis; k++) stride *= nodes[k];
  const total = grid.length;
  const lines = total / length;
  const line = new Float64Array(length);
  for (let lineIndex = 0; lineIndex < lines; lineIndex++) {
    // Line number → its first node: the axes below `axis` vary fastest within a block of stride·length.
    const below = lineIndex % stride;
    const start = (lineIndex - below) * length + below;
    let empty = true;
    for (let m = 0, p = start; m < length; m++, p += stride) {
      const value = grid[p];
      line[m] = value;
      if (value !== 0) empty = false;
    }
    if (empty) continue;
    for (let m = 0, p = start; m < length; m++, p += stride) {
      let sum = convolutionWeights[0] * line[m];
      const reach = Math.min(taps, m, length - 1 - m);
      for (let k = 1; k <= reach; k++) sum += convolutionWeights[k] * (line[m - k] + line[m + k]);
      // Beyond the line's ends the grid is zero (the grid extends a window past every inside point).
      for (let k = reach + 1; k <= taps; k++) {
        if (m - k >= 0) sum += convolutionWeights[k] * line[m - k];
        if (m + k < length) sum += convolutionWeights[k] * line[m + k];
      }
      grid[p] = sum;
    }
  }
}

/** Nodes per bucket side when ordering points for locality. */
const ORDER_BUCKET = 2;

/**
 * The inside points in the order of the grid's memory (by buckets of ORDER_BUCKET nodes per axis, the last
 * axis slowest), by a counting sort: consecutive points then touch the same grid rows, which stay in cache;
 * in input order every point's window was a fresh set of cache misses (measured 4× slower at n = 10⁵).
 */
function gridOrder(z: Float64Array, n: number, plan: GridPlan): Uint32Array {
  const { dim, origin, step, nodes, lower, upper } = plan;
  const buckets = new Int32Array(dim);
  let bucketCount = 1;
  for (let k = 0; k < dim; k++) {
    buckets[k] = Math.ceil(nodes[k] / ORDER_BUCKET);
    bucketCount *= buckets[k];
  }
  const keys = new Int32Array(n).fill(-1);
  const counts = new Int32Array(bucketCount + 1);
  let inside = 0;
  for (let i = 0; i < n; i++) {
    if (!isInside(z, i, dim, lower, upper)) continue;
    let key = 0;
    for (let k = dim - 1; k >= 0; k--) key = key * buckets[k] + Math.floor((z[i * dim + k] - origin[k]) / step / ORDER_BUCKET);
    keys[i] = key;
    counts[key + 1]++;
    inside++;
  }
  for (let b = 0; b < bucketCount; b++) counts[b + 1] += counts[b];
  const order = new Uint32Array(inside);
  for (let i = 0; i < n; i++) if (keys[i] >= 0) order[counts[keys[i]]++] = i;
  return order;
}

// The hot loops below add four grid values per step into separate partial sums: about 1.5–2× faster under
// V8 than one value per step (measured on 16-node windows), the rest of a row done one by one.

/** Adds weight·w0 to the grid row starting at `base`. */
function addRow(grid: Float64Array, base: number, weight: number, w0: Float64Array, window: number): void {
  let m0 = 0;
  for (; m0 + 3 < window; m0 += 4) {
    grid[base + m0] += weight * w0[m0];
    grid[base + m0 + 1] += weight * w0[m0 + 1];
    grid[base + m0 + 2] += weight * w0[m0 + 2];
    grid[base + m0 + 3] += weight * w0[m0 + 3];
  }
  for (; m0 < window; m0++) grid[base + m0] += weight * w0[m0];
}

/** Σ w0[m]·grid[base + m]. */
function rowDot(grid: Float64Array, base: number, w0: Float64Array, window: number): number {
  let r0 = 0;
  let r1 = 0;
  let r2 = 0;
  let r3 = 0;
  let m0 = 0;
  for (; m0 + 3 < window; m0 += 4) {
    r0 += w0[m0] * grid[base + m0];
    r1 += w0[m0 + 1] * grid[base + m0 + 1];
    r2 += w0[m0 + 2] * grid[base + m0 + 2];
    r3 += w0[m0 + 3] * grid[base + m0 + 3];
  }
  for (; m0 < window; m0++) r0 += w0[m0] * grid[base + m0];
  return r0 + r1 + r2 + r3;
}

/** Adds the outer product of the weight tables to the grid at the window's corner (d = 3). */
function spread3(
  grid: Float64Array,
  n0: number,
  n1: number,
  first0: number,
  first1: number,
  first2: number,
  w0: Float64Array,
  w1: Float64Array,
  w2: Float64Array,
  window: number,
): void {
  for (let m2 = 0; m2 < window; m2++) {
    const weight2 = w2[m2];
    let base = ((first2 + m2) * n1 + first1) * n0 + first0;
    for (let m1 = 0; m1 < window; m1++, base += n0) addRow(grid, base, weight2 * w1[m1], w0, window);
  }
}

/** The grid's values in the window weighted by the outer product of the weight tables (d = 3). */
function gather3(
  grid: Float64Array,
  n0: number,
  n1: number,
  first0: number,
  first1: number,
  first2: number,
  w0: Float64Array,
  w1: Float64Array,
  w2: Float64Array,
  window: number,
): number {
  let total = 0;
  for (let m2 = 0; m2 < window; m2++) {
    let plane = 0;
    let base = ((first2 + m2) * n1 + first1) * n0 + first0;
    for (let m1 = 0; m1 < window; m1++, base += n0) plane += w1[m1] * rowDot(grid, base, w0, window);
    total += w2[m2] * plane;
  }
  return total;
}

function spread2(grid: Float64Array, n0: number, first0: number, first1: number, w0: Float64Array, w1: Float64Array, window: number): void {
  let base = first1 * n0 + first0;
  for (let m1 = 0; m1 < window; m1++, base += n0) addRow(grid, base, w1[m1], w0, window);
}

function gather2(grid: Float64Array, n0: number, first0: number, first1: number, w0: Float64Array, w1: Float64Array, window: number): number {
  let total = 0;
  let base = first1 * n0 + first0;
  for (let m1 = 0; m1 < window; m1++, base += n0) total += w1[m1] * rowDot(grid, base, w0, window);
  return total;
}

/**
 * Grid sums for the inside points: writes log Ŝ_i where Ŝ_i ≥ 1 and NaN elsewhere (outside points, and
 * inside points whose grid sum is below 1, for the caller to do exactly). `extra` (may be undefined) holds
 * exact contributions from points outside the box, added before the threshold.
 */
export function gridLogKernelSums(z: Float64Array, n: number, bandwidth: number, plan: GridPlan, extra: Float64Array | undefined, logSums: Float64Array): void {
  const { dim, window, taps, convolutionWeights, origin, nodes, totalNodes, lower, upper, step } = plan;
  const a = plan.spreadWidth;
  const b = plan.convolutionWidth;
  const exponentScale = -0.5 / (a * a);
  // Per-axis constant hδ²/(2πa²b) turning the grid sums into the kernel (see the file comment).
  const axisConstant = (bandwidth * step * step) / (2 * Math.PI * a * a * b);
  const constant = axisConstant ** dim;
  const grid = new Float64Array(totalNodes);
  const w0 = new Float64Array(window);
  const w1 = new Float64Array(window);
  const w2 = new Float64Array(window);
  const n0 = nodes[0];
  const n1 = nodes[1];
  const first = new Int32Array(3);
  const order = gridOrder(z, n, plan);
  const count = order.length;

  for (let r = 0; r < count; r++) {
    const i = order[r];
    const first0 = axisWeights(z[i * dim], origin[0], step, window, exponentScale, w0);
    const first1 = axisWeights(z[i * dim + 1], origin[1], step, window, exponentScale, w1);
    if (dim === 2) spread2(grid, n0, first0, first1, w0, w1, window);
    else spread3(grid, n0, n1, first0, first1, axisWeights(z[i * dim + 2], origin[2], step, window, exponentScale, w2), w0, w1, w2, window);
  }
  for (let axis = 0; axis < dim; axis++) convolveAxis(grid, nodes, axis, convolutionWeights, taps);
  for (let i = 0; i < n; i++) if (!isInside(z, i, dim, lower, upper)) logSums[i] = NaN;
  for (let r = 0; r < count; r++) {
    const i = order[r];
    first[0] = axisWeights(z[i * dim], origin[0], step, window, exponentScale, w0);
    first[1] = axisWeights(z[i * dim + 1], origin[1], step, window, exponentScale, w1);
    let total: number;
    let self = axisSelf(w0, window, convolutionWeights, taps) * axisSelf(w1, window, convolutionWeights, taps);
    if (dim === 2) total = gather2(grid, n0, first[0], first[1], w0, w1, window);
    else {
      first[2] = axisWeights(z[i * dim + 2], origin[2], step, window, exponentScale, w2);
      total = gather3(grid, n0, n1, first[0], first[1], first[2], w0, w1, w2, window);
      self *= axisSelf(w2, window, convolutionWeights, taps);
    }
    const sum = constant * (total - self) + (extra ? extra[i] : 0);
    logSums[i] = sum >= 1 ? Math.log(sum) : NaN;
  }
}
