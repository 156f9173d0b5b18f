/**
 * Everything a unit of work needs, rebuilt from the plan alone: the main thread and every worker build the
 * same context from the same plan, so they compute the same estimates.
 */
import type { Plan } from './plan.js';
import { resolveCheckedPlan } from './plan.js';
import { parsePerturbation } from './perturb.js';
import { tuningGrid } from './tuning.js';
import type { DequantizedTwin, WorkContext } from './work.js';
import { dequantizedVariant, type ConfiguredEstimator } from '../../estimators/index.js';

/**
 * With quantize perturbations, each plan estimator that takes `dequantize` and does not set it also runs with
 * dequantize=auto on the quantized copies (never on the sample as drawn, where it would repeat the plain
 * estimate): the robustness section then says at which recording step each one's error doubles, with and
 * without jitter within the step. Appended after the tuning points, so no other index moves.
 */
function dequantizedTwins(estimators: ConfiguredEstimator[], taken: Set<string>, quantized: boolean): DequantizedTwin[] {
  if (!quantized) return [];
  return estimators.flatMap((e, base) => {
    const configured = dequantizedVariant(e);
    if (!configured || taken.has(configured.spec)) return [];
    taken.add(configured.spec);
    return [{ base, configured }];
  });
}

/**
 * `shifts: false` (a worker) skips what only the scores need: the truth's shift under each perturbation, which
 * for a monotone map is a quadrature per coordinate; a worker only applies the perturbations, and the main thread
 * (which decides which ones apply) keeps the shifts.
 */
export function buildContext(plan: Plan, { shifts = true, replicateOffset = 0 }: { shifts?: boolean; replicateOffset?: number } = {}): WorkContext {
  // A Plan is a valid PlanInput: resolving it again yields the same plan, with its scenarios and estimators. runPlan
  // checked a plan it did not resolve itself, and a run file's plan was checked with the file.
  const resolved = resolveCheckedPlan(plan);
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
  const dequantized = dequantizedTwins(
    estimators,
    seen,
    perturbations.some((p) => p.kind === 'quantize'),
  );
  return {
    plan: resolved.plan,
    scenarios,
    estimators,
    tuning,
    dequantized,
    all: [...estimators, ...tuning.map((t) => t.configured), ...dequantized.map((t) => t.configured)],
    perturbations,
    prepared: scenarios.map((s) => perturbations.map((p) => p.prepare(s, { shiftNeeded: shifts }))),
    replicateOffset,
  };
}
