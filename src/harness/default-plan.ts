/**
 * The built-in plan `hhat bench` runs with no arguments: the entropy estimators that declare themselves in the
 * default plan (`defaultFor.bench`, all built-in ones at their default settings) on a representative set of scenarios (light and heavy tails, bounded and half-bounded support,
 * a bimodal law, d = 1, 2, 3, 5), sized to finish within a minute on two cores.
 */
import { defaultSet } from '../../estimators/index.js';
import type { Quantity } from '../core/contracts.js';
import type { PlanInput } from './plan.js';
import { DEFAULT_SEED } from '../core/rng.js';
import { catalog } from '../../scenarios/index.js';

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

/**
 * The default plan of a quantity, with the estimators of its default set (estimators/index.ts, defaultSet) in
 * their declared order. Mutual information and divergence: every catalog scenario of that quantity, with
 * robustness at n = 500 (MI: 300; monotone maps of X and of Y, where the true value must not move) and no
 * tuning grids.
 */
export function defaultPlan(quantity: Quantity = 'entropy'): PlanInput {
  if (quantity === 'conditional-mutual-information') {
    // Every catalog scenario (Gaussian triples and their monotone transforms): the k-NN and Gaussian estimators
    // are O(n log n) and O(n), so two sizes and 30 replicates take seconds; rescale and monotone maps of X and
    // of Z must leave I(X; Y | Z) where it is.
    return {
      name: `default ${quantity}`,
      quantity,
      scenarios: catalog()
        .filter((s) => s.quantity === quantity)
        .map((s) => s.id),
      estimators: defaultSet('bench', quantity),
      sampleSizes: [100, 1000],
      replicates: 30,
      seed: DEFAULT_SEED,
      robustness: {
        sampleSize: 1000,
        perturbations: ['rescale:c=1000', 'monotone:map=asinh,part=x', 'monotone:map=cubic,part=z', 'quantize:step=0.01', 'quantize:step=0.1'],
        tuning: false,
      },
    };
  }
  if (quantity === 'transfer-entropy') {
    // Four VAR(1) settings: coupling X → Y only (and its zero reverse direction, the test a user most needs),
    // no coupling at all, and both directions coupled; estimators and scenarios both at histories k = l = 1.
    // n = 5000 is where te-ksg's bias falls below 0.03 nats; rescale and monotone maps of either series must
    // leave the truth where it is.
    return {
      name: `default ${quantity}`,
      quantity,
      scenarios: [
        'te-var1:a=0.5,b=0.5,cXY=0.4,cYX=0',
        'te-var1-reverse:a=0.5,b=0.5,cXY=0.4,cYX=0',
        'te-var1:a=0.5,b=0.5,cXY=0,cYX=0',
        'te-var1:a=0.3,b=0.6,cXY=0.5,cYX=0.2',
      ],
      estimators: defaultSet('bench', quantity),
      sampleSizes: [500, 5000],
      replicates: 30,
      seed: DEFAULT_SEED,
      robustness: {
        sampleSize: 500,
        perturbations: ['rescale:c=1000', 'monotone:map=asinh,part=x', 'monotone:map=cubic,part=y', 'quantize:step=0.01', 'quantize:step=0.1'],
        tuning: false,
      },
    };
  }
  if (quantity !== 'entropy') {
    return {
      name: `default ${quantity}`,
      quantity,
      scenarios: catalog()
        .filter((s) => s.quantity === quantity)
        .map((s) => s.id),
      estimators: defaultSet('bench', quantity),
      // The kernel MI estimator is quadratic in n in several dimensions: 1000 keeps the plan within a minute.
      sampleSizes: quantity === 'mutual-information' ? [100, 300, 1000] : [100, 500, 2000],
      replicates: 30,
      seed: DEFAULT_SEED,
      robustness: {
        sampleSize: quantity === 'mutual-information' ? 300 : 500,
        perturbations:
          quantity === 'mutual-information'
            ? ['rescale:c=1000', 'monotone:map=asinh,part=x', 'monotone:map=cubic,part=y', 'quantize:step=0.01', 'quantize:step=0.1']
            : ['rescale:c=1000', 'monotone:map=asinh', 'affine:condition=10,scale=1', 'quantize:step=0.01', 'quantize:step=0.1'],
        tuning: false,
      },
    };
  }
  return {
    name: 'default',
    quantity: 'entropy',
    scenarios: DEFAULT_PLAN_SCENARIOS,
    estimators: defaultSet('bench', 'entropy'),
    sampleSizes: [100, 500, 2000],
    replicates: 30,
    seed: DEFAULT_SEED,
    robustness: { sampleSize: 500 },
  };
}
