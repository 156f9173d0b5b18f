/**
 * Reading files through a window, and the limits that keep large inputs within the machine: a record may
 * straddle any window boundary, so the values read must not depend on the window size.
 */
import { closeSync, mkdtempSync, openSync, rmSync, statSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { afterAll, describe, expect, it } from 'vitest';
import chisquareCdf from '@stdlib/stats-base-dists-chisquare-cdf';
import { parseDelimited, readDelimitedFile, readSample } from '../src/data/index.js';
import { rngFromSeed } from '../src/core/rng.js';
import { predictedSeconds, roundRowsDown, rowsWithin } from '../src/harness/cost-model.js';
import { checkSampleMemory, MAX_TYPED_ARRAY_LENGTH } from '../src/core/memory.js';
import { seededRowSubsample, uniformRowSubsample } from '../src/core/sample.js';
import { adviseFile, analysisRows } from '../src/analysis/advise/file.js';
import { applicableEstimators } from '../src/analysis/advise/benchmark.js';
import { listEstimators, parseEstimatorSpec } from '../estimators/index.js';
import { runCli as run } from './helpers/cli.js';
import { usageMessage } from './helpers/usage-error.js';

const tempDir = mkdtempSync(join(tmpdir(), 'hhat-large-data-'));
afterAll(() => rmSync(tempDir, { recursive: true, force: true }));

function writeTemp(name: string, content: string): string {
  const path = join(tempDir, name);
  writeFileSync(path, content);
  return path;
}

function readWithWindow(path: string, windowBytes: number, delimiter: 'comma' | undefined = 'comma') {
  const fd = openSync(path, 'r');
  try {
    return readDelimitedFile(fd, statSync(path).size, { source: path, delimiter, windowBytes });
  } finally {
    closeSync(fd);
  }
}

describe('delimited files read through a window', () => {
  // Rows of numbers written as text; the expected values are ECMAScript Number() of that text.
  const rng = rngFromSeed('window-test');
  const lines: string[] = ['# a gauge log', '"north, µm/m",mid,south'];
  const expected: number[] = [];
  for (let i = 0; i < 300; i++) {
    const fields = [0, 1, 2].map((j) => {
      const x = (rng() - 0.5) * 10 ** (3 * j - 3);
      // Full precision sometimes (the slow path, which decodes the window as text), short otherwise.
      const text = i % 3 === 0 ? String(x) : x.toFixed(6);
      expected.push(Number(text));
      return j === 1 && i % 7 === 0 ? `"${text}"` : text;
    });
    lines.push(fields.join(','));
    if (i % 50 === 25) lines.push('# a comment between rows');
  }
  const crlf = writeTemp('gauges-crlf.csv', `${lines.join('\r\n')}\r\n\r\n`);
  const lf = writeTemp('gauges-lf.csv', `${lines.join('\n')}`);
  const cr = writeTemp('gauges-cr.txt', `${lines.join('\r')}\r`);

  for (const [label, path] of [
    ['CRLF', crlf],
    ['LF, no final line end', lf],
    ['CR', cr],
  ] as const) {
    it(`gives the same values for every window size (${label})`, () => {
      for (const windowBytes of [1, 2, 3, 5, 8, 13, 64, 1000, 1 << 20]) {
        const table = readWithWindow(path, windowBytes);
        expect(table.sample.n, `window ${windowBytes}`).toBe(300);
        expect(Array.from(table.sample.data), `window ${windowBytes}`).toEqual(expected);
        expect(table.columnNames).toEqual(['north, µm/m', 'mid', 'south']);
        expect(table.headerLine).toBe(2);
      }
    });
  }

  it('names the same line in errors whatever the window', () => {
    const bad = [...lines.slice(0, 200), '1,2,oops', ...lines.slice(200)].join('\n');
    const path = writeTemp('bad.csv', bad);
    const whole = usageMessage(() => parseDelimited(bad, { source: path, delimiter: 'comma' }));
    expect(whole).toMatch(/line 201, column 3/);
    for (const windowBytes of [1, 7, 64]) expect(usageMessage(() => readWithWindow(path, windowBytes))).toBe(whole);
    const unclosed = writeTemp('unclosed.csv', `x,y\n1,2\n3,"4\n5,6\n`);
    for (const windowBytes of [1, 3, 100])
      expect(usageMessage(() => readWithWindow(unclosed, windowBytes))).toMatch(/line 3, column 2: a quoted field is never closed/);
    const blank = writeTemp('blank.csv', `x,y\n1,2\n\n3,4\n`);
    for (const windowBytes of [1, 4]) expect(usageMessage(() => readWithWindow(blank, windowBytes))).toMatch(/line 3 is blank/);
    const comments = writeTemp('comments.csv', `# only\n# comments\n`);
    for (const windowBytes of [1, 4]) expect(usageMessage(() => readWithWindow(comments, windowBytes))).toMatch(/only comment lines/);
  });

  it('guesses the delimiter of a .txt file from its start, as the whole-file parser does', () => {
    const text = lines.map((line) => line.replace(/"[^"]*"/g, (q) => q.replace(/, /g, '_')).replace(/,/g, ';')).join('\n');
    const path = writeTemp('gauges.txt', text);
    const table = readSample(path);
    expect(table.delimiter).toBe('semicolon');
    expect(Array.from(table.sample.data)).toEqual(expected);
  });

  it('keeps the values in an array exactly n·d long', () => {
    const table = readSample(lf);
    expect(table.sample.data.length).toBe(300 * 3);
  });
});

/** Three correlated gauge columns, seeded, as CSV text and as the values written. */
function gaugeFile(name: string, rows: number): { path: string; values: Float64Array } {
  const rng = rngFromSeed(`gauges-${name}`);
  const normal = (): number => Math.sqrt(-2 * Math.log(1 - rng())) * Math.cos(2 * Math.PI * rng());
  const values = new Float64Array(rows * 3);
  const lines = ['north,mid,south'];
  for (let i = 0; i < rows; i++) {
    const a = Number(normal().toFixed(6));
    const b = Number((0.8 * a + 0.6 * normal()).toFixed(6));
    const c = Number((0.5 * b + 0.87 * normal()).toFixed(6));
    values.set([a, b, c], 3 * i);
    lines.push(`${a},${b},${c}`);
  }
  return { path: writeTemp(`${name}.csv`, `${lines.join('\n')}\n`), values };
}

describe('uniform row subsamples', () => {
  it('every 3-subset of 7 rows is equally likely (chi-square against @stdlib chisquare-cdf)', () => {
    const n = 7;
    const data = Float64Array.from({ length: n * 2 }, (_, p) => (p % 2 === 0 ? p / 2 : -p));
    const counts = new Map<string, number>();
    const rng = rngFromSeed('subset-uniformity');
    const draws = 35 * 400;
    for (let t = 0; t < draws; t++) {
      const cut = uniformRowSubsample({ n, dim: 2, data }, 3, rng);
      // Rows come out whole and in their original order.
      const rows = [0, 1, 2].map((r) => cut.data[2 * r]);
      for (let r = 0; r < 3; r++) expect(cut.data[2 * r + 1]).toBe(-(2 * rows[r] + 1));
      expect(rows[0] < rows[1] && rows[1] < rows[2]).toBe(true);
      counts.set(rows.join(','), (counts.get(rows.join(',')) ?? 0) + 1);
    }
    expect(counts.size).toBe(35); // C(7, 3)
    const expected = draws / 35;
    let statistic = 0;
    for (const count of counts.values()) statistic += (count - expected) ** 2 / expected;
    expect(1 - chisquareCdf(statistic, 34)).toBeGreaterThan(0.001);
  });

  it('is fixed by its seed and size, and keeps a divergence Q sample in proportion', () => {
    const sample = { n: 1000, dim: 1, data: Float64Array.from({ length: 1000 }, (_, i) => i), q: { n: 500, dim: 1, data: new Float64Array(500) } };
    const a = seededRowSubsample(sample, 100, 'x');
    expect(Array.from(a.data)).toEqual(Array.from(seededRowSubsample(sample, 100, 'x').data));
    expect(Array.from(a.data)).not.toEqual(Array.from(seededRowSubsample(sample, 100, 'y').data));
    expect(a.q!.n).toBe(50);
    expect(seededRowSubsample(sample, 1000, 'x')).toBe(sample);
  });

  it('nests: with one seed, a smaller subsample lies inside every larger one, so cut estimators share rows', () => {
    const sample = { n: 5000, dim: 1, data: Float64Array.from({ length: 5000 }, (_, i) => i) };
    const sizes = [40, 300, 1200, 4999];
    const cuts = sizes.map((rows) => new Set(seededRowSubsample(sample, rows, 'nest').data));
    for (let k = 1; k < cuts.length; k++) for (const row of cuts[k - 1]) expect(cuts[k].has(row)).toBe(true);
    expect(cuts.map((c) => c.size)).toEqual(sizes);
  });
});

describe('the cost model', () => {
  it('the cost model knows every built-in estimator: none runs unlimited for want of a prediction', () => {
    for (const estimator of listEstimators()) {
      const dim = estimator.quantity === 'entropy' ? Math.max(1, estimator.dims[0]) : 2;
      const context = estimator.quantity === 'mutual-information' ? { xDim: 1 } : estimator.quantity === 'divergence' ? { qN: 1000 } : {};
      const seconds = predictedSeconds(parseEstimatorSpec(estimator.id), 1000, dim, context);
      expect(seconds, estimator.id).not.toBeNull();
      expect(seconds!, estimator.id).toBeGreaterThan(0);
    }
  });

  it('rowsWithin is the largest row count whose prediction fits (brute-force scan), rounded down to two digits below n', () => {
    for (const spec of ['kernel', 'kozachenko-leonenko-weighted', 'histogram']) {
      const configured = parseEstimatorSpec(spec);
      for (const seconds of [0.01, 0.3]) {
        const rows = rowsWithin(configured, 40000, 3, seconds);
        let brute = 0;
        for (let m = 1; m <= 40000; m++) if (predictedSeconds(configured, m, 3)! <= seconds) brute = m;
        expect(rows, `${spec} ${seconds}`).toBe(brute === 40000 ? 40000 : roundRowsDown(brute));
      }
    }
    // All rows, even an unround count, when they fit.
    expect(rowsWithin(parseEstimatorSpec('histogram'), 3456, 1, 10)).toBe(3456);
    expect(roundRowsDown(81_234)).toBe(81_000);
    expect(roundRowsDown(4_987_654)).toBe(4_900_000);
  });
});

describe('hhat estimate on more rows than its time limit allows', () => {
  const { path, values } = gaugeFile('estimate', 20000);

  it('runs a slow default estimator on a stated seeded subsample, the rest on all rows', async () => {
    const { code, out } = await run(['estimate', path, '--json', '--max-seconds', '0.3']);
    expect(code).toBe(0);
    const json = JSON.parse(out) as {
      maxSeconds: number;
      estimates: { estimator: string; value: number | null; subsample?: { rows: number; of: number; seed: number; reason: string } }[];
    };
    expect(json.maxSeconds).toBe(0.3);
    const kernel = json.estimates.find((e) => e.estimator === 'kernel')!;
    const rows = roundRowsDown(rowsWithin(parseEstimatorSpec('kernel'), 20000, 3, 0.3));
    expect(kernel.subsample).toMatchObject({ rows, of: 20000, seed: 1 });
    expect(kernel.subsample!.reason).toMatch(/^all 20000 rows would take about .* over the 0.3 s limit \(--max-seconds\)$/);
    // The value is the kernel estimate of exactly those rows.
    const sample = { n: 20000, dim: 3, data: values };
    const configured = parseEstimatorSpec('kernel');
    expect(kernel.value).toBe(configured.estimator.estimate(seededRowSubsample(sample, rows, '1'), configured.settings));
    for (const e of json.estimates.filter((r) => r.estimator !== 'kernel')) expect(e.subsample, e.estimator).toBeUndefined();
  });

  it('skips what would not fit even on 1000 rows, says so, and exits 0 while something was estimated', async () => {
    const { code, out, err } = await run(['estimate', path, '--max-seconds', '0.002', '--estimator', 'kernel', '--estimator', 'gaussian']);
    expect(code).toBe(0);
    expect(err).toBe('');
    expect(out).toMatch(/kernel .*│ +– │ +skipped \(time\) │/);
    expect(out).toMatch(/^skipped: kernel: all 20000 rows would take about .*, and even 1000 rows would not fit$/m);
    const json = JSON.parse((await run(['estimate', path, '--max-seconds', '0.002', '--estimator', 'kernel', '--json'])).out) as {
      estimates: { value: null; skipped: string }[];
    };
    expect(json.estimates[0].value).toBeNull();
    expect(json.estimates[0].skipped).toMatch(/even 1000 rows would not fit/);
    const none = await run(['estimate', path, '--max-seconds', '0.002', '--estimator', 'kernel']);
    expect(none.code).toBe(1);
    expect(none.err).toMatch(/no estimate was made: every estimator was skipped under the 0.002 s limit/);
  });

  it('runs named estimators on all rows unless --max-seconds is given', async () => {
    const json = JSON.parse((await run(['estimate', path, '--estimator', 'histogram', '--json'])).out) as {
      maxSeconds: null;
      estimates: { subsample?: unknown }[];
    };
    expect(json.maxSeconds).toBeNull();
    expect(json.estimates[0].subsample).toBeUndefined();
    expect((await run(['estimate', path, '--max-seconds', '0'])).code).toBe(2);
    expect((await run(['estimate', path, '--max-seconds', 'none', '--estimator', 'gaussian'])).code).toBe(0);
  });
});

describe('hhat advise FILE with more rows than the budget can analyse', () => {
  it('works on a seeded subsample of the rows analysisRows gives, says so, and runs the choice on more rows', async () => {
    const { values } = gaugeFile('advise', 30000);
    const sample = { n: 30000, dim: 3, data: values };
    const estimators = applicableEstimators(3);
    // No interval (level null), so no bootstrap resamples to fit.
    const rows = analysisRows(30000, 3, estimators, 2, 1, 20, 0);
    expect(rows).toBeLessThan(30000);
    // The analysis rows are a two-digit count whose predicted 20 replicates fit 15% of 2 s on one thread.
    const perReplicate = (m: number) => estimators.reduce((sum, e) => sum + predictedSeconds(parseEstimatorSpec(e), m, 3)!, 0) * 1.1;
    expect(perReplicate(rows) * 20).toBeLessThanOrEqual(0.15 * 2 + 1e-12);
    expect(perReplicate(rows * 1.1) * 20).toBeGreaterThan(0.15 * 2);
    const advice = await adviseFile(sample, { budgetSeconds: 2, workers: 1, level: null });
    expect(advice.fileRows).toBe(30000);
    expect(advice.n).toBe(rows);
    expect(advice.subsample).toMatchObject({ rows, of: 30000 });
    expect(advice.warnings[0]).toMatch(new RegExp(`^your file has 30000 rows; the advice above works on a seeded uniform subsample of ${rows} of them`));
    expect(advice.allRows).not.toBeNull();
    expect(advice.allRows!.rows).toBeGreaterThan(rows);
    expect(advice.allRows!.value).not.toBeNull();
  });

  it('a fixed replicate count sizes the rows by the whole benchmark share (60%), not the budgeted minimum’s 15%', () => {
    const estimators = applicableEstimators(3);
    const perReplicate = (m: number) => estimators.reduce((sum, e) => sum + predictedSeconds(parseEstimatorSpec(e), m, 3)!, 0) * 1.1;
    const fixed = analysisRows(30000, 3, estimators, 20, 2, 1000, 0, 0.6);
    expect(perReplicate(fixed) * 1000).toBeLessThanOrEqual(0.6 * 20 * 2 + 1e-9);
    expect(perReplicate(fixed * 1.1) * 1000).toBeGreaterThan(0.6 * 20 * 2);
    expect(fixed).toBeGreaterThan(analysisRows(30000, 3, estimators, 20, 2, 1000, 0));
  });

  it('refuses a budget under which not even 200 rows fit, before any work, with the budget that would', async () => {
    const { values } = gaugeFile('advise-tiny', 3000);
    await expect(adviseFile({ n: 3000, dim: 3, data: values }, { budgetSeconds: 0.01, workers: 1 })).rejects.toThrow(
      /^--budget 0.01 is too small for this file: one replicate of the 5 estimators at n = 3000 would take about .* by the cost model, and the benchmark needs 20; within the 0.01 s budget on 1 worker, not even 200 rows fit; give --budget \d+ or more$/,
    );
  });
});

describe('sample sizes the machine cannot hold', () => {
  it('refuses with what they would need (formula checked by hand)', () => {
    // 10^8 points in d = 2 on 2 workers: 150 MB + 2 · 10^8 · 8 · (6·2 + 28) bytes = 64.15 GB.
    // With 40 GB the largest n is (40e9 − 150e6) / (2 · 320) = 62 265 625, and one worker (32.15 GB) would fit.
    expect(() => checkSampleMemory('--n 100000000', 1e8, 2, { workers: 2, totalBytes: 40e9 })).toThrow(
      /^--n 100000000 needs about 64 GB of memory \(2 workers × 100000000 points in d = 2, about 320 bytes per point .*\), more than this machine's 40 GB; use n ≤ 62265625, or fewer workers \(--workers 1\)$/,
    );
    // With 32 GB one worker would not fit either (32.15 GB), so only a smaller n is offered.
    expect(() => checkSampleMemory('--n 100000000', 1e8, 2, { workers: 2, totalBytes: 32e9 })).toThrow(/more than this machine's 32 GB; use n ≤ 49765625$/);
    expect(() => checkSampleMemory('--n 1000', 1000, 2, { workers: 2, totalBytes: 32e9 })).not.toThrow();
    expect(() => checkSampleMemory('--n 5000000000', 5e9, 1, { totalBytes: 1e15 })).toThrow(
      new RegExp(`beyond the ${MAX_TYPED_ARRAY_LENGTH} a JavaScript typed array can hold`),
    );
  });

  it('advise --n: the plan schema ranges, the memory check and the predicted budget, all before any work', async () => {
    const tooLarge = await run(['advise', '--n', '1e12', '--dim', '1']);
    expect(tooLarge.code).toBe(2);
    expect(tooLarge.err).toMatch(/--n 1e12 is not allowed; it must be an integer from 10 to 100000000/);
    const wide = await run(['advise', '--n', '100000000', '--dim', '1000']);
    expect(wide.code).toBe(2);
    expect(wide.err).toMatch(/a JavaScript typed array can hold/);
    expect((await run(['advise', '--n', '500', '--dim', '1', '--replicates', '1000001'])).err).toMatch(/from 2 to 1000000/);
    // Predicted at about 9 s per replicate (src/harness/cost-model.ts), so 5 replicates on 2 workers need about 33 s:
    // more than 4 (the model's margin) times a 5 s budget.
    const slow = await run(['advise', '--n', '300000', '--dim', '3', '--budget', '5']);
    expect(slow.code).toBe(2);
    expect(slow.err).toMatch(
      /^hhat: --budget 5 is too small here: one replicate of one matching scenario at n = 300000 is predicted to take about .*; give --budget \d+ or more, or a smaller --n\n$/,
    );
  });
});
