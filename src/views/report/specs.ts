/**
 * Vega-Lite specifications of the benchmark charts, pure functions of the rows in data.ts. Every axis title
 * names its unit; estimators keep their colour and shape from palette.ts through explicit scale ranges, so a
 * chart that shows only some estimators still colours them like the others.
 */
import type { TopLevelSpec } from 'vega-lite';
import type { Encoding } from 'vega-lite/types_unstable/encoding.js';
import { formatValue, type Base } from '../../core/format.js';
import type { ConvergenceData, DistributionData, EfficiencyData, RankGrid, Series } from './data.js';
import { RANK_SCHEME, REFERENCE_COLOUR } from './palette.js';

/** System fonts only: the report must render offline, with nothing fetched. */
export const CHART_FONT = 'system-ui, -apple-system, "Segoe UI", Roboto, "Helvetica Neue", Arial, sans-serif';

export const CHART_CONFIG = {
  font: CHART_FONT,
  background: 'white',
  padding: 8,
  view: { stroke: '#bbbbbb' },
  axis: { labelFontSize: 11, titleFontSize: 12, titleFontWeight: 'normal' as const, gridColor: '#e6e6e6' },
  legend: { labelFontSize: 11, titleFontSize: 11, labelLimit: 420, titleLimit: 420, symbolSize: 70 },
  title: { fontSize: 14, subtitleFontSize: 11, subtitleColor: '#555555', anchor: 'start' as const, offset: 10 },
};

const WIDTH = 340;

type Channels = Encoding<string>;

function colourScale(series: Series[]) {
  return { domain: series.map((s) => s.name), range: series.map((s) => s.colour) };
}

function shapeScale(series: Series[]) {
  return { domain: series.map((s) => s.name), range: series.map((s) => s.shape) };
}

function bottomLegend(title: string | null = null) {
  return { orient: 'bottom' as const, direction: 'vertical' as const, columns: 1, title, labelLimit: 420 };
}

/** Sample sizes as plain integers: these are counts, and "4k" reads worse than 4000 here. */
function sizeAxis(sizes: number[]) {
  return { values: sizes, format: 'd', title: 'sample size n', grid: true };
}

export function convergenceSpec(chart: ConvergenceData, base: Base): TopLevelSpec {
  const { sizes, series } = chart;
  const yTitle = chart.metric === 'bias' ? `|bias| (${base})` : `RMSE (${base})`;
  const x = {
    field: 'x',
    type: 'quantitative' as const,
    scale: { type: 'log' as const, domain: [sizes[0] / 1.6, sizes[sizes.length - 1] * 1.6], nice: false },
    axis: sizeAxis(sizes),
  };
  const y = { field: 'value', type: 'quantitative' as const, scale: { type: 'log' as const }, title: yTitle };
  const what = chart.metric === 'bias' ? '|bias|' : 'RMSE';
  const legend = bottomLegend(`fitted slope of log ${what} on log n`);
  const colour = { field: 'series', type: 'nominal' as const, scale: colourScale(series), legend };
  return {
    title: {
      text: `${what} against n (log–log)`,
      subtitle: [chart.scenario.id, `bars: ±1 Monte-Carlo SE${chart.metric === 'bias' ? '; open marks: |bias| < 2 SE' : ''}`],
    },
    width: WIDTH,
    height: 240,
    data: { values: chart.points },
    layer: [
      {
        mark: { type: 'rule', strokeWidth: 1.2, opacity: 0.8 },
        encoding: { x, y: { ...y, field: 'lower' }, y2: { field: 'upper' }, color: colour },
      },
      { mark: { type: 'line', strokeWidth: 1.4, opacity: 0.85 }, encoding: { x, y, color: colour } },
      // Two point layers rather than a conditional fill, which would need a second legend to be silenced;
      // an empty layer would make vega warn about an empty extent, so only those with points are drawn.
      ...[false, true]
        .filter((clear) => chart.points.some((p) => p.clear === clear))
        .map((clear) => ({
          transform: [{ filter: clear ? 'datum.clear' : '!datum.clear' }],
          mark: { type: 'point' as const, size: 55, strokeWidth: 1.6, opacity: 1, filled: !clear, ...(clear ? { fill: 'white' } : {}) },
          encoding: { x, y, color: colour, shape: { field: 'series', type: 'nominal' as const, scale: shapeScale(series), legend } },
        })),
    ],
    config: CHART_CONFIG,
  };
}

export function distributionSpec(chart: DistributionData, base: Base): TopLevelSpec {
  const names = chart.series.map((s) => s.name);
  const y = { field: 'series', type: 'nominal' as const, sort: names, title: null, axis: { labelLimit: 260 } };
  const x = { field: 'value', type: 'quantitative' as const, scale: { zero: false }, title: `estimate (${base})` };
  const colour = { field: 'series', type: 'nominal' as const, scale: colourScale(chart.series), legend: null };
  return {
    title: {
      text: `Estimates at n = ${chart.n}`,
      subtitle: [
        chart.scenario.id,
        'boxes: quartiles, whiskers: extremes; ticks: replicates',
        `dashed line: true value ${formatValue(chart.truth, 6)} ${base}`,
      ],
    },
    width: WIDTH,
    height: { step: 26 },
    layer: [
      {
        data: { values: chart.values },
        // Whiskers to the extremes: the ticks already show every replicate, so separate outlier marks would repeat them.
        mark: { type: 'boxplot', extent: 'min-max', size: 16, opacity: 0.45, median: { color: 'black', opacity: 1 } },
        encoding: { x, y, color: colour },
      },
      {
        data: { values: chart.values },
        mark: { type: 'tick', thickness: 1, size: 20, opacity: 0.6 },
        encoding: { x, y, color: colour },
      },
      {
        data: { values: [{ truth: chart.truth }] },
        mark: { type: 'rule', strokeDash: [5, 3], strokeWidth: 1.5, color: REFERENCE_COLOUR },
        encoding: { x: { field: 'truth', type: 'quantitative' } },
      },
    ],
    config: CHART_CONFIG,
  };
}

