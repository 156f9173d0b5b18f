/**
 * `hhat report`: every chart is a well-formed standalone SVG (checked by an independent XML parser,
 * fast-xml-parser), names itself and its units; a bad run file writes nothing; the optional robustness
 * section draws its charts; the terminal chart puts each |bias| on the right decade.
 */
import { existsSync, mkdtempSync, readdirSync, readFileSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { beforeAll, describe, expect, it } from 'vitest';
import { XMLParser, XMLValidator } from 'fast-xml-parser';
import normalEntropy from '@stdlib/stats-base-dists-normal-entropy';
import { resolvePlan } from '../src/harness/plan.js';
import { runPlan } from '../src/harness/runner.js';
import { assembleRun, readRunFile, writeRunFile, type Cell, type RunFile } from '../src/analysis/results.js';
import type { RobustnessSection } from '../src/analysis/robustness.js';
import { UsageError } from '../src/core/errors.js';
import { formatValue } from '../src/core/format.js';
import { renderReport, slug, SLUG_LIMIT, writeReport } from '../src/views/report/report.js';
import { biasTextChart } from '../src/views/report/text-chart.js';
import { robustnessTable, scenarioTables } from '../src/views/tables.js';
import { runCli as cli } from './helpers/cli.js';

const dir = mkdtempSync(join(tmpdir(), 'hhat-report-'));
let run: RunFile;
let runPath: string;

beforeAll(async () => {
  const { plan } = resolvePlan({
    name: 'report test',
    scenarios: ['normal', 'gaussian:dim=2,rho=0.5'],
    estimators: ['kozachenko-leonenko', 'gaussian', 'histogram', 'vasicek'],
    sampleSizes: [60, 240, 960],
    replicates: 8,
    seed: 11,
  });
  run = assembleRun(await runPlan(plan, { workers: 1 }), null);
  runPath = join(dir, 'run.json');
  writeRunFile(runPath, run);
});

const xml = new XMLParser({ ignoreAttributes: false, attributeNamePrefix: '@', textNodeName: '#text' });

/** Every string inside <text> elements (vega draws axis titles, labels and legends as <text>). */
function texts(node: unknown, inside = false, out: string[] = []): string[] {
  if (typeof node === 'string' || typeof node === 'number') {
    if (inside) out.push(String(node));
  } else if (Array.isArray(node)) {
    for (const child of node) texts(child, inside, out);
  } else if (node && typeof node === 'object') {
    for (const [key, child] of Object.entries(node)) {
      if (key.startsWith('@')) continue;
      texts(child, inside || key === 'text', out);
    }
  }
  return out;
}

function parseSvg(text: string): { root: Record<string, unknown>; strings: string[] } {
  // fast-xml-parser's validator: a real XML well-formedness check, independent of how vega wrote the file.
  expect(XMLValidator.validate(text)).toBe(true);
  const doc = xml.parse(text) as { svg: Record<string, unknown> };
  expect(doc.svg).toBeDefined();
  return { root: doc.svg, strings: texts(doc.svg) };
}

/** The unit words each kind of chart must show in its axis titles. */
const UNIT_TEXT: [RegExp, (unit: string) => string[]][] = [
  [/^bias-/, (u) => [`|bias| (${u})`, 'sample size n']],
  [/^rmse-/, (u) => [`RMSE (${u})`, 'sample size n']],
  [/^estimates-/, (u) => [`estimate (${u})`]],
  [/^tuning-/, (u) => [`mean estimate (${u})`]],
  [/^efficiency$/, () => ['efficiency n·Var(Ĥ)/Var(log f(X)) (ratio, no unit)']],
  [/^average-rank$/, () => ['mean rank', 'dimension / tail class']],
  [/^robustness$/, () => ['check', 'verdict']],
];

describe('hhat report on a small run', () => {
  it('writes the page and one standalone SVG per chart, each valid XML with a title and unit-naming axes', async () => {
    const out = join(dir, 'page.html');
    const svgDir = join(dir, 'svg');
    const { code, out: printed } = await cli(['report', runPath, '--out', out, '--svg-dir', svgDir]);
    expect(code).toBe(0);
    expect(printed).toMatch(/report: .*page\.html \(\d+ charts/);
    const files = readdirSync(svgDir).filter((f) => f.endsWith('.svg'));
    // 2 scenarios × (|bias|, RMSE, estimates) + average rank + efficiency.
    expect(files.length).toBe(8);
    for (const file of files) {
      const { root, strings } = parseSvg(readFileSync(join(svgDir, file), 'utf8'));
      expect(root['@xmlns']).toBe('http://www.w3.org/2000/svg');
      expect(typeof root.title === 'string' && root.title.length > 10, `${file} has a <title>`).toBe(true);
      const rule = UNIT_TEXT.find(([pattern]) => pattern.test(file.replace(/\.svg$/, '')));
      expect(rule, `${file} is a known kind of chart`).toBeDefined();
      for (const expected of rule![1]('nats')) expect(strings, `${file} shows "${expected}"`).toContain(expected);
    }
    const html = readFileSync(out, 'utf8');
    expect((html.match(/<figure class="chart/g) ?? []).length).toBe(8);
    expect(html).toContain(run.environment.hhatVersion);
    expect(html).toContain(String(run.plan.seed));
  });

  it('an --svg-dir that cannot be a folder is one line, not an internal error: exit 2 for a file named, 1 for a folder the system refuses', async () => {
    const inTheWay = join(dir, 'not-a-folder');
    writeFileSync(inTheWay, 'a file');
    const named = await cli(['report', runPath, '--out', join(dir, 'blocked.html'), '--svg-dir', inTheWay]);
    expect(named.code).toBe(2);
    expect(named.err).toBe(`hhat: --svg-dir ${inTheWay} is a file, not a folder; give a folder's name (it is created if missing)\n`);
    const below = join(inTheWay, 'charts');
    const refused = await cli(['report', runPath, '--out', join(dir, 'blocked.html'), '--svg-dir', below]);
    expect(refused.code).toBe(1);
    expect(refused.err).toMatch(/^hhat: cannot create the folder .*not-a-folder\/charts: a part of that path is a file, not a folder\n$/);
  });

  it('--bits converts every entropy axis and the true value (normal truth from @stdlib)', async () => {
    const report = await renderReport(run, { base: 'bits' });
    expect(report.warnings).toEqual([]);
    for (const chart of report.svgs) {
      const { strings } = parseSvg(chart.svg);
      expect(strings.join('\n')).not.toMatch(/\(nats\)/);
      const rule = UNIT_TEXT.find(([pattern]) => pattern.test(chart.name))!;
      for (const expected of rule[1]('bits')) expect(strings, `${chart.name} shows "${expected}"`).toContain(expected);
    }
    const normal = report.svgs.find((c) => c.name.startsWith('estimates-normal'))!;
    const bits = normalEntropy(0, 1) / Math.LN2;
    expect(parseSvg(normal.svg).strings).toContain(`dashed line: true value ${formatValue(bits, 6)} bits`);
  });

  it('a run file of schema version 0 is a usage error and writes nothing', async () => {
    const old = join(dir, 'old.json');
    writeFileSync(old, JSON.stringify({ ...run, schemaVersion: 0 }));
    expect(() => readRunFile(old)).toThrow(UsageError);
    const out = join(dir, 'old.html');
    const svgDir = join(dir, 'old-svg');
    const { code, err } = await cli(['report', old, '--out', out, '--svg-dir', svgDir]);
    expect(code).toBe(2);
    expect(err.trim().split('\n')).toHaveLength(1);
    expect(err).toMatch(/schemaVersion 0/);
    expect(existsSync(out)).toBe(false);
    expect(existsSync(svgDir)).toBe(false);
  });

  it('a truncated run file is a usage error and writes nothing', async () => {
    const truncated = join(dir, 'truncated.json');
    const text = readFileSync(runPath, 'utf8');
    writeFileSync(truncated, text.slice(0, Math.floor(text.length / 2)));
    expect(() => readRunFile(truncated)).toThrow(UsageError);
    const out = join(dir, 'truncated.html');
    const { code, err } = await cli(['report', truncated, '--out', out, '--svg-dir', join(dir, 'truncated-svg')]);
    expect(code).toBe(2);
    expect(err).toMatch(/not valid JSON/);
    expect(existsSync(out)).toBe(false);
    expect(existsSync(join(dir, 'truncated-svg'))).toBe(false);
  });
});

/**
 * A robustness section in the format the brief for this section gives, made by hand so that the verdicts and
 * settings are known. Cast: the runner may add fields the report does not read.
 */
function withRobustness(base: RunFile): RunFile {
  const estimators = base.plan.estimators;
  const [knn, gaussian, histogram] = estimators;
  const estimate = (value: number | null) => ({ value: value as number, se: 0.01 });
  const verdicts = ['pass', 'warn', 'fail', 'n/a', 'pass', 'fail'];
  const columns = ['rescale', 'monotone', 'affine', 'quantize', 'contaminate', 'tuning'];
  const section = {
    sampleSize: 240,
    replicates: 8,
    perturbations: ['rescale:c=1000', 'quantize:step=0.1'],
    measures: [
      {
        scenario: 'normal:mu=0,sigma=1',
        estimator: knn,
        perturbation: 'rescale:c=1000',
        kind: 'rescale',
        level: null,
        shift: Math.log(1000),
        drift: estimate(1e-12),
        change: estimate(1e-13),
        discreteEntropy: null,
        sd: 0.1,
        failures: 0,
      },
      {
        scenario: 'normal:mu=0,sigma=1',
        estimator: gaussian,
        perturbation: 'quantize:step=0.1',
        kind: 'quantize',
        level: 0.1,
        shift: null,
        drift: estimate(null),
        change: estimate(0.02),
        discreteEntropy: 3.7,
        sd: 0.05,
        failures: 1,
      },
    ],
    tuning: [
      {
        scenario: 'normal:mu=0,sigma=1',
        estimator: knn,
        setting: 'k',
        // Out of order on purpose: numeric settings are drawn in numeric order.
        points: [10, 1, 3].map((k) => ({ value: k, spec: `kozachenko-leonenko:k=${k},norm=euclidean`, mean: estimate(1.4 + k / 100), sd: 0.05, failures: 0 })),
        spread: 1.8,
      },
      {
        scenario: 'normal:mu=0,sigma=1',
        estimator: histogram,
        setting: 'bins',
        points: ['sturges', 'scott', 'freedman-diaconis'].map((rule, i) => ({
          value: rule,
          spec: `histogram:bins=${rule}`,
          mean: estimate(1.38 + i / 100),
          sd: 0.06,
          failures: 0,
        })),
        spread: 0.4,
      },
    ],
    table: [knn, gaussian].map((estimator, row) => ({
      estimator,
      columns: Object.fromEntries(
        columns.map((c, i) => [c, { value: i === 3 ? null : i / 10, verdict: verdicts[(i + row) % verdicts.length], detail: `${c} detail` }]),
      ),
    })),
  } as unknown as RobustnessSection;
  return { ...base, robustness: section };
}

describe('the robustness section', () => {
  it('draws the verdict grid and one tuning panel per scenario × family, and is left out without one', async () => {
    const synthetic = withRobustness(run);
    const report = await renderReport(synthetic);
    expect(report.warnings).toEqual([]);
    const names = report.svgs.map((c) => c.name);
    expect(names).toContain('robustness');
    const tuningNames = names.filter((n) => n.startsWith('tuning-'));
    expect(tuningNames).toHaveLength(2);
    expect(tuningNames[0]).toMatch(/^tuning-nearest-neighbour-normal-mu-0-sigma-1-[0-9a-f]{8}$/);
    expect(tuningNames[1]).toMatch(/^tuning-histogram-normal-mu-0-sigma-1-[0-9a-f]{8}$/);
    const grid = parseSvg(report.svgs.find((c) => c.name === 'robustness')!.svg).strings;
    // Counted from the section above: each verdict's cells (with value and unit), plus its legend entry.
    const table = synthetic.robustness!.table.flatMap((r) => Object.values(r.columns).map((c) => c.verdict));
    for (const verdict of ['pass', 'warn', 'fail']) {
      expect(grid.filter((t) => t === verdict || t.startsWith(`${verdict} `)).length).toBe(table.filter((v) => v === verdict).length + 1);
    }
    const tuning = parseSvg(report.svgs.find((c) => c.name.startsWith('tuning-nearest'))!.svg).strings;
    const ticks = tuning.filter((t) => ['1', '3', '10'].includes(t));
    expect(ticks).toEqual(['1', '3', '10']);
    expect(report.html).toContain('id="robustness"');

    const plain = await renderReport({ ...run, robustness: null });
    expect(plain.svgs.some((c) => c.name === 'robustness' || c.name.startsWith('tuning-'))).toBe(false);
    expect(plain.html).not.toContain('id="robustness"');
  });

  it('the report and the terminal tables show the same verdicts, with units', async () => {
    const synthetic = withRobustness(run);
    const report = await renderReport(synthetic);
    const terminal = robustnessTable(synthetic);
    // Every verdict text the terminal prints (e.g. "warn 0.1 SD", "pass 0.4 nats") appears as a cell of the page.
    const shown = terminal
      .split('\n')
      .flatMap((line) => line.split('│').map((cell) => cell.trim()))
      .filter((cell) => /^(pass|warn|fail)\b/.test(cell));
    expect(shown.length).toBeGreaterThan(4);
    for (const cell of shown) expect(report.html).toContain(`>${cell}</td>`);
    // Each carries its unit: nats for drift and outliers, SD for bias changes and tuning, SD for recording steps.
    for (const cell of shown.filter((c) => /\d/.test(c))) expect(cell).toMatch(/ (nats|SD)$/);
    // Ranks read the same too, row by row: each scenario's rows (estimator and its rank at every n) in the page's
    // table equal the terminal table's, parsed from each independently.
    const sizes = [...new Set(run.cells.map((c) => c.n))].length;
    for (const info of run.scenarios) {
      const terminalRows = scenarioTables(run, 'nats')
        .split(/\n(?=\S+ {2}\(d=)/)
        .find((block) => block.startsWith(`${info.id}  (`))!
        .split('\n')
        .filter((line) => line.startsWith('│') && !line.includes('estimator'))
        .map((line) => {
          const cells = line
            .split('│')
            .slice(1, -1)
            .map((c) => c.trim());
          return [cells[0], ...cells.slice(1, 1 + sizes).map((c) => c.split(/ {2}/).pop()!)];
        });
      const table = report.html.split('<table').find((t) => t.includes(`<caption>${info.id}: RMSE`))!;
      const pageRows = [...table.matchAll(/<tr>(.*?)<\/tr>/g)]
        .map((m) => [...m[1].matchAll(/<td[^>]*>(.*?)<\/td>/g)].map((c) => c[1]))
        .filter((cells) => cells.length)
        .map((cells) => [cells[0], ...Array.from({ length: sizes }, (_, i) => cells[2 + 2 * i])]);
      expect(pageRows.length).toBeGreaterThan(0);
      expect(pageRows).toEqual(terminalRows);
    }
  });

  it('writeReport writes nothing when rendering fails', async () => {
    const broken = { ...run, cells: run.cells.map((c, i) => (i === 0 ? ({ ...c, scores: undefined } as unknown as Cell) : c)) };
    const out = join(dir, 'broken.html');
    await expect(writeReport(broken, { out, svgDir: join(dir, 'broken-svg') })).rejects.toThrow();
    expect(existsSync(out)).toBe(false);
    expect(existsSync(join(dir, 'broken-svg'))).toBe(false);
  });
});

// Found by a tester: `hhat bench --phi` printed these tables, and the report left them out.
describe('the serial dependence section', () => {
  it('holds the variance-inflation and thinning rows of a run with phi, and is left out without', async () => {
    const { plan } = resolvePlan({
      scenarios: ['normal'],
      phi: [0, 0.5],
      estimators: ['gaussian', 'kozachenko-leonenko', 'kozachenko-leonenko:thin=2'],
      sampleSizes: [200],
      replicates: 8,
      seed: 3,
    });
    const dependent = assembleRun(await runPlan(plan, { workers: 1, isolation: 'in-process' }), null);
    const section = dependent.dependence!;
    expect(section.varianceInflation.length).toBeGreaterThan(0);
    expect(section.thinning.length).toBeGreaterThan(0);
    const { html } = await renderReport(dependent);
    expect(html).toContain('<section id="dependence"><h2>Serial dependence</h2>');
    expect(html).toContain('<a href="#dependence">Serial dependence</a>');
    const part = html.slice(html.indexOf('<section id="dependence">'), html.indexOf('</section>', html.indexOf('<section id="dependence">')));
    // One table row per ratio and per thinning comparison, each with its figures as the run file holds them.
    expect(part.match(/<tr><td/g)).toHaveLength(section.varianceInflation.length + section.thinning.length);
    for (const v of section.varianceInflation)
      expect(part).toContain(`>${formatValue(v.ratio.value, 3)} [${formatValue(v.ratio.lower, 2)}, ${formatValue(v.ratio.upper, 2)}]<`);
    for (const t of section.thinning) expect(part).toContain(`>${t.verdict}<`);
    expect((await renderReport(run)).html).not.toContain('id="dependence"');
  });
});

describe('what the report names and labels', () => {
  /** A section whose verdicts and values are set by hand: 11 SD of bias change, no safe recording step, 3e-15 nats of drift. */
  function verdicts(base: RunFile): RunFile {
    const [knn] = base.plan.estimators;
    const cell = (value: number | null, verdict: string) => ({ value, verdict, detail: '' });
    const section = {
      sampleSize: 240,
      replicates: 8,
      perturbations: [],
      measures: [],
      tuning: [],
      table: [{ estimator: knn, columns: { rescale: cell(3e-15, 'pass'), affine: cell(11, 'fail'), quantize: cell(0, 'fail'), tuning: cell(null, 'n/a') } }],
    } as unknown as RobustnessSection;
    return { ...base, robustness: section };
  }

  it('the verdict grid keeps each verdict\'s unit, as the tables do: "fail 11 SD", "fail <min"', async () => {
    const report = await renderReport(verdicts(run));
    const grid = parseSvg(report.svgs.find((c) => c.name === 'robustness')!.svg).strings;
    for (const text of ['pass 3e-15 nats', 'fail 11 SD', 'fail <min', '–']) expect(grid, `the grid shows "${text}"`).toContain(text);
    for (const text of ['pass 3e-15 nats', 'fail 11 SD', 'fail &lt;min']) expect(report.html).toContain(`>${text}</td>`);
  });

  it("names specs that differ only in sign apart, and keeps a long spec's name short", () => {
    expect(slug('normal')).toBe('normal');
    const plus = slug('normal:mu=2');
    const minus = slug('normal:mu=-2');
    expect(plus).toMatch(/^normal-mu-2-[0-9a-f]{8}$/);
    expect(minus).toMatch(/^normal-mu-2-[0-9a-f]{8}$/);
    expect(plus).not.toBe(minus);
    const covariance = Array.from({ length: 9 }, (_, i) => Array.from({ length: 9 }, (_, j) => (i === j ? 1.25 : 0.125)).join(',')).join(';');
    const long = slug(`gaussian-covariance[${covariance}]`);
    expect(long).toBe(
      `${`gaussian-covariance-${covariance}`
        .replace(/[^a-z0-9.]+/g, '-')
        .slice(0, SLUG_LIMIT)
        .replace(/-+$/, '')}-${long.slice(-8)}`,
    );
    expect(long.length).toBeLessThanOrEqual(SLUG_LIMIT + 9);
  });

  it('writes the page and every SVG for a 9-D covariance spec and for two specs that differ only in sign', async () => {
    const covariance = Array.from({ length: 9 }, (_, i) => Array.from({ length: 9 }, (_, j) => (i === j ? 1.25 : 0.125)).join(',')).join(';');
    const { plan } = resolvePlan({
      name: 'long names',
      scenarios: [`gaussian-covariance[${covariance}]`, 'normal:mu=2', 'normal:mu=-2'],
      estimators: ['gaussian'],
      sampleSizes: [40, 80],
      replicates: 4,
      seed: 2,
    });
    const longRun = assembleRun(await runPlan(plan, { workers: 1 }), null);
    const svgDir = join(dir, 'long-svg');
    const out = join(dir, 'long.html');
    const written = await writeReport(longRun, { out, svgDir });
    expect(existsSync(out)).toBe(true);
    const files = readdirSync(svgDir);
    // 3 scenarios × (|bias|, RMSE, estimates) + efficiency; one gaussian estimator gives no rank heat map.
    expect(files).toHaveLength(written.svgs.length);
    // ext4 and most file systems allow 255 bytes per name.
    for (const file of files) expect(Buffer.byteLength(file)).toBeLessThanOrEqual(255);
    const estimates = files.filter((f) => f.startsWith('estimates-normal-mu-2-'));
    expect(estimates).toHaveLength(2);
    // Each is the chart of its own scenario, not a numbered duplicate.
    const titles = estimates.map((f) => String(parseSvg(readFileSync(join(svgDir, f), 'utf8')).root.title));
    expect(titles.sort()).toEqual(['Estimates (nats) at n = 80: normal:mu=-2,sigma=1', 'Estimates (nats) at n = 80: normal:mu=2,sigma=1']);
    const html = readFileSync(out, 'utf8');
    const sectionIds = [...html.matchAll(/<section class="scenario" id="([^"]+)"/g)].map((m) => m[1]);
    expect(new Set(sectionIds).size).toBe(3);
  }, 60_000);
});

describe('biasTextChart', () => {
  /** Two estimators with |bias| chosen by hand: A falls two decades over 100 → 10000, B stays at 0.01. */
  function handMade(): RunFile {
    const scores = (bias: number, se: number) => ({ bias: { value: bias, se } }) as unknown as Cell['scores'];
    const cell = (estimator: string, n: number, bias: number, se: number) =>
      ({ scenario: 's', estimator, n, role: 'main', perturbation: null, scores: scores(bias, se) }) as unknown as Cell;
    return {
      scenarios: [{ id: 's' }],
      cells: [cell('gaussian', 100, 0.1, 0.001), cell('gaussian', 10000, -0.001, 0.0001), cell('kernel', 100, 0.01, 0.001), cell('kernel', 10000, 0.01, 0.02)],
      rankings: [{ scenario: 's', n: 10000, perturbation: null, entries: [{ estimator: 'gaussian' }, { estimator: 'kernel' }] }],
    } as unknown as RunFile;
  }

  it('puts each |bias| on its decade (log10 worked out by hand) and lower-cases those within 2 SE of zero', () => {
    const lines = biasTextChart(handMade(), 'nats').split('\n');
    const rowOf = (label: string) => lines.find((l) => l.trimStart().startsWith(`${label} ┤`))!;
    expect(lines[0]).toBe('s: |bias| (nats) against n, log–log, best 2 at n=10000');
    expect(rowOf('0.1').match(/[A-Za-z]/g)).toEqual(['A']);
    // B at n=100 is 0.01 ± 0.001 (clear of zero); at n=10000, 0.01 ± 0.02 is within 2 SE: lower case.
    expect(rowOf('0.01').match(/[A-Za-z]/g)).toEqual(['B', 'b']);
    expect(rowOf('0.001').match(/[A-Za-z]/g)).toEqual(['A']);
    const a100 = rowOf('0.1').indexOf('A');
    const a10000 = rowOf('0.001').indexOf('A');
    expect(a10000).toBeGreaterThan(a100);
    expect(lines.some((l) => l.includes('A gaussian') && l.includes('B kernel'))).toBe(true);
  });

  it('converts to bits and draws every scenario of a real run', () => {
    const text = biasTextChart(run, 'bits');
    expect(text).toContain('|bias| (bits)');
    for (const info of run.scenarios) expect(text).toContain(`${info.id}: |bias|`);
  });
});

describe('the efficiency chart names the variance it divides by', () => {
  it('for mutual information the information density, not log f; for entropy log f', async () => {
    const { plan } = resolvePlan({
      quantity: 'mutual-information',
      scenarios: ['mi-gaussian:rho=0.6'],
      estimators: ['mi-gaussian', 'ksg1'],
      sampleSizes: [100, 200],
      replicates: 6,
      seed: 4,
    });
    const mi = await renderReport(assembleRun(await runPlan(plan, { workers: 1 }), null));
    expect(mi.html).toContain('Efficiency n·Var(Î)/Var(i(X; Y)) against the asymptotic 1');
    expect(mi.html).toContain('the information density');
    expect(mi.html).not.toContain('Var(log f');
    const entropy = await renderReport(run);
    expect(entropy.html).toContain('Efficiency n·Var(Ĥ)/Var(log f(X)) against the asymptotic 1');
  });
});
