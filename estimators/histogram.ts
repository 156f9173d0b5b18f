/**
 * The histogram (plug-in) estimator of differential entropy on a product grid of equal-width bins:
 *
 *   Ĥ = −Σ_j (c_j/n) log( c_j / (n·w_j) ),   w_j = bin volume = Π_k (bin width along coordinate k),
 *
 * optionally with Miller's (1955) bias correction + (B − 1)/(2n), B = number of occupied bins.
 *
 * Bin edges. With a bin rule or a bin count, coordinate k gets K_k equal bins from its minimum to its
 * maximum, exactly as numpy.histogram lays them out (edge_i = min + i·(range/K), bins half-open [e_i, e_i+1)
 * except the last, which is closed). The count K_k comes from scale-free ratios (range/SD, range/IQR, or n
 * alone), so rescaling the data by c rescales every edge by c, leaves every count unchanged, and shifts the
 * estimate by exactly d·log c up to rounding. With a fixed `width` the bins start at each coordinate's
 * minimum and have that width in data units, so the estimate is not scale-equivariant (by design: the
 * width is a unit-bound choice). A coordinate whose spread is subnormal or near the top of the double range
 * is binned in a power-of-two unit near its spread, and one whose values are near the top of the double range
 * is moved near 0 (estimators/shared/scaling.ts, both exact; a width setting is converted to the unit exactly), so its bins are the same as in exact arithmetic and the estimate is not thrown off by
 * widths that underflow or counts per unit that overflow.
 *
 * Bin rules, per coordinate k with n points in d dimensions:
 *   scott              h_k = 2·3^{1/(d+2)}·π^{d/(2(d+2))}·σ_k·n^{−1/(d+2)}: the normal-reference L2-optimal
 *                      width of Scott (1979, Biometrika 66, 605–610) for d = 1, i.e. 3.49·σ·n^{−1/3}, and its
 *                      d-dimensional form from Scott (1992, Multivariate Density Estimation, §3.4; ≈ 3.5·σ_k·
 *                      n^{−1/(d+2)}). σ_k is the population SD (ddof 0), as numpy uses.
 *   freedman-diaconis  h_k = 2·IQR_k·n^{−1/(d+2)}: Freedman & Diaconis (1981, Z. Wahrsch. verw. Gebiete 57,
 *                      453–476) for d = 1; for d > 1 we keep their IQR scale and use the d-dimensional rate
 *                      n^{−1/(d+2)} of Scott's rule (our choice; no published multivariate form).
 *                      IQR by linear interpolation between order statistics (numpy's default percentile).
 *   sturges            K = log2(n) + 1 bins: Sturges (1926, JASA 21, 65–66).
 *   doane              K_k = 1 + log2(n) + log2(1 + |g1_k|/σ_g1), g1 the sample skewness and
 *                      σ_g1 = sqrt(6(n−2)/((n+1)(n+3))): Doane (1976, Am. Stat. 30, 181–183).
 *   sqrt               K = sqrt(n) bins (common practice, e.g. spreadsheet software and numpy).
 * Width rules give K_k = ceil(range_k / h_k). The count rules define a total number of bins K for one
 * dimension; for d > 1 we keep that total and split it evenly, K_k = ceil(K^{1/d}) (our choice: applying
 * the one-dimensional count to every coordinate would give (log2 n)^d or n^{d/2} cells, far more than
 * points). An integer `bins` is the number of bins per coordinate.
 *
 * Default: freedman-diaconis. Its width shrinks at the density-optimal rate, so the bin (discretisation)
 * bias and the plug-in bias (B−1)/(2n) both vanish as n grows, while Sturges' log2(n) bins stay too coarse
 * for large n; and the IQR, unlike the SD in Scott's rule, is not inflated by heavy tails.
 *
 * Settings are not resolved to counts: the rule keyword is a deterministic function of the sample and,
 * for d > 1, gives a different count per coordinate, which one integer setting could not state.
 *
 * Occupied bins are found without per-point objects: each point's bin coordinates become one integer key
 * (row-major over the grid) in a Float64Array, counted in a dense array when the grid is small, or sorted
 * and run-length counted otherwise. When the grid has 2^53 cells or more, the keys of the leading
 * coordinates are first replaced by their ranks among the distinct keys, which keeps every key exact.
 */
