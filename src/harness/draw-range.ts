/**
 * Draws beyond the double range. A law with heavy enough tails puts values past ±1.8e308 (Number.MAX_VALUE),
 * which its sampler returns as ±Infinity, and a perturbation can carry finite draws there (rescale:c=1e308);
 * every estimator then refuses the sample, and the failure would read as the estimators'.
 *
 * The rule (README, "Draws beyond the double range"): a plan draws N values of each of a law's d coordinates
 * (replicates × the sum of its sample sizes; for a perturbation, replicates × the robustness size). A scenario
 * is refused when, for some coordinate j and some side, its marginal law puts more than RANGE_RISK / (2dN)
 * beyond ±1.8e308: an accepted scenario's draws then hold such a value with probability at most RANGE_RISK
 * (a union bound over the N·d values and both sides). A perturbation is refused when it maps a point of the box
 * the same draws stay in with that probability, [F_j⁻¹(RANGE_RISK / 2dN), F_j⁻¹(1 − RANGE_RISK / 2dN)] in each
 * coordinate, beyond the range: the box's corners (its two extreme rows beyond MAX_CORNER_DIM dimensions).
 *
 *   scenarioRangeProblem(parseScenario('student-t:nu=0.001'), 300)   // "scenario student-t:...: its draws leave ..."
 *
 * The law's tails are not the whole story: a sampler can overflow on the way to a finite value (Student's t with
 * small ν divides by a chi-square variate that underflows to 0; the triangular law squares its width), and some
 * laws state no marginals. So the plan's own first replicate is drawn in advance at each sample size, as the run
 * will draw it, and perturbed as the run will perturb it (pilotRangeProblem): one that leaves the range refuses
 * the scenario or the perturbation too. What neither check sees, the runner still checks on every draw
 * (nonFiniteCount) and records as the scenario's failure, or the perturbation's, on that replicate.
 */
import type { Sample, Scenario, UnivariateDensity } from '../core/contracts.js';
import { formatNumber } from '../core/spec.js';
import { quantileOf, survivalOf, upperQuantileOf } from '../../scenarios/build.js';
import { parseScenario } from '../../scenarios/index.js';
import type { PreparedPerturbation } from './perturb.js';

/** The chance of any draw beyond the range that an accepted plan may carry: one in a million. */
export const RANGE_RISK = 1e-6;

/** Up to this dimension the perturbation probe takes every corner of the box (2^d rows); beyond, its two extreme rows. */
const MAX_CORNER_DIM = 12;

/** The first word of a failure's message when a draw, not an estimator, left the double range. */
export const OUT_OF_RANGE = 'out-of-range draw';

const RANGE = '±1.8e308';
const README = 'README, "Draws beyond the double range"';

/** Non-finite values in a sample (its Q sample too): what no estimator can take. */
export function nonFiniteCount(sample: Sample): number {
  let count = 0;
  for (const data of sample.q ? [sample.data, sample.q.data] : [sample.data]) {
    for (let i = 0; i < data.length; i++) if (!Number.isFinite(data[i])) count++;
  }
  return count;
}

/** A failure's message for a replicate whose draw (perturbation null) or perturbed copy left the double range. */
export function outOfRangeMessage(scenario: Scenario, perturbation: string | null): string {
  return perturbation === null
    ? `${OUT_OF_RANGE}: scenario ${scenario.id} drew values beyond ${RANGE} (±Infinity) on this replicate; the scenario's failure, not the estimator's`
    : `${OUT_OF_RANGE}: perturbation ${perturbation} took draws of ${scenario.id} beyond ${RANGE} (±Infinity) on this replicate; the perturbation's failure, not the estimator's`;
}

/** Each coordinate's law, as the draws have it: recorded[...] rounds its base's draws, so an overflow is the base's. */
function marginalsOf(scenario: Scenario): UnivariateDensity[] | undefined {
  const marginals = scenario.marginals ?? (scenario.recorded ? parseScenario(scenario.recorded.base).marginals : undefined);
  return marginals?.length === scenario.dim ? marginals : undefined;
}

/** P(X < −MAX) and P(X > MAX); a tail the law's functions cannot evaluate there (NaN) counts as none, for the runner to catch. */
function tailMasses(m: UnivariateDensity): [below: number, above: number] {
  const below = m.lower < -Number.MAX_VALUE ? m.cdf(-Number.MAX_VALUE) : 0;
  const above = m.upper > Number.MAX_VALUE ? survivalOf(m).survival(Number.MAX_VALUE) : 0;
  return [below > 0 ? below : 0, above > 0 ? above : 0];
}

function coordinateName(scenario: Scenario, j: number): string {
  return scenario.dim === 1 ? 'X' : `X${j + 1}`;
}

/** Two significant digits: 0.34, 5.9, 1.9e+8. */
function significant(x: number): string {
  const magnitude = Math.abs(x);
  return magnitude !== 0 && (magnitude >= 1e6 || magnitude < 1e-3) ? x.toExponential(1) : formatNumber(Number(x.toPrecision(2)));
}

