import { readFileSync } from 'node:fs';
import { createRequire } from 'node:module';
import { join } from 'node:path';
import { describe, expect, it } from 'vitest';
import normalRandom from '@stdlib/random-base-normal';
import { KnnIndex, nextDown, squaredThreshold, type KnnNorm } from '../src/math/knn.js';
import { sortedNearestOthers } from '../src/math/knn-sorted.js';
import { MAX_SEARCH_BYTES, searchLayout, wasmNearestOthers } from '../src/math/knn-search.js';
import { KNN_SEARCH_WASM } from '../src/math/knn-search-wasm.js';
import { rngFromSeed } from '../src/core/rng.js';

/*
 * Every check here compares the kd-tree with an independent brute-force computation written in this file
 * (all n² distances, sorted), or with the kd-tree-javascript package from npm. Brute-force Euclidean
 * distances are Math.sqrt of the squared differences summed in coordinate order 0..d-1, the convention
 * the index promises, so they must agree bit for bit (toEqual on Float64Array compares every element).
 */

type Rng = () => number;

function distance(a: Float64Array, i: number, b: Float64Array, j: number, dim: number, norm: KnnNorm): number {
  if (norm === 'max') {
    let largest = 0;
    for (let axis = 0; axis < dim; axis++) largest = Math.max(largest, Math.abs(a[i * dim + axis] - b[j * dim + axis]));
    return largest;
  }
  let squared = 0;
  for (let axis = 0; axis < dim; axis++) {
    const diff = a[i * dim + axis] - b[j * dim + axis];
    squared += diff * diff;
  }
  return Math.sqrt(squared);
}

/** All distances from query i to the indexed points, sorted; `self` (or -1) is left out. */
function sortedDistances(queries: Float64Array, i: number, points: Float64Array, dim: number, norm: KnnNorm, self: number): Float64Array {
  const n = points.length / dim;
  const out: number[] = [];
  for (let j = 0; j < n; j++) if (j !== self) out.push(distance(queries, i, points, j, dim, norm));
  return Float64Array.from(out).sort();
}

function bruteNearestOthers(points: Float64Array, dim: number, k: number, norm: KnnNorm): Float64Array {
  const n = points.length / dim;
  const out = new Float64Array(n * k);
  for (let i = 0; i < n; i++) out.set(sortedDistances(points, i, points, dim, norm, i).subarray(0, k), i * k);
  return out;
}

function bruteNearest(points: Float64Array, queries: Float64Array, dim: number, k: number, norm: KnnNorm): Float64Array {
  const m = queries.length / dim;
  const out = new Float64Array(m * k);
  for (let i = 0; i < m; i++) out.set(sortedDistances(queries, i, points, dim, norm, -1).subarray(0, k), i * k);
  return out;
}

function bruteCount(
  points: Float64Array,
  queries: Float64Array,
  dim: number,
  norm: KnnNorm,
  radii: Float64Array,
  inclusive: boolean,
  selfIsQuery: boolean,
): Int32Array {
  const n = points.length / dim;
  const m = queries.length / dim;
  const out = new Int32Array(m);
  for (let i = 0; i < m; i++) {
    let count = 0;
    for (let j = 0; j < n; j++) {
      if (selfIsQuery && j === i) continue;
      const d = distance(queries, i, points, j, dim, norm);
      if (inclusive ? d <= radii[i] : d < radii[i]) count++;
    }
    out[i] = count;
  }
  return out;
}

function uniform(rng: Rng, n: number, dim: number): Float64Array {
  return Float64Array.from({ length: n * dim }, () => rng());
}

function normal(rng: Rng, n: number, dim: number): Float64Array {
  const draw = normalRandom.factory(0, 1, { prng: rng });
  return Float64Array.from({ length: n * dim }, () => draw());
}

/** A few tight clusters (spread 1e-9 around random centres) plus exact duplicates of some points. */
function clustered(rng: Rng, n: number, dim: number): Float64Array {
  const centres = uniform(rng, 5, dim);
  const out = new Float64Array(n * dim);
  for (let i = 0; i < n; i++) {
    const c = Math.floor(rng() * 5);
    for (let axis = 0; axis < dim; axis++) out[i * dim + axis] = centres[c * dim + axis] + 1e-9 * (rng() - 0.5);
  }
  // Every seventh point repeats an earlier one exactly.
  for (let i = 7; i < n; i += 7) {
    const source = Math.floor(rng() * i);
    for (let axis = 0; axis < dim; axis++) out[i * dim + axis] = out[source * dim + axis];
  }
  return out;
}