import {
  defineEstimator,
  type Estimator,
  type EstimatorFile,
  type Sample,
  TUNING_SCALE_FACTORS,
  type SettingSpec,
  type TuningAxis,
} from '../src/core/contracts.js';
import { EstimateError } from '../src/core/errors.js';
import { quantileOfSorted, squaredDeviations } from '../src/math/moments.js';
import { checkFiniteValues, column } from '../src/core/sample.js';
import { spreadUnitOfRange, timesPowerOfTwo, toUnit } from './shared/scaling.js';
import { quantilePairInPlace, rankKeys, sortAscending } from '../src/math/sort.js';
import { SampleMemo } from './shared/sample-memo.js';
import { sharedSortedValues } from './shared/sorted-values.js';

export const BIN_RULES = ['sturges', 'scott', 'freedman-diaconis', 'doane', 'sqrt'] as const;
export type BinRule = (typeof BIN_RULES)[number];

const HISTOGRAM_SETTINGS = [
  {
    name: 'bins',
    meaning: 'bin rule, or a number of bins per coordinate; ignored when width is given',
    default: 'freedman-diaconis',
    kind: 'choice-or-integer',
    choices: BIN_RULES,
    min: 1,
  },
  {
    name: 'scale',
    meaning: 'multiplies the bin count a rule gives (rounded, at least 1); ignored with a numeric bins or a width',
    default: 1,
    kind: 'number',
    min: 0,
    minExclusive: true,
  },
  {
    name: 'width',
    meaning: "bin width in data units, the same along every coordinate; 'none' = use bins",
    default: 'none',
    kind: 'choice-or-number',
    choices: ['none'],
    min: 0,
    minExclusive: true,
  },
  {
    name: 'correction',
    meaning: 'none, or miller-madow: add (occupied bins − 1)/(2n)',
    default: 'none',
    kind: 'choice',
    choices: ['none', 'miller-madow'],
  },
] as const satisfies readonly SettingSpec[];

/** What the grid depends on: a bin rule or count scaled by `scale`, or a fixed width ('none': use bins). */
export interface GridSettings {
  bins: BinRule | number;
  scale: number;
  width: 'none' | number;
}

/**
 * The tuning grid of a bin-rule estimator: every rule, and the count of the base's rule ×TUNING_SCALE_FACTORS (a
 * count or a width in data units is a choice of its own, not a rule to vary).
 */
export function binGrid(base: { bins: BinRule | number }): TuningAxis<{ bins: BinRule | number; scale: number }>[] {
  const rules = { setting: 'bins', values: BIN_RULES } as const;
  return typeof base.bins === 'string' ? [rules, { setting: 'scale', values: TUNING_SCALE_FACTORS }] : [rules];
}

const MAX_EXACT_INTEGER = 2 ** 53;

/**
 * Where the bins of one coordinate lie: edge_i = origin + i·binWidth, i = 0..binCount, in grid units:
 * data units divided by 2^unitExponent. The unit is 1 (unitExponent 0) unless the coordinate's spread is
 * subnormal or near the top of the double range (estimators/shared/scaling.ts), where a width in data units
 * would underflow or its reciprocal overflow.
 */
export interface AxisBins {
  origin: number;
  binWidth: number;
  binCount: number;
  /** The right edge of the last bin: the maximum for rules and counts, origin + binCount·width for widths. */
  lastEdge: number;
  /** Grid coordinates are (x − unitOffset) / 2^unitExponent for x in data units (exact: estimators/shared/scaling.ts). */
  unitExponent: number;
  unitOffset: number;
}

