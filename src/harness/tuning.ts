/**
 * Tuning grids: the reasonable settings of each estimator family, run at the robustness sample size on the
 * same draws as the default settings, so "how far does the answer move with tuning" is a paired measurement.
 *
 *   nearest neighbour: k = 1..10 (the weighted estimator: its largest order k from 2 to 20)
 *   histogram: every bin rule, and the default rule's count ×{0.5, 0.71, 1, 1.41, 2} (setting `scale`)
 *   kernel: the bandwidth ×{0.5, 0.71, 1, 1.41, 2} (setting `scale`)
 *   spacing: the window m = ⌊√n + ½⌋ ×{0.5, 0.71, 1, 1.41, 2}, rounded, 1 ≤ m < n/2
 */
import type { Settings, SettingValue } from '../core/contracts.js';
import { configureEstimator, type ConfiguredEstimator } from '../../estimators/index.js';

export const TUNING_FACTORS = [0.5, 0.71, 1, 1.41, 2];

export interface TuningPoint {
  /** Index of the plan estimator whose settings are varied. */
  base: number;
  /** The setting varied, and its value at this point. */
  setting: string;
  value: SettingValue;
  configured: ConfiguredEstimator;
}

function variant(base: ConfiguredEstimator, changes: Settings): ConfiguredEstimator {
  return configureEstimator(base.estimator.id, { ...base.settings, ...changes });
}

/** Grid points for one estimator at sample size n (the base setting's own point included). */
export function tuningGrid(base: ConfiguredEstimator, baseIndex: number, n: number): TuningPoint[] {
  const points: TuningPoint[] = [];
  const add = (setting: string, value: SettingValue) => {
    try {
      points.push({ base: baseIndex, setting, value, configured: variant(base, { [setting]: value }) });
    } catch {
      // A grid value outside the estimator's valid range is simply not a reasonable setting here.
    }
  };
  switch (base.estimator.family) {
    case 'nearest-neighbour': {
      const ks = base.estimator.id === 'kozachenko-leonenko-weighted' ? [2, 4, 6, 8, 12, 16, 20] : [1, 2, 3, 4, 5, 6, 7, 8, 9, 10];
      for (const k of ks) if (k < n) add('k', k);
      break;
    }
    case 'histogram': {
      if (base.settings.width !== 'none') break;
      for (const rule of ['sturges', 'scott', 'freedman-diaconis', 'doane', 'sqrt']) add('bins', rule);
      if (typeof base.settings.bins === 'string') for (const f of TUNING_FACTORS) add('scale', f);
      break;
    }
    case 'kernel':
      if (typeof base.settings.bandwidth === 'string') for (const f of TUNING_FACTORS) add('scale', f);
      break;
    case 'spacing': {
      const m0 = Math.floor(Math.sqrt(n) + 0.5);
      const ms = new Set(TUNING_FACTORS.map((f) => Math.max(1, Math.round(m0 * f))).filter((m) => m < n / 2));
      for (const m of ms) add('m', m);
      break;
    }
    default:
      break;
  }
  return points;
}
