/**
 * Notes on a plan whose estimators aim at another value than a scenario's truth states. A transfer-entropy
 * estimator that conditions on k past values of the target estimates TE at that k; a te-var1 scenario states its
 * truth for its own `history` (default 1), and for a target that is not Markov the two differ (by 0.0045 nats for
 * te-var1:a=0.3,b=0.6,cXY=0.5,cYX=0.2 between k = 1 and k = 3), so the estimator's bias there would include a
 * difference that is not its error. The note names the estimator, the value of its own target, and the scenario
 * spec that states it.
 */
import type { Scenario } from '../core/contracts.js';
import { formatNumber } from '../core/spec.js';
import type { ConfiguredEstimator } from '../../estimators/index.js';
import { parseScenario } from '../../scenarios/index.js';
import { atHistories } from '../../scenarios/transfer-entropy.js';

/** Differences below this are rounding, not another target. */
const SAME_TARGET = 1e-12;

function setting(estimator: ConfiguredEstimator, name: string): number | undefined {
  const value = estimator.settings[name];
  return typeof value === 'number' ? value : undefined;
}

/** One note per transfer-entropy estimator whose histories give some scenario of the plan another true value. */
export function historyNotes(scenarios: readonly Scenario[], estimators: readonly ConfiguredEstimator[]): string[] {
  const notes: string[] = [];
  for (const estimator of estimators) {
    const k = setting(estimator, 'history');
    const l = setting(estimator, 'sourceHistory');
    if (estimator.estimator.quantity !== 'transfer-entropy' || k === undefined) continue;
    const differing = scenarios.flatMap((scenario) => {
      if (scenario.params.history === k && scenario.params.sourceHistory === (l ?? 1)) return [];
      const matched = atHistories(scenario, k, l);
      if (matched === null) return [];
      const own = parseScenario(matched);
      return Math.abs(own.truth - scenario.truth) > SAME_TARGET ? [{ scenario, own }] : [];
    });
    if (!differing.length) continue;
    const largest = differing.reduce((a, b) => (Math.abs(b.own.truth - b.scenario.truth) > Math.abs(a.own.truth - a.scenario.truth) ? b : a));
    const show = (x: number) => formatNumber(Number(x.toPrecision(5)));
    const { scenario, own } = largest;
    const others = differing.length > 1 ? ` (and ${differing.length - 1} more scenario${differing.length > 2 ? 's' : ''} of the plan)` : '';
    notes.push(
      `${estimator.spec} conditions on k = ${k} past ${k === 1 ? 'value' : 'values'} of the target and l = ${l ?? 1} of the source, but ${scenario.id}${others} ` +
        `states its truth for k = ${scenario.params.history}, l = ${scenario.params.sourceHistory}: ${show(scenario.truth)} nats, against ${show(own.truth)} at the estimator's histories, ` +
        `so its bias there includes a difference of ${show(own.truth - scenario.truth)} nats that is not its error; ` +
        `to score it against its own target, benchmark ${own.id}`,
    );
  }
  return notes;
}
