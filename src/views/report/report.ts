/**
 * `hhat report`: a run file → one self-contained HTML page of charts and tables, and optionally each chart
 * as its own SVG file. Everything is rendered in memory first; files are written (atomically) only after all
 * of it succeeded, so a failure never leaves a half report.
 */
import { createHash } from 'node:crypto';
import { join } from 'node:path';
import { ensureFolder } from '../../core/files.js';
import type { TopLevelSpec } from 'vega-lite';
import { formatValue, toBase, type Base } from '../../core/format.js';
import { writeFileAtomic, type RunFile, type ScenarioInfo } from '../../analysis/results.js';
import { getEstimator } from '../../../estimators/index.js';
import { parseSpec } from '../../core/spec.js';
import { convergenceData, distributionData, efficiencyData, rankGrid, reportData, type ReportData } from './data.js';
import { definitionList, escapeHtml, figure, page as htmlPage } from './html.js';
import { robustnessGrid, robustnessOf, tuningPanels } from './robustness-data.js';
import { robustnessGridSpec, tuningSpec } from './robustness-specs.js';
import { convergenceSpec, distributionSpec, efficiencySpec, rankHeatmapSpec } from './specs.js';
import { renderChart, type RenderedChart } from './svg.js';
import { dependenceTables, measuresTable, rankTable, robustnessTable, scenarioTable, scoresTable } from './tables-html.js';

export interface ReportOptions {
  /** Output unit of entropy values (the run file is always nats). */
  base?: Base;
}

export interface Report {
  html: string;
  /** Every chart, in page order; `name` is a unique file-name stem. */
  svgs: RenderedChart[];
  /** Warnings from the chart compiler (none expected). */
  warnings: string[];
  renderMs: number;
}

export interface WriteReportOptions extends ReportOptions {
  /** Where the HTML goes; omitted: nothing is written for the page. */
  out?: string;
  /** Also write each chart as DIR/NAME.svg. */
  svgDir?: string;
}

/** The readable part of a slug keeps at most this many characters: with a prefix and a hash, a name stays far below the 255 bytes file systems allow. */
export const SLUG_LIMIT = 80;

/**
 * Lowercase letters, digits, dots and hyphens: safe as a file name and an HTML id on every system. A text that
 * does not come through unchanged (a sign, '=', ',', capitals, or more than SLUG_LIMIT characters) gets the
 * first 8 hex digits of its SHA-256 appended, so `normal:mu=2` and `normal:mu=-2` get different names and a 9-D
 * covariance spec a short one.
 */
export function slug(text: string): string {
  const plain =
    text
      .toLowerCase()
      .replace(/[^a-z0-9.]+/g, '-')
      .replace(/^-+|-+$/g, '') || 'chart';
  if (plain === text && plain.length <= SLUG_LIMIT) return plain;
  const hash = createHash('sha256').update(text).digest('hex').slice(0, 8);
  return `${plain.slice(0, SLUG_LIMIT).replace(/-+$/, '')}-${hash}`;
}

function familyOf(run: RunFile, spec: string): string {
  const cell = run.cells.find((c) => c.estimator === spec || c.estimatorId === spec);
  if (cell) return cell.family;
  try {
    return getEstimator(parseSpec(spec, 'estimator').id).family;
  } catch {
    return spec.split(':')[0];
  }
}

interface Pending {
  name: string;
  spec: TopLevelSpec;
  title: string;
  description: string;
}

/** What the section builders share: the data, a chart queue (rendered later, in one pass) and the contents list. */
class Page {
  readonly pending: Pending[] = [];
  readonly nav: string[] = [];
  private readonly names = new Set<string>();

  constructor(readonly data: ReportData) {}

  /** Queues a chart and returns the marker that the rendered SVG replaces. */
  chart(stem: string, spec: TopLevelSpec, title: string, description: string): string {
    let name = stem;
    for (let i = 2; this.names.has(name); i++) name = `${stem}-${i}`;
    this.names.add(name);
    this.pending.push({ name, spec, title, description });
    return `<!--chart:${name}-->`;
  }
}

