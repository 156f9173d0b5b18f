/**
 * Estimators of the transfer entropy TE(X → Y) = I(Y_{t+1}; X_t^(l) | Y_t^(k)) in nats (Schreiber 2000). The
 * sample is a bivariate time series, rows in time order: column 0 the source X, column 1 the target Y.
 *
 *   const te = getEstimator('te-ksg');            // from estimators/index.ts
 *   te.estimate({ n, dim: 2, data, xDim: 1 }, { k: 4, history: 1, sourceHistory: 1, copula: 'none' });
 *
 * Both embed the series first (embedTransfer): for every t with a full past, one row of the target's next value
 * Y_{t+1}, the source's past X_t, …, X_{t−l+1} and the target's past Y_t, …, Y_{t−k+1}; the transfer entropy
 * is the conditional mutual information of the first two groups given the third, over those n − max(k, l) rows.
 * - te-ksg: the Frenzel–Pompe conditional k-NN estimator on the embedded rows (ksgConditionalMutualInformation).
 * - te-gaussian: the Gaussian form, ½ log(det S_{Y+,Y⁻} det S_{X⁻,Y⁻} / (det S_{Y⁻} det S)) of the embedded
 *   scatter matrices, i.e. ½ log of the ratio of the two conditional (residual) variances of Y_{t+1}; for a
 *   Gaussian process with these history lengths it is the transfer entropy itself (Barnett, Barrett & Seth 2009).
 */
import { defineEstimator, type Estimator, type EstimatorFile, type Sample } from '../src/core/contracts.js';
import { EstimateError } from '../src/core/errors.js';
import { ksgConditionalMutualInformation } from './conditional-mutual-information.js';
import { COPULA_SETTING, rankTransform } from './mutual-information.js';
import { logDeterminantSpd, scatterMatrix, wishartLogDetShift } from './parametric.js';
import { orderGrid } from './shared/order-grid.js';

type Copula = (typeof COPULA_SETTING.choices)[number];

const HISTORY_SETTINGS = [
  { name: 'history', meaning: 'k: how many past values of the target Y are conditioned on (Y_t, …, Y_{t−k+1})', default: 1, kind: 'integer', min: 1, max: 50 },
  { name: 'sourceHistory', meaning: 'l: how many past values of the source X are used (X_t, …, X_{t−l+1})', default: 1, kind: 'integer', min: 1, max: 50 },
] as const;

/** Both estimators are in both default sets of transfer entropy, at order 0: registry order. */
const IN_DEFAULT_SETS = { estimate: true, bench: true } as const;

/** The checked series: two columns (source, target), finite values. */
function checkedSeries(id: string, sample: Sample): void {
  const { n, dim, data } = sample;
  if (dim !== 2 || (sample.xDim !== undefined && sample.xDim !== 1)) {
    throw new EstimateError('dimension', `${id}: a transfer-entropy sample has 2 columns (source X, then target Y); got d = ${dim}, xDim = ${sample.xDim}`);
  }
  for (let p = 0; p < n * dim; p++) {
    if (!Number.isFinite(data[p])) {
      throw new EstimateError(
        'invalid-input',
        `${id}: value ${data[p]} at row ${Math.floor(p / dim) + 1}, column ${(p % dim) + 1}; only finite numbers are allowed`,
      );
    }
  }
}

/**
 * The embedded rows of a series (row-major n × 2, column 0 the source, 1 the target), one per t from
 * max(k, l) − 1 to n − 2, with columns [Y_{t+1} | X_t … X_{t−l+1} | Y_t … Y_{t−k+1}]: m = n − max(k, l) rows of
 * 1 + l + k values.
 */
export function embedTransfer(series: Float64Array, n: number, history: number, sourceHistory: number): { data: Float64Array; rows: number; width: number } {
  const first = Math.max(history, sourceHistory) - 1;
  const rows = Math.max(0, n - 1 - first);
  const width = 1 + sourceHistory + history;
  const data = new Float64Array(rows * width);
  for (let r = 0; r < rows; r++) {
    const t = first + r;
    const out = r * width;
    data[out] = series[2 * (t + 1) + 1];
    for (let j = 0; j < sourceHistory; j++) data[out + 1 + j] = series[2 * (t - j)];
    for (let j = 0; j < history; j++) data[out + 1 + sourceHistory + j] = series[2 * (t - j) + 1];
  }
  return { data, rows, width };
}

/** The checked series (ranked when copula=rank: each series by its own ranks, before embedding), embedded. */
function embedded(
  id: string,
  sample: Sample,
  history: number,
  sourceHistory: number,
  copula: Copula,
  needed: number,
  why: string,
): { data: Float64Array; rows: number; width: number } {
  checkedSeries(id, sample);
  const { n } = sample;
  const lag = Math.max(history, sourceHistory);
  if (n - lag < needed) {
    throw new EstimateError(
      'too-few-points',
      `${id}: a series of ${n} rows gives ${Math.max(0, n - lag)} embedded rows with history ${history}, sourceHistory ${sourceHistory}; ${why} needs at least ${needed}, so at least ${needed + lag} rows`,
    );
  }
  const raw = sample.data.subarray(0, 2 * n);
  // Ranking each series is an increasing map of each, which leaves the transfer entropy unchanged.
  return embedTransfer(copula === 'rank' ? rankTransform(raw, n, 2) : raw, n, history, sourceHistory);
}

