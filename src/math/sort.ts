/** Sorting and ranking of doubles without per-point objects, shared by the estimators. */

/** Below this size the engine's typed-array sort is as fast as the radix sort and allocates nothing. */
const RADIX_SORT_MIN_LENGTH = 1 << 15;

/**
 * Sorts finite doubles ascending and returns the sorted array: the argument itself or a new array; either
 * way the argument's contents are overwritten, so pass a copy you own.
 * Same order as `Float64Array.prototype.sort` (−0 before +0). For large inputs this is an LSD radix sort
 * on the IEEE-754 bit patterns, 4 passes of 16 bits: at n = 10^6 the engine's comparison sort alone takes
 * about as long as SciPy's whole Vasicek estimate, the radix sort half as long or less (bench/spacing.ts).
 */
export function sortAscending(values: Float64Array): Float64Array {
  if (values.length < RADIX_SORT_MIN_LENGTH) return values.sort();
  return radixSortFloat64(values);
}

/** Replaces each key by its rank among the distinct keys; returns the number of distinct keys. */
export function rankKeys(keys: Float64Array): number {
  const distinct = sortAscending(keys.slice());
  let unique = 0;
  for (let i = 0; i < distinct.length; i++) if (i === 0 || distinct[i] !== distinct[i - 1]) distinct[unique++] = distinct[i];
  for (let i = 0; i < keys.length; i++) {
    let lo = 0;
    let hi = unique - 1;
    const key = keys[i];
    while (lo < hi) {
      const mid = (lo + hi) >>> 1;
      if (distinct[mid] < key) lo = mid + 1;
      else hi = mid;
    }
    keys[i] = lo;
  }
  return unique;
}

function radixSortFloat64(values: Float64Array): Float64Array {
  const n = values.length;
  const DIGIT_BITS = 16;
  const RADIX = 1 << DIGIT_BITS;
  const DIGIT_MASK = RADIX - 1;
  const PASSES = 4;
  // Two 32-bit words per double, low word first (little-endian, as on every platform Node supports).
  const valueWords = new Uint32Array(values.buffer, values.byteOffset, 2 * n);
  const digitCounts = new Uint32Array(PASSES * RADIX);
  for (let w = 0; w < 2 * n; w += 2) {
    const low = valueWords[w];
    const high = valueWords[w + 1];
    digitCounts[low & DIGIT_MASK]++;
    digitCounts[RADIX + (low >>> 16)]++;
    digitCounts[2 * RADIX + (high & DIGIT_MASK)]++;
    digitCounts[3 * RADIX + (high >>> 16)]++;
  }
  // Sorting the raw bit patterns as unsigned integers puts non-negative values first in ascending order,
  // then negative values by ascending magnitude; the last step reverses the negative block to the front.
  let source: Float64Array = values;
  let sourceWords: Uint32Array = valueWords;
  let target: Float64Array = new Float64Array(n);
  let targetWords: Uint32Array = new Uint32Array(target.buffer);
  const nextSlot = new Int32Array(RADIX);
  for (let pass = 0; pass < PASSES; pass++) {
    const countBase = pass * RADIX;
    let slot = 0;
    let allInOneBucket = false;
    for (let digit = 0; digit < RADIX; digit++) {
      const count = digitCounts[countBase + digit];
      if (count === n) allInOneBucket = true;
      nextSlot[digit] = slot;
      slot += count;
    }
    if (allInOneBucket) continue;
    const wordOffset = pass >> 1;
    const shift = (pass & 1) * 16;
    for (let i = 0; i < n; i++) {
      const digit = (sourceWords[2 * i + wordOffset] >>> shift) & DIGIT_MASK;
      target[nextSlot[digit]++] = source[i];
    }
    [source, target] = [target, source];
    [sourceWords, targetWords] = [targetWords, sourceWords];
  }
  let negativeCount = 0;
  for (let digit = 1 << 15; digit < RADIX; digit++) negativeCount += digitCounts[3 * RADIX + digit];
  if (negativeCount === 0) return source;
  const sorted = target;
  for (let k = 0; k < negativeCount; k++) sorted[k] = source[n - 1 - k];
  sorted.set(source.subarray(0, n - negativeCount), negativeCount);
  return sorted;
}

/**
 * Reorders values[lo..hi] (inclusive) so that values[kth] is the value sorting would put there, those before it
 * ≤ and those after it ≥ (Hoare partitions around a median of three). O(n) on average: for a few order
 * statistics of a column, where a full sort would cost n·log n.
 */
export function selectInPlace(values: Float64Array, kth: number, lo = 0, hi = values.length - 1): void {
  while (hi > lo) {
    const a = values[lo];
    const b = values[(lo + hi) >> 1];
    const c = values[hi];
    const pivot = a < b ? (b < c ? b : a < c ? c : a) : a < c ? a : b < c ? c : b;
    let i = lo;
    let j = hi;
    while (i <= j) {
      while (values[i] < pivot) i++;
      while (values[j] > pivot) j--;
      if (i <= j) {
        const held = values[i];
        values[i++] = values[j];
        values[j--] = held;
      }
    }
    if (kth <= j) hi = j;
    else if (kth >= i) lo = i;
    else return;
  }
}

/** The smallest of values[from..to] (inclusive). */
function smallest(values: Float64Array, from: number, to: number): number {
  let least = values[from];
  for (let i = from + 1; i <= to; i++) if (values[i] < least) least = values[i];
  return least;
}

/**
 * Quantiles p ≤ q of finite values by linear interpolation between order statistics at position p·(n − 1)
 * (Hyndman & Fan 1996, type 7, as quantileOfSorted), found by selection; `values` is reordered.
 */
export function quantilePairInPlace(values: Float64Array, p: number, q: number): [number, number] {
  const n = values.length;
  const at = (position: number, below: number, to: number): number => {
    const fraction = position - below;
    if (fraction === 0) return values[below];
    // Everything after `below` up to `to` is ≥ values[below]: the next order statistic is their smallest.
    return values[below] + (smallest(values, below + 1, to) - values[below]) * fraction;
  };
  const upperPosition = q * (n - 1);
  const upperBelow = Math.floor(upperPosition);
  selectInPlace(values, upperBelow, 0, n - 1);
  const upper = at(upperPosition, upperBelow, n - 1);
  const lowerPosition = p * (n - 1);
  const lowerBelow = Math.floor(lowerPosition);
  // Everything before upperBelow is ≤ values[upperBelow], so the lower order statistics lie there (or are it).
  if (lowerBelow < upperBelow) selectInPlace(values, lowerBelow, 0, upperBelow - 1);
  const lower = at(lowerPosition, lowerBelow, lowerBelow < upperBelow ? upperBelow : n - 1);
  return [lower, upper];
}