function provenance(run: RunFile, data: ReportData): string {
  const env = run.environment;
  const { plan } = run;
  const git = env.git ? `${env.git.commit.slice(0, 12)}${env.git.dirty ? ' (with uncommitted changes)' : ''}` : 'not a git checkout';
  const facts: [string, string][] = [
    ['plan', `${plan.name} (${plan.quantity})`],
    ['scenarios', `${plan.scenarios.length}`],
    ['estimators', `${plan.estimators.length}: ${plan.estimators.map((e) => data.label(e)).join(', ')}`],
    ['sample sizes n', plan.sampleSizes.join(', ')],
    ['replicates per cell', String(plan.replicates)],
    ['seed', String(plan.seed)],
    [
      'robustness',
      plan.robustness
        ? `at n = ${plan.robustness.sampleSize}: ${plan.robustness.perturbations.length} perturbations${plan.robustness.tuning ? ', tuning grids' : ''}`
        : 'not measured',
    ],
    ['hhat version', env.hhatVersion],
    ['git commit', git],
    ['run created', run.createdAt.replace('T', ' ').replace(/\.\d+Z$/, ' UTC')],
    ['Node', env.node],
    ['machine', `${env.platform} ${env.arch}, ${env.cpus} × ${env.cpuModel}, ${env.memoryGiB} GiB`],
    [
      'run',
      `${run.cells.length} cells, ${run.wallSeconds.toFixed(1)} s on ${run.workers} worker${run.workers === 1 ? '' : 's'}${run.complete ? '' : ', incomplete'}${run.shard ? `, shard ${run.shard.index}/${run.shard.count}` : ''}`,
    ],
    ['draws fingerprint', run.drawsFingerprint.slice(0, 16)],
    ['unit', data.base === 'bits' ? 'bits (run file: nats)' : 'nats'],
  ];
  return definitionList(facts);
}

const QUANTITY_NAMES: Record<string, string> = {
  entropy: 'Differential-entropy',
  'mutual-information': 'Mutual-information',
  'conditional-mutual-information': 'Conditional-mutual-information',
  'transfer-entropy': 'Transfer-entropy',
  divergence: 'Divergence',
};

function header(run: RunFile, data: ReportData): string {
  const unit = data.base === 'bits' ? 'bits' : 'nats (natural logarithm)';
  const quantity = QUANTITY_NAMES[run.plan.quantity] ?? run.plan.quantity;
  return [
    `<header><h1>hhat report: plan “${escapeHtml(run.plan.name)}”</h1>`,
    `<p class="lead">${escapeHtml(quantity)} estimators on seeded samples with known true values. Values in ${unit}; every score carries its Monte-Carlo standard error.</p>`,
    provenance(run, data),
    '</header>',
  ].join('\n');
}

function overallSection(page: Page): string {
  const grid = rankGrid(page.data);
  const efficiency = efficiencyData(page.data);
  if (!grid && !efficiency.rows.length) return '';
  page.nav.push('<li><a href="#overall">Overall</a></li>');
  const charts: string[] = [];
  if (grid) {
    const description = `Heat map of the average rank (1 = best) of ${grid.estimators.length} estimators in ${grid.groups.length - 1} dimension / tail groups.`;
    charts.push(page.chart('average-rank', rankHeatmapSpec(grid), 'Average rank by RMSE per dimension and tail class', description));
  }
  if (efficiency.rows.length) {
    const { ratio, meaning } = efficiency.formula;
    const description = `Efficiency ratio ${ratio} (${meaning}) of each estimator per scenario at the largest sample size n, on a log axis, with the line at 1: the asymptotic variance of an efficient estimator. It is a large-sample benchmark, not a bound at finite n: a biased or shrunk estimator can fall below it.`;
    charts.push(page.chart('efficiency', efficiencySpec(efficiency), `Efficiency ${ratio} against the asymptotic 1`, description));
  }
  return `<section id="overall"><h2>Overall</h2><div class="charts">${charts.join('\n')}</div>${grid ? rankTable(grid) : ''}</section>`;
}

