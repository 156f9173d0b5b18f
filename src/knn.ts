/**
 * An exact k-nearest-neighbour index (a kd-tree) on n points in d dimensions, for the Euclidean and the max
 * (Chebyshev) norm.
 *
 * ```ts
 * const index = new KnnIndex(data, 3, { norm: 'max' });      // data: Float64Array, row-major n*3
 * const { distances } = index.nearestOthers(4);               // n*4 sorted distances, self excluded
 * const near = index.nearest(queries, 4, { indices: true });  // another point set's neighbours here
 * const counts = index.countOthersWithin(radii);              // others at distance < radii[i]
 * const inside = index.countWithin(queries, radii, { inclusive: true });  // at distance <= radii[i]
 * ```
 *
 * Exactness. A Euclidean distance is always Math.sqrt of the squared coordinate differences summed in
 * coordinate order 0..d-1, so results equal a brute-force computation done the same way bit for bit. Pruning
 * compares a box's lower bound with the current k-th squared distance (for the max norm, the largest
 * coordinate gap with the k-th distance); the bound is computed with the same operations on the box's nearest
 * face, and floating-point subtraction, squaring, addition and max are monotone, so the bound never exceeds
 * the computed distance of any point in the box: nothing that could enter the result is ever pruned.
 * Radius counts compare squared distances with a threshold T chosen so that `s < T` holds exactly when
 * `Math.sqrt(s) < r` (or `<= r`), so counts are exact too.
 *
 * Layout. Points are copied into tree order (each leaf's points contiguous); nodes live in typed arrays with
 * tight bounding boxes; each split is at the median of the widest axis of the node's cell, and leaves hold
 * at most `leafSize` points (default 12; sizes 8..24 time the same within noise at n = 10^5, d = 3).
 * Queries of the indexed points run leaf by leaf in tree order, so consecutive queries touch the same
 * memory; each starts from its own leaf and climbs, searching a sibling subtree (depth first, nearest child
 * first) only when its box is closer than the current k-th distance. The k best so far sit in a short
 * sorted typed array. Other point sets are first bucketed by the leaf they fall in, for the same locality.
 * Ties: duplicates of a point are other points at distance 0; which of several equidistant points is
 * reported in `indices` is unspecified, the distances are not.
 */

export type KnnNorm = 'euclidean' | 'max';

export interface KnnIndexOptions {
  /** Default 'euclidean'. */
  norm?: KnnNorm;
  /** Largest number of points in a leaf; default 12. */
  leafSize?: number;
}

export interface NeighbourOptions {
  /** Also return the (original) indices of the neighbours. Default false. */
  indices?: boolean;
}

export interface NeighbourResult {
  k: number;
  /** Row i holds the k distances of query i in increasing order (length queries*k). */
  distances: Float64Array;
  /** Row i holds the original indices of those neighbours, when asked for. */
  indices?: Int32Array;
}

export interface CountOptions {
  /** Count points at distance <= r instead of < r. Default false (strict). */
  inclusive?: boolean;
}

const DEFAULT_LEAF_SIZE = 12;

export class KnnIndex {
  readonly n: number;
  readonly dim: number;
  readonly norm: KnnNorm;
  readonly leafSize: number;
  /** The points in tree order, row-major. */
  private readonly coords: Float64Array;
  /** Tree position → original index. */
  private readonly order: Int32Array;
  private readonly nodeStart: Int32Array;
  private readonly nodeEnd: Int32Array;
  /** Left child, or -1 for a leaf; the right child is `nodeRight`. */
  private readonly nodeLeft: Int32Array;
  private readonly nodeRight: Int32Array;
  private readonly nodeParent: Int32Array;
  private readonly nodeSplitAxis: Int32Array;
  private readonly nodeSplitValue: Float64Array;
  /** Tight bounding boxes, node-major: boxLower[node*dim + axis]. */
  private readonly boxLower: Float64Array;
  private readonly boxUpper: Float64Array;
  /** Leaf node ids in tree order. */
  private readonly leaves: Int32Array;
  private readonly nodeCount: number;
  private readonly depth: number;

