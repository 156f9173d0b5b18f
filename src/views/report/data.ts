/**
 * Chart data from a run file: flat rows in the output unit, one function per chart. Run files write NaN as
 * null, so every number read here is checked before use. Estimators keep one colour and shape across all
 * charts: their position in the plan picks both.
 */
import { toBase, type Base } from '../../core/format.js';
import type { Quantity } from '../../core/contracts.js';
import { rankedGroups, type Cell, type RunFile, type ScenarioInfo } from '../../analysis/results.js';
import { estimatorLabel } from '../../../estimators/index.js';
import { estimatorColour, estimatorShape } from './palette.js';

/** A number that can be drawn (not null, NaN or infinite). */
export function finite(x: unknown): x is number {
  return typeof x === 'number' && Number.isFinite(x);
}

/** One estimator as it appears in a chart: its legend text and its fixed colour and shape. */
export interface Series {
  spec: string;
  name: string;
  colour: string;
  shape: string;
}

export interface ReportData {
  run: RunFile;
  base: Base;
  /** Estimator specs in plan order (then any others met in cells, for hand-made runs). */
  estimators: string[];
  series(spec: string, name?: string): Series;
  label(spec: string): string;
}

export function reportData(run: RunFile, base: Base): ReportData {
  const estimators = [...new Set([...run.plan.estimators, ...run.cells.filter(isMainCell).map((c) => c.estimator)])];
  const index = new Map(estimators.map((e, i) => [e, i]));
  const labels = new Map<string, string>();
  const label = (spec: string) => {
    if (!labels.has(spec)) labels.set(spec, estimatorLabel(spec));
    return labels.get(spec)!;
  };
  return {
    run,
    base,
    estimators,
    label,
    series(spec, name) {
      let i = index.get(spec);
      if (i === undefined) {
        i = estimators.length;
        estimators.push(spec);
        index.set(spec, i);
      }
      return { spec, name: name ?? label(spec), colour: estimatorColour(i), shape: estimatorShape(i) };
    },
  };
}

/** The plan's own estimators on the samples as drawn (not tuning-grid points, not perturbed copies). */
export function isMainCell(cell: Cell): boolean {
  return (cell.role ?? 'main') === 'main' && cell.perturbation === null;
}

/** Main cells of one scenario, in plan order of estimators then n. */
export function scenarioCells(data: ReportData, scenario: string): Cell[] {
  const order = new Map(data.estimators.map((e, i) => [e, i]));
  return data.run.cells
    .filter((c) => c.scenario === scenario && isMainCell(c))
    .sort((a, b) => (order.get(a.estimator) ?? 0) - (order.get(b.estimator) ?? 0) || a.n - b.n);
}

export function sampleSizes(cells: Cell[]): number[] {
  return [...new Set(cells.map((c) => c.n))].sort((a, b) => a - b);
}

/** A fitted rate as legend text; the fit leaves out points within 2 SE of zero, so it may have none. */
export function slopeText(fit: { slope: number; se: number | null } | null | undefined, metric: 'bias' | 'rmse' = 'rmse'): string {
  // The fit needs two sample sizes whose value clears 2 SE (score.ts, fitRate); fewer, and there is no slope.
  if (!fit || !finite(fit.slope)) return metric === 'bias' ? 'no slope (fewer than two n with |bias| > 2 SE)' : 'no slope (fewer than two n with RMSE > 2 SE)';
  return `slope ${fit.slope.toFixed(2).replace('-', '−')}${finite(fit.se) ? ` ± ${fit.se.toFixed(2)}` : ''}`;
}

export interface ConvergencePoint {
  series: string;
  n: number;
  /** n nudged sideways per estimator on the log axis, so error bars at one n do not hide each other. */
  x: number;
  value: number;
  lower: number;
  upper: number;
  /** |bias| within 2 SE of zero: drawn as an open mark, since its logarithm is mostly noise. */
  clear: boolean;
}

export interface ConvergenceData {
  scenario: ScenarioInfo;
  metric: 'bias' | 'rmse';
  sizes: number[];
  points: ConvergencePoint[];
  series: Series[];
}

/** |bias| or RMSE against n with ±1 Monte-Carlo SE, legend text carrying the fitted slope from run.rates. */
export function convergenceData(data: ReportData, scenario: ScenarioInfo, metric: 'bias' | 'rmse'): ConvergenceData {
  const cells = scenarioCells(data, scenario.id);
  const specs = [...new Set(cells.map((c) => c.estimator))];
  const series = specs.map((spec) => {
    const rate = data.run.rates.find((r) => r.scenario === scenario.id && r.estimator === spec);
    return data.series(spec, `${data.label(spec)}: ${slopeText(rate?.[metric], metric)}`);
  });
  const name = new Map(series.map((s) => [s.spec, s.name]));
  const usable = cells.flatMap((c) => {
    const score = c.scores[metric];
    const value = metric === 'bias' && finite(score.value) ? Math.abs(score.value) : score.value;
    return finite(value) && value > 0 ? [{ cell: c, value: toBase(value, data.base), se: finite(score.se) ? toBase(score.se, data.base) : 0 }] : [];
  });
  // Lower error-bar ends at or below zero cannot be drawn on a log axis: stop them at half the smallest value.
  const floor = Math.min(...usable.map((u) => u.value)) / 2;
  const dodge = (spec: string) => {
    const i = specs.indexOf(spec);
    return specs.length > 1 ? (i / (specs.length - 1) - 0.5) * 0.06 : 0;
  };
  const points = usable.map(({ cell, value, se }) => ({
    series: name.get(cell.estimator)!,
    n: cell.n,
    x: cell.n * 10 ** dodge(cell.estimator),
    value,
    lower: Math.max(value - se, floor),
    upper: value + se,
    clear: metric === 'bias' ? value < 2 * se : false,
  }));
  return { scenario, metric, sizes: sampleSizes(cells), points, series };
}