function scenarioSection(page: Page, info: ScenarioInfo): string {
  const { data } = page;
  const { base } = data;
  const distribution = distributionData(data, info);
  if (!distribution) return '';
  const id = `scenario-${slug(info.id)}`;
  page.nav.push(`<li><a href="#${id}">${escapeHtml(info.id)}</a></li>`);
  const charts: string[] = [];
  for (const metric of ['bias', 'rmse'] as const) {
    const chart = convergenceData(data, info, metric);
    if (!chart.points.length) continue;
    const what = metric === 'bias' ? '|bias|' : 'RMSE';
    const description = `Log–log plot of ${what} in ${base} against sample size n for ${chart.series.length} estimators, ±1 Monte-Carlo SE, fitted slopes in the legend.`;
    charts.push(page.chart(`${metric}-${slug(info.id)}`, convergenceSpec(chart, base), `${what} (${base}) against sample size n: ${info.id}`, description));
  }
  const description = `Box plots of the replicate estimates in ${base} per estimator at n = ${distribution.n}, with the true value as a dashed line.`;
  charts.push(
    page.chart(`estimates-${slug(info.id)}`, distributionSpec(distribution, base), `Estimates (${base}) at n = ${distribution.n}: ${info.id}`, description),
  );
  const facts = `d = ${info.dim}, ${escapeHtml(info.support)} support, ${escapeHtml(info.tails)} tails; true value ${escapeHtml(formatValue(toBase(info.truth, base), 7))} ${base} (${escapeHtml(info.truthSource)})`;
  return `<section class="scenario" id="${id}"><h3>${escapeHtml(info.id)}</h3><p class="lead">${facts}</p><div class="charts">${charts.join('\n')}</div>${scenarioTable(data, info)}</section>`;
}

function scenariosSection(page: Page): string {
  const start = page.nav.length;
  const sections = page.data.run.scenarios.map((info) => scenarioSection(page, info)).join('\n');
  const entries = page.nav.splice(start);
  page.nav.push(`<li><a href="#scenarios">Scenarios</a><ol>${entries.join('')}</ol></li>`);
  return [
    '<section id="scenarios"><h2>Scenarios</h2>',
    '<p>Per scenario: |bias| and RMSE against n on log–log axes, every replicate estimate at the largest n, and the scores with their ranks. At the parametric rate the RMSE falls with slope −0.5 and the |bias| of a parametric plug-in with slope −1; where the truth is 0 (independent data, no flow) the information density is constant, the n<sup>−1/2</sup> term vanishes, and the RMSE may fall with slope down to −1.</p>',
    sections,
    '</section>',
  ].join('\n');
}