  constructor(points: Float64Array, dim: number, options: KnnIndexOptions = {}) {
    if (!Number.isInteger(dim) || dim < 1) throw new RangeError(`dim must be a positive integer, got ${dim}`);
    if (points.length % dim !== 0) throw new RangeError(`points length ${points.length} is not a multiple of dim ${dim}`);
    const norm = options.norm ?? 'euclidean';
    if (norm !== 'euclidean' && norm !== 'max') throw new RangeError(`norm must be euclidean or max, got ${String(norm)}`);
    const leafSize = options.leafSize ?? DEFAULT_LEAF_SIZE;
    if (!Number.isInteger(leafSize) || leafSize < 1) throw new RangeError(`leafSize must be a positive integer, got ${leafSize}`);
    for (let i = 0; i < points.length; i++) {
      if (!Number.isFinite(points[i])) {
        throw new RangeError(`point ${Math.floor(i / dim)} has a non-finite coordinate (${points[i]}) at axis ${i % dim}`);
      }
    }
    this.n = points.length / dim;
    this.dim = dim;
    this.norm = norm;
    this.leafSize = leafSize;
    this.coords = Float64Array.from(points);
    this.order = new Int32Array(this.n);
    for (let i = 0; i < this.n; i++) this.order[i] = i;

    // Median splits leave every leaf with at least ceil(leafSize/2) points, hence this many nodes at most.
    const minLeafPoints = Math.max(1, Math.floor((leafSize + 1) / 2));
    const maxNodes = 2 * Math.max(1, Math.ceil(this.n / minLeafPoints)) + 1;
    this.nodeStart = new Int32Array(maxNodes);
    this.nodeEnd = new Int32Array(maxNodes);
    this.nodeLeft = new Int32Array(maxNodes);
    this.nodeRight = new Int32Array(maxNodes);
    this.nodeParent = new Int32Array(maxNodes);
    this.nodeSplitAxis = new Int32Array(maxNodes);
    this.nodeSplitValue = new Float64Array(maxNodes);
    this.boxLower = new Float64Array(maxNodes * dim);
    this.boxUpper = new Float64Array(maxNodes * dim);
    const leafIds: number[] = [];
    const built = this.build(leafIds);
    this.nodeCount = built.nodeCount;
    this.depth = built.depth;
    this.leaves = Int32Array.from(leafIds);
  }

  /**
   * Builds the tree iteratively: median split on the widest axis, node ids in pre-order (children after
   * their parent). The axis is chosen from the node's cell (the data's bounding box for the root, the
   * parent's cell cut at the split value below it), so no level rescans the points; the tight boxes that
   * the searches prune with are computed bottom-up at the end, in one pass over the points.
   */
  private build(leafIds: number[]): { nodeCount: number; depth: number } {
    const { n, dim, coords, order, leafSize } = this;
    const { nodeStart, nodeEnd, nodeLeft, nodeRight, nodeParent, nodeSplitAxis, nodeSplitValue, boxLower, boxUpper } = this;
    let nodeCount = 0;
    let depth = 0;
    // The root's cell is the data's bounding box.
    for (let axis = 0; axis < dim; axis++) {
      boxLower[axis] = Infinity;
      boxUpper[axis] = -Infinity;
    }
    for (let i = 0; i < n * dim; i += dim) {
      for (let axis = 0; axis < dim; axis++) {
        const value = coords[i + axis];
        if (value < boxLower[axis]) boxLower[axis] = value;
        if (value > boxUpper[axis]) boxUpper[axis] = value;
      }
    }
    // Stack of nodes to create, each with its point range, parent and cell; right halves are pushed first
    // so that ids come out in pre-order.
    const starts: number[] = [0];
    const ends: number[] = [n];
    const parents: number[] = [-1];
    const isLeftChild: boolean[] = [true];
    const levelOf: number[] = [0];
    const cellLower: Float64Array[] = [boxLower.slice(0, dim)];
    const cellUpper: Float64Array[] = [boxUpper.slice(0, dim)];
    while (starts.length > 0) {
      const start = starts.pop()!;
      const end = ends.pop()!;
      const parent = parents.pop()!;
      const isLeft = isLeftChild.pop()!;
      const level = levelOf.pop()!;
      const lower = cellLower.pop()!;
      const upper = cellUpper.pop()!;
      const node = nodeCount++;
      if (level > depth) depth = level;
      nodeStart[node] = start;
      nodeEnd[node] = end;
      nodeParent[node] = parent;
      if (parent >= 0) {
        if (isLeft) nodeLeft[parent] = node;
        else nodeRight[parent] = node;
      }
      if (end - start <= leafSize) {
        nodeLeft[node] = -1;
        nodeRight[node] = -1;
        leafIds.push(node);
        continue;
      }
      let splitAxis = 0;
      let widest = -1;
      for (let axis = 0; axis < dim; axis++) {
        const width = upper[axis] - lower[axis];
        if (width > widest) {
          widest = width;
          splitAxis = axis;
        }
      }
      const middle = start + ((end - start) >> 1);
      selectRows(coords, order, dim, start, end - 1, middle, splitAxis);
      const splitValue = coords[middle * dim + splitAxis];
      nodeSplitAxis[node] = splitAxis;
      nodeSplitValue[node] = splitValue;
      const rightLower = lower.slice();
      rightLower[splitAxis] = splitValue;
      const leftUpper = upper.slice();
      leftUpper[splitAxis] = splitValue;
      starts.push(middle, start);
      ends.push(end, middle);
      parents.push(node, node);
      isLeftChild.push(false, true);
      levelOf.push(level + 1, level + 1);
      cellLower.push(rightLower, lower);
      cellUpper.push(upper, leftUpper);
    }
    // Tight boxes, children before parents (reverse pre-order).
    for (let node = nodeCount - 1; node >= 0; node--) {
      const offset = node * dim;
      if (nodeLeft[node] < 0) {
        for (let axis = 0; axis < dim; axis++) {
          boxLower[offset + axis] = Infinity;
          boxUpper[offset + axis] = -Infinity;
        }
        for (let pos = nodeStart[node]; pos < nodeEnd[node]; pos++) {
          const rowOffset = pos * dim;
          for (let axis = 0; axis < dim; axis++) {
            const value = coords[rowOffset + axis];
            if (value < boxLower[offset + axis]) boxLower[offset + axis] = value;
            if (value > boxUpper[offset + axis]) boxUpper[offset + axis] = value;
          }
        }
      } else {
        const left = nodeLeft[node] * dim;
        const right = nodeRight[node] * dim;
        for (let axis = 0; axis < dim; axis++) {
          boxLower[offset + axis] = Math.min(boxLower[left + axis], boxLower[right + axis]);
          boxUpper[offset + axis] = Math.max(boxUpper[left + axis], boxUpper[right + axis]);
        }
      }
    }
    return { nodeCount, depth };
  }