/**
 * Why a scenario whose draws are `values` per coordinate cannot be scored (its draws leave the double range with
 * a chance above RANGE_RISK), or null. Laws without stated marginals give null: the runner checks their draws.
 */
export function scenarioRangeProblem(scenario: Scenario, values: number): string | null {
  const marginals = marginalsOf(scenario);
  if (!marginals) return null;
  const allowed = RANGE_RISK / (2 * scenario.dim * values);
  for (let j = 0; j < marginals.length; j++) {
    const [below, above] = tailMasses(marginals[j]);
    if (Math.max(below, above) <= allowed) continue;
    const name = coordinateName(scenario, j);
    const mass =
      below > 0 && above > 0
        ? `P(|${name}| > 1.8e308) = ${significant(below + above)}`
        : above > 0
          ? `P(${name} > 1.8e308) = ${significant(above)}`
          : `P(${name} < −1.8e308) = ${significant(below)}`;
    const expected = values * (below + above);
    const chance = -Math.expm1(values * Math.log1p(-Math.min(below + above, 1)));
    const outcome = expected >= 1 ? `about ${significant(expected)} such values` : `one with a chance of ${significant(chance)}`;
    return `scenario ${scenario.id}: its draws leave the double range (values beyond ${RANGE} are stored as ±Infinity, which no estimator can take): ${mass}, so the ${values} values drawn of ${name} would hold ${outcome}; choose parameters with lighter tails (${README})`;
  }
  return null;
}

/** The probe's rows: every corner of the box [lo, hi] up to MAX_CORNER_DIM dimensions, else its two extreme rows. */
function boxRows(lo: number[], hi: number[]): Float64Array {
  const d = lo.length;
  const rows = d <= MAX_CORNER_DIM ? 2 ** d : 2;
  const data = new Float64Array(rows * d);
  for (let r = 0; r < rows; r++) {
    for (let j = 0; j < d; j++) {
      const high = d <= MAX_CORNER_DIM ? ((r >> j) & 1) === 1 : r === 1;
      data[r * d + j] = high ? hi[j] : lo[j];
    }
  }
  return data;
}

/**
 * Why a perturbation cannot apply to a scenario's draws, `values` per coordinate (it maps a point of the box
 * those draws stay in beyond the double range), or null. Laws without stated marginals give null.
 */
export function perturbationRangeProblem(scenario: Scenario, spec: string, prepared: PreparedPerturbation, values: number): string | null {
  const marginals = marginalsOf(scenario);
  if (!marginals) return null;
  const level = RANGE_RISK / (2 * scenario.dim * values);
  const lo = marginals.map((m) => Math.max(m.lower, quantileOf(m)(level)));
  const hi = marginals.map((m) => Math.min(m.upper, upperQuantileOf(m)(level)));
  // A quantile the law's functions cannot give there (NaN) leaves the check to the runner.
  if (![...lo, ...hi].every(Number.isFinite)) return null;
  const before = boxRows(lo, hi);
  const probe: Sample = { n: before.length / scenario.dim, dim: scenario.dim, data: before.slice() };
  if (scenario.xDim !== undefined) probe.xDim = scenario.xDim;
  if (scenario.yDim !== undefined) probe.yDim = scenario.yDim;
  prepared.apply(probe, 0, 0);
  const i = probe.data.findIndex((x) => !Number.isFinite(x));
  if (i < 0) return null;
  const j = i % scenario.dim;
  return `perturbation ${spec} takes draws of ${scenario.id} beyond the double range (values beyond ${RANGE} are stored as ±Infinity, which no estimator can take): the ${values} values drawn of ${coordinateName(scenario, j)} lie within ${significant(lo[j])} to ${significant(hi[j])} but for a chance of ${RANGE_RISK}, and it maps ${significant(before[i])} to ${probe.data[i]}; choose a milder perturbation (${README})`;
}

/**
 * Why the plan's pilot draw (a replicate drawn in advance, exactly as the run draws it) shows the scenario or a
 * perturbation (`perturbation` its spec, null for the draw itself) leaving the double range, or null.
 */
export function pilotRangeProblem(scenario: Scenario, perturbation: string | null, sample: Sample, replicate: number): string | null {
  const count = nonFiniteCount(sample);
  if (count === 0) return null;
  const where = `replicate ${replicate} at n = ${sample.n}`;
  const what = `values beyond ${RANGE} (stored as ±Infinity, which no estimator can take)`;
  return perturbation === null
    ? `scenario ${scenario.id}: its draws leave the double range: ${where} holds ${count} ${what}, though its law's tails alone would not put them there (its sampler overflows on the way); choose other parameters (${README})`
    : `perturbation ${perturbation} takes draws of ${scenario.id} beyond the double range: on ${where} it makes ${count} ${what}; choose a milder perturbation (${README})`;
}
