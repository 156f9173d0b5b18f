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
 * compares a lower bound on a subtree's distances with the current k-th distance value; every bound is
 * built from rounded coordinate differences no larger than those of the subtree's points and combined in
 * axis order with the same operations (rounding, squaring, addition and max are monotone), so it never
 * exceeds the computed distance of any point it stands for: nothing that could enter the result is pruned.
 * Radius counts compare squared distances with a threshold T chosen so that `s < T` holds exactly when
 * `Math.sqrt(s) < r` (or `<= r`), so counts are exact too.
 *
 * Layout. Points are copied into tree order (each leaf's points contiguous); nodes live in typed arrays;
 * each split is at the median of the widest axis of the node's cell, and leaves hold at most `leafSize`
 * points (12 up to d = 5, more above; see defaultLeafSize). Queries of the indexed points run leaf by leaf
 * in tree order, so consecutive queries touch the same memory; each starts from its own leaf and climbs,
 * searching a sibling subtree (depth first, nearer child first) only when its cell is closer than the
 * current k-th distance. The k best so far sit in a short sorted typed array. Other point sets are first
 * bucketed by the leaf they fall in, for the same locality. Radius counts prune with tight bounding boxes
 * instead, which also tell when a whole box lies inside the radius.
 * nearestOthers runs this search in WebAssembly (knn-search.ts), the same walk and the same sums, so the same
 * results (Euclidean: 0.54–0.76 of the JavaScript search's time at d = 2..5, 0.40 at d = 8).
 * Ties: duplicates of a point are other points at distance 0; which of several equidistant points is
 * reported in `indices` is unspecified, the distances are not.
 */
import { wasmNearestOthers, type TreeArrays } from './knn-search.js';

export type KnnNorm = 'euclidean' | 'max';

export interface KnnIndexOptions {
  /** Default 'euclidean'. */
  norm?: KnnNorm;
  /** Largest number of points in a leaf; default 12 up to d = 5, 24 up to d = 8, 32 above. */
  leafSize?: number;
}

export interface NeighbourOptions {
  /** Also return the (original) indices of the neighbours. Default false. */
  indices?: boolean;
  /**
   * nearestOthers: 'auto' (default) searches in WebAssembly (src/math/knn-search.ts), 'javascript' with the
   * search below. Both give the same distances and indices; the choice is for tests and comparisons.
   */
  engine?: 'auto' | 'javascript';
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

/**
 * Larger leaves in higher dimensions: there most leaves near a query must be opened anyway, and a bigger
 * leaf trades node visits for point scans, which are cheaper. Best of the sizes 8..64 timed for all-points
 * 4-NN at n = 10^5 (normal and uniform data): 8..16 at d <= 5, 24..32 at d = 8, 32 at d = 10.
 */
function defaultLeafSize(dim: number): number {
  if (dim <= 5) return 12;
  return dim <= 8 ? 24 : 32;
}

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
  private boxesBuilt = false;
  /** Leaf node ids in tree order. */
  private readonly leaves: Int32Array;
  private readonly nodeCount: number;
  private readonly depth: number;

  constructor(points: Float64Array, dim: number, options: KnnIndexOptions = {}) {
    if (!Number.isInteger(dim) || dim < 1) throw new RangeError(`dim must be a positive integer, got ${dim}`);
    if (points.length % dim !== 0) throw new RangeError(`points length ${points.length} is not a multiple of dim ${dim}`);
    const norm = options.norm ?? 'euclidean';
    if (norm !== 'euclidean' && norm !== 'max') throw new RangeError(`norm must be euclidean or max, got ${String(norm)}`);
    const leafSize = options.leafSize ?? defaultLeafSize(dim);
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
    this.coords = points.slice();
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
   * the radius counts prune with are computed bottom-up on the first count (ensureBoxes).
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
    return { nodeCount, depth };
  }

  /**
   * The k nearest OTHER indexed points of every indexed point (self excluded by index, so duplicates of a
   * point are neighbours at distance 0). Rows are in the original point order.
   */
  nearestOthers(k: number, options: NeighbourOptions = {}): NeighbourResult {
    checkK(k, this.n - 1, 'other points');
    const withIndices = options.indices ?? false;
    const euclidean = this.norm === 'euclidean';
    if (options.engine !== 'javascript') {
      const { n, dim, coords, order, nodeCount, nodeStart, nodeEnd, nodeLeft, nodeRight, nodeParent, nodeSplitAxis, nodeSplitValue, leaves } = this;
      const tree = { n, dim, coords, order, nodeCount, nodeStart, nodeEnd, nodeLeft, nodeRight, nodeParent, nodeSplitAxis, nodeSplitValue, leaves };
      const found = wasmNearestOthers(tree, k, withIndices, this.norm);
      if (found) return { k, ...found };
    }
    const { n, dim, coords, order, leaves, nodeStart, nodeEnd } = this;
    const distances = new Float64Array(n * k);
    const indices = withIndices ? new Int32Array(n * k) : undefined;
    const search = this.makeSearch(k);
    const query = search.query;
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
    this.ensureBoxes();
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
    this.ensureBoxes();
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

  /**
   * The tight boxes the radius counts prune with, children before parents (reverse pre-order); built on the
   * first count, since the k-NN searches prune with cells and most indexes never count.
   */
  private ensureBoxes(): void {
    if (this.boxesBuilt) return;
    this.boxesBuilt = true;
    const { dim, coords, nodeCount, nodeStart, nodeEnd, nodeLeft, nodeRight, boxLower, boxUpper } = this;
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
      nodeSplitAxis: this.nodeSplitAxis,
      nodeSplitValue: this.nodeSplitValue,
    };
  }
}

/**
 * k-NN search on distance values: squared distances for the Euclidean norm, max |difference| for the max
 * norm. The k best so far are kept sorted (insertion into a short typed array beats a heap for the small k
 * used by the estimators); `worst` is the k-th.
 *
 * Pruning uses each node's cell (the region its splits carve out of the whole space), not its tight box:
 * the gap from the query to a cell changes on one axis only per split (Arya & Mount's incremental
 * distance), so a child's bound costs one subtraction plus, for the Euclidean norm, a sum of d cached
 * squares, with no box to load from memory. At d = 8, n = 10^5 that halved the time of tight-box pruning,
 * whose box loads were half the search, although cells prune a little less. Every cell gap is a rounded
 * difference between the query and a split value lying between the query and the cell's points, and
 * rounding is monotone, so each gap is at most the corresponding coordinate difference of any point in the
 * cell as computed; the bound is then summed (or maxed) in axis order like a point's distance, hence never
 * exceeds it.
 */
class NeighbourSearch {
  /** The query point; fill before `run`. */
  readonly query: Float64Array;
  /** After `run`: the k best distance values in increasing order ... */
  readonly bestDistance: Float64Array;
  /** ... and their tree positions. */
  readonly bestPosition: Int32Array;
  /** The current k-th best distance value. */
  private worst = Infinity;
  private selfPosition = -1;
  /** Squared gap from the query to the current cell on each axis (Euclidean norm only). */
  private readonly sideSquared: Float64Array;

  constructor(
    private readonly tree: TreeArrays,
    private readonly k: number,
    private readonly euclidean: boolean,
  ) {
    this.query = new Float64Array(tree.dim);
    this.sideSquared = new Float64Array(tree.dim);
    this.bestDistance = new Float64Array(k);
    this.bestPosition = new Int32Array(k);
  }

  /**
   * Searches from `startLeaf`, whose cell holds the query, upwards; `selfPosition` (or -1) is skipped.
   * Climbing from the query's own leaf finds close neighbours first, so the k-th distance is small before
   * any other subtree is opened.
   */
  run(startLeaf: number, selfPosition: number): void {
    const { query, sideSquared } = this;
    const { nodeLeft, nodeRight, nodeParent, nodeSplitAxis, nodeSplitValue } = this.tree;
    this.bestDistance.fill(Infinity);
    this.bestPosition.fill(-1);
    this.worst = Infinity;
    this.selfPosition = selfPosition;
    this.scanLeaf(startLeaf);
    // The query lies in every ancestor's cell, so a sibling's cell is away from it on the split axis only.
    let node = startLeaf;
    for (let parent = nodeParent[node]; parent >= 0; node = parent, parent = nodeParent[node]) {
      const sibling = nodeLeft[parent] === node ? nodeRight[parent] : nodeLeft[parent];
      const axis = nodeSplitAxis[parent];
      const gap = query[axis] - nodeSplitValue[parent];
      if (this.euclidean) {
        const bound = gap * gap;
        if (bound < this.worst) {
          sideSquared[axis] = bound;
          this.visitEuclidean(sibling, bound);
          sideSquared[axis] = 0;
        }
      } else {
        const bound = Math.abs(gap);
        if (bound < this.worst) this.visitMax(sibling, bound);
      }
    }
  }

  /** Searches a subtree whose cell is `bound` (< worst) away, as `sideSquared` describes; nearer child first. */
  private visitEuclidean(node: number, bound: number): void {
    const tree = this.tree;
    const left = tree.nodeLeft[node];
    if (left < 0) {
      this.scanLeaf(node);
      return;
    }
    const axis = tree.nodeSplitAxis[node];
    const gap = this.query[axis] - tree.nodeSplitValue[node];
    const right = tree.nodeRight[node];
    // The nearer child's cell is as far as this one's.
    this.visitEuclidean(gap < 0 ? left : right, bound);
    // The farther child's cell is further on the split axis only: the split plane replaces the old side.
    // The new side is never shorter than the one it replaces, so the far bound is at least this cell's,
    // and at least the new side alone (rounded sums of non-negative terms only grow): either settles a
    // prune without summing the d sides.
    const gapSquared = gap * gap;
    if (gapSquared >= this.worst || bound >= this.worst) return;
    const sideSquared = this.sideSquared;
    const previous = sideSquared[axis];
    sideSquared[axis] = gapSquared;
    let farBound = 0;
    for (let a = 0; a < tree.dim; a++) farBound += sideSquared[a];
    if (farBound < this.worst) this.visitEuclidean(gap < 0 ? right : left, farBound);
    sideSquared[axis] = previous;
  }

  /** As visitEuclidean for the max norm, where the bound is exactly the largest side gap. */
  private visitMax(node: number, bound: number): void {
    const tree = this.tree;
    const left = tree.nodeLeft[node];
    if (left < 0) {
      this.scanLeaf(node);
      return;
    }
    const gap = this.query[tree.nodeSplitAxis[node]] - tree.nodeSplitValue[node];
    const right = tree.nodeRight[node];
    this.visitMax(gap < 0 ? left : right, bound);
    const side = Math.abs(gap);
    const farBound = side > bound ? side : bound;
    if (farBound < this.worst) this.visitMax(gap < 0 ? right : left, farBound);
  }

  private scanLeaf(node: number): void {
    if (this.euclidean) this.scanLeafEuclidean(node);
    else this.scanLeafMax(node);
  }

  /**
   * Squared distances to a leaf's points, summed in axis order four axes at a time; a point is dropped as
   * soon as its partial sum reaches the k-th distance (sums of non-negative terms only grow, even rounded),
   * which at d = 8 skips about a fifth of the work.
   */
  private scanLeafEuclidean(node: number): void {
    const { query, selfPosition } = this;
    const { dim, coords, nodeStart, nodeEnd } = this.tree;
    const blockEnd = dim - 3;
    for (let pos = nodeStart[node], end = nodeEnd[node]; pos < end; pos++) {
      if (pos === selfPosition) continue;
      const worst = this.worst;
      const row = pos * dim;
      let distance = 0;
      let axis = 0;
      while (axis < blockEnd && distance < worst) {
        const diff0 = query[axis] - coords[row + axis];
        const diff1 = query[axis + 1] - coords[row + axis + 1];
        const diff2 = query[axis + 2] - coords[row + axis + 2];
        const diff3 = query[axis + 3] - coords[row + axis + 3];
        distance = distance + diff0 * diff0 + diff1 * diff1 + diff2 * diff2 + diff3 * diff3;
        axis += 4;
      }
      if (distance >= worst) continue;
      for (; axis < dim; axis++) {
        const diff = query[axis] - coords[row + axis];
        distance += diff * diff;
      }
      if (distance < worst) this.insert(distance, pos);
    }
  }

  private scanLeafMax(node: number): void {
    const { query, selfPosition } = this;
    const { dim, coords, nodeStart, nodeEnd } = this.tree;
    for (let pos = nodeStart[node], end = nodeEnd[node]; pos < end; pos++) {
      if (pos === selfPosition) continue;
      const worst = this.worst;
      const row = pos * dim;
      let distance = 0;
      for (let axis = 0; axis < dim && distance < worst; axis++) {
        const diff = Math.abs(query[axis] - coords[row + axis]);
        if (diff > distance) distance = diff;
      }
      if (distance < worst) this.insert(distance, pos);
    }
  }

  /** Inserts a distance value below the k-th into the sorted k best. */
  private insert(distance: number, pos: number): void {
    const { bestDistance, bestPosition } = this;
    let slot = this.k - 1;
    while (slot > 0 && bestDistance[slot - 1] > distance) {
      bestDistance[slot] = bestDistance[slot - 1];
      bestPosition[slot] = bestPosition[slot - 1];
      slot--;
    }
    bestDistance[slot] = distance;
    bestPosition[slot] = pos;
    this.worst = bestDistance[this.k - 1];
  }
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