  /**
   * The k nearest OTHER indexed points of every indexed point (self excluded by index, so duplicates of a
   * point are neighbours at distance 0). Rows are in the original point order.
   */
  nearestOthers(k: number, options: NeighbourOptions = {}): NeighbourResult {
    checkK(k, this.n - 1, 'other points');
    const withIndices = options.indices ?? false;
    const { n, dim, coords, order, leaves, nodeStart, nodeEnd } = this;
    const distances = new Float64Array(n * k);
    const indices = withIndices ? new Int32Array(n * k) : undefined;
    const search = this.makeSearch(k);
    const query = search.query;
    const euclidean = this.norm === 'euclidean';
    for (let l = 0; l < leaves.length; l++) {
      const leaf = leaves[l];
      const start = nodeStart[leaf];
      const end = nodeEnd[leaf];
      for (let pos = start; pos < end; pos++) {
        for (let axis = 0; axis < dim; axis++) query[axis] = coords[pos * dim + axis];
        search.run(leaf, pos);
        const rowOffset = order[pos] * k;
        writeRow(search.bestDistance, search.bestPosition, k, euclidean, distances, indices, order, rowOffset);
      }
    }
    return { k, distances, indices };
  }

  /** The k nearest indexed points of each query point (queries are not in the index; none is excluded). */
  nearest(queries: Float64Array, k: number, options: NeighbourOptions = {}): NeighbourResult {
    const queryCount = this.checkQueries(queries);
    checkK(k, this.n, 'indexed points');
    const withIndices = options.indices ?? false;
    const { dim, order } = this;
    const distances = new Float64Array(queryCount * k);
    const indices = withIndices ? new Int32Array(queryCount * k) : undefined;
    const search = this.makeSearch(k);
    const query = search.query;
    const euclidean = this.norm === 'euclidean';
    const { queryOrder, queryLeaf } = this.sortQueriesByLeaf(queries, queryCount);
    for (let t = 0; t < queryCount; t++) {
      const q = queryOrder[t];
      for (let axis = 0; axis < dim; axis++) query[axis] = queries[q * dim + axis];
      search.run(queryLeaf[t], -1);
      writeRow(search.bestDistance, search.bestPosition, k, euclidean, distances, indices, order, q * k);
    }
    return { k, distances, indices };
  }