export function efficiencySpec(chart: EfficiencyData): TopLevelSpec {
  const names = chart.series.map((s) => s.name);
  const band = Math.max(36, names.length * 9);
  const x = { field: 'value', type: 'quantitative' as const, scale: { type: 'log' as const }, title: `efficiency ${chart.formula.ratio} (ratio, no unit)` };
  const y = { field: 'scenario', type: 'nominal' as const, sort: chart.scenarios, title: null, axis: { labelLimit: 320 } };
  const yOffset = { field: 'series', type: 'nominal' as const, sort: names };
  const colour = { field: 'series', type: 'nominal' as const, scale: colourScale(chart.series), legend: bottomLegend() };
  const sizes = [...new Set(chart.rows.map((r) => r.n))];
  return {
    title: {
      text: `Efficiency at the largest n (${sizes.join(', ')})`,
      subtitle: [
        `dashed line at 1: n·Var = ${chart.formula.variance}, the large-sample variance`,
        'of an efficient estimator (not a finite-n bound)',
        `(${chart.formula.meaning})`,
        'bars: ±1 Monte-Carlo SE',
      ],
    },
    width: 460,
    height: chart.scenarios.length * band,
    layer: [
      {
        data: { values: [{ bound: 1 }] },
        mark: { type: 'rule', strokeDash: [5, 3], strokeWidth: 1.5, color: REFERENCE_COLOUR },
        encoding: { x: { field: 'bound', type: 'quantitative' } },
      },
      {
        data: { values: chart.rows },
        layer: [
          { mark: { type: 'rule', strokeWidth: 1.2 }, encoding: { x: { ...x, field: 'lower' }, x2: { field: 'upper' }, y, yOffset, color: colour } },
          {
            mark: { type: 'point', filled: true, size: 40, opacity: 1 },
            encoding: { x, y, yOffset, color: colour, shape: { field: 'series', type: 'nominal', scale: shapeScale(chart.series), legend: bottomLegend() } },
          },
        ],
      },
    ],
    config: CHART_CONFIG,
  };
}

/**
 * Estimators down, `x` across: a coloured cell with a text label in each. The report's two heatmaps (average
 * rank, robustness verdicts) share this layout.
 */
export function estimatorHeatmapSpec(chart: {
  title: string;
  subtitle: string[];
  columnStep: number;
  x: Channels['x'];
  estimators: string[];
  rows: object[];
  colour: Channels['color'];
  label: Pick<Channels, 'text' | 'color'>;
  labelColour?: string;
}): TopLevelSpec {
  const { x } = chart;
  const y = { field: 'estimator', type: 'nominal' as const, sort: chart.estimators, title: null, axis: { labelLimit: 260 } };
  return {
    title: { text: chart.title, subtitle: chart.subtitle },
    width: { step: chart.columnStep },
    height: { step: 28 },
    data: { values: chart.rows },
    layer: [
      { mark: { type: 'rect', stroke: 'white', strokeWidth: 1 }, encoding: { x, y, color: chart.colour } },
      { mark: { type: 'text', fontSize: 12, ...(chart.labelColour ? { color: chart.labelColour } : {}) }, encoding: { x, y, ...chart.label } },
    ],
    config: CHART_CONFIG,
  };
}

export function rankHeatmapSpec(grid: RankGrid): TopLevelSpec {
  const middle = (1 + grid.maxRank) / 2;
  return estimatorHeatmapSpec({
    title: 'Average rank by RMSE (1 = best)',
    subtitle: ['over the scenarios and sample sizes of each group', 'rows sorted by the mean relative rank over all cells (0 = best, 1 = last)'],
    columnStep: 76,
    // "d=1/exponential" on two lines keeps the columns narrow enough for a phone.
    x: { field: 'group', type: 'nominal', sort: grid.groups, title: 'dimension / tail class', axis: { labelAngle: 0, labelExpr: "split(datum.label, '/')" } },
    estimators: grid.estimators,
    rows: grid.rows,
    colour: {
      field: 'meanRank',
      type: 'quantitative',
      scale: { scheme: RANK_SCHEME, domain: [1, grid.maxRank], reverse: true },
      legend: { title: 'mean rank', orient: 'bottom', direction: 'horizontal', gradientLength: 200 },
    },
    label: {
      text: { field: 'meanRank', type: 'quantitative', format: '.1f' },
      // Reversed viridis is dark at high ranks: white text there, black on the light end.
      color: { condition: { test: `datum.meanRank > ${middle}`, value: 'white' }, value: 'black' },
    },
  });
}
