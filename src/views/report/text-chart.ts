/**
 * A compact terminal chart of |bias| against n on log–log axes, for the best few estimators of each scenario
 * (by rank at the largest n). Plain text, no colour: it must read the same in a pipe, a log file and a CI
 * transcript. Each estimator is a letter; upper case where |bias| exceeds 2 Monte-Carlo SE, lower case where
 * it does not (that point's height is then mostly noise).
 */
import { toBase, type Base } from '../../core/format.js';
import type { RunFile } from '../../analysis/results.js';
import { estimatorLabel } from '../../../estimators/index.js';
import { finite, isMainCell } from './data.js';

export interface TextChartOptions {
  /** Estimators per scenario (the best by rank at the largest n). */
  top?: number;
  /** Plot width in characters. */
  width?: number;
  /** Text rows per factor of ten on the |bias| axis. */
  rowsPerDecade?: number;
}

const LETTERS = 'ABCDEFGHIJ';

function decadeLabel(exponent: number): string {
  return exponent >= -3 && exponent <= 3 ? String(Number((10 ** exponent).toFixed(Math.max(0, -exponent)))) : `1e${exponent}`;
}

/** One scenario's chart, or null when no estimator has a drawable |bias|. */
function scenarioChart(run: RunFile, scenario: string, base: Base, options: Required<TextChartOptions>): string | null {
  const cells = run.cells.filter((c) => c.scenario === scenario && isMainCell(c));
  const sizes = [...new Set(cells.map((c) => c.n))].sort((a, b) => a - b);
  if (sizes.length < 2) return null;
  const largest = sizes[sizes.length - 1];
  const ranking = run.rankings.find((r) => r.scenario === scenario && r.perturbation === null && r.n === largest);
  const chosen = (ranking ? ranking.entries.map((e) => e.estimator) : [...new Set(cells.map((c) => c.estimator))]).slice(0, options.top);
  const points = chosen.flatMap((spec, i) =>
    cells
      .filter((c) => c.estimator === spec)
      .flatMap((c) => {
        const bias = c.scores.bias;
        if (!finite(bias.value) || bias.value === 0) return [];
        const value = toBase(Math.abs(bias.value), base);
        const clear = finite(bias.se) && Math.abs(bias.value) < 2 * bias.se;
        return [{ n: c.n, value, letter: clear ? LETTERS[i].toLowerCase() : LETTERS[i] }];
      }),
  );
  if (!points.length) return null;
  const logs = points.map((p) => Math.log10(p.value));
  const top = Math.ceil(Math.max(...logs));
  const bottom = Math.min(Math.floor(Math.min(...logs)), top - 1);
  const rows = (top - bottom) * options.rowsPerDecade + 1;
  const width = options.width;
  const grid = Array.from({ length: rows }, () => Array<string>(width).fill(' '));
  const logMin = Math.log10(sizes[0]);
  const logSpan = Math.log10(largest) - logMin;
  const column = (n: number) => Math.round(((Math.log10(n) - logMin) / logSpan) * (width - 4)) + 1;
  for (const p of points) {
    const row = Math.round((top - Math.log10(p.value)) * options.rowsPerDecade);
    let col = column(p.n);
    // Points at one n side by side: step right into a free place, or mark the crowd with '*'.
    while (col < width - 1 && grid[row][col] !== ' ') col++;
    grid[row][col] = grid[row][col] === ' ' ? p.letter : '*';
  }
  const labelWidth = Math.max(...Array.from({ length: top - bottom + 1 }, (_v, k) => decadeLabel(top - k).length));
  const lines = grid.map((cells, r) => {
    const onDecade = r % options.rowsPerDecade === 0;
    const label = onDecade ? decadeLabel(top - r / options.rowsPerDecade) : '';
    return `${label.padStart(labelWidth)} ${onDecade ? '┤' : '│'}${cells.join('').trimEnd()}`;
  });
  const axis = Array<string>(width).fill('─');
  const ticks = Array<string>(width + 8).fill(' ');
  for (const n of sizes) {
    const col = column(n);
    axis[col] = '┬';
    const text = String(n);
    const start = Math.max(0, Math.min(col - Math.floor(text.length / 2), ticks.length - text.length));
    if (ticks.slice(Math.max(0, start - 1), start + text.length).every((ch) => ch === ' ')) ticks.splice(start, text.length, ...text);
  }
  lines.push(`${' '.repeat(labelWidth)} └${axis.join('')}`);
  lines.push(`${' '.repeat(labelWidth)}  ${ticks.join('').trimEnd()}   n`);
  const legend = chosen.map((spec, i) => `${LETTERS[i]} ${estimatorLabel(spec)}`).join('  ');
  return [`${scenario}: |bias| (${base}) against n, log–log, best ${chosen.length} at n=${largest}`, ...lines, `${' '.repeat(labelWidth)}  ${legend}`].join(
    '\n',
  );
}

/** |bias| against n for the best estimators of every scenario, as text for the end of `hhat bench`. */
export function biasTextChart(run: RunFile, base: Base, options: TextChartOptions = {}): string {
  const settings: Required<TextChartOptions> = { top: options.top ?? 4, width: options.width ?? 44, rowsPerDecade: options.rowsPerDecade ?? 2 };
  const charts = run.scenarios.map((s) => scenarioChart(run, s.id, base, settings)).filter((c): c is string => c !== null);
  if (!charts.length) return '';
  return [...charts, 'Letters: estimators (legend under each chart); lower case: |bias| < 2 Monte-Carlo SE, so its height is mostly noise.'].join('\n\n');
}
