/**
 * Everything a unit of work needs, rebuilt from the plan alone: the main thread and every worker build the
 * same context from the same plan, so they compute the same estimates.
 */
import type { Plan } from './plan.js';
import { resolvePlan } from './plan.js';
import { parsePerturbation } from './perturb.js';
import { tuningGrid } from './tuning.js';
import type { WorkContext } from './work.js';

export function buildContext(plan: Plan): WorkContext {
  const resolved = resolvePlan({
    name: plan.name,
    quantity: plan.quantity,
    scenarios: plan.scenarios,
    estimators: plan.estimators,
    sampleSizes: plan.sampleSizes,
    replicates: plan.replicates,
    seed: plan.seed,
    robustness: plan.robustness,
    modules: plan.modules,
  });
  const { scenarios, estimators } = resolved;
  const robustness = resolved.plan.robustness;
  const mainSpecs = new Set(estimators.map((e) => e.spec));
  const tuning =
    robustness?.tuning === true
      ? estimators.flatMap((e, i) => tuningGrid(e, i, robustness.sampleSize)).filter((t, i, list) => !mainSpecs.has(t.configured.spec) && list.findIndex((u) => u.configured.spec === t.configured.spec) === i)
      : [];
  const perturbations = (robustness?.perturbations ?? []).map(parsePerturbation);
  return {
    plan: resolved.plan,
    scenarios,
    estimators,
    tuning,
    all: [...estimators, ...tuning.map((t) => t.configured)],
    perturbations,
    prepared: scenarios.map((s) => perturbations.map((p) => p.prepare(s))),
  };
}
