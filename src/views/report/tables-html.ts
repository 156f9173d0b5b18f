/**
 * The report's tables: per-scenario RMSE and ranks, average ranks, every cell's scores, and the robustness
 * verdicts and measures. Shown values are in the output unit; sort keys are the plain numbers.
 */
import { formatP, formatValue, toBase, type Base } from '../../core/format.js';
import type { RunFile, ScenarioInfo } from '../../analysis/results.js';
import { finite, sampleSizes, scenarioCells, slopeText, type RankGrid, type ReportData } from './data.js';
import { escapeHtml, sortableTable, type CellInput, type TableCell } from './html.js';
import type { RobustnessSection } from './robustness-data.js';
import { rankText, robustnessText, smallestQuantizeStep, wideBestSetNote } from '../verdict-text.js';

function pm(value: number | null | undefined, se: number | null | undefined, base: Base | null, digits = 3): TableCell {
  if (!finite(value)) return { text: '–', sort: null };
  const v = base ? toBase(value, base) : value;
  const s = finite(se) ? (base ? toBase(se, base) : se) : NaN;
  return { text: `${formatValue(v, digits)} ± ${Number.isFinite(s) ? formatValue(s, 2) : '?'}`, sort: v };
}

/** Ranks as the terminal tables show them ("1=" in the best set, failures ranked last with their count). */
function ranksOf(run: RunFile, scenario: string): Map<string, { text: string; rank: number }> {
  const out = new Map<string, { text: string; rank: number }>();
  for (const ranking of run.rankings.filter((r) => r.scenario === scenario && r.perturbation === null)) {
    for (const e of ranking.entries) out.set(`${e.estimator}|${ranking.n}`, { text: rankText(e, ranking), rank: e.rank });
  }
  return out;
}

export function scenarioTable(data: ReportData, info: ScenarioInfo): string {
  const { run, base } = data;
  const cells = scenarioCells(data, info.id);
  const sizes = sampleSizes(cells);
  const largest = sizes[sizes.length - 1];
  const ranks = ranksOf(run, info.id);
  // Rows in the printed order of the ranking at the largest n, as in the terminal tables.
  const rankings = run.rankings.filter((r) => r.scenario === info.id && r.perturbation === null);
  const position = new Map(rankings.find((r) => r.n === largest)?.entries.map((e, i) => [e.estimator, i]) ?? []);
  const specs = [...new Set(cells.map((c) => c.estimator))].sort((a, b) => (position.get(a) ?? Infinity) - (position.get(b) ?? Infinity));
  const rows = specs.map((spec) => {
    const row: CellInput[] = [data.label(spec)];
    for (const n of sizes) {
      const cell = cells.find((c) => c.estimator === spec && c.n === n);
      row.push(cell ? pm(cell.scores.rmse.value, cell.scores.rmse.se, base) : { text: '–', sort: null });
      const rank = ranks.get(`${spec}|${n}`);
      row.push({ text: rank?.text ?? '–', sort: rank?.rank ?? null });
    }
    const last = cells.find((c) => c.estimator === spec && c.n === largest);
    row.push(last ? pm(last.scores.bias.value, last.scores.bias.se, base) : { text: '–', sort: null });
    const rate = run.rates.find((r) => r.scenario === info.id && r.estimator === spec);
    row.push({ text: rate?.bias ? slopeText(rate.bias).replace('slope ', '') : '–', sort: rate?.bias?.slope ?? null });
    row.push({ text: rate?.rmse ? slopeText(rate.rmse).replace('slope ', '') : '–', sort: rate?.rmse?.slope ?? null });
    const failed = cells.filter((c) => c.estimator === spec).reduce((s, c) => s + c.scores.failures, 0);
    row.push(failed);
    return row;
  });
  const head = [
    'estimator',
    ...sizes.flatMap((n) => [`RMSE (${base}), n=${n}`, 'rank']),
    `bias (${base}), n=${largest}`,
    '|bias| slope',
    'RMSE slope',
    'failed',
  ];
  const note = rankings.length ? wideBestSetNote(rankings, data.label) : null;
  const table = sortableTable(
    `${info.id}: RMSE ± Monte-Carlo SE and rank ("1=": in the best set at level ${run.plan.verdicts.level}; failed cells rank last)`,
    head,
    rows,
  );
  return note ? `${table}<p class="note">${escapeHtml(note)}</p>` : table;
}

