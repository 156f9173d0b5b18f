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

/** Where each array lies in the module's memory (byte offsets, 8-byte aligned), and the bytes in all. */
interface Layout {
  coords: number;
  split: number;
  left: number;
  right: number;
  parent: number;
  axis: number;
  start: number;
  end: number;
  leaves: number;
  order: number;
  side: number;
  best: number;
  bestPos: number;
  out: number;
  indices: number;
  bytes: number;
}

/** The memory layout for this tree and k; `indices` is 0 without indices. */
export function searchLayout(n: number, dim: number, nodeCount: number, leafCount: number, k: number, withIndices: boolean): Layout {
  let offset = 0;
  // Each block starts on an 8-byte boundary, so the doubles are aligned whatever the counts.
  const block = (bytes: number): number => {
    const at = offset;
    offset += Math.ceil(bytes / 8) * 8;
    return at;
  };
  const nodes = (bytesEach: number) => block(bytesEach * nodeCount);
  const layout = {
    coords: block(8 * n * dim),
    split: nodes(8),
    left: nodes(4),
    right: nodes(4),
    parent: nodes(4),
    axis: nodes(4),
    start: nodes(4),
    end: nodes(4),
    leaves: block(4 * leafCount),
    order: block(4 * n),
    side: block(8 * dim),
    best: block(8 * k),
    bestPos: block(4 * k),
    out: block(8 * n * k),
    indices: withIndices ? block(4 * n * k) : 0,
    // Last: the blocks above are laid out in this order, so offset is their end here.
    bytes: offset,
  };
  return layout;
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
  const at = searchLayout(n, dim, nodeCount, leaves.length, k, withIndices);
  if (at.bytes > MAX_SEARCH_BYTES) return null;
  const module = load();
  reserve(module.memory, at.bytes);
  const buffer = module.memory.buffer;
  const put = (values: Float64Array | Int32Array, offset: number, count: number): void => {
    if (values instanceof Float64Array) new Float64Array(buffer, offset, count).set(values.subarray(0, count));
    else new Int32Array(buffer, offset, count).set(values.subarray(0, count));
  };
  put(tree.coords, at.coords, n * dim);
  put(tree.nodeSplitValue, at.split, nodeCount);
  put(tree.nodeLeft, at.left, nodeCount);
  put(tree.nodeRight, at.right, nodeCount);
  put(tree.nodeParent, at.parent, nodeCount);
  put(tree.nodeSplitAxis, at.axis, nodeCount);
  put(tree.nodeStart, at.start, nodeCount);
  put(tree.nodeEnd, at.end, nodeCount);
  put(leaves, at.leaves, leaves.length);
  put(tree.order, at.order, n);
  module.setLayout(at.coords, at.split, at.left, at.right, at.parent, at.axis, at.start, at.end, at.side, at.best, at.bestPos, k, dim);
  const prefix = norm === 'max' ? 'Max' : '';
  const search = module.searches.get(`${prefix}${UNROLLED_DIMS.includes(dim) ? dim : ''}`)!;
  search(at.leaves, leaves.length, at.order, at.out, at.indices);
  return {
    distances: new Float64Array(buffer, at.out, n * k).slice(),
    indices: withIndices ? new Int32Array(buffer, at.indices, n * k).slice() : undefined,
  };
}