/** Points drawn from a small integer lattice: many exactly equal distances and many duplicates. */
function lattice(rng: Rng, n: number, dim: number): Float64Array {
  return Float64Array.from({ length: n * dim }, () => Math.floor(rng() * 4));
}

/**
 * Each axis on its own scale, from 2^-40 to 2^40: squared differences of very different sizes, so rounded
 * sums lose the small ones, where a pruning bound computed in another order could exceed a distance.
 */
function scales(rng: Rng, n: number, dim: number): Float64Array {
  const factors = Array.from({ length: dim }, () => 2 ** Math.round(80 * rng() - 40));
  return Float64Array.from({ length: n * dim }, (_, i) => factors[i % dim] * (rng() - 0.5));
}

const generators: Record<string, (rng: Rng, n: number, dim: number) => Float64Array> = { uniform, normal, clustered, lattice, scales };
// 5, 7, 8 and 16: the Euclidean scan sums four axes at a time, then the remaining 0 to 3.
const dims = [1, 2, 3, 5, 7, 8, 16];
// undefined: the default leaf size, which depends on the dimension (12 up to d = 5, then 24 and 32).
const leafSizes = [1, 5, undefined];
const norms: KnnNorm[] = ['euclidean', 'max'];

describe('KnnIndex.nearestOthers equals brute force exactly', () => {
  for (const [name, generate] of Object.entries(generators)) {
    for (const dim of dims) {
      it(`${name} data, d = ${dim}, both norms, k = 1, 4, 11, several leaf sizes`, () => {
        const rng = rngFromSeed(`knn-others-${name}-${dim}`);
        const points = generate(rng, 400, dim);
        for (const norm of norms) {
          const want = bruteNearestOthers(points, dim, 11, norm);
          for (const leafSize of leafSizes) {
            const index = new KnnIndex(points, dim, { norm, leafSize });
            for (const k of [1, 4, 11]) {
              const { distances, indices } = index.nearestOthers(k, { indices: true });
              // Reference: bruteNearestOthers, all n² distances sorted (this file).
              const expected = new Float64Array(400 * k);
              for (let i = 0; i < 400; i++) expected.set(want.subarray(i * 11, i * 11 + k), i * k);
              expect(distances).toEqual(expected);
              // The reported indices are k distinct other points at exactly the reported distances.
              const wrongIndices: string[] = [];
              for (let i = 0; i < 400; i++) {
                const row = Array.from(indices!.subarray(i * k, i * k + k));
                const atDistance = row.every((neighbour, j) => distance(points, i, points, neighbour, dim, norm) === distances[i * k + j]);
                if (row.includes(i) || new Set(row).size !== k || !atDistance) wrongIndices.push(`point ${i}: ${row.join(',')}`);
              }
              expect(wrongIndices).toEqual([]);
            }
          }
        }
      });
    }
  }

  it('points repeated six times: their 5 nearest others are at distance 0 and the 6th is not (d = 8 and 16)', () => {
    // A k-th distance of 0 prunes everything else; the next order statistic must still be exact.
    for (const dim of [8, 16]) {
      const rng = rngFromSeed(`knn-repeated-${dim}`);
      const distinct = normal(rng, 60, dim);
      const points = new Float64Array(360 * dim);
      for (let i = 0; i < 360; i++) points.set(distinct.subarray((i % 60) * dim, (i % 60) * dim + dim), i * dim);
      for (const norm of norms) {
        const { distances } = new KnnIndex(points, dim, { norm }).nearestOthers(6);
        // Reference: bruteNearestOthers (this file).
        expect(distances).toEqual(bruteNearestOthers(points, dim, 6, norm));
        for (let i = 0; i < 360; i++) {
          expect(distances[i * 6 + 4]).toBe(0);
          expect(distances[i * 6 + 5]).toBeGreaterThan(0);
        }
      }
    }
  });

  it('larger n at d = 8 and 16 (many leaves of the default size, deep searches)', () => {
    for (const dim of [8, 16]) {
      const rng = rngFromSeed(`knn-larger-${dim}`);
      const points = normal(rng, 800, dim);
      for (const norm of norms) {
        // Reference: bruteNearestOthers (this file).
        expect(new KnnIndex(points, dim, { norm }).nearestOthers(4).distances).toEqual(bruteNearestOthers(points, dim, 4, norm));
      }
    }
  });

  it('duplicates are neighbours at distance 0, and k = n - 1 reaches every other point', () => {
    const points = Float64Array.from([0, 0, 0, 0, 1, 0, 0, 0, 3, 4]);
    const index = new KnnIndex(points, 2, { leafSize: 1 });
    const { distances } = index.nearestOthers(4);
    expect(distances).toEqual(bruteNearestOthers(points, 2, 4, 'euclidean'));
    expect(Array.from(distances.subarray(0, 4))).toEqual([0, 0, 1, 5]);
  });
});