/** The grid the estimator uses for this sample and these (validated) settings, one entry per coordinate. */
export function histogramGrid(sample: Sample, { bins, scale, width }: GridSettings): AxisBins[] {
  const { n, dim } = sample;
  const id = 'histogram';
  // One point says nothing of spread: its estimate would be log(width) whatever the data.
  if (n < 2) throw new EstimateError('too-few-points', `${id}: needs at least 2 points, got ${n}`);
  checkFiniteValues(id, sample);
  const isRule = typeof bins === 'string';
  const grid: AxisBins[] = [];
  for (let k = 0; k < dim; k++) {
    let values = column(sample, k);
    let dataMinimum = Infinity;
    let dataMaximum = -Infinity;
    for (let i = 0; i < n; i++) {
      if (values[i] < dataMinimum) dataMinimum = values[i];
      if (values[i] > dataMaximum) dataMaximum = values[i];
    }
    // A subnormal or huge spread is binned in a power-of-two unit near the spread: every edge, width and
    // count is then the exact image of the data-unit one, and the bin volume gets the unit's log back.
    const unit = spreadUnitOfRange(dataMinimum, dataMaximum);
    const unitExponent = unit ? unit.exponents[0] : 0;
    const unitOffset = unit ? unit.offsets[0] : 0;
    if (unit) values = toUnit(values, n, 1, unit);
    const minimum = timesPowerOfTwo(dataMinimum - unitOffset, -unitExponent);
    const maximum = timesPowerOfTwo(dataMaximum - unitOffset, -unitExponent);
    const range = maximum - minimum;
    if (typeof width === 'number') {
      const gridWidth = timesPowerOfTwo(width, -unitExponent);
      const binCount = Math.floor(range / gridWidth) + 1;
      if (!(binCount < MAX_EXACT_INTEGER)) {
        const dataRange = timesPowerOfTwo(range, unitExponent);
        throw new EstimateError(
          'invalid-input',
          `${id}: width=${width} cuts coordinate ${k + 1} (range ${Number.isFinite(dataRange) ? dataRange : `${dataMinimum} .. ${dataMaximum}`}) into 2^53 or more bins; use a larger width`,
        );
      }
      if (!(minimum + gridWidth > minimum)) {
        throw new EstimateError(
          'numeric',
          `${id}: width=${width} is below the resolution of the values of coordinate ${k + 1} (near ${dataMinimum}); use a larger width`,
        );
      }
      grid.push({ origin: minimum, binWidth: gridWidth, binCount, lastEdge: minimum + binCount * gridWidth, unitExponent, unitOffset });
      continue;
    }
    if (!(range > 0)) {
      throw new EstimateError(
        'ties',
        `${id}: all ${n} values of coordinate ${k + 1} are equal (${dataMinimum}), so bins spanning the data have zero width; give width=W instead`,
      );
    }
    if (!Number.isFinite(range)) {
      throw new EstimateError('numeric', `${id}: the range of coordinate ${k + 1} overflows the double range; rescale the data`);
    }
    // A scaled rule keeps its scale-free count ratio, so rescaling the data still shifts by exactly d·log c.
    const interquartileRange = () => sampleInterquartileRange(sample, k, values, unit === null);
    const binCount = isRule ? Math.max(1, Math.round(ruleBinCount(bins, values, range, dim, k, interquartileRange) * scale)) : bins;
    if (!(binCount < MAX_EXACT_INTEGER)) {
      throw new EstimateError('numeric', `${id}: coordinate ${k + 1} would need 2^53 or more bins; use a bin count or width=W`);
    }
    const binWidth = range / binCount;
    // As numpy does, refuse bins so narrow that neighbouring edges cannot be told apart.
    if (!(minimum + binWidth > minimum && maximum - binWidth < maximum)) {
      throw new EstimateError(
        'numeric',
        `${id}: ${binCount} bins are too many for the range of coordinate ${k + 1} (${dataMinimum} .. ${dataMaximum}); use fewer bins`,
      );
    }
    grid.push({ origin: minimum, binWidth, binCount, lastEdge: maximum, unitExponent, unitOffset });
  }
  return grid;
}

/**
 * Interquartile ranges of a draw's coordinates in grid units, NaN until asked for. The tuning grid asks for the
 * Freedman–Diaconis count of the same draw at every scale, and each ask sorted the column again.
 */
const interquartileRanges = new SampleMemo<Float64Array>();

/**
 * IQR of coordinate k of the sample, `values` being that column in grid units (reordered here when a sort is
 * needed); `inDataUnits` when the grid unit is the data's own, so `values` equals the column as given.
 */
function sampleInterquartileRange(sample: Sample, k: number, values: Float64Array, inDataUnits: boolean): number {
  const { n, dim, data } = sample;
  // In one dimension the column as given is the draw itself, which spacing and kernel estimators sort too.
  if (dim === 1 && inDataUnits) return interquartileRangeOfSorted(sharedSortedValues(data.subarray(0, n)));
  const kept = interquartileRanges.get(data, `iqr|${data.byteOffset}|${n}|${dim}`, () => new Float64Array(dim).fill(Number.NaN));
  if (Number.isNaN(kept[k])) kept[k] = interquartileRangeInPlace(values);
  return kept[k];
}

function interquartileRangeOfSorted(sorted: Float64Array): number {
  return quantileOfSorted(sorted, 0.75) - quantileOfSorted(sorted, 0.25);
}

