/**
 * Tests that call an estimator's own functions directly (not through runEstimator) give it settings as the
 * registry would: validated against the declaration, defaults filled in. Estimators never see anything else.
 */
import type { Estimator, Sample, Settings } from '../../src/core/contracts.js';
import { validateSettings } from '../../src/core/spec.js';

/** `given` validated and completed against the estimator's declaration, typed as the caller needs. */
export function validated<S = Settings>(estimator: Estimator, given: Settings = {}): S {
  return validateSettings(estimator.id, estimator.settings, given) as S;
}

/** The estimator with `estimate` and `resolve` taking settings as a user writes them (partial, validated first). */
export function withValidation(estimator: Estimator): Estimator {
  const { resolve } = estimator;
  return {
    ...estimator,
    estimate: (sample: Sample, given: Settings) => estimator.estimate(sample, validated(estimator, given)),
    ...(resolve ? { resolve: (sample: Sample, given: Settings) => resolve.call(estimator, sample, validated(estimator, given)) } : {}),
  };
}