function gaussianTransferEstimate(
  sample: Sample,
  { history, sourceHistory, correction, copula }: { history: number; sourceHistory: number; correction: 'ahmed-gokhale' | 'none'; copula: Copula },
): number {
  const id = 'te-gaussian';
  const width = 1 + history + sourceHistory;
  const { data, rows } = embedded(id, sample, history, sourceHistory, copula, width + 1, `a ${width}-dimensional covariance`);
  const scatter = scatterMatrix({ n: rows, dim: width, data }, new Float64Array(width));
  const logDetJoint = logDeterminantSpd(scatter, width, rows, id);
  const logDetOf = (keep: number[]): number => {
    const size = keep.length;
    const block = new Float64Array(size * size);
    for (let r = 0; r < size; r++) for (let c = 0; c < size; c++) block[r * size + c] = scatter[keep[r] * width + keep[c]];
    return logDeterminantSpd(block, size, rows, id);
  };
  const targetPast = Array.from({ length: history }, (_, j) => 1 + sourceHistory + j);
  const sourcePast = Array.from({ length: sourceHistory }, (_, j) => 1 + j);
  // Every column appears as often in the numerator as in the denominator, so the column scales cancel.
  const plugIn = 0.5 * (logDetOf([0, ...targetPast]) + logDetOf([...sourcePast, ...targetPast]) - logDetOf(targetPast) - logDetJoint);
  if (correction === 'none') return plugIn;
  const w = (m: number): number => wishartLogDetShift(rows, m);
  return plugIn - 0.5 * (w(1 + history) + w(sourceHistory + history) - w(history) - w(width));
}

const TE_KSG_DEFAULT_K = 4;

export const transferEntropyEstimators: Estimator[] = [
  defineEstimator({
    id: 'te-ksg',
    family: 'nearest-neighbour',
    quantity: 'transfer-entropy',
    summary: 'Frenzel–Pompe conditional k-NN on the embedding (Y_{t+1} | X_t^(l) | Y_t^(k)), max norm',
    settings: [
      { name: 'k', meaning: 'neighbour order in the joint embedded space', default: TE_KSG_DEFAULT_K, kind: 'integer', min: 1 },
      ...HISTORY_SETTINGS,
      COPULA_SETTING,
    ],
    dims: [2, 2],
    reference:
      'Schreiber, T. (2000). Measuring information transfer. Physical Review Letters 85, 461–464; ' +
      'Frenzel, S. & Pompe, B. (2007). Partial mutual information for coupling analysis of multivariate time series. Physical Review Letters 99, 204101.',
    tuning: orderGrid(),
    defaultFor: IN_DEFAULT_SETS,
    estimate(sample, { k, history, sourceHistory, copula }) {
      // Fewer embedded points than embedding dimensions leave the neighbour distances no room to mean anything.
      const width = 1 + history + sourceHistory;
      const needed = Math.max(k + 1, width + 1);
      const why = needed === k + 1 ? `k = ${k} neighbours` : `a ${width}-dimensional embedding (more points than dimensions)`;
      const { data, rows } = embedded('te-ksg', sample, history, sourceHistory, copula, needed, why);
      return ksgConditionalMutualInformation(data, rows, 1, sourceHistory, history, k, 'te-ksg');
    },
    lacks: {
      // The joint max norm compares source and target distances, so rescaling one series alone changes the
      // neighbours: invariant to one common factor (checked), and with copula=rank to increasing maps of each.
      separateScale: (settings) =>
        settings.copula === 'rank'
          ? undefined
          : 'the joint max-norm distance compares source and target distances, so rescaling one series alone changes the neighbours (standardise the columns, or use copula=rank)',
    },
  }),
  defineEstimator({
    id: 'te-gaussian',
    family: 'parametric',
    quantity: 'transfer-entropy',
    summary: 'TE of the fitted Gaussian process: ½ log of the ratio of the residual variances of Y_{t+1} without and with the source past',
    settings: [
      ...HISTORY_SETTINGS,
      {
        name: 'correction',
        meaning: 'ahmed-gokhale: subtract the exact bias of the Gaussian log-determinants (as for iid rows); none: the plug-in',
        default: 'ahmed-gokhale',
        kind: 'choice',
        choices: ['ahmed-gokhale', 'none'],
      },
      COPULA_SETTING,
    ],
    dims: [2, 2],
    reference:
      'Schreiber, T. (2000). Physical Review Letters 85, 461–464; Barnett, L., Barrett, A. B. & Seth, A. K. (2009). Granger causality and transfer entropy are equivalent ' +
      'for Gaussian variables. Physical Review Letters 103, 238701; bias term from Ahmed, N. A. & Gokhale, D. V. (1989), IEEE Trans. Inf. Theory 35(3), 688–692.',
    // No tuning grid: the histories define the quantity estimated, and the correction picks an estimator.
    defaultFor: IN_DEFAULT_SETS,
    estimate: gaussianTransferEstimate,
  }),
];

export const registration: EstimatorFile = { catalogOrder: 67, estimators: transferEntropyEstimators };