export function rankTable(grid: RankGrid): string {
  const rows = grid.estimators.map((estimator) => [
    estimator,
    ...grid.groups.map((g): CellInput => {
      const cell = grid.rows.find((r) => r.estimator === estimator && r.group === g);
      if (cell?.relative !== undefined)
        return {
          text: `${cell.relative.toFixed(2)} relative (${cell.cells}${cell.failedCells ? `, ${cell.failedCells} failed` : ''})`,
          sort: cell.relative,
          title: `mean of (rank − 1)/(estimators in the cell − 1) over ${cell.cells} cells, 0 = best, 1 = last (plain mean rank ${cell.meanRank.toFixed(1)}, not comparable across estimators that run in different dimensions)`,
        };
      return cell
        ? {
            // As the terminal's table has it: a rank that failures pushed to last says so in the cell itself.
            text: `${cell.meanRank.toFixed(1)} (${cell.cells}${cell.failedCells ? `, ${cell.failedCells} failed` : ''})`,
            sort: cell.meanRank,
            title: `average over ${cell.cells} cells${cell.failedCells ? `, ${cell.failedCells} of them failed and ranked last` : ''}`,
          }
        : { text: 'n/a', sort: null, title: 'cannot run in this group by design' };
    }),
  ]);
  return sortableTable('Average rank (1 = best) per dimension / tail class; in brackets the cells averaged', ['estimator', ...grid.groups], rows);
}

export function scoresTable(data: ReportData): string {
  const { run, base } = data;
  const rows = run.cells.map((c): CellInput[] => [
    c.scenario,
    data.label(c.estimator),
    c.n,
    c.perturbation ?? (c.role === 'tuning' ? 'tuning grid' : ''),
    pm(c.scores.mean.value, c.scores.mean.se, base),
    pm(c.scores.bias.value, c.scores.bias.se, base),
    pm(c.scores.sd.value, c.scores.sd.se, base),
    pm(c.scores.rmse.value, c.scores.rmse.se, base),
    pm(c.scores.mae.value, c.scores.mae.se, base),
    c.scores.efficiency ? pm(c.scores.efficiency.value, c.scores.efficiency.se, null) : { text: '–', sort: null },
    {
      text: `${c.scores.failures}/${c.scores.replicates}`,
      sort: c.scores.failures,
      title: c.failures
        .slice(0, 3)
        .map((f) => `#${f.replicate}: ${f.message}`)
        .join('\n'),
    },
    { text: formatValue(c.timing.meanMs, 3), sort: c.timing.meanMs },
  ]);
  const head = [
    'scenario',
    'estimator',
    'n',
    'variant',
    `mean (${base})`,
    `bias (${base})`,
    `SD (${base})`,
    `RMSE (${base})`,
    `MAE (${base})`,
    'efficiency',
    'failed',
    'ms / estimate',
  ];
  return sortableTable(`Every cell: score ± Monte-Carlo SE (${run.cells.length} cells)`, head, rows, { textColumns: 2, tall: true, stickyNames: true });
}

export function robustnessTable(data: ReportData, section: RobustnessSection, columns: string[]): string {
  const finest = smallestQuantizeStep(section);
  const rows = section.table.map((row): CellInput[] => [
    data.label(row.estimator),
    ...columns.map((column): CellInput => {
      const cell = row.columns[column];
      if (!cell) return { text: '–', sort: null };
      return {
        text: robustnessText(column, cell.verdict, cell.value, finest, { base: data.base, sd: cell.sd }),
        sort: finite(cell.value) ? cell.value : null,
        title: cell.detail,
        className: cell.verdict === 'n/a' ? undefined : cell.verdict,
      };
    }),
  ]);
  return sortableTable('Robustness verdicts (hover a cell for its detail)', ['estimator', ...columns], rows);
}

