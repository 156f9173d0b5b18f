/**
 * Terminal tables of a run: per scenario, RMSE ± Monte-Carlo SE and rank at each n; the overall average
 * ranks by dimension and tail class; optionally every score of every cell.
 */
import { formatP, formatValue, fullIds, renderTable, toBase, type Base } from '../core/format.js';
import { estimatorLabel } from '../../estimators/index.js';
import { rankedGroups, type Cell, type RunFile } from '../analysis/results.js';
import { doublingText } from '../analysis/resolution.js';
import { COLUMN_TITLES, rankText, robustnessText, smallestQuantizeStep, wideBestSetNote } from './verdict-text.js';

function pm(value: number, se: number, base: Base, digits = 3): string {
  if (!Number.isFinite(value)) return '–';
  return `${formatValue(toBase(value, base), digits)} ± ${Number.isFinite(se) ? formatValue(toBase(se, base), 2) : '?'}`;
}

export function scenarioTables(run: RunFile, base: Base): string {
  const out: string[] = [];
  for (const info of run.scenarios) {
    const cells = run.cells.filter((c) => c.scenario === info.id && c.role === 'main');
    if (!cells.length) continue;
    const sizes = [...new Set(cells.map((c) => c.n))].sort((a, b) => a - b);
    const estimators = [...new Set(cells.map((c) => c.estimator))];
    const rankOf = new Map<string, string>();
    for (const ranking of run.rankings.filter((r) => r.scenario === info.id && r.perturbation === null)) {
      for (const e of ranking.entries) rankOf.set(`${e.estimator}|${ranking.n}`, rankText(e, ranking));
    }
    const largest = sizes[sizes.length - 1];
    // Rows in the printed order of the ranking at the largest n: best set, the rest by RMSE, then failed.
    const finalRanking = run.rankings.find((r) => r.scenario === info.id && r.perturbation === null && r.n === largest);
    const position = new Map(finalRanking?.entries.map((e, i) => [e.estimator, i]) ?? []);
    estimators.sort((a, b) => (position.get(a) ?? Number.MAX_SAFE_INTEGER) - (position.get(b) ?? Number.MAX_SAFE_INTEGER));
    const rows = estimators.map((spec) => {
      const row: string[] = [estimatorLabel(spec)];
      for (const n of sizes) {
        const cell = cells.find((c) => c.estimator === spec && c.n === n);
        if (!cell) {
          row.push('');
          continue;
        }
        row.push(`${pm(cell.scores.rmse.value, cell.scores.rmse.se, base)}  ${rankOf.get(`${spec}|${n}`) ?? '–'}`);
      }
      const atLargest = cells.find((c) => c.estimator === spec && c.n === largest);
      row.push(atLargest ? pm(atLargest.scores.bias.value, atLargest.scores.bias.se, base) : '');
      const rate = run.rates.find((r) => r.scenario === info.id && r.estimator === spec)?.rmse;
      // Sizes whose RMSE is not clearly above 0 (< 2 SE) are left out of the fit (score.ts, fitRate): say how many remain.
      row.push(rate ? `${rate.slope.toFixed(2)} ± ${rate.se.toFixed(2)}${rate.sizes < sizes.length ? ` [${rate.sizes} of ${sizes.length} n]` : ''}` : '–');
      return row;
    });
    const heading = `${info.id}  (d=${info.dim}, ${info.support} support, ${info.tails} tails; truth ${formatValue(toBase(info.truth, base), 7)} ${base})`;
    out.push(heading);
    out.push(
      renderTable(['estimator', ...sizes.map((n) => `RMSE ± SE  rank, n=${n}`), `bias ± SE, n=${largest}`, 'RMSE slope vs n'], rows, {
        align: ['left', ...sizes.map(() => 'right' as const), 'right', 'right'],
      }),
    );
    const note = wideBestSetNote(
      run.rankings.filter((r) => r.scenario === info.id && r.perturbation === null),
      estimatorLabel,
    );
    if (note) out.push(note);
  }
  return out.join('\n');
}