describe('nearestOthers in WebAssembly (src/math/knn-search.ts) is the JavaScript search, ties included', () => {
  // The module must walk the tree as NeighbourSearch does, so even which of several equidistant points is
  // reported agrees; the distances are also checked against brute force above (the default engine).
  const wasmDims = [1, 2, 3, 4, 5, 6, 7, 8, 9, 10, 12, 16];
  it.each(Object.keys(generators).flatMap((name) => norms.map((norm) => [name, norm] as const)))(
    '%s points, %s norm, every unrolled dimension and the generic loop',
    (name, norm) => {
      const rng = rngFromSeed(`knn-wasm-${name}-${norm}`);
      for (const dim of wasmDims) {
        for (const leafSize of [2, undefined]) {
          const n = 40 + Math.floor(rng() * 60);
          const index = new KnnIndex(generators[name](rng, n, dim), dim, { leafSize, norm });
          for (const k of [1, 4, 13, n - 1]) {
            const fast = index.nearestOthers(k, { indices: true });
            const plain = index.nearestOthers(k, { indices: true, engine: 'javascript' });
            expect(fast.distances, `${name} d=${dim} leaf=${leafSize} k=${k}`).toEqual(plain.distances);
            expect(fast.indices, `${name} d=${dim} leaf=${leafSize} k=${k}`).toEqual(plain.indices);
          }
        }
      }
    },
  );

  it('leaves a tree too large for its memory to the JavaScript search', () => {
    expect(searchLayout(2e8, 3, 4e7, 2e7, 5, false).bytes).toBeGreaterThan(MAX_SEARCH_BYTES);
    const empty = new Int32Array(0);
    const tree = { n: 2e8, dim: 3, coords: new Float64Array(0), order: empty, nodeCount: 4e7, nodeStart: empty, nodeEnd: empty, nodeLeft: empty };
    const arrays = { nodeRight: empty, nodeParent: empty, nodeSplitAxis: empty, nodeSplitValue: new Float64Array(0), leaves: new Int32Array(2e7) };
    expect(wasmNearestOthers({ ...tree, ...arrays }, 5, false)).toBeNull();
  });

  it('is what tools/knn-search-wasm.mjs generates now (the .wat text and the assembled module)', async () => {
    const generator = '../tools/knn-search-wasm.mjs';
    const { knnSearchWat, moduleSource } = (await import(generator)) as { knnSearchWat: () => string; moduleSource: (bytes: Buffer) => string };
    const assembler = '../tools/wasm-assemble.mjs';
    const { assemble } = (await import(assembler)) as { assemble: (name: string, text: string) => Promise<Buffer> };
    const text = knnSearchWat();
    const folder = join(import.meta.dirname, '..', 'src', 'math');
    expect(readFileSync(join(folder, 'knn-search.wat'), 'utf8')).toBe(text);
    const bytes = await assemble('knn-search.wat', text);
    expect(bytes.toString('base64')).toBe(KNN_SEARCH_WASM);
    expect(readFileSync(join(folder, 'knn-search-wasm.ts'), 'utf8')).toBe(moduleSource(bytes));
  });
});