export interface DistributionData {
  scenario: ScenarioInfo;
  n: number;
  truth: number;
  values: { series: string; value: number }[];
  series: Series[];
}

/** Every replicate estimate at the largest n, per estimator; failed replicates are counted in the label. */
export function distributionData(data: ReportData, scenario: ScenarioInfo): DistributionData | null {
  const cells = scenarioCells(data, scenario.id);
  if (!cells.length) return null;
  const n = Math.max(...cells.map((c) => c.n));
  const atLargest = cells.filter((c) => c.n === n);
  const series = atLargest.map((c) => {
    const failed = c.estimates.filter((v) => !finite(v)).length;
    return data.series(c.estimator, `${data.label(c.estimator)}${failed ? ` (${failed} failed)` : ''}`);
  });
  const values = atLargest.flatMap((c, i) => c.estimates.filter(finite).map((v) => ({ series: series[i].name, value: toBase(v, data.base) })));
  return { scenario, n, truth: toBase(scenario.truth, data.base), values, series };
}

export interface EfficiencyData {
  rows: { scenario: string; series: string; n: number; value: number; lower: number; upper: number }[];
  scenarios: string[];
  series: Series[];
  /** The ratio and the variance it divides by, in the run's quantity (efficiencyFormula). */
  formula: EfficiencyFormula;
}

export interface EfficiencyFormula {
  /** e.g. "n·Var(Î)/Var(i(X; Y))" */
  ratio: string;
  /** The variance in the denominator, e.g. "Var(i(X; Y))", and what it is where the symbol needs saying. */
  variance: string;
  meaning: string;
}

/**
 * What the efficiency ratio divides by: the variance of the log-density for entropy, of the information
 * density for mutual information (the scenarios' logDensityVariance holds whichever the quantity needs).
 */
export function efficiencyFormula(quantity: Quantity): EfficiencyFormula {
  switch (quantity) {
    case 'mutual-information':
      return { ratio: 'n·Var(Î)/Var(i(X; Y))', variance: 'Var(i(X; Y))', meaning: 'i = log f(x, y)/(f(x) f(y)), the information density' };
    case 'conditional-mutual-information':
      return {
        ratio: 'n·Var(Î)/Var(i(X; Y | Z))',
        variance: 'Var(i(X; Y | Z))',
        meaning: 'i = log f(x, y, z) f(z)/(f(x, z) f(y, z)), the conditional information density',
      };
    default:
      return { ratio: 'n·Var(Ĥ)/Var(log f(X))', variance: 'Var(log f(X))', meaning: 'f the density' };
  }
}

/** The efficiency ratio at each scenario's largest n; a ratio, so the same in nats and bits. */
export function efficiencyData(data: ReportData): EfficiencyData {
  const rows: EfficiencyData['rows'] = [];
  const specs = new Set<string>();
  for (const info of data.run.scenarios) {
    const cells = scenarioCells(data, info.id);
    if (!cells.length) continue;
    const n = Math.max(...cells.map((c) => c.n));
    for (const c of cells) {
      const e = c.scores.efficiency;
      if (c.n !== n || !e || !finite(e.value) || e.value <= 0) continue;
      specs.add(c.estimator);
      const se = finite(e.se) ? e.se : 0;
      rows.push({ scenario: info.id, series: data.label(c.estimator), n, value: e.value, lower: Math.max(e.value - se, e.value / 4), upper: e.value + se });
    }
  }
  const series = data.estimators.filter((e) => specs.has(e)).map((e) => data.series(e));
  return { rows, scenarios: [...new Set(rows.map((r) => r.scenario))], series, formula: efficiencyFormula(data.run.plan.quantity) };
}

export interface RankGrid {
  /** The 'all' row also carries the mean relative rank (src/analysis/ranking.ts), which orders the estimators. */
  rows: { estimator: string; group: string; meanRank: number; cells: number; failedCells: number; relative?: number }[];
  estimators: string[];
  groups: string[];
  maxRank: number;
}

/** run.overall as a grid, rows sorted by the average rank over all cells. */
export function rankGrid(data: ReportData): RankGrid | null {
  const { run } = data;
  if (!run.overall.length) return null;
  const groups = rankedGroups(run);
  const rows: RankGrid['rows'] = [];
  const totals: { estimator: string; mean: number }[] = [];
  for (const o of run.overall) {
    const estimator = data.label(o.estimator);
    for (const g of groups) {
      const cell = o.groups[g];
      if (!cell || !finite(cell.meanRank)) continue;
      rows.push({ estimator, group: g, meanRank: cell.meanRank, cells: cell.cells, failedCells: cell.failedCells });
    }
    const relative = o.all.meanRelativeRank;
    rows.push({
      estimator,
      group: 'all',
      meanRank: o.all.meanRank,
      cells: o.all.cells,
      failedCells: o.all.failedCells,
      ...(relative !== undefined ? { relative } : {}),
    });
    totals.push({ estimator, mean: relative ?? o.all.meanRank });
  }
  totals.sort((a, b) => a.mean - b.mean || a.estimator.localeCompare(b.estimator));
  const maxRank = Math.max(2, ...run.rankings.map((r) => r.entries.length));
  return { rows, estimators: totals.map((t) => t.estimator), groups: [...groups, 'all'], maxRank };
}