/** Average ranks per dimension/tail group and over all cells, with how many cells each average holds. */
export function overallTable(run: RunFile): string {
  if (!run.overall.length) return '';
  const groups = rankedGroups(run);
  // A run file written before relative ranks existed has only the plain mean; it then sorts and shows that.
  const relative = run.overall.every((o) => o.all.meanRelativeRank !== undefined);
  const rows = run.overall.map((o) => ({
    label: estimatorLabel(o.estimator),
    mean: relative ? o.all.meanRelativeRank! : o.all.meanRank,
    cells: groups.map((g) => {
      const r = o.groups[g];
      return r ? `${r.meanRank.toFixed(1)} (${r.cells}${r.failedCells ? `, ${r.failedCells} failed` : ''})` : 'n/a';
    }),
    all: `${relative ? o.all.meanRelativeRank!.toFixed(2) : o.all.meanRank.toFixed(1)} (${o.all.cells}${o.all.failedCells ? `, ${o.all.failedCells} failed` : ''})`,
  }));
  rows.sort((a, b) => a.mean - b.mean || a.label.localeCompare(b.label));
  return [
    relative
      ? 'Average rank (1 = best) per dimension and tail class, over scenarios and sample sizes; in brackets the cells averaged and how many of them it failed (ranked last). n/a: cannot run there by design. "all": the mean relative rank over every cell it ran, (rank − 1)/(estimators in the cell − 1), 0 = best, 1 = last, since estimators for fewer dimensions meet fewer competitors; rows are in its order.'
      : 'Average rank (1 = best) per dimension and tail class, over scenarios and sample sizes; in brackets the cells averaged and how many of them it failed (ranked last). n/a: cannot run there by design.',
    renderTable(
      ['estimator', ...groups, relative ? 'all (0–1)' : 'all'],
      rows.map((r) => [r.label, ...r.cells, r.all]),
      {
        align: ['left', ...groups.map(() => 'right' as const), 'right'],
      },
    ),
  ].join('\n');
}

export function detailTable(run: RunFile, base: Base): string {
  // Scenario specs stay whole: a long one is printed on its own line under the table.
  const ids = fullIds(
    run.cells.map((c) => c.scenario),
    40,
    (_, number) => `see [${number}] below`,
  );
  const rows = run.cells.map((c: Cell, i) => [
    ids.cells[i],
    `${estimatorLabel(c.estimator)}${c.perturbation ? ` after ${c.perturbation}` : ''}`,
    c.n,
    pm(c.scores.bias.value, c.scores.bias.se, base),
    pm(c.scores.sd.value, c.scores.sd.se, base),
    pm(c.scores.rmse.value, c.scores.rmse.se, base),
    pm(c.scores.mae.value, c.scores.mae.se, base),
    c.scores.efficiency ? pm(c.scores.efficiency.value, c.scores.efficiency.se, 'nats', 2) : '–',
    `${c.scores.failures}/${c.scores.replicates}`,
    formatValue(c.timing.meanMs, 3),
  ]);
  const table = renderTable(['scenario', 'estimator', 'n', 'bias', 'SD', 'RMSE', 'MAE', 'efficiency', 'failed', 'ms/estimate'], rows, {
    align: ['left', 'left', 'right', 'right', 'right', 'right', 'right', 'right', 'right', 'right'],
  });
  return [table, ...ids.notes].join('\n');
}