export function measuresTable(data: ReportData, section: RobustnessSection): string {
  const { base } = data;
  const rows = section.measures.map((m): CellInput[] => [
    m.scenario,
    data.label(m.estimator),
    m.perturbation,
    finite(m.shift) ? { text: formatValue(toBase(m.shift, base), 4), sort: toBase(m.shift, base) } : { text: 'none', sort: null },
    pm(m.drift.value, m.drift.se, base),
    pm(m.change.value, m.change.se, base),
    finite(m.sd) ? { text: formatValue(toBase(m.sd, base), 3), sort: toBase(m.sd, base) } : { text: '–', sort: null },
    m.failures,
  ]);
  const head = ['scenario', 'estimator', 'perturbation', `exact shift (${base})`, `drift (${base})`, `change (${base})`, `SD (${base})`, 'failed'];
  return sortableTable(`Unit drift: mean |Ĥ(perturbed) − Ĥ(original) − shift| at n = ${section.sampleSize}, ${section.replicates} replicates`, head, rows, {
    textColumns: 3,
    tall: true,
  });
}

/**
 * The serial-dependence tables of a plan with a `phi` list (src/analysis/dependence.ts), as `hhat bench` prints them:
 * the variance of the estimates at each φ over that at φ = 0, and each thinned estimator against all rows.
 */
export function dependenceTables(data: ReportData): string {
  const { run, base } = data;
  const section = run.dependence;
  if (!section) return '';
  const level = `${+(run.plan.verdicts.level * 100).toPrecision(6)}%`;
  const parts: string[] = [];
  if (section.varianceInflation.length) {
    const rows = section.varianceInflation.map((v): CellInput[] => [
      v.base,
      data.label(v.estimator),
      v.n,
      v.phi,
      { text: formatValue((1 + v.phi) / (1 - v.phi), 3), sort: (1 + v.phi) / (1 - v.phi) },
      { text: `${formatValue(v.ratio.value, 3)} [${formatValue(v.ratio.lower, 2)}, ${formatValue(v.ratio.upper, 2)}]`, sort: v.ratio.value },
    ]);
    parts.push(
      sortableTable(
        `Variance of the estimates at φ over that at φ = 0 (same base scenario, estimator and n; independent draws), ${level} interval from the delta method on log s², one per ratio, not simultaneous. τ = (1+φ)/(1−φ) is what the variance of the mean of the latent normal scores grows by.`,
        ['base scenario', 'estimator', 'n', 'φ', 'τ', `Var(φ)/Var(0) [${level}]`],
        rows,
        { textColumns: 2, tall: true },
      ),
    );
  }
  if (section.thinning.length) {
    // A mean squared error in bits² is the nats² figure over (ln 2)².
    const squared = (x: number) => (base === 'bits' ? x / (Math.LN2 * Math.LN2) : x);
    const rows = section.thinning.map((t): CellInput[] => [
      t.scenario,
      data.label(t.estimator),
      t.n,
      { text: formatValue(toBase(t.rmseThinned, base), 3), sort: toBase(t.rmseThinned, base) },
      { text: formatValue(toBase(t.rmseAllRows, base), 3), sort: toBase(t.rmseAllRows, base) },
      {
        text: `${formatValue(squared(t.mseDifference.value), 2)} ± ${formatValue(squared(t.mseDifference.se), 2)}`,
        sort: squared(t.mseDifference.value),
      },
      { text: formatP(t.adjustedP), sort: t.adjustedP },
      t.verdict,
    ]);
    parts.push(
      sortableTable(
        `Thinning: every t-th row against all rows, on the same draws (paired squared errors; t test on their mean, Diebold–Mariano with m − 1 degrees of freedom; p Holm-adjusted over these ${section.thinning.length} comparisons, verdict at level ${level})`,
        ['scenario', 'estimator', 'n', `RMSE thinned (${base})`, `RMSE all rows (${base})`, `MSE thinned − all ± SE (${base}²)`, 'Holm p', 'verdict'],
        rows,
        { textColumns: 2, tall: true },
      ),
    );
  }
  return parts.join('\n');
}
