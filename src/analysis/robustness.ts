/**
 * The robustness section of a run: how far each estimate moves, beyond what the mathematics says it must,
 * under perturbations of the sample (paired with the unperturbed estimates on the same draws), and how far
 * the mean estimate moves across each estimator's tuning grid.
 *
 * Verdicts (thresholds are our choice, documented in the README):
 *   rescale      unit drift: pass if below 1e-9 nats (exact to rounding), warn below 0.1 SD, else fail
 *   monotone,    bias change: pass below 0.25 SD, warn below 1 SD, else fail
 *   affine
 *   quantize     threshold (largest step δ/σ up to which the bias changes by less than 0.25 SD and no
 *                estimate fails): pass at ≥ 0.1, warn at ≥ 0.01, else fail
 * The bias thresholds are sizes of effect, judged on the paired change itself: a change is not called small
 * because too few replicates could not show it (that would pass more often with fewer replicates), nor large
 * because many replicates can show a tiny one. The paired SE is reported beside each change.
 *   contaminate  shift per 1% of outliers: pass below 1 SD, warn below 5 SD, else fail
 *   tuning       spread (max − min of the mean across the grid, in SDs): pass below 1, warn below 3, else fail
 * SD is the estimator's own replicate SD on the unperturbed sample; each column reports the worst scenario.
 */
import type { Plan } from '../harness/plan.js';
import { parsePerturbation, type PerturbationKind } from '../harness/perturb.js';
import type { ValueWithSe } from './score.js';
import type { Cell, ScenarioInfo } from './cells.js';
import { parseScenario } from '../../scenarios/index.js';
import { parseEstimatorSpec } from '../../estimators/index.js';
import { tuningGrid } from '../harness/tuning.js';
import { resolutionSection, type ResolutionMeasure, type ResolutionRow } from './resolution.js';

export type Verdict = 'pass' | 'warn' | 'fail' | 'n/a';

export interface RobustnessMeasure {
  scenario: string;
  estimator: string;
  perturbation: string;
  kind: PerturbationKind;
  level: number | null;
  shift: number | null;
  /** mean |Ĥ(perturbed) − Ĥ(original) − shift| */
  drift: ValueWithSe;
  /** mean (Ĥ(perturbed) − Ĥ(original) − shift) */
  change: ValueWithSe;
  /** For quantize: h − Σ log δ_j, what a discretised variable's Shannon entropy approaches. */
  discreteEntropy: number | null;
  sd: number;
  /** Monte-Carlo SE of the unperturbed bias (SD/√m): the yardstick of the quantization threshold. */
  biasSe: number;
  /** Replicates that fail only on the perturbed sample (the estimator's own failures are not counted). */
  failures: number;
}

export interface TuningCurve {
  scenario: string;
  estimator: string;
  setting: string;
  points: { value: number | string; spec: string; mean: ValueWithSe; sd: number; failures: number }[];
  spread: number;
}

export interface RobustnessRow {
  estimator: string;
  /** Per column: its value (the unit of `robustnessValue`), verdict and detail; `sd`, the value in the estimator's SDs where the value is in nats and the verdict is judged in SDs. */
  columns: Record<string, { value: number | null; verdict: Verdict; detail: string; sd?: number }>;
}

export interface RobustnessSection {
  sampleSize: number;
  replicates: number;
  perturbations: string[];
  measures: RobustnessMeasure[];
  tuning: TuningCurve[];
  table: RobustnessRow[];
  /**
   * With quantize perturbations: per plan estimator, the recording step at which its RMSE doubles, raw and with
   * dequantize=auto (resolution.ts). Absent from run files of plans without quantize perturbations.
   */
  resolution?: { measures: ResolutionMeasure[]; rows: ResolutionRow[] };
}

export const ROBUSTNESS_COLUMNS = ['rescale', 'monotone', 'affine', 'quantize', 'contaminate', 'tuning'] as const;
const EXACT_DRIFT = 1e-9;

function meanSe(values: number[]): ValueWithSe {
  const m = values.length;
  if (!m) return { value: NaN, se: NaN };
  const mean = values.reduce((a, b) => a + b, 0) / m;
  if (m < 2) return { value: mean, se: NaN };
  const variance = values.reduce((a, v) => a + (v - mean) ** 2, 0) / (m - 1);
  return { value: mean, se: Math.sqrt(variance / m) };
}