describe('sortedNearestOthers (1-D, from the sorted values) equals brute force and the kd-tree exactly', () => {
  it('continuous, lattice and repeated values, both norms, k = 1..20', () => {
    const rng = normalRandom.factory(0, 1, { prng: rngFromSeed('sorted-1d') });
    const continuous = Float64Array.from({ length: 400 }, () => 3 * rng() + 1e3);
    // A lattice with many repeats (values recorded to 0.25), a value repeated 30 times, and signed zeros.
    const lattice = Float64Array.from({ length: 400 }, () => Math.round(4 * rng()) / 4);
    const repeated = Float64Array.from({ length: 200 }, (_, i) => (i < 30 ? 0.1 : i === 30 ? -0 : i === 31 ? 0 : rng()));
    for (const values of [continuous, lattice, repeated]) {
      for (const norm of ['euclidean', 'max'] as const) {
        for (const k of [1, 3, 12, 20]) {
          const sorted = sortedNearestOthers(values, Float64Array.from(values).sort(), k, norm);
          expect(sorted).toEqual(bruteNearestOthers(values, 1, k, norm));
          expect(sorted).toEqual(new KnnIndex(values, 1, { norm }).nearestOthers(k).distances);
        }
      }
    }
  });

  it('k = n − 1 reaches every other value; a larger k is refused', () => {
    const values = Float64Array.of(5, -1, 2, 2, 9);
    const ascending = Float64Array.from(values).sort();
    expect(sortedNearestOthers(values, ascending, 4, 'euclidean')).toEqual(bruteNearestOthers(values, 1, 4, 'euclidean'));
    expect(() => sortedNearestOthers(values, ascending, 5, 'euclidean')).toThrow(/exceeds/);
  });
});

describe('KnnIndex.nearest (queries not in the index) equals brute force exactly', () => {
  for (const [name, generate] of Object.entries(generators)) {
    for (const dim of dims) {
      it(`${name} data, d = ${dim}, both norms`, () => {
        const rng = rngFromSeed(`knn-queries-${name}-${dim}`);
        const points = generate(rng, 300, dim);
        // Queries: fresh points of the same kind, points far outside the data, and copies of indexed points.
        const fresh = generate(rng, 150, dim);
        const outside = Float64Array.from({ length: 20 * dim }, () => 10 * (rng() - 0.5));
        const copies = points.slice(0, 30 * dim);
        const queries = new Float64Array(fresh.length + outside.length + copies.length);
        queries.set(fresh, 0);
        queries.set(outside, fresh.length);
        queries.set(copies, fresh.length + outside.length);
        for (const norm of norms) {
          for (const leafSize of [2, undefined]) {
            const index = new KnnIndex(points, dim, { norm, leafSize });
            for (const k of [1, 5, 9]) {
              // Reference: bruteNearest, all distances from each query sorted (this file).
              expect(index.nearest(queries, k).distances).toEqual(bruteNearest(points, queries, dim, k, norm));
            }
          }
        }
      });
    }
  }

  it('k may equal n for queries', () => {
    const rng = rngFromSeed('knn-k-equals-n');
    const points = uniform(rng, 10, 2);
    const queries = uniform(rng, 4, 2);
    const index = new KnnIndex(points, 2, { leafSize: 3 });
    expect(index.nearest(queries, 10).distances).toEqual(bruteNearest(points, queries, 2, 10, 'euclidean'));
  });
});

describe('radius counts equal brute force exactly', () => {
  // Counts prune with tight boxes, not with the k-NN search's cell gaps, so the scales data is left out.
  for (const [name, generate] of Object.entries(generators).filter(([name]) => name !== 'scales')) {
    for (const dim of [1, 2, 3, 5, 8, 16]) {
      it(`${name} data, d = ${dim}, both norms, strict and inclusive`, () => {
        const rng = rngFromSeed(`knn-counts-${name}-${dim}`);
        const n = 300;
        const points = generate(rng, n, dim);
        for (const norm of norms) {
          const index = new KnnIndex(points, dim, { norm, leafSize: 4 });
          // Radii exactly equal to each point's 3rd-neighbour distance (as the KSG estimator uses them),
          // random radii, and the edge cases 0 and a negative radius.
          const kth = index.nearestOthers(3).distances;
          const radiiSets = [
            Float64Array.from({ length: n }, (_, i) => kth[i * 3 + 2]),
            Float64Array.from({ length: n }, () => rng() * 0.5),
            Float64Array.from({ length: n }, (_, i) => (i % 3 === 0 ? 0 : i % 3 === 1 ? -1 : 1e6)),
          ];
          for (const radii of radiiSets) {
            for (const inclusive of [false, true]) {
              expect(index.countOthersWithin(radii, { inclusive })).toEqual(bruteCount(points, points, dim, norm, radii, inclusive, true));
            }
          }
          // Another point set: distances from each query to its 2nd nearest indexed point as radii.
          const queries = generate(rng, 120, dim);
          const second = index.nearest(queries, 2).distances;
          const queryRadii = Float64Array.from({ length: 120 }, (_, i) => second[i * 2 + 1]);
          for (const inclusive of [false, true]) {
            expect(index.countWithin(queries, queryRadii, { inclusive })).toEqual(bruteCount(points, queries, dim, norm, queryRadii, inclusive, false));
          }
        }
      });
    }
  }

  it('a strict count at the k-th distance of distinct-distance data is k - 1, an inclusive one is k', () => {
    // The identity the KSG estimator relies on, checked on continuous data where distances are distinct.
    const rng = rngFromSeed('knn-counts-identity');
    const points = uniform(rng, 500, 3);
    for (const norm of norms) {
      const index = new KnnIndex(points, 3, { norm });
      const kth = index.nearestOthers(5).distances;
      const radii = Float64Array.from({ length: 500 }, (_, i) => kth[i * 5 + 4]);
      expect(Array.from(index.countOthersWithin(radii))).toEqual(new Array(500).fill(4));
      expect(Array.from(index.countOthersWithin(radii, { inclusive: true }))).toEqual(new Array(500).fill(5));
    }
  });
});