/** The same from unsorted values (reordered), by selection: the two quartiles without sorting the column. */
function interquartileRangeInPlace(values: Float64Array): number {
  const [lower, upper] = quantilePairInPlace(values, 0.25, 0.75);
  return upper - lower;
}

/**
 * Number of bins along one coordinate for a rule; `values` is that coordinate's column (reordered here).
 * `interquartileRange` gives the column's IQR, for callers that keep it between calls.
 */
export function ruleBinCount(
  rule: BinRule,
  values: Float64Array,
  range: number,
  dim: number,
  coordinate = 0,
  interquartileRange = () => interquartileRangeInPlace(values),
): number {
  const n = values.length;
  const id = `histogram (bins=${rule})`;
  const countPerCoordinate = (total: number): number => Math.max(1, Math.ceil(dim === 1 ? total : Math.pow(total, 1 / dim)));
  switch (rule) {
    case 'sturges':
      return countPerCoordinate(Math.log2(n) + 1);
    case 'sqrt':
      return countPerCoordinate(Math.sqrt(n));
    case 'doane': {
      if (n < 3) throw new EstimateError('too-few-points', `${id}: Doane's skewness term needs n ≥ 3, but n = ${n}`);
      const { skewness } = moments(values, true);
      const skewnessSd = Math.sqrt((6 * (n - 2)) / ((n + 1) * (n + 3)));
      return countPerCoordinate(1 + Math.log2(n) + Math.log2(1 + Math.abs(skewness) / skewnessSd));
    }
    case 'scott': {
      const { sd } = moments(values);
      const constant = 2 * Math.pow(3, 1 / (dim + 2)) * Math.pow(Math.PI, dim / (2 * (dim + 2)));
      return Math.max(1, Math.ceil(range / sd / (constant * Math.pow(n, -1 / (dim + 2)))));
    }
    case 'freedman-diaconis': {
      const iqr = interquartileRange();
      if (!(iqr > 0)) {
        throw new EstimateError(
          'ties',
          `${id}: coordinate ${coordinate + 1} has interquartile range 0 (at least half of its ${n} values are equal); use bins=scott, a bin count, or width=W`,
        );
      }
      return Math.max(1, Math.ceil(range / iqr / (2 * Math.pow(n, -1 / (dim + 2)))));
    }
  }
}

/** Population SD (ddof 0); with `withSkewness`, also the skewness mean(((x − mean)/SD)^3). */
function moments(values: Float64Array, withSkewness = false): { sd: number; skewness: number } {
  const n = values.length;
  const { mean, sumOfSquares } = squaredDeviations(values);
  const sd = Math.sqrt(sumOfSquares / n);
  let cubes = 0;
  if (withSkewness) {
    for (let i = 0; i < n; i++) {
      const z = (values[i] - mean) / sd;
      cubes += z * z * z;
    }
  }
  return { sd, skewness: cubes / n };
}

/**
 * Bin index of every point along one coordinate (x in data units, brought to grid units here), written
 * into `out`. The index is floor((x − origin)/width)
 * corrected against the actual edges origin + i·width, so a point on an edge goes to the bin on its right
 * and the maximum to the last bin, as numpy.histogram does.
 */
export function axisIndices(values: Float64Array, count: number, dim: number, axis: number, bins: AxisBins, out: Float64Array): void {
  const { origin, binWidth, binCount, lastEdge, unitExponent, unitOffset } = bins;
  const perUnit = binCount / (lastEdge - origin);
  const last = binCount - 1;
  // Two factors: 2^−unitExponent itself may not be a double (a subnormal spread needs up to 2^1074).
  const halfExponent = Math.trunc(-unitExponent / 2);
  const toGridA = 2 ** halfExponent;
  const toGridB = 2 ** (-unitExponent - halfExponent);
  const inUnit = unitExponent !== 0 || unitOffset !== 0;
  for (let i = 0, p = axis; i < count; i++, p += dim) {
    const x = inUnit ? (values[p] - unitOffset) * toGridA * toGridB : values[p];
    let index = Math.floor((x - origin) * perUnit);
    if (index > last) index = last;
    if (index < 0) index = 0;
    if (x < origin + index * binWidth) index--;
    else if (index < last && x >= origin + (index + 1) * binWidth) index++;
    out[i] = index;
  }
}

