/**
 * Evidence of a hard edge (bounded support) at either end of one coordinate, from the gaps between the
 * outermost values compared with the gaps just inside them.
 *
 *   const { lower, upper } = edgeEvidence(column);   // each { m, ratio, tailReference, edge }
 *
 * Near an end where the density stays positive up to a bound b, the points crowd against b like a uniform
 * sample: the outermost gaps D₁, D₂, … (D_i = x_(n−i+1) − x_(n−i)) are i.i.d. exponential, so the mean of the
 * m outermost gaps over the mean of the next m is about 1. In a tail the points thin out: for an exponential
 * tail the Rényi representation makes i·D_i i.i.d., so the ratio is about H_m/(H_{2m} − H_m) (harmonic
 * numbers; 3.5 for m = 5, 6.0 for m = 35), and Gaussian tails behave the same to first order; power-law
 * tails give more. A density that falls to zero at the bound like (b − x)^{β−1} gives 1/(2^{1/β} − 1) for large m
 * (2.4 for β = 2), between the two. We call an end an edge when the ratio is below both the geometric mean of
 * the two reference values, √(tail reference) (closer to a flat end than to a tail on the log scale), and
 * exp(2√(2/m)), two standard deviations of the log ratio at a flat end (a ratio of two Gamma(m) sums), so a
 * flat end is missed about 2% of the time and tails are not read as edges where the noise is that large.
 *
 * m rule: m = ⌊√n⌋, at least 5 and at most ⌊n/8⌋ (so the 2m gaps stay within a quarter of the sample).
 */
import type { Support } from '../../core/contracts.js';

export interface EdgeReading {
  /** Gaps per group. */
  m: number;
  /** Mean of the m outermost gaps over the mean of the next m. */
  ratio: number;
  /** The ratio an exponential tail gives in expectation, H_m/(H_{2m} − H_m). */
  tailReference: number;
  /** The ratio below which the end reads as an edge: min(√tailReference, exp(2√(2/m))). */
  threshold: number;
  edge: boolean;
}

export function edgeGroupSize(n: number): number {
  return Math.max(5, Math.min(Math.floor(Math.sqrt(n)), Math.floor(n / 8)));
}

function harmonic(m: number): number {
  let sum = 0;
  for (let i = 1; i <= m; i++) sum += 1 / i;
  return sum;
}

/** H_m/(H_{2m} − H_m): the expected ratio under an exponential tail (Rényi representation). */
export function tailReferenceRatio(m: number): number {
  const hm = harmonic(m);
  return hm / (harmonic(2 * m) - hm);
}

/** Both ends of one coordinate; null when there are fewer than 2m + 1 points (m from the rule above). */
export function edgeEvidence(column: ArrayLike<number>): { lower: EdgeReading; upper: EdgeReading } | null {
  const n = column.length;
  const m = edgeGroupSize(n);
  if (n < 2 * m + 1 || n < 16) return null;
  const sorted = Float64Array.from(column).sort();
  const read = (gap: (i: number) => number): EdgeReading => {
    let outer = 0;
    let inner = 0;
    for (let i = 1; i <= m; i++) outer += gap(i);
    for (let i = m + 1; i <= 2 * m; i++) inner += gap(i);
    const tailReference = tailReferenceRatio(m);
    // All 2m gaps zero (ties at the end) reads as a flat end: the values pile up against a bound.
    const ratio = inner > 0 ? outer / inner : outer > 0 ? Infinity : 1;
    const threshold = Math.min(Math.sqrt(tailReference), Math.exp(2 * Math.sqrt(2 / m)));
    return { m, ratio, tailReference, threshold, edge: ratio < threshold };
  };
  return {
    upper: read((i) => sorted[n - i] - sorted[n - i - 1]),
    lower: read((i) => sorted[i] - sorted[i - 1]),
  };
}

/** bounded: edges at both ends; half: at one; unbounded: at neither. */
export function supportFromEdges(edges: { lower: EdgeReading; upper: EdgeReading } | null): Support {
  if (!edges) return 'unbounded';
  const count = Number(edges.lower.edge) + Number(edges.upper.edge);
  return count === 2 ? 'bounded' : count === 1 ? 'half' : 'unbounded';
}