function pairedMeasure(perturbed: Cell, original: Cell, scenario: ScenarioInfo): RobustnessMeasure {
  const p = parsePerturbation(perturbed.perturbation!);
  const shift = perturbed.shift ?? 0;
  const diffs: number[] = [];
  perturbed.estimates.forEach((v, r) => {
    const o = original.estimates[r];
    if (v !== null && o !== null) diffs.push(v - o - shift);
  });
  let discreteEntropy: number | null = null;
  if (p.kind === 'quantize') {
    const prepared = p.prepare(parseScenario(scenario.id));
    if ('logCellVolume' in prepared && prepared.logCellVolume !== undefined) discreteEntropy = scenario.truth - prepared.logCellVolume;
  }
  return {
    scenario: scenario.id,
    estimator: original.estimator,
    perturbation: p.spec,
    kind: p.kind,
    level: p.level,
    shift: perturbed.shift,
    drift: meanSe(diffs.map(Math.abs)),
    change: meanSe(diffs),
    discreteEntropy,
    sd: original.scores.sd.value,
    biasSe: original.scores.bias.se,
    failures: perturbed.estimates.filter((v, r) => v === null && original.estimates[r] !== null).length,
  };
}

function worst(verdicts: Verdict[]): Verdict {
  for (const v of ['fail', 'warn', 'pass'] as const) if (verdicts.includes(v)) return v;
  return 'n/a';
}

function fmt(x: number): string {
  if (!Number.isFinite(x)) return '–';
  return Math.abs(x) < 1e-3 && x !== 0 ? x.toExponential(1) : x.toPrecision(2);
}

/** A bias change below this many of the estimator's own SDs is negligible beside its sampling spread (our threshold). */
export const NEGLIGIBLE_BIAS_SD = 0.25;

/** Largest quantization step up to which the bias changes by less than NEGLIGIBLE_BIAS_SD SDs and no estimate fails. */
export function quantizationThreshold(measures: RobustnessMeasure[]): number {
  const sorted = [...measures].sort((a, b) => (a.level ?? 0) - (b.level ?? 0));
  let threshold = 0;
  for (const m of sorted) {
    const ok = m.failures === 0 && Number.isFinite(m.change.value) && Math.abs(m.change.value) < NEGLIGIBLE_BIAS_SD * m.sd;
    if (!ok) break;
    threshold = m.level ?? 0;
  }
  return threshold;
}

function columnFor(kind: string, measures: RobustnessMeasure[], curves: TuningCurve[]): RobustnessRow['columns'][string] {
  if (kind === 'tuning') {
    if (!curves.length) return { value: null, verdict: 'n/a', detail: 'no tuning grid' };
    const spread = Math.max(...curves.map((c) => c.spread));
    const verdict: Verdict = !Number.isFinite(spread) ? 'fail' : spread < 1 ? 'pass' : spread < 3 ? 'warn' : 'fail';
    const top = curves.find((c) => c.spread === spread)!;
    return { value: spread, verdict, detail: `spread ${fmt(spread)} SD over ${top.setting} on ${top.scenario}` };
  }
  const tried = measures.filter((m) => m.kind === kind);
  if (!tried.length) return { value: null, verdict: 'n/a', detail: 'not run' };
  // A perturbation is judged against the unperturbed estimates' spread; where the estimator failed on (nearly)
  // every unperturbed draw there is no spread and nothing to compare, so that scenario is left out, not failed.
  const mine = tried.filter((m) => Number.isFinite(m.sd));
  if (!mine.length) return { value: null, verdict: 'n/a', detail: 'the estimator failed on the unperturbed draws' };
  const skipped = new Set(tried.filter((m) => !Number.isFinite(m.sd)).map((m) => m.scenario)).size;
  const column = judge(kind, mine);
  const withSd = column.sd !== undefined && !Number.isFinite(column.sd) ? { ...column, sd: undefined } : column;
  return skipped
    ? { ...withSd, detail: `${withSd.detail}; ${skipped} scenario${skipped > 1 ? 's' : ''} not judged (the estimator failed unperturbed)` }
    : withSd;
}

