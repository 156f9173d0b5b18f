/**
 * Tuning grids: the reasonable settings of each estimator, run at the robustness sample size on the same draws
 * as the plan's settings, so "how far does the answer move with tuning" is a paired measurement. Each estimator
 * declares its own grid beside its settings (`tuning` in src/contracts.ts); here its points become configured
 * estimators, each validated like any setting a user gives. The built-in grids:
 *
 *   nearest neighbour: k = 1..10 (the weighted estimator: its largest order k from 2 to 20)
 *   histogram: every bin rule, and the default rule's count ×{0.5, 0.71, 1, 1.41, 2} (setting `scale`)
 *   kernel: the bandwidth ×{0.5, 0.71, 1, 1.41, 2} (setting `scale`)
 *   spacing: the window m = ⌊√n + ½⌋ ×{0.5, 0.71, 1, 1.41, 2}, rounded, 1 ≤ m < n/2
 *   mutual information: KSG k = 1..10; mi-histogram as histogram; mi-kernel as kernel; mi-from-entropies the
 *     k grid of its entropy estimator (none when that has no k)
 *   divergence: knn-divergence k = 1..10; histogram-divergence as histogram
 */
import type { SettingValue } from '../core/contracts.js';
import { UsageError } from '../core/errors.js';
import { DEQUANTIZE_SETTING, THIN_SETTING } from '../core/spec.js';
import { configureEstimator, type ConfiguredEstimator } from '../../estimators/index.js';

export interface TuningPoint {
  /** Index of the plan estimator whose settings are varied. */
  base: number;
  /** The setting varied, and its value at this point. */
  setting: string;
  value: SettingValue;
  configured: ConfiguredEstimator;
}

/** Grid points for one estimator at sample size n (the base setting's own point included), axis by axis. */
export function tuningGrid(base: ConfiguredEstimator, baseIndex: number, n: number): TuningPoint[] {
  const { estimator } = base;
  const axes = estimator.tuning?.(base.settings, n) ?? [];
  return axes.flatMap(({ setting, values }) =>
    values.map((value) => {
      try {
        return {
          base: baseIndex,
          setting,
          value,
          // The harness's settings stay as the base has them: a dequantized estimator's grid is dequantized too.
          configured: configureEstimator(estimator.id, {
            ...base.settings,
            [setting]: value,
            ...(base.thin !== 1 && { [THIN_SETTING]: base.thin }),
            ...(base.dequantize !== 'none' && { [DEQUANTIZE_SETTING]: base.dequantize }),
          }),
        };
      } catch (error) {
        // A grid is part of the estimator's declaration: a value it does not accept is the declaration's mistake.
        if (error instanceof UsageError)
          throw new UsageError(`${estimator.id}: its tuning grid at n = ${n} (from ${base.spec}) has a value that is not allowed: ${error.message}`);
        throw error;
      }
    }),
  );
}
