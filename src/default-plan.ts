/**
 * The built-in plan `hhat bench` runs with no arguments: every registered entropy estimator at its default
 * settings on a representative set of scenarios (light and heavy tails, bounded and half-bounded support,
 * a bimodal law, d = 1, 2, 3, 5), sized to finish within a minute on two cores.
 */
import { listEstimators } from '../estimators/index.js';
import type { PlanInput } from './plan.js';

export const DEFAULT_PLAN_SCENARIOS = [
  'normal',
  'uniform',
  'exponential',
  'student-t:nu=3',
  'gaussian-mixture',
  'gaussian:dim=2,rho=0.5',
  'gaussian:dim=3,rho=0.5',
  'uniform-ball:dim=3',
  'student-t-mv:dim=3,nu=4',
  'gaussian:dim=5,rho=0.3,spread=10',
];

export function defaultPlan(): PlanInput {
  return {
    name: 'default',
    quantity: 'entropy',
    scenarios: DEFAULT_PLAN_SCENARIOS,
    estimators: listEstimators()
      .filter((e) => e.quantity === 'entropy')
      .map((e) => e.id),
    sampleSizes: [100, 500, 2000],
    replicates: 30,
    seed: 20261201,
    robustness: { sampleSize: 500 },
  };
}
