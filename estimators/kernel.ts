/**
 * The kernel family: the leave-one-out resubstitution entropy estimate with a Gaussian kernel,
 *   Ĥ = −(1/n) Σ_i log f̂₋ᵢ(x_i).
 *
 * Bandwidth (setting `bandwidth`):
 * - silverman (default): d = 1, 0.9·min(σ̂, IQR/1.34)·n^(−1/5) (Silverman 1986, eq. 3.31), robust to heavy
 *   tails and skew through the IQR, the usual default for density estimation; d > 1,
 *   (4/(d+2))^(1/(d+4))·n^(−1/(d+4)) on prewhitened data.
 * - scott: d = 1, 1.06·σ̂·n^(−1/5); d > 1, n^(−1/(d+4)) on prewhitened data (Scott 1992).
 * - likelihood-cv: the h maximising the leave-one-out log-likelihood, which is the h minimising Ĥ itself;
 *   a bounded Brent search on log h from h_silverman/16 to 4·h_silverman.
 * - a number > 0: data units for d = 1, whitened units for d > 1. A fixed number in data units is not
 *   unit-equivariant (like a fixed histogram bin width): rescaling the data by c does not shift Ĥ by log c.
 *   The rules are equivariant: Ĥ shifts by exactly d·log c. Data whose spread is subnormal or near the top
 *   of the double range are worked on in a power-of-two unit near the spread (estimators/shared/scaling.ts), with a
 *   numeric 1-D bandwidth converted exactly, so the estimate is the one exact arithmetic would give.
 *
 * `resolve` reports the numeric bandwidth actually used (in the units above), so a run file records it and
 * re-running with that number gives the same estimate.
 *
 * Computation (estimators/kernel/): d = 1 sorts and sums exactly over neighbours within a truncation radius,
 * or for large n bins onto a grid and convolves by FFT; d > 1 whitens and sums within the radius with a
 * cell list or blocked brute force, or in d = 2, 3 for large n spreads onto a grid with a Gaussian split
 * into three (linear in n, each log sum within a derived 2e-6 of exact; grid.ts). All paths agree with the
 * direct O(n²) sum within their stated bounds (test/kernel.test.ts).
 *
 * Heavy tails and outliers: a point many bandwidths from all others has f̂₋ᵢ(x_i) far below the smallest
 * double, but every path takes log f̂₋ᵢ(x_i) in log space, relative to the nearest neighbour, so the
 * estimate is the exact leave-one-out value, large as it may be (about (gap/h)²/(2n) nats from such a
 * point), not a refusal. The estimator fails ('numeric') only where that value does not fit in a double:
 * a point over ~1.3e154 bandwidths from its nearest neighbour, or data whose range overflows.
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
import { SampleMemo } from './shared/sample-memo.js';
import { type BandwidthSetting, chooseBandwidth, type KernelData, kernelEntropy, prepareKernelData, toDataUnits } from './kernel/resubstitution.js';

export const BANDWIDTH_RULES = ['silverman', 'scott', 'likelihood-cv'] as const;

const kernelSettings = [
  {
    name: 'bandwidth',
    meaning: 'Gaussian kernel width: silverman, scott, likelihood-cv, or a number (data units if d = 1, whitened units if d > 1)',
    default: 'silverman',
    kind: 'choice-or-number',
    choices: BANDWIDTH_RULES,
    min: 0,
    minExclusive: true,
  },
  {
    name: 'scale',
    meaning: 'multiplies the bandwidth a rule or cross-validation gives (for tuning studies); ignored with a numeric bandwidth',
    default: 1,
    kind: 'number',
    min: 0,
    minExclusive: true,
  },
] as const satisfies readonly SettingSpec[];

/** What the bandwidth depends on: a rule (or cross-validation) times `scale`, or a number. */
export interface KernelSettings {
  bandwidth: BandwidthSetting;
  scale: number;
}

/** The tuning grid of a bandwidth rule: its bandwidth ×TUNING_SCALE_FACTORS (a numeric bandwidth is a choice of its own). */
export function bandwidthGrid(base: { bandwidth: BandwidthSetting }): TuningAxis<{ scale: number }>[] {
  return typeof base.bandwidth === 'string' ? [{ setting: 'scale', values: TUNING_SCALE_FACTORS }] : [];
}

const searchedBandwidths = new SampleMemo<number>();

/**
 * The bandwidth used, in the prepared points' units: a numeric setting as given, a rule's (or
 * cross-validation's) value times `scale`.
 */
function usedBandwidth(sample: Sample, data: KernelData, settings: KernelSettings): number {
  const setting = settings.bandwidth;
  // The search is the costly part, and `hhat estimate` asks for the value and then the bandwidth it used.
  const chosen =
    setting === 'likelihood-cv'
      ? searchedBandwidths.get(sample.data.subarray(0, sample.n * sample.dim), `${sample.dim}`, () => chooseBandwidth(data, setting))
      : chooseBandwidth(data, setting);
  return typeof setting === 'number' ? chosen : chosen * settings.scale;
}

export const kernelEstimator: Estimator = defineEstimator({
  id: 'kernel',
  family: 'kernel',
  quantity: 'entropy',
  summary: 'leave-one-out Gaussian kernel density, resubstituted: −mean log f̂₋ᵢ(xᵢ)',
  settings: kernelSettings,
  dims: [1, Infinity],
  reference:
    'Ahmad & Lin, IEEE Trans. Inf. Theory 22(3):372–375, 1976 (resubstitution estimate); leave-one-out form: Joe, Ann. Inst. Statist. Math. 41:683–697, 1989, and Hall & Morton, Ann. Inst. Statist. Math. 45:69–88, 1993; bandwidth rules: Silverman 1986 (eq. 3.31), Scott 1992; binned FFT sums: Wand, J. Comput. Graph. Statist. 3:433–445, 1994',
  tuning: bandwidthGrid,
  defaultFor: { estimate: [{ order: 40 }], bench: true },
  resolve(sample, settings) {
    // The numeric bandwidth reported already includes the scale, so the settings used reproduce the estimate.
    const data = prepareKernelData(sample);
    return { ...settings, bandwidth: toDataUnits(data, usedBandwidth(sample, data, settings)), scale: 1 };
  },
  estimate(sample, settings) {
    const data = prepareKernelData(sample);
    return kernelEntropy(data, usedBandwidth(sample, data, settings));
  },
  lacks: {
    // A numeric 1-D bandwidth is in data units (like a fixed histogram width); for d > 1 it is in whitened
    // units, which follow the data, and the rules are equivariant.
    scale: (settings, dim) =>
      dim === 1 && typeof settings.bandwidth === 'number'
        ? `bandwidth=${settings.bandwidth} is in data units for d = 1, which do not change with the data's unit`
        : undefined,
  },
});

export const kernelEstimators: Estimator[] = [kernelEstimator];

export const registration: EstimatorFile = { catalogOrder: 40, estimators: kernelEstimators };
