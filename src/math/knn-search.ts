/**
 * The kd-tree's all-points k-nearest-others search (src/math/knn.ts, nearestOthers), Euclidean and max norm, in
 * WebAssembly. It walks the tree exactly as the JavaScript search does and sums squared distances in the same
 * order, so distances and neighbour indices are the same, ties included (test/knn-search.test.ts checks it
 * against the JavaScript search). It is faster, and its code is compiled once per process, where a worker
 * thread's JavaScript is optimised again in every thread. The module is generated (tools/knn-search-wasm.mjs →
 * knn-search.wat, knn-search-wasm.ts).
 *
 * One thread has one module and one memory; each call copies the tree in and the rows out.
 */
import { KNN_SEARCH_WASM, UNROLLED_DIMS } from './knn-search-wasm.js';
import { instantiate, reserve, type WasmMemory } from './wasm.js';

/** The arrays of a kd-tree as src/math/knn.ts builds it, as its searches read them. */
export interface TreeArrays {
  dim: number;
  /** The points in tree order, row-major. */
  coords: Float64Array;
  nodeStart: Int32Array;
  nodeEnd: Int32Array;
  /** Left child, or -1 for a leaf. */
  nodeLeft: Int32Array;
  nodeRight: Int32Array;
  nodeParent: Int32Array;
  nodeSplitAxis: Int32Array;
  nodeSplitValue: Float64Array;
}

/** The whole tree: its arrays, the original index of each tree position, and its leaves in tree order. */
export interface SearchTree extends TreeArrays {
  n: number;
  order: Int32Array;
  nodeCount: number;
  leaves: Int32Array;
}

type Search = (leaves: number, leafCount: number, order: number, out: number, indices: number) => void;
type SetLayout = (...offsets: number[]) => void;

interface Loaded {
  memory: WasmMemory;
  setLayout: SetLayout;
  /** Per norm ('' Euclidean, 'Max'): the unrolled searches by dimension, and the generic one. */
  searches: Map<string, Search>;
}

let loaded: Loaded | undefined;

function load(): Loaded {
  if (loaded) return loaded;
  const { exports, memory } = instantiate(KNN_SEARCH_WASM);
  return (loaded = {
    memory,
    setLayout: exports.setLayout as SetLayout,
    searches: new Map(
      Object.entries(exports)
        .filter(([name]) => name.startsWith('nearestOthers'))
        .map(([name, search]) => [name.slice('nearestOthers'.length), search as Search]),
    ),
  });
}

/** Above this many bytes of tree and rows the JavaScript search runs instead (a 32-bit memory holds 4 GiB). */
export const MAX_SEARCH_BYTES = 2 ** 31;

/** Bytes the module's memory needs for this tree and k (8-byte aligned blocks). */
export function searchBytes(n: number, dim: number, nodeCount: number, leafCount: number, k: number, withIndices: boolean): number {
  return 8 * (n * dim + nodeCount + dim + k + n * k) + 4 * (6 * nodeCount + leafCount + n + k + (withIndices ? n * k : 0)) + 8 * 16;
}

/**
 * The k nearest other points of every point in the norm, rows in the original point order: distances (and
 * original indices), as NeighbourSearch gives them; null when the tree is too large for the module's memory.
 */
export function wasmNearestOthers(
  tree: SearchTree,
  k: number,
  withIndices: boolean,
  norm: 'euclidean' | 'max' = 'euclidean',
): { distances: Float64Array; indices: Int32Array | undefined } | null {
  const { n, dim, nodeCount, leaves } = tree;
  const bytes = searchBytes(n, dim, nodeCount, leaves.length, k, withIndices);
  if (bytes > MAX_SEARCH_BYTES) return null;
  const module = load();
  reserve(module.memory, bytes);
  const buffer = module.memory.buffer;
  let offset = 0;
  // Each block starts on an 8-byte boundary, so the doubles are aligned whatever the counts.
  const block = (size: number): number => {
    const at = offset;
    offset += Math.ceil(size / 8) * 8;
    return at;
  };
  const put = (values: Float64Array | Int32Array, count: number): number => {
    const at = block(values.BYTES_PER_ELEMENT * count);
    if (values instanceof Float64Array) new Float64Array(buffer, at, count).set(values.subarray(0, count));
    else new Int32Array(buffer, at, count).set(values.subarray(0, count));
    return at;
  };
  const coords = put(tree.coords, n * dim);
  const split = put(tree.nodeSplitValue, nodeCount);
  const left = put(tree.nodeLeft, nodeCount);
  const right = put(tree.nodeRight, nodeCount);
  const parent = put(tree.nodeParent, nodeCount);
  const axis = put(tree.nodeSplitAxis, nodeCount);
  const start = put(tree.nodeStart, nodeCount);
  const end = put(tree.nodeEnd, nodeCount);
  const leavesAt = put(leaves, leaves.length);
  const order = put(tree.order, n);
  const side = block(8 * dim);
  const best = block(8 * k);
  const bestPos = block(4 * k);
  const out = block(8 * n * k);
  const indicesAt = withIndices ? block(4 * n * k) : 0;
  module.setLayout(coords, split, left, right, parent, axis, start, end, side, best, bestPos, k, dim);
  const prefix = norm === 'max' ? 'Max' : '';
  const search = module.searches.get(`${prefix}${UNROLLED_DIMS.includes(dim) ? dim : ''}`)!;
  search(leavesAt, leaves.length, order, out, indicesAt);
  return {
    distances: new Float64Array(buffer, out, n * k).slice(),
    indices: withIndices ? new Int32Array(buffer, indicesAt, n * k).slice() : undefined,
  };
}
