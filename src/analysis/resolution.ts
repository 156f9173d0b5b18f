/**
 * The robustness section's recording-resolution table: for each plan estimator, the recording step δ/σ (a
 * quantize perturbation's level) at which its RMSE doubles against the unquantized estimates on the same
 * draws, as the data arrive (raw) and with dequantize=auto (uniform jitter within the detected step; the twin
 * cells context.ts adds). Errors are against the underlying continuous truth, which quantizing does not move.
 *
 * Between two steps of the plan the step is interpolated linearly in log step against log RMSE (an assumption:
 * error grows like a power of the step between grid points); a step where some estimate fails counts as
 * doubled, without interpolation. Each row reports its worst scenario (the smallest step).
 */
import type { Cell } from './cells.js';
import { parsePerturbation } from '../harness/perturb.js';

/** Where the error doubles: at `step` (interpolated), by `step` (at or below it), or beyond `step` (not within the steps tried). */
export interface DoublingStep {
  relation: 'at' | 'by' | 'beyond';
  step: number;
}

export interface ResolutionPoint {
  step: number;
  /** RMSE on the quantized copies (null when some estimate failed). */
  rmse: number | null;
  failures: number;
}

export interface ResolutionMeasure {
  scenario: string;
  /** The plan estimator. */
  estimator: string;
  /** RMSE on the samples as drawn: the yardstick (the error doubles at twice this); null when some estimate failed there. */
  rmse: number | null;
  raw: { points: ResolutionPoint[]; doubling: DoublingStep };
  /** With dequantize=auto; null when the estimator does not take the setting (or sets it itself). */
  dequantized: { spec: string; points: ResolutionPoint[]; doubling: DoublingStep } | null;
}

export interface ResolutionRow {
  estimator: string;
  /** Worst scenario's doubling step, raw and dequantized. */
  raw: DoublingStep & { scenario: string };
  dequantized: (DoublingStep & { scenario: string }) | null;
}

/** The doubling step of an error curve over increasing steps, from the unquantized RMSE `base`. */
export function doublingStep(base: number, points: readonly ResolutionPoint[]): DoublingStep {
  const sorted = [...points].sort((a, b) => a.step - b.step);
  const target = 2 * base;
  for (let i = 0; i < sorted.length; i++) {
    const p = sorted[i];
    const doubled = p.rmse === null || !(p.rmse < target);
    if (!doubled) continue;
    if (i === 0 || p.rmse === null || !(base > 0)) return { relation: 'by', step: p.step };
    const before = sorted[i - 1];
    const e0 = Math.log(before.rmse!);
    const e1 = Math.log(p.rmse);
    // Both errors positive (the earlier one below the target, this one at or above it), so e1 > e0.
    const fraction = e1 > e0 ? (Math.log(target) - e0) / (e1 - e0) : 1;
    return { relation: 'at', step: Math.exp(Math.log(before.step) + fraction * (Math.log(p.step) - Math.log(before.step))) };
  }
  return { relation: 'beyond', step: sorted.length ? sorted[sorted.length - 1].step : NaN };
}

/** Which of two doubling steps is worse (doubles earlier): by its step, and at equal steps "by" before "at" before "beyond". */
function earlier(a: DoublingStep, b: DoublingStep): boolean {
  const order = { by: 0, at: 1, beyond: 2 };
  return a.step < b.step || (a.step === b.step && order[a.relation] < order[b.relation]);
}

function point(cell: Cell): ResolutionPoint {
  const level = parsePerturbation(cell.perturbation!).level ?? NaN;
  const failures = cell.scores.failures;
  return { step: level, rmse: failures > 0 || !Number.isFinite(cell.scores.rmse.value) ? null : cell.scores.rmse.value, failures };
}

/**
 * Measures and rows from a run's cells at the robustness size: `main` maps "scenario|spec" to the plan
 * estimators' unperturbed cells; `perturbed` holds every perturbed cell there (twins carry tuning.setting
 * 'dequantize' and their plan estimator in tuning.base).
 */
export function resolutionSection(
  planEstimators: readonly string[],
  main: ReadonlyMap<string, Cell>,
  perturbed: readonly Cell[],
): { measures: ResolutionMeasure[]; rows: ResolutionRow[] } {
  const quantized = perturbed.filter((c) => c.perturbation !== null && parsePerturbation(c.perturbation).kind === 'quantize');
  if (!quantized.length) return { measures: [], rows: [] };
  const measures: ResolutionMeasure[] = [];
  for (const original of main.values()) {
    if (!planEstimators.includes(original.estimator)) continue;
    const raw = quantized.filter((c) => c.scenario === original.scenario && c.estimator === original.estimator && c.tuning === null).map(point);
    if (!raw.length) continue;
    const twins = quantized.filter((c) => c.scenario === original.scenario && c.tuning?.base === original.estimator && c.tuning.setting === 'dequantize');
    const base = original.scores.failures > 0 ? NaN : original.scores.rmse.value;
    measures.push({
      scenario: original.scenario,
      estimator: original.estimator,
      rmse: Number.isFinite(base) ? base : null,
      raw: { points: raw, doubling: doublingStep(base, raw) },
      dequantized: twins.length ? { spec: twins[0].estimator, points: twins.map(point), doubling: doublingStep(base, twins.map(point)) } : null,
    });
  }
  const rows: ResolutionRow[] = [];
  for (const spec of planEstimators) {
    const mine = measures.filter((m) => m.estimator === spec);
    if (!mine.length) continue;
    let raw: ResolutionRow['raw'] | null = null;
    let dequantized: ResolutionRow['dequantized'] = null;
    for (const m of mine) {
      if (!raw || earlier(m.raw.doubling, raw)) raw = { ...m.raw.doubling, scenario: m.scenario };
      if (m.dequantized && (!dequantized || earlier(m.dequantized.doubling, dequantized))) dequantized = { ...m.dequantized.doubling, scenario: m.scenario };
    }
    rows.push({ estimator: spec, raw: raw!, dequantized });
  }
  return { measures, rows };
}

/** "0.043 SD", "≤ 0.01 SD", "> 0.3 SD". */
export function doublingText(d: DoublingStep): string {
  if (!Number.isFinite(d.step)) return '–';
  const step = Number(d.step.toPrecision(2));
  return d.relation === 'at' ? `${step} SD` : d.relation === 'by' ? `≤ ${step} SD` : `> ${step} SD`;
}