  /**
   * For each indexed point i, the number of OTHER indexed points at distance < radii[i] (or <= with
   * `inclusive`). radii is in the original point order; a negative radius counts nothing.
   */
  countOthersWithin(radii: Float64Array, options: CountOptions = {}): Int32Array {
    const { n, dim, coords, order } = this;
    if (radii.length !== n) throw new RangeError(`radii has length ${radii.length}; expected one per point (${n})`);
    const inclusive = options.inclusive ?? false;
    const counts = new Int32Array(n);
    const query = new Float64Array(dim);
    const stack = new Int32Array(2 * this.depth + 4);
    for (let pos = 0; pos < n; pos++) {
      const original = order[pos];
      const threshold = this.threshold(radii[original], inclusive);
      for (let axis = 0; axis < dim; axis++) query[axis] = coords[pos * dim + axis];
      const total = this.countBelow(query, threshold, stack);
      // The point itself is at distance 0, counted whenever 0 passes the test.
      counts[original] = 0 < threshold ? total - 1 : total;
    }
    return counts;
  }

  /** For each query point i, the number of indexed points at distance < radii[i] (or <= with `inclusive`). */
  countWithin(queries: Float64Array, radii: Float64Array, options: CountOptions = {}): Int32Array {
    const queryCount = this.checkQueries(queries);
    if (radii.length !== queryCount) throw new RangeError(`radii has length ${radii.length}; expected one per query (${queryCount})`);
    const { dim } = this;
    const inclusive = options.inclusive ?? false;
    const counts = new Int32Array(queryCount);
    const query = new Float64Array(dim);
    const stack = new Int32Array(2 * this.depth + 4);
    const { queryOrder } = this.sortQueriesByLeaf(queries, queryCount);
    for (let t = 0; t < queryCount; t++) {
      const q = queryOrder[t];
      for (let axis = 0; axis < dim; axis++) query[axis] = queries[q * dim + axis];
      counts[q] = this.countBelow(query, this.threshold(radii[q], inclusive), stack);
    }
    return counts;
  }

  /**
   * The value T such that a point counts exactly when its computed distance value (squared for the
   * Euclidean norm) is < T.
   */
  private threshold(radius: number, inclusive: boolean): number {
    if (Number.isNaN(radius)) throw new RangeError('a radius is NaN');
    if (radius < 0) return 0;
    if (this.norm === 'max') return inclusive ? nextUp(radius) : radius;
    return squaredThreshold(radius, inclusive);
  }

  private checkQueries(queries: Float64Array): number {
    const { dim } = this;
    if (queries.length % dim !== 0) throw new RangeError(`queries length ${queries.length} is not a multiple of dim ${dim}`);
    for (let i = 0; i < queries.length; i++) {
      if (!Number.isFinite(queries[i])) {
        throw new RangeError(`query ${Math.floor(i / dim)} has a non-finite coordinate (${queries[i]}) at axis ${i % dim}`);
      }
    }
    return queries.length / dim;
  }

  /** Finds each query's leaf by the split values and orders queries leaf by leaf (a counting sort). */
  private sortQueriesByLeaf(queries: Float64Array, queryCount: number): { queryOrder: Int32Array; queryLeaf: Int32Array } {
    const { dim, nodeLeft, nodeRight, nodeSplitAxis, nodeSplitValue, nodeCount } = this;
    const leafOf = new Int32Array(queryCount);
    const perNode = new Int32Array(nodeCount + 1);
    for (let q = 0; q < queryCount; q++) {
      let node = 0;
      while (nodeLeft[node] >= 0) {
        node = queries[q * dim + nodeSplitAxis[node]] < nodeSplitValue[node] ? nodeLeft[node] : nodeRight[node];
      }
      leafOf[q] = node;
      perNode[node + 1]++;
    }
    for (let node = 0; node < nodeCount; node++) perNode[node + 1] += perNode[node];
    const queryOrder = new Int32Array(queryCount);
    const queryLeaf = new Int32Array(queryCount);
    for (let q = 0; q < queryCount; q++) {
      const slot = perNode[leafOf[q]]++;
      queryOrder[slot] = q;
      queryLeaf[slot] = leafOf[q];
    }
    return { queryOrder, queryLeaf };
  }