/** Σ c log c over occupied cells and the number of occupied cells, for integer keys in [0, keySpace). */
export function occupiedCellSums(keys: Float64Array, keySpace: number): { sumCountLogCount: number; occupied: number } {
  const n = keys.length;
  let sumCountLogCount = 0;
  let occupied = 0;
  if (keySpace <= 4 * n + 1024) {
    const counts = new Int32Array(keySpace);
    for (let i = 0; i < n; i++) counts[keys[i]]++;
    for (let cell = 0; cell < keySpace; cell++) {
      const c = counts[cell];
      if (c > 0) {
        occupied++;
        sumCountLogCount += c * Math.log(c);
      }
    }
    return { sumCountLogCount, occupied };
  }
  const sorted = sortAscending(keys.slice());
  let run = 1;
  for (let i = 1; i <= n; i++) {
    if (i < n && sorted[i] === sorted[i - 1]) run++;
    else {
      occupied++;
      sumCountLogCount += run * Math.log(run);
      run = 1;
    }
  }
  return { sumCountLogCount, occupied };
}

/** Occupied-cell statistics of a sample on a grid: Σ c log c, B, and log of the bin volume. */
export function histogramCells(sample: Sample, grid: readonly AxisBins[]): { sumCountLogCount: number; occupied: number; logBinVolume: number } {
  const { n, dim } = sample;
  const keys = new Float64Array(n);
  const axis = new Float64Array(n);
  let keySpace = 1;
  let logBinVolume = 0;
  for (let k = 0; k < dim; k++) {
    const bins = grid[k];
    logBinVolume += Math.log(bins.binWidth) + bins.unitExponent * Math.LN2;
    axisIndices(sample.data, sample.n, sample.dim, k, bins, axis);
    let axisSpace = bins.binCount;
    if (keySpace * axisSpace >= MAX_EXACT_INTEGER) {
      keySpace = rankKeys(keys);
      if (keySpace * axisSpace >= MAX_EXACT_INTEGER) axisSpace = rankKeys(axis);
    }
    for (let i = 0; i < n; i++) keys[i] = keys[i] * axisSpace + axis[i];
    keySpace *= axisSpace;
  }
  return { ...occupiedCellSums(keys, keySpace), logBinVolume };
}

function histogramEntropy(sample: Sample, settings: GridSettings & { correction: 'none' | 'miller-madow' }): number {
  const { correction } = settings;
  const grid = histogramGrid(sample, settings);
  const { sumCountLogCount, occupied, logBinVolume } = histogramCells(sample, grid);
  const n = sample.n;
  // −Σ (c/n) log(c/(n·V)) = log n + log V − (1/n) Σ c log c
  const plugIn = Math.log(n) + logBinVolume - sumCountLogCount / n;
  return correction === 'miller-madow' ? plugIn + (occupied - 1) / (2 * n) : plugIn;
}

export const histogramEstimators: Estimator[] = [
  defineEstimator({
    id: 'histogram',
    family: 'histogram',
    quantity: 'entropy',
    summary: 'plug-in entropy of a product grid of equal-width bins (bin rule, count or width), optional Miller–Madow term',
    settings: HISTOGRAM_SETTINGS,
    dims: [1, Infinity],
    reference:
      'Plug-in histogram estimator, e.g. Beirlant, Dudewicz, Györfi & van der Meulen (1997), Int. J. Math. Stat. Sci. 6(1), 17–39; ' +
      'Miller, G. A. (1955), Note on the bias of information estimates, in Information Theory in Psychology, 95–100; ' +
      'bin rules: Sturges (1926) JASA 21; Scott (1979) Biometrika 66; Freedman & Diaconis (1981) Z. Wahrsch. 57; Doane (1976) Am. Stat. 30.',
    tuning: (base) => (base.width === 'none' ? binGrid(base) : []),
    // Beyond d = 3 a product grid has far more cells than points at usual sample sizes.
    defaultFor: { estimate: [{ dims: [1, 3], order: 50 }], bench: true },
    estimate: histogramEntropy,
    lacks: {
      // A width in data units does not grow with the data: x → c·x keeps the width, so the bins and counts
      // change and Ĥ does not shift by d·log|c|. Rules and counts are scale-free (see the top of this file).
      scale: (settings) =>
        typeof settings.width === 'number' ? `width=${settings.width} is a bin width in data units, which does not change with the data's unit` : undefined,
    },
  }),
];

export const registration: EstimatorFile = { catalogOrder: 10, estimators: histogramEstimators };