function judge(kind: string, mine: RobustnessMeasure[]): RobustnessRow['columns'][string] {
  switch (kind) {
    case 'rescale': {
      const drift = Math.max(...mine.map((m) => m.drift.value));
      const ratio = Math.max(...mine.map((m) => m.drift.value / m.sd));
      const failed = mine.some((m) => m.failures > 0);
      const verdict: Verdict = failed ? 'fail' : drift <= EXACT_DRIFT ? 'pass' : ratio < 0.1 ? 'warn' : 'fail';
      const broken = mine.reduce((sum, m) => sum + m.failures, 0);
      return {
        value: drift,
        verdict,
        detail: `max unit drift ${fmt(drift)} nats (${fmt(ratio)} SD)${broken ? `; ${broken} estimates fail only after rescaling` : ''}`,
        sd: ratio,
      };
    }
    case 'monotone':
    case 'affine': {
      const verdicts = mine.map((m): Verdict => {
        if (m.failures > 0) return 'fail';
        const change = Math.abs(m.change.value);
        if (change < NEGLIGIBLE_BIAS_SD * m.sd) return 'pass';
        return change < m.sd ? 'warn' : 'fail';
      });
      const ratio = Math.max(...mine.map((m) => Math.abs(m.change.value) / m.sd));
      const top = mine.find((m) => Math.abs(m.change.value) / m.sd === ratio) ?? mine[0];
      return { value: ratio, verdict: worst(verdicts), detail: `bias change up to ${fmt(top.change.value)} ± ${fmt(top.change.se)} nats (${fmt(ratio)} SD)` };
    }
    case 'quantize': {
      const byScenario = new Map<string, RobustnessMeasure[]>();
      for (const m of mine) byScenario.set(m.scenario, [...(byScenario.get(m.scenario) ?? []), m]);
      const thresholds = [...byScenario.values()].map(quantizationThreshold);
      const threshold = Math.min(...thresholds);
      const finest = Math.min(...mine.map((m) => m.level ?? Infinity));
      const verdict: Verdict = threshold >= 0.1 ? 'pass' : threshold >= 0.01 ? 'warn' : 'fail';
      return {
        value: threshold,
        verdict,
        detail:
          threshold > 0
            ? `bias moves by less than ${NEGLIGIBLE_BIAS_SD} SD up to δ = ${fmt(threshold)} σ`
            : `bias moves by ${NEGLIGIBLE_BIAS_SD} SD or more (or estimates fail) at the finest step tried, δ = ${fmt(finest)} σ` +
              (finest > 0.01 ? '; no finer step was tried, so the safe step may lie anywhere below it' : ''),
      };
    }
    case 'contaminate': {
      const perPercent = mine.map((m) => m.change.value / (100 * (m.level ?? 0.01)));
      const ratio = Math.max(...mine.map((m, i) => Math.abs(perPercent[i]) / m.sd));
      const failed = mine.some((m) => m.failures > 0);
      const verdict: Verdict = failed || !Number.isFinite(ratio) ? 'fail' : ratio < 1 ? 'pass' : ratio < 5 ? 'warn' : 'fail';
      const top = perPercent[mine.findIndex((m, i) => Math.abs(perPercent[i]) / m.sd === ratio)] ?? perPercent[0];
      return { value: top, verdict, detail: `${fmt(top)} nats per 1% of outliers (${fmt(ratio)} SD)`, sd: ratio };
    }
    default:
      return { value: null, verdict: 'n/a', detail: '' };
  }
}

export function robustnessSection(plan: Plan, cells: Cell[], scenarios: Map<string, ScenarioInfo>): RobustnessSection {
  const robustness = plan.robustness!;
  const n = robustness.sampleSize;
  const main = new Map(cells.filter((c) => c.role === 'main' && c.n === n).map((c) => [`${c.scenario}|${c.estimator}`, c]));
  const measures = cells
    .filter((c) => c.role === 'perturbed' && c.n === n && c.tuning === null)
    .flatMap((c) => {
      const original = main.get(`${c.scenario}|${c.estimator}`);
      return original ? [pairedMeasure(c, original, scenarios.get(c.scenario)!)] : [];
    });
  const bySpec = new Map(cells.filter((c) => c.n === n && c.role !== 'perturbed').map((c) => [`${c.scenario}|${c.estimator}`, c]));
  const curves: TuningCurve[] = [];
  if (robustness.tuning) {
    plan.estimators.forEach((spec, index) => {
      const grid = tuningGrid(parseEstimatorSpec(spec), index, n);
      const settings = [...new Set(grid.map((g) => g.setting))];
      for (const scenario of plan.scenarios) {
        const reference = main.get(`${scenario}|${spec}`);
        if (!reference) continue;
        for (const setting of settings) {
          const points = grid
            .filter((g) => g.setting === setting)
            .flatMap((g) => {
              const cell = bySpec.get(`${scenario}|${g.configured.spec}`);
              return cell
                ? [{ value: g.value, spec: g.configured.spec, mean: cell.scores.mean, sd: cell.scores.sd.value, failures: cell.scores.failures }]
                : [];
            });
          if (points.length < 2) continue;
          const means = points.map((p) => p.mean.value).filter(Number.isFinite);
          const sd = reference.scores.sd.value;
          const spread = means.length === points.length && sd > 0 ? (Math.max(...means) - Math.min(...means)) / sd : Infinity;
          curves.push({ scenario, estimator: spec, setting, points, spread });
        }
      }
    });
  }
  const table: RobustnessRow[] = plan.estimators
    .filter((spec) => [...main.values()].some((c) => c.estimator === spec))
    .map((spec) => ({
      estimator: spec,
      columns: Object.fromEntries(
        ROBUSTNESS_COLUMNS.map((kind) => [
          kind,
          columnFor(
            kind,
            measures.filter((m) => m.estimator === spec),
            curves.filter((c) => c.estimator === spec),
          ),
        ]),
      ),
    }));
  const resolution = resolutionSection(
    plan.estimators,
    main,
    cells.filter((c) => c.role === 'perturbed' && c.n === n),
  );
  return {
    sampleSize: n,
    replicates: plan.replicates,
    perturbations: robustness.perturbations,
    measures,
    tuning: curves,
    table,
    ...(resolution.measures.length ? { resolution } : {}),
  };
}