describe('squaredThreshold', () => {
  // Reference: Math.sqrt itself (IEEE 754 correctly rounded square root), probed on both sides of T.
  it('splits squared values exactly where Math.sqrt crosses the radius', () => {
    const rng = rngFromSeed('knn-threshold');
    const radii = [0, 5e-324, 1e-170, 1e-160, 1e-5, 0.1, 1, 2, 3, 1e150, 1e160, Number.MAX_VALUE];
    for (let i = 0; i < 200; i++) radii.push(rng() * 10 ** Math.floor(20 * rng() - 10));
    for (const radius of radii) {
      const strict = squaredThreshold(radius, false);
      const inclusive = squaredThreshold(radius, true);
      // strict: T is the least value whose square root is >= r.
      expect(Math.sqrt(strict) >= radius).toBe(true);
      if (strict > 0) expect(Math.sqrt(nextDown(strict)) < radius).toBe(true);
      // inclusive: T is the least value whose square root is > r.
      expect(inclusive === Infinity || Math.sqrt(inclusive) > radius).toBe(true);
      if (inclusive > 0) expect(Math.sqrt(nextDown(inclusive)) <= radius).toBe(true);
    }
  });
});

describe('agreement with kd-tree-javascript (npm)', () => {
  it('the k nearest distances of random queries match that independent kd-tree', () => {
    interface KdTreeLike {
      nearest(point: number[], count: number): [number[], number][];
    }
    const require = createRequire(import.meta.url);
    const { kdTree } = require('kd-tree-javascript') as {
      kdTree: new (points: number[][], metric: (a: number[], b: number[]) => number, dimensions: string[]) => KdTreeLike;
    };
    const rng = rngFromSeed('knn-kd-tree-javascript');
    const dim = 3;
    const n = 2000;
    const points = normal(rng, n, dim);
    const queries = normal(rng, 200, dim);
    const rows = Array.from({ length: n }, (_, i) => Array.from(points.subarray(i * dim, i * dim + dim)));
    const euclidean = (a: number[], b: number[]) => {
      let squared = 0;
      for (let axis = 0; axis < dim; axis++) squared += (a[axis] - b[axis]) ** 2;
      return Math.sqrt(squared);
    };
    const reference = new kdTree(rows, euclidean, ['0', '1', '2']);
    const k = 6;
    const ours = new KnnIndex(points, dim).nearest(queries, k).distances;
    for (let q = 0; q < 200; q++) {
      const found = reference.nearest(Array.from(queries.subarray(q * dim, q * dim + dim)), k);
      const theirs = found.map(([, d]) => d).sort((a, b) => a - b);
      expect(Array.from(ours.subarray(q * k, q * k + k))).toEqual(theirs);
    }
  });
});

describe('input checks', () => {
  it('rejects k beyond the available points, non-finite coordinates and mismatched lengths', () => {
    const index = new KnnIndex(Float64Array.from([0, 1, 2]), 1);
    expect(() => index.nearestOthers(3)).toThrow(RangeError);
    expect(() => index.nearestOthers(0)).toThrow(RangeError);
    expect(() => index.nearest(Float64Array.from([0.5]), 4)).toThrow(RangeError);
    expect(() => index.countOthersWithin(Float64Array.from([1, 2]))).toThrow(RangeError);
    expect(() => index.countOthersWithin(Float64Array.from([1, NaN, 2]))).toThrow(RangeError);
    expect(() => new KnnIndex(Float64Array.from([0, NaN]), 1)).toThrow(RangeError);
    expect(() => new KnnIndex(Float64Array.from([0, 1, 2]), 2)).toThrow(RangeError);
  });
});