  /** Number of indexed points whose distance value (squared for Euclidean) to `query` is < threshold. */
  private countBelow(query: Float64Array, threshold: number, stack: Int32Array): number {
    const { dim, coords, nodeStart, nodeEnd, nodeLeft, nodeRight, boxLower, boxUpper } = this;
    const euclidean = this.norm === 'euclidean';
    let count = 0;
    let top = 0;
    stack[top++] = 0;
    while (top > 0) {
      const node = stack[--top];
      const boxOffset = node * dim;
      // Nearest and farthest distance values from the query to the node's box.
      let near = 0;
      let far = 0;
      for (let axis = 0; axis < dim; axis++) {
        const x = query[axis];
        const lower = boxLower[boxOffset + axis];
        const upper = boxUpper[boxOffset + axis];
        let nearGap = 0;
        if (x < lower) nearGap = lower - x;
        else if (x > upper) nearGap = x - upper;
        const toLower = x - lower;
        const toUpper = upper - x;
        const farGap = toLower > toUpper ? toLower : toUpper;
        if (euclidean) {
          near += nearGap * nearGap;
          far += farGap * farGap;
        } else {
          if (nearGap > near) near = nearGap;
          if (farGap > far) far = farGap;
        }
      }
      if (!(near < threshold)) continue;
      if (far < threshold) {
        count += nodeEnd[node] - nodeStart[node];
        continue;
      }
      if (nodeLeft[node] >= 0) {
        stack[top++] = nodeLeft[node];
        stack[top++] = nodeRight[node];
        continue;
      }
      for (let pos = nodeStart[node], end = nodeEnd[node]; pos < end; pos++) {
        const rowOffset = pos * dim;
        let value = 0;
        if (euclidean) {
          for (let axis = 0; axis < dim; axis++) {
            const diff = query[axis] - coords[rowOffset + axis];
            value += diff * diff;
          }
        } else {
          for (let axis = 0; axis < dim; axis++) {
            const diff = Math.abs(query[axis] - coords[rowOffset + axis]);
            if (diff > value) value = diff;
          }
        }
        if (value < threshold) count++;
      }
    }
    return count;
  }

  private makeSearch(k: number): NeighbourSearch {
    return new NeighbourSearch(this.tree(), k, this.norm === 'euclidean');
  }

  private tree(): TreeArrays {
    return {
      dim: this.dim,
      coords: this.coords,
      nodeStart: this.nodeStart,
      nodeEnd: this.nodeEnd,
      nodeLeft: this.nodeLeft,
      nodeRight: this.nodeRight,
      nodeParent: this.nodeParent,
      boxLower: this.boxLower,
      boxUpper: this.boxUpper,
      depth: this.depth,
    };
  }
}

interface TreeArrays {
  dim: number;
  coords: Float64Array;
  nodeStart: Int32Array;
  nodeEnd: Int32Array;
  nodeLeft: Int32Array;
  nodeRight: Int32Array;
  nodeParent: Int32Array;
  boxLower: Float64Array;
  boxUpper: Float64Array;
  depth: number;
}

/**
 * k-NN search on distance values: squared distances for the Euclidean norm, max |difference| for the max
 * norm, and box bounds likewise. The k best so far are kept sorted (insertion into a short typed array
 * beats a heap for the small k used by the estimators); `worst` is the k-th. One class serves both norms:
 * a separate copy per norm (each hot loop monomorphic) timed the same within noise (all-points 4-NN,
 * n = 10^5 at d = 3 and 5·10^4 at d = 5, runs interleaved).
 */
class NeighbourSearch {
  /** The query point; fill before `run`. */
  readonly query: Float64Array;
  /** After `run`: the k best distance values in increasing order ... */
  readonly bestDistance: Float64Array;
  /** ... and their tree positions. */
  readonly bestPosition: Int32Array;
  private readonly stackNode: Int32Array;
  private readonly stackBound: Float64Array;

  constructor(
    private readonly tree: TreeArrays,
    private readonly k: number,
    private readonly euclidean: boolean,
  ) {
    this.query = new Float64Array(tree.dim);
    this.bestDistance = new Float64Array(k);
    this.bestPosition = new Int32Array(k);
    this.stackNode = new Int32Array(tree.depth + 2);
    this.stackBound = new Float64Array(tree.depth + 2);
  }

