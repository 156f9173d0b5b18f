/**
 * All-points nearest-neighbour distances in one dimension, from the sorted values: each point's k nearest
 * others are its k closest values on either side, taken by merging outwards, so after one sort the search is
 * O(nk) with no tree. At n = 500, k = 12 this is about a twentieth of building and searching the kd-tree.
 *
 * The distances are the kd-tree's to the bit (src/math/knn.ts, tested): the Euclidean one is the square root
 * of the squared difference, as the tree takes it, and the max norm the absolute difference. Equal values
 * are interchangeable, so a point is found by binary search at the first of its copies and the others count
 * as neighbours at distance 0, exactly as the tree excludes a point by index only.
 */
import type { KnnNorm } from './knn.js';

/**
 * The k nearest OTHER values of each value, ascending, row-major n × k in the input order. `sorted` is the values
 * sorted ascending (Float64Array.prototype.sort's order), passed in so a caller that already has them sorts once.
 */
export function sortedNearestOthers(values: Float64Array, sorted: Float64Array, k: number, norm: KnnNorm): Float64Array {
  const n = values.length;
  if (!Number.isInteger(k) || k < 1) throw new RangeError(`k must be a positive integer, got ${k}`);
  if (k > n - 1) throw new RangeError(`k = ${k} exceeds the number of other points (${n - 1})`);
  if (sorted.length !== n) throw new RangeError(`sorted has ${sorted.length} values; expected ${n}, the values sorted`);
  const euclidean = norm === 'euclidean';
  const distances = new Float64Array(n * k);
  for (let i = 0; i < n; i++) {
    const value = values[i];
    let lo = 0;
    let hi = n - 1;
    while (lo < hi) {
      const mid = (lo + hi) >>> 1;
      if (sorted[mid] < value) lo = mid + 1;
      else hi = mid;
    }
    let left = lo - 1;
    let right = lo + 1;
    const row = i * k;
    for (let j = 0; j < k; j++) {
      // Each gap is the difference the tree forms, up to sign (−0 − 0 is −0, hence the abs for the max norm).
      const leftGap = left >= 0 ? value - sorted[left] : Infinity;
      const rightGap = right < n ? sorted[right] - value : Infinity;
      let gap: number;
      if (leftGap <= rightGap) {
        gap = leftGap;
        left--;
      } else {
        gap = rightGap;
        right++;
      }
      distances[row + j] = euclidean ? Math.sqrt(gap * gap) : Math.abs(gap);
    }
  }
  return distances;
}