/** The score table as CSV (nats or bits), one row per cell. */
export function scoresCsv(run: RunFile, base: Base): string {
  const header = [
    'scenario',
    'estimator',
    'n',
    'role',
    'perturbation',
    'truth',
    'replicates',
    'failures',
    'mean',
    'mean_se',
    'bias',
    'bias_se',
    'sd',
    'sd_se',
    'rmse',
    'rmse_se',
    'mae',
    'mae_se',
    'efficiency',
    'efficiency_se',
    'ms_per_estimate',
    'unit',
  ];
  const truth = new Map(run.scenarios.map((s) => [s.id, s.truth]));
  const q = (s: string) => (/[",\n]/.test(s) ? `"${s.replace(/"/g, '""')}"` : s);
  const num = (x: number | undefined | null, convert = true) =>
    x === undefined || x === null || !Number.isFinite(x) ? '' : String(convert ? toBase(x, base) : x);
  const lines = run.cells.map((c) =>
    [
      q(c.scenario),
      q(c.estimator),
      c.n,
      c.role,
      q(c.perturbation ?? ''),
      num((truth.get(c.scenario) ?? NaN) + (c.shift ?? 0)),
      c.scores.replicates,
      c.scores.failures,
      num(c.scores.mean.value),
      num(c.scores.mean.se),
      num(c.scores.bias.value),
      num(c.scores.bias.se),
      num(c.scores.sd.value),
      num(c.scores.sd.se),
      num(c.scores.rmse.value),
      num(c.scores.rmse.se),
      num(c.scores.mae.value),
      num(c.scores.mae.se),
      num(c.scores.efficiency?.value, false),
      num(c.scores.efficiency?.se, false),
      num(c.timing.meanMs, false),
      base,
    ].join(','),
  );
  return `${header.join(',')}\n${lines.join('\n')}\n`;
}

/** One row per estimator, one column per perturbation kind and tuning: verdict and the worst value. */
export function robustnessTable(run: RunFile, base: Base = 'nats'): string {
  const section = run.robustness;
  if (!section) return '';
  const columns = ['rescale', 'monotone', 'affine', 'quantize', 'contaminate', 'tuning'].filter((c) =>
    section.table.some((r) => r.columns[c]?.verdict !== 'n/a'),
  );
  const finest = smallestQuantizeStep(section);
  const rows = section.table.map((row) => [
    estimatorLabel(row.estimator),
    ...columns.map((c) => {
      const cell = row.columns[c];
      return robustnessText(c, cell.verdict, cell.value, finest, { base, sd: cell.sd });
    }),
  ]);
  return [
    `Robustness at n = ${section.sampleSize} (${section.replicates} paired replicates; worst scenario per column):`,
    renderTable(['estimator', ...columns.map((c) => COLUMN_TITLES[c])], rows, { align: ['left', ...columns.map(() => 'right' as const)] }),
    'How to read it: README, "Reading the robustness table". Per-scenario values: the run file\'s robustness.measures and robustness.tuning.',
    ...resolutionTable(section),
  ].join('\n');
}

/**
 * The recording step at which each estimator's RMSE doubles, raw and with dequantize=auto (src/analysis/resolution.ts);
 * nothing when the plan has no quantize perturbation.
 */
function resolutionTable(section: NonNullable<RunFile['robustness']>): string[] {
  const rows = section.resolution?.rows ?? [];
  if (!rows.length) return [];
  const steps = [...new Set(section.resolution!.measures.flatMap((m) => m.raw.points.map((p) => p.step)))].sort((a, b) => a - b);
  return [
    '',
    `Recording resolution at n = ${section.sampleSize}: the step δ (in SDs of each coordinate) at which the RMSE doubles against the unrounded data's, worst scenario (steps tried: ${steps.join(', ')}):`,
    renderTable(
      ['estimator', 'as recorded', 'dequantize=auto'],
      rows.map((r) => [estimatorLabel(r.estimator), doublingText(r.raw), r.dequantized ? doublingText(r.dequantized) : 'n/a']),
      { align: ['left', 'right', 'right'] },
    ),
    '"≤ δ": doubled, or some estimate failed, at δ (the smallest step tried, or the first where estimates fail); "> δ": not doubled up to the largest step tried; otherwise interpolated between the two steps around it, in log step against log RMSE.',
  ];
}

/**
 * Error against autocorrelation (a plan's `phi` list): per base scenario and n, one row per estimator, RMSE ± SE
 * at each φ and the variance inflation Var(φ)/Var(0) with its interval at the plan's level; then each thinned estimator against
 * all rows on the same draws. Empty when the run has neither (src/analysis/dependence.ts).
 */
export function dependenceTables(run: RunFile, base: Base): string {
  const section = run.dependence;
  if (!section) return '';
  const out: string[] = [];
  const level = `${+(run.plan.verdicts.level * 100).toPrecision(6)}%`;
  const groups = new Map<string, typeof section.varianceInflation>();
  for (const v of section.varianceInflation) {
    const key = `${v.base}|${v.n}`;
    if (!groups.has(key)) groups.set(key, []);
    groups.get(key)!.push(v);
  }
  for (const [key, inflations] of groups) {
    const [scenario, nText] = [key.slice(0, key.lastIndexOf('|')), key.slice(key.lastIndexOf('|') + 1)];
    const n = Number(nText);
    const phis = [...new Set(inflations.map((v) => v.phi))].sort((a, b) => a - b);
    const estimators = [...new Set(inflations.map((v) => v.estimator))];
    const rmse = (scenarioId: string, spec: string) => {
      const cell = run.cells.find((c) => c.role === 'main' && c.scenario === scenarioId && c.estimator === spec && c.n === n);
      return cell ? pm(cell.scores.rmse.value, cell.scores.rmse.se, base) : '–';
    };
    const rows = estimators.map((spec) => [
      estimatorLabel(spec),
      rmse(scenario, spec),
      ...phis.flatMap((phi) => {
        const v = inflations.find((x) => x.estimator === spec && x.phi === phi);
        if (!v) return ['–', '–'];
        return [rmse(v.scenario, spec), `${formatValue(v.ratio.value, 3)} [${formatValue(v.ratio.lower, 2)}, ${formatValue(v.ratio.upper, 2)}]`];
      }),
    ]);
    out.push(`${scenario} at n = ${n}: RMSE against the lag-1 autocorrelation φ of the rows, and Var(φ)/Var(0) [${level} interval]`);
    out.push(
      renderTable(
        ['estimator', 'RMSE, φ=0', ...phis.flatMap((phi) => [`RMSE, φ=${phi}`, `Var ×, φ=${phi} (τ=${formatValue((1 + phi) / (1 - phi), 3)})`])],
        rows,
        { align: ['left', 'right', ...phis.flatMap(() => ['right' as const, 'right' as const])] },
      ),
    );
  }
  if (groups.size) {
    out.push(
      `Var ×: variance of the estimates at φ over that at φ = 0 (same base, estimator and n; independent draws), ${level} interval from the delta method on log s² (small-sample kurtosis, t quantile), one per ratio, not simultaneous. τ = (1+φ)/(1−φ) is what the variance of the mean of the latent normal scores grows by.`,
    );
  }
  if (section.thinning.length) {
    const rows = section.thinning.map((t) => [
      t.scenario,
      t.n,
      estimatorLabel(t.estimator),
      pm(t.rmseThinned, NaN, base).replace(' ± ?', ''),
      pm(t.rmseAllRows, NaN, base).replace(' ± ?', ''),
      `${formatValue(toBase(t.mseDifference.value, base) * (base === 'bits' ? 1 / Math.LN2 : 1), 2)} ± ${formatValue(toBase(t.mseDifference.se, base) * (base === 'bits' ? 1 / Math.LN2 : 1), 2)}`,
      t.adjustedP === undefined ? '–' : formatP(t.adjustedP),
      t.verdict,
    ]);
    const ids = fullIds(
      rows.map((r) => String(r[0])),
      56,
      (_, number) => `see [${number}] below`,
    );
    rows.forEach((r, i) => (r[0] = ids.cells[i]));
    out.push(
      `Thinning: every t-th row against all rows, on the same draws (paired squared errors; t test on their mean, Diebold–Mariano with m − 1 degrees of freedom; p Holm-adjusted over these ${section.thinning.length} comparisons, verdict at level ${level})`,
    );
    out.push(
      renderTable(['scenario', 'n', 'estimator', 'RMSE thinned', 'RMSE all rows', 'MSE thinned − all ± SE', 'Holm p', 'verdict'], rows, {
        align: ['left', 'right', 'left', 'right', 'right', 'right', 'right', 'left'],
      }),
    );
    out.push(...ids.notes);
  }
  return out.join('\n');
}
