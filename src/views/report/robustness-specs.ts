/**
 * Vega-Lite specifications for the optional robustness section: tuning curves (one panel per scenario ×
 * estimator family, one sub-chart per varied setting) and the estimator × check verdict grid.
 */
import type { TopLevelSpec } from 'vega-lite';
import { formatValue, type Base } from '../../core/format.js';
import type { RobustnessGrid, TuningPanel } from './robustness-data.js';
import { CHART_CONFIG, estimatorHeatmapSpec } from './specs.js';
import { REFERENCE_COLOUR, VERDICT_COLOURS } from './palette.js';
import { textWidth } from './text-metrics.js';

export function tuningSpec(panel: TuningPanel, base: Base): TopLevelSpec {
  const charts = panel.settings.map((group) => {
    const colourScale = { domain: group.series.map((s) => s.name), range: group.series.map((s) => s.colour) };
    const shapeScale = { domain: group.series.map((s) => s.name), range: group.series.map((s) => s.shape) };
    const legend = { orient: 'bottom' as const, direction: 'vertical' as const, columns: 1, title: 'spread: range of the means / SD', labelLimit: 420 };
    // Settings may be words (a bin rule) or numbers: an ordinal axis in the grid's own order serves both.
    const wordy = group.values.some((v) => v.length > 5);
    const x = { field: 'value', type: 'ordinal' as const, sort: group.values, title: `setting ${group.setting}`, axis: { labelAngle: wordy ? -35 : 0 } };
    const y = { field: 'mean', type: 'quantitative' as const, scale: { zero: false }, title: `mean estimate (${base})` };
    const colour = { field: 'series', type: 'nominal' as const, scale: colourScale, legend };
    return {
      width: Math.max(170, group.values.length * 34),
      height: 220,
      layer: [
        ...(panel.truth === null
          ? []
          : [
              {
                data: { values: [{ truth: panel.truth }] },
                mark: { type: 'rule' as const, strokeDash: [5, 3], strokeWidth: 1.5, color: REFERENCE_COLOUR },
                encoding: { y: { field: 'truth', type: 'quantitative' as const } },
              },
            ]),
        {
          data: { values: group.points },
          layer: [
            { mark: { type: 'rule' as const, strokeWidth: 1.2 }, encoding: { x, y: { ...y, field: 'lower' }, y2: { field: 'upper' }, color: colour } },
            { mark: { type: 'line' as const, strokeWidth: 1.4 }, encoding: { x, y, color: colour } },
            {
              mark: { type: 'point' as const, filled: true, size: 50, opacity: 1 },
              encoding: { x, y, color: colour, shape: { field: 'series', type: 'nominal' as const, scale: shapeScale, legend } },
            },
          ],
        },
      ],
    };
  });
  return {
    title: {
      text: panel.scenario,
      subtitle: [
        `${panel.family} estimators: mean ±1 Monte-Carlo SE per setting`,
        ...(panel.truth === null ? [] : [`dashed line: true value ${formatValue(panel.truth, 6)} ${base}`]),
      ],
    },
    hconcat: charts,
    resolve: { scale: { color: 'independent', shape: 'independent', y: 'shared' } },
    config: CHART_CONFIG,
  };
}

export function robustnessGridSpec(grid: RobustnessGrid): TopLevelSpec {
  const verdicts = Object.keys(VERDICT_COLOURS);
  return estimatorHeatmapSpec({
    title: 'Robustness checks',
    subtitle: ['unit drift per perturbation and tuning spread', 'details in the table below'],
    // Wide enough for the longest label with its unit, measured ("pass 7e-16 nats", "fail <0.001 SD"), plus padding.
    columnStep: Math.max(84, Math.ceil(Math.max(...grid.rows.map((r) => textWidth(r.text, 12)))) + 16),
    x: { field: 'column', type: 'nominal', sort: grid.columns, title: 'check', axis: { orient: 'top', labelAngle: 0 } },
    estimators: grid.estimators,
    rows: grid.rows,
    colour: {
      field: 'verdict',
      type: 'nominal',
      scale: { domain: verdicts, range: verdicts.map((v) => VERDICT_COLOURS[v]) },
      legend: { title: 'verdict', orient: 'bottom', direction: 'horizontal' },
    },
    label: { text: { field: 'text', type: 'nominal' } },
    labelColour: 'black',
  });
}