function robustnessSection(page: Page): string {
  const { data } = page;
  const { run, base } = data;
  const section = robustnessOf(run);
  if (!section) return '';
  page.nav.push('<li><a href="#robustness">Robustness and tuning</a></li>');
  const parts = [
    '<section id="robustness"><h2>Robustness and tuning</h2>',
    `<p>At n = ${section.sampleSize} with ${section.replicates} replicates, paired with the unperturbed estimates on the same draws. Perturbations: ${escapeHtml(section.perturbations.join(', ') || 'none')}.</p>`,
  ];
  const verdicts = robustnessGrid(data, section);
  if (verdicts) {
    const description = `Grid of ${verdicts.estimators.length} estimators by ${verdicts.columns.length} checks, each cell a verdict.`;
    parts.push(
      `<div class="charts">${page.chart('robustness', robustnessGridSpec(verdicts), 'Robustness checks: pass / warn / fail per estimator', description)}</div>`,
    );
    parts.push(robustnessTable(data, section, verdicts.columns));
  }
  if (section.measures.length) parts.push(measuresTable(data, section));
  const panels = tuningPanels(data, section, (e) => familyOf(run, e));
  for (const family of [...new Set(panels.map((p) => p.family))]) {
    const charts = panels
      .filter((p) => p.family === family)
      .map((panel) => {
        const description = `Mean estimate in ${base} ±1 Monte-Carlo SE against each varied setting of the ${family} estimators on ${panel.scenario}.`;
        return page.chart(
          `tuning-${slug(family)}-${slug(panel.scenario)}`,
          tuningSpec(panel, base),
          `Tuning of ${family} estimators (${base}): ${panel.scenario}`,
          description,
        );
      });
    parts.push(`<h3>Tuning: ${escapeHtml(family)} estimators</h3><div class="charts">${charts.join('\n')}</div>`);
  }
  parts.push('</section>');
  return parts.join('\n');
}

/** Error against autocorrelated rows (a plan's `phi` list): the tables `hhat bench` prints, sortable (found missing by a tester). */
function dependenceSection(page: Page): string {
  const tables = dependenceTables(page.data);
  if (!tables) return '';
  page.nav.push('<li><a href="#dependence">Serial dependence</a></li>');
  return `<section id="dependence"><h2>Serial dependence</h2>\n${tables}\n</section>`;
}

function scoresSection(page: Page): string {
  const { run } = page.data;
  page.nav.push('<li><a href="#scores">All scores</a></li>');
  const parts = [`<section id="scores"><h2>All scores</h2>${scoresTable(page.data)}`];
  if (run.skipped.length) {
    const reasons = [...new Set(run.skipped.map((s) => s.reason))];
    parts.push(`<p class="note">Skipped ${run.skipped.length} estimator–scenario pairs: ${escapeHtml(reasons.join('; '))}.</p>`);
  }
  parts.push('<p class="note">Click a column header to sort; click again to reverse.</p></section>');
  return parts.join('\n');
}

/** Renders the page and every chart; writes nothing. */
export async function renderReport(run: RunFile, options: ReportOptions = {}): Promise<Report> {
  const started = performance.now();
  const data = reportData(run, options.base ?? 'nats');
  const page = new Page(data);
  const sections = [overallSection(page), scenariosSection(page), robustnessSection(page), dependenceSection(page), scoresSection(page)];
  const warnings: string[] = [];
  const svgs: RenderedChart[] = [];
  for (const p of page.pending) svgs.push(await renderChart(p.name, p.spec, p.title, p.description, warnings));
  const byName = new Map(svgs.map((c) => [c.name, c]));
  // The provenance comes first so that it is on the first screen, before the contents list.
  const contents = `<nav aria-label="contents"><h2>Contents</h2><ol>${page.nav.join('')}</ol></nav>`;
  const body = [header(run, data), contents, ...sections].join('\n').replace(/<!--chart:([^>]+)-->/g, (_m, name: string) => figure(byName.get(name)!));
  const html = htmlPage(`hhat report: ${run.plan.name}`, body);
  return { html, svgs, warnings, renderMs: performance.now() - started };
}

/** Renders, then writes the page and the SVG files; returns what it rendered and the paths it wrote. */
export async function writeReport(run: RunFile, options: WriteReportOptions): Promise<Report & { files: string[] }> {
  const report = await renderReport(run, options);
  const files: string[] = [];
  if (options.svgDir) {
    ensureFolder(options.svgDir);
    for (const chart of report.svgs) {
      const path = join(options.svgDir, `${chart.name}.svg`);
      writeFileAtomic(path, `<?xml version="1.0" encoding="UTF-8"?>\n${chart.svg}\n`);
      files.push(path);
    }
  }
  if (options.out) {
    writeFileAtomic(options.out, report.html);
    files.push(options.out);
  }
  return { ...report, files };
}
