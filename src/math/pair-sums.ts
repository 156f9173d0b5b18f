/**
 * Gaussian kernel sums over pairs of points, S_i += exp(s·|z_i − z_j|²) for both points of each pair, as the
 * multivariate kernel estimator adds them (estimators/kernel/multivariate.ts), in WebAssembly with two-lane
 * SIMD for d = 2..5: rows p and p + 1 sit in the two lanes against each q, which is the order the scalar loops
 * used, so the sums are the same doubles bit for bit (WebAssembly rounds every operation to double as
 * JavaScript does, and has no fused multiply-add; test/pair-sums.test.ts checks against plain loops). The
 * exponential is expNonPositive (src/math/exp.ts) on both lanes at once. Two row pairs go against each q
 * together (two independent exponentials per step, and q's coordinates and sum read once), adding to sums[q] in
 * the order the pairs one after the other would. All log-sums of n = 2000 points by the blocked path, against
 * the unrolled JavaScript loops the module replaced (same process, medians of 15, load 0.6): d = 2 6.6 against
 * 8.1 ms, d = 3 7.2 against 9.2 ms, d = 5 7.9 against 12.0 ms, with one row pair at a time; two at a time took
 * 0.75–0.82 of that (n = 500 and 2000, d = 2, 3, 5, medians of 5 alternating, load 2.7).
 * The same module has the one-dimensional pass over sorted values (sortedPairSums), two rows in the lanes while
 * both are within reach: 0.62 of the JavaScript pass's time at n = 500 and 1000 (normal values, Silverman's h).
 * The module is generated (tools/pair-sums-wasm.mjs → pair-sums.wat, pair-sums-wasm.ts).
 *
 *   const pairs = pairSums(points, n, 3);        // copies the points into the module's memory
 *   pairs.add(0, 256, 0, 256, -0.5 / (h * h));    // pairs within [0, 256); then other ranges
 *   pairs.addTo(sums);                            // the sums so far, added to sums[i]
 *
 * One thread has one module and one memory: a `PairSums` is valid until the next `pairSums` call in the thread
 * (the kernel estimator is synchronous, and uses one at a time); using a stale one throws.
 */
import { PAIR_SUMS_DIMS, PAIR_SUMS_WASM, POWERS_OFFSET, TABLE_OFFSET } from './pair-sums-wasm.js';
import { POWERS, TABLE } from './exp.js';
import { instantiate, reserve, type WasmMemory } from './wasm.js';

export { PAIR_SUMS_DIMS };

/** After the two tables: the points, then the sums (16-byte aligned). */
const DATA_OFFSET = Math.ceil((POWERS_OFFSET + POWERS.length * 8) / 16) * 16;

type PairLoop = (z: number, fromA: number, toA: number, fromB: number, toB: number, scale: number, sums: number) => void;
type SortedLoop = (z: number, n: number, reach: number, scale: number, sums: number) => void;

interface Loaded {
  memory: WasmMemory;
  loops: Map<number, PairLoop>;
  sorted: SortedLoop;
  generation: number;
}

let loaded: Loaded | undefined;

function load(): Loaded {
  if (loaded) return loaded;
  const { exports, memory } = instantiate(PAIR_SUMS_WASM);
  new Float64Array(memory.buffer, TABLE_OFFSET, TABLE.length).set(TABLE);
  new Float64Array(memory.buffer, POWERS_OFFSET, POWERS.length).set(POWERS);
  const loops = new Map(PAIR_SUMS_DIMS.map((d) => [d, exports[`pairs${d}`] as PairLoop]));
  return (loaded = { memory, loops, sorted: exports.sorted1 as SortedLoop, generation: 0 });
}

export interface PairSums {
  /** Every pair of [fromA, toA) × [fromB, toB), j > i when the ranges are the same, added to both points. */
  add(fromA: number, toA: number, fromB: number, toB: number, exponentScale: number): void;
  /** Adds the sums so far to target[i]. */
  addTo(target: Float64Array): void;
}

/** Pair sums of `n` points of dimension `dim` (one of PAIR_SUMS_DIMS), each starting at 0. */
export function pairSums(points: Float64Array, n: number, dim: number): PairSums {
  const module = load();
  const loop = module.loops.get(dim);
  if (!loop) throw new Error(`pairSums: no WebAssembly loop for d = ${dim} (${PAIR_SUMS_DIMS.join(', ')})`);
  const zBytes = n * dim * 8;
  const sumsOffset = DATA_OFFSET + zBytes;
  const needed = sumsOffset + n * 8;
  reserve(module.memory, needed);
  new Float64Array(module.memory.buffer, DATA_OFFSET, n * dim).set(points.subarray(0, n * dim));
  new Float64Array(module.memory.buffer, sumsOffset, n).fill(0);
  const generation = ++module.generation;
  const check = () => {
    if (module.generation !== generation) throw new Error('pairSums: this PairSums was replaced by a later pairSums call in the same thread');
  };
  return {
    add(fromA, toA, fromB, toB, exponentScale) {
      check();
      loop(DATA_OFFSET, fromA, toA, fromB, toB, exponentScale, sumsOffset);
    },
    addTo(target) {
      check();
      const sums = new Float64Array(module.memory.buffer, sumsOffset, n);
      for (let i = 0; i < n; i++) target[i] += sums[i];
    },
  };
}

/**
 * One-dimensional pair sums of sorted values: for every pair i < j with sorted[j] − sorted[i] ≤ reach, the term
 * exp(exponentScale·gap·gap) added to both points' sums, each point's own terms summed apart and added last, as
 * estimators/kernel/univariate.ts adds them. Returns the sums (a new array).
 */
export function sortedPairSums(sorted: Float64Array, reach: number, exponentScale: number): Float64Array {
  const module = load();
  const n = sorted.length;
  const sumsOffset = DATA_OFFSET + n * 8;
  reserve(module.memory, sumsOffset + n * 8);
  // Any PairSums still held is overwritten.
  module.generation++;
  new Float64Array(module.memory.buffer, DATA_OFFSET, n).set(sorted);
  new Float64Array(module.memory.buffer, sumsOffset, n).fill(0);
  module.sorted(DATA_OFFSET, n, reach, exponentScale, sumsOffset);
  return new Float64Array(module.memory.buffer, sumsOffset, n).slice();
}
