/**
 * A profile of the user's sample: what an estimator's error depends on, read off the data.
 *
 *   const profile = profileSample(sample);
 *   profile.tails, profile.support            // overall classes, for matching and for warnings
 *   profile.columns[j].skewness / .tail / .edges / .repeats
 *   profile.correlation                       // Pearson, d × d
 *
 * Skewness is the moment ratio g₁ = m₃ / m₂^{3/2} with central sample moments m_r = (1/n) Σ (x − x̄)^r (the
 * Fisher–Pearson coefficient, no small-sample correction). Tails: the Hill estimator (tails.ts). Support:
 * the gaps at either end (edges.ts). Ties and the recording resolution: findRepeats (src/data/repeats.ts).
 */
import type { Sample, Support, Tails } from '../../core/contracts.js';
import { findRepeats, type ColumnRepeats, type RepeatReport } from '../../data/index.js';
import { edgeEvidence, supportFromEdges, type EdgeReading } from './edges.js';
import { hillTail, type HillTail } from './tails.js';

export interface ColumnProfile {
  name: string;
  mean: number;
  sd: number;
  skewness: number;
  tail: HillTail | null;
  edges: { lower: EdgeReading; upper: EdgeReading } | null;
  support: Support;
  repeats: ColumnRepeats;
  /** Tied values as a fraction of n. */
  tiedFraction: number;
  /** The apparent recording step (the smallest gap between distinct values) when over 5% of values are tied; else null. */
  step: number | null;
  /** step / SD. */
  relativeStep: number | null;
}

export interface DataProfile {
  n: number;
  dim: number;
  columns: ColumnProfile[];
  /** Pearson correlation matrix. */
  correlation: number[][];
  /** The largest |correlation| between two different coordinates (0 in 1-D). */
  maxAbsCorrelation: number;
  repeats: RepeatReport;
  /** The heaviest tail class over the coordinates. */
  tails: Tails;
  /** The least bounded support over the coordinates (as for a product of laws). */
  support: Support;
  /**
   * The data look discrete: over 5% of rows repeat an earlier row, or some coordinate has over 5% tied values
   * on a grid coarser than 5% of its SD.
   */
  discreteLooking: boolean;
}

/** Tied fraction above which a coordinate looks recorded on a grid. */
export const DISCRETE_TIED_FRACTION = 0.05;
/** A grid step above this fraction of the SD is coarse: rounding then moves estimates (the quantize perturbation). */
export const COARSE_STEP = 0.05;

/** Fisher–Pearson skewness g₁ = m₃ / m₂^{3/2} (0 for a constant column). */
export function skewness(values: ArrayLike<number>): number {
  const n = values.length;
  let mean = 0;
  for (let i = 0; i < n; i++) mean += values[i];
  mean /= n;
  let m2 = 0;
  let m3 = 0;
  for (let i = 0; i < n; i++) {
    const c = values[i] - mean;
    m2 += c * c;
    m3 += c * c * c;
  }
  m2 /= n;
  m3 /= n;
  return m2 > 0 ? m3 / Math.pow(m2, 1.5) : 0;
}

/** Pearson correlation matrix of a row-major sample (1 on the diagonal; 0 where a column is constant). */
export function correlationMatrix(sample: Sample): number[][] {
  const { n, dim, data } = sample;
  const means = new Float64Array(dim);
  for (let i = 0; i < n; i++) for (let j = 0; j < dim; j++) means[j] += data[i * dim + j];
  for (let j = 0; j < dim; j++) means[j] /= n;
  const cross = new Float64Array(dim * dim);
  const centred = new Float64Array(dim);
  for (let i = 0; i < n; i++) {
    for (let j = 0; j < dim; j++) centred[j] = data[i * dim + j] - means[j];
    for (let a = 0; a < dim; a++) for (let b = a; b < dim; b++) cross[a * dim + b] += centred[a] * centred[b];
  }
  return Array.from({ length: dim }, (_, a) =>
    Array.from({ length: dim }, (_, b) => {
      if (a === b) return 1;
      const [lo, hi] = a < b ? [a, b] : [b, a];
      const denominator = Math.sqrt(cross[lo * dim + lo] * cross[hi * dim + hi]);
      return denominator > 0 ? cross[lo * dim + hi] / denominator : 0;
    }),
  );
}

const TAIL_RANK: Record<Tails, number> = { light: 0, exponential: 1, heavy: 2 };
const SUPPORT_RANK: Record<Support, number> = { bounded: 0, half: 1, unbounded: 2 };

export function profileSample(sample: Sample, columnNames: readonly string[] = []): DataProfile {
  const { n, dim, data } = sample;
  const repeats = findRepeats(sample);
  const column = new Float64Array(n);
  const columns: ColumnProfile[] = [];
  for (let j = 0; j < dim; j++) {
    for (let i = 0; i < n; i++) column[i] = data[i * dim + j];
    let mean = 0;
    for (let i = 0; i < n; i++) mean += column[i];
    mean /= n;
    let sumSquares = 0;
    for (let i = 0; i < n; i++) sumSquares += (column[i] - mean) ** 2;
    const sd = n > 1 ? Math.sqrt(sumSquares / (n - 1)) : 0;
    const edges = edgeEvidence(column);
    const columnRepeats = repeats.columns[j];
    const tiedFraction = columnRepeats.tiedValues / n;
    const step = tiedFraction > DISCRETE_TIED_FRACTION && Number.isFinite(columnRepeats.smallestGap) ? columnRepeats.smallestGap : null;
    columns.push({
      name: columnNames[j] ?? `column ${j + 1}`,
      mean,
      sd,
      skewness: skewness(column),
      tail: hillTail(column),
      edges,
      support: supportFromEdges(edges),
      repeats: columnRepeats,
      tiedFraction,
      step,
      relativeStep: step !== null && sd > 0 ? step / sd : null,
    });
  }
  const correlation = correlationMatrix(sample);
  let maxAbsCorrelation = 0;
  for (let a = 0; a < dim; a++) for (let b = a + 1; b < dim; b++) maxAbsCorrelation = Math.max(maxAbsCorrelation, Math.abs(correlation[a][b]));
  const tails = columns.reduce<Tails>((worst, c) => (c.tail && TAIL_RANK[c.tail.tails] > TAIL_RANK[worst] ? c.tail.tails : worst), 'light');
  const support = columns.reduce<Support>((worst, c) => (SUPPORT_RANK[c.support] > SUPPORT_RANK[worst] ? c.support : worst), 'bounded');
  return {
    n,
    dim,
    columns,
    correlation,
    maxAbsCorrelation,
    repeats,
    tails,
    support,
    discreteLooking: repeats.repeatedRows > DISCRETE_TIED_FRACTION * n || columns.some((c) => c.relativeStep !== null && c.relativeStep >= COARSE_STEP),
  };
}