  /** Searches from `startLeaf` upwards; `selfPosition` (or -1) is skipped. */
  run(startLeaf: number, selfPosition: number): void {
    const { k, euclidean, bestDistance, bestPosition, query, stackNode, stackBound } = this;
    const { dim, coords, nodeStart, nodeEnd, nodeLeft, nodeRight, nodeParent, boxLower, boxUpper } = this.tree;
    const boxDistance = euclidean ? boxSquaredDistance : boxMaxDistance;
    bestDistance.fill(Infinity);
    bestPosition.fill(-1);
    let worst = Infinity;
    const last = k - 1;
    let top = 0;
    let node = startLeaf;
    let pending = startLeaf; // the subtree to search next
    for (;;) {
      // Depth-first search of `pending`, nearest child first.
      stackNode[0] = pending;
      stackBound[0] = 0;
      top = 1;
      while (top > 0) {
        top--;
        if (stackBound[top] >= worst) continue;
        const current = stackNode[top];
        const left = nodeLeft[current];
        if (left < 0) {
          const end = nodeEnd[current];
          for (let pos = nodeStart[current]; pos < end; pos++) {
            if (pos === selfPosition) continue;
            const rowOffset = pos * dim;
            let distance = 0;
            if (euclidean) {
              for (let axis = 0; axis < dim; axis++) {
                const diff = query[axis] - coords[rowOffset + axis];
                distance += diff * diff;
              }
            } else {
              for (let axis = 0; axis < dim; axis++) {
                const diff = Math.abs(query[axis] - coords[rowOffset + axis]);
                if (diff > distance) distance = diff;
              }
            }
            if (distance < worst) {
              let slot = last;
              while (slot > 0 && bestDistance[slot - 1] > distance) {
                bestDistance[slot] = bestDistance[slot - 1];
                bestPosition[slot] = bestPosition[slot - 1];
                slot--;
              }
              bestDistance[slot] = distance;
              bestPosition[slot] = pos;
              worst = bestDistance[last];
            }
          }
          continue;
        }
        const right = nodeRight[current];
        const leftBound = boxDistance(query, boxLower, boxUpper, left * dim, dim);
        const rightBound = boxDistance(query, boxLower, boxUpper, right * dim, dim);
        if (leftBound <= rightBound) {
          if (rightBound < worst) {
            stackNode[top] = right;
            stackBound[top++] = rightBound;
          }
          if (leftBound < worst) {
            stackNode[top] = left;
            stackBound[top++] = leftBound;
          }
        } else {
          if (leftBound < worst) {
            stackNode[top] = left;
            stackBound[top++] = leftBound;
          }
          if (rightBound < worst) {
            stackNode[top] = right;
            stackBound[top++] = rightBound;
          }
        }
      }
      // Climb to the next ancestor whose other child is closer than the k-th distance.
      let next = -1;
      while (next < 0) {
        const parent = nodeParent[node];
        if (parent < 0) return;
        const sibling = nodeLeft[parent] === node ? nodeRight[parent] : nodeLeft[parent];
        node = parent;
        if (boxDistance(query, boxLower, boxUpper, sibling * dim, dim) < worst) next = sibling;
      }
      pending = next;
    }
  }
}

/** Squared distance from the query to the nearest point of a box, summed in axis order like a point's. */
function boxSquaredDistance(query: Float64Array, boxLower: Float64Array, boxUpper: Float64Array, offset: number, dim: number): number {
  let squared = 0;
  for (let axis = 0; axis < dim; axis++) {
    const x = query[axis];
    const lower = boxLower[offset + axis];
    if (x < lower) {
      const gap = lower - x;
      squared += gap * gap;
    } else {
      const upper = boxUpper[offset + axis];
      if (x > upper) {
        const gap = x - upper;
        squared += gap * gap;
      }
    }
  }
  return squared;
}

function boxMaxDistance(query: Float64Array, boxLower: Float64Array, boxUpper: Float64Array, offset: number, dim: number): number {
  let distance = 0;
  for (let axis = 0; axis < dim; axis++) {
    const x = query[axis];
    const lower = boxLower[offset + axis];
    let gap = 0;
    if (x < lower) gap = lower - x;
    else {
      const upper = boxUpper[offset + axis];
      if (x > upper) gap = x - upper;
    }
    if (gap > distance) distance = gap;
  }
  return distance;
}

