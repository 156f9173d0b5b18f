/**
 * Everything a unit of work needs, rebuilt from the plan alone: the main thread and every worker build the
 * same context from the same plan, so they compute the same estimates.
 */
import type { Plan } from './plan.js';
import { resolvePlan } from './plan.js';
import type { WorkContext } from './work.js';
import { UsageError } from './errors.js';

export function buildContext(plan: Plan): WorkContext {
  const resolved = resolvePlan({
    name: plan.name,
    quantity: plan.quantity,
    scenarios: plan.scenarios,
    estimators: plan.estimators,
    sampleSizes: plan.sampleSizes,
    replicates: plan.replicates,
    seed: plan.seed,
  });
  if (plan.perturbations.length) throw new UsageError('this plan lists perturbations, which this version of hhat cannot run');
  return { plan: resolved.plan, scenarios: resolved.scenarios, estimators: resolved.estimators, perturbations: [] };
}
