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
  // A Plan is a valid PlanInput: resolving it again yields the same plan, with its scenarios and estimators.
  const resolved = resolvePlan(plan);
  const { scenarios, estimators } = resolved;
  const robustness = resolved.plan.robustness;
  // Tuning points that are not a plan estimator, each spec once (the first grid that reaches it keeps it).
  const seen = new Set(estimators.map((e) => e.spec));
  const tuning =
    robustness?.tuning === true
      ? estimators
          .flatMap((e, i) => tuningGrid(e, i, robustness.sampleSize))
          .filter((t) => !seen.has(t.configured.spec) && Boolean(seen.add(t.configured.spec)))
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
