/**
 * The optional `robustness` section of a run file (unit drift under perturbations, tuning spread) and the
 * rows its charts draw. The section may be null (plans without perturbations or tuning): the report then
 * leaves it out. Run files write NaN as null, so numbers are checked with finite() despite their types.
 */
import { toBase } from '../../core/format.js';
import type { RunFile } from '../../analysis/results.js';
import { ROBUSTNESS_COLUMNS, type RobustnessSection, type Verdict } from '../../analysis/robustness.js';
import { finite, type ReportData, type Series } from './data.js';
import { robustnessText, smallestQuantizeStep } from '../verdict-text.js';

export type { RobustnessSection };

/** The section when the run has one (runs without perturbations or tuning have null). */
export function robustnessOf(run: RunFile): RobustnessSection | null {
  const section = run.robustness as RobustnessSection | null | undefined;
  return section && typeof section === 'object' ? section : null;
}

const KNOWN_COLUMNS: readonly string[] = ROBUSTNESS_COLUMNS;

export interface RobustnessGrid {
  rows: { estimator: string; column: string; verdict: Verdict; text: string; detail: string }[];
  estimators: string[];
  columns: string[];
}

/** Columns named in the table, known ones first in their usual order; each cell's text is its verdict with value and unit, as in the tables ("fail 11 SD"). */
export function robustnessGrid(data: ReportData, section: RobustnessSection): RobustnessGrid | null {
  if (!section.table.length) return null;
  const seen = new Set(section.table.flatMap((r) => Object.keys(r.columns)));
  const columns = [...KNOWN_COLUMNS.filter((c) => seen.has(c)), ...[...seen].filter((c) => !KNOWN_COLUMNS.includes(c))];
  const rows: RobustnessGrid['rows'] = [];
  const finest = smallestQuantizeStep(section);
  for (const row of section.table) {
    const estimator = data.label(row.estimator);
    for (const column of columns) {
      const cell = row.columns[column];
      const verdict: Verdict = cell?.verdict ?? 'n/a';
      const text = cell ? robustnessText(column, verdict, cell.value, finest, { base: data.base, sd: cell.sd }) : '–';
      rows.push({ estimator, column, verdict, text, detail: cell?.detail ?? '' });
    }
  }
  return { rows, estimators: section.table.map((r) => data.label(r.estimator)), columns };
}

export interface TuningPanel {
  scenario: string;
  family: string;
  /** One sub-chart per varied setting: its values keep the order the grid gave them. */
  settings: {
    setting: string;
    values: string[];
    points: { series: string; value: string; mean: number; lower: number; upper: number }[];
    series: Series[];
  }[];
  truth: number | null;
}

/** Tuning curves grouped one panel per scenario × estimator family. */
export function tuningPanels(data: ReportData, section: RobustnessSection, familyOf: (estimator: string) => string): TuningPanel[] {
  const panels = new Map<string, TuningPanel>();
  for (const curve of section.tuning) {
    const family = familyOf(curve.estimator);
    const key = `${curve.scenario}|${family}`;
    if (!panels.has(key)) {
      const info = data.run.scenarios.find((s) => s.id === curve.scenario);
      panels.set(key, { scenario: curve.scenario, family, settings: [], truth: info && finite(info.truth) ? toBase(info.truth, data.base) : null });
    }
    const panel = panels.get(key)!;
    let group = panel.settings.find((s) => s.setting === curve.setting);
    if (!group) {
      group = { setting: curve.setting, values: [], points: [], series: [] };
      panel.settings.push(group);
    }
    const spread = finite(curve.spread) ? `spread ${curve.spread.toFixed(2)} SD` : 'spread –';
    const series = data.series(curve.estimator, `${data.label(curve.estimator)}: ${spread}`);
    group.series.push(series);
    for (const p of curve.points) {
      const value = String(p.value);
      if (!group.values.includes(value)) group.values.push(value);
      if (!finite(p.mean.value)) continue;
      const mean = toBase(p.mean.value, data.base);
      const se = finite(p.mean.se) ? toBase(p.mean.se, data.base) : 0;
      group.points.push({ series: series.name, value, mean, lower: mean - se, upper: mean + se });
    }
  }
  // Numeric settings (k, a scale factor) read best in numeric order; words keep the grid's order.
  for (const panel of panels.values()) {
    for (const group of panel.settings) {
      if (group.values.every((v) => v.trim() !== '' && Number.isFinite(Number(v)))) group.values.sort((a, b) => Number(a) - Number(b));
    }
  }
  return [...panels.values()];
}