function writeRow(
  bestDistance: Float64Array,
  bestPosition: Int32Array,
  k: number,
  euclidean: boolean,
  distances: Float64Array,
  indices: Int32Array | undefined,
  order: Int32Array,
  rowOffset: number,
): void {
  for (let j = 0; j < k; j++) distances[rowOffset + j] = euclidean ? Math.sqrt(bestDistance[j]) : bestDistance[j];
  if (indices) for (let j = 0; j < k; j++) indices[rowOffset + j] = order[bestPosition[j]];
}

function checkK(k: number, available: number, what: string): void {
  if (!Number.isInteger(k) || k < 1) throw new RangeError(`k must be a positive integer, got ${k}`);
  if (k > available) throw new RangeError(`k = ${k} exceeds the number of ${what} (${available})`);
}

/**
 * Quickselect on rows [lo, hi] (inclusive) by one coordinate: afterwards row `kth` holds the value that
 * would be there after sorting, rows before it are <= and rows after it are >=. Rows move with their
 * original index. Hoare partitioning swaps equal keys, so lattices and duplicates stay balanced.
 */
function selectRows(coords: Float64Array, order: Int32Array, dim: number, lo: number, hi: number, kth: number, axis: number): void {
  while (hi > lo) {
    const a = coords[lo * dim + axis];
    const b = coords[((lo + hi) >> 1) * dim + axis];
    const c = coords[hi * dim + axis];
    const pivot = a < b ? (b < c ? b : a < c ? c : a) : a < c ? a : b < c ? c : b;
    let i = lo;
    let j = hi;
    while (i <= j) {
      while (coords[i * dim + axis] < pivot) i++;
      while (coords[j * dim + axis] > pivot) j--;
      if (i <= j) {
        if (i !== j) swapRows(coords, order, dim, i, j);
        i++;
        j--;
      }
    }
    if (kth <= j) hi = j;
    else if (kth >= i) lo = i;
    else return;
  }
}

function swapRows(coords: Float64Array, order: Int32Array, dim: number, i: number, j: number): void {
  const rowI = i * dim;
  const rowJ = j * dim;
  for (let axis = 0; axis < dim; axis++) {
    const held = coords[rowI + axis];
    coords[rowI + axis] = coords[rowJ + axis];
    coords[rowJ + axis] = held;
  }
  const heldIndex = order[i];
  order[i] = order[j];
  order[j] = heldIndex;
}

const bitsView = new Float64Array(1);
const bitsInt = new BigInt64Array(bitsView.buffer);

/** The next double above x >= 0 (Infinity stays Infinity). */
export function nextUp(x: number): number {
  if (!(x >= 0)) throw new RangeError(`nextUp needs x >= 0, got ${x}`);
  if (x === Infinity) return x;
  bitsView[0] = x + 0; // turns -0 into +0, whose successor is the smallest subnormal
  bitsInt[0] += 1n;
  return bitsView[0];
}

/** The next double below x >= 0 (0 stays 0). */
export function nextDown(x: number): number {
  if (!(x >= 0)) throw new RangeError(`nextDown needs x >= 0, got ${x}`);
  if (x === 0) return 0;
  if (x === Infinity) return Number.MAX_VALUE;
  bitsView[0] = x;
  bitsInt[0] -= 1n;
  return bitsView[0];
}

/**
 * For a radius r >= 0: the least double T with Math.sqrt(T) >= r (strict), or with Math.sqrt(T) > r
 * (inclusive). Math.sqrt is correctly rounded, hence monotone, so for every s >= 0, `s < T` holds exactly
 * when Math.sqrt(s) < r (strict), or Math.sqrt(s) <= r (inclusive). r*r is within an ulp or two of T, so
 * the walk below takes a step or two.
 */
export function squaredThreshold(radius: number, inclusive: boolean): number {
  if (!(radius >= 0)) throw new RangeError(`radius must be >= 0, got ${radius}`);
  if (radius === Infinity) return Infinity;
  let threshold = radius * radius;
  if (passesRadius(threshold, radius, inclusive)) {
    do threshold = nextUp(threshold);
    while (passesRadius(threshold, radius, inclusive));
  } else {
    while (threshold > 0 && !passesRadius(nextDown(threshold), radius, inclusive)) threshold = nextDown(threshold);
  }
  return threshold;
}

function passesRadius(squared: number, radius: number, inclusive: boolean): boolean {
  return inclusive ? Math.sqrt(squared) <= radius : Math.sqrt(squared) < radius;
}
