/**
 * The estimator conformance suite (src/conformance.ts) and `hhat check`:
 * - every estimator in the registry passes every applicable check with its defaults (a new estimator is
 *   covered by being registered), and with the settings that switch its declared exceptions on or off;
 * - each check fails, alone, on an estimator broken in exactly that way, so no check is one that cannot fail;
 * - hhat check passes the shipped example and exits 1 on a module whose estimate depends on the row order.
 *
 * The broken estimators' closed forms are textbook ones: the normal entropy ½ log(2πeσ²) and the Gaussian
 * mutual information −½ log(1 − ρ²) (Cover & Thomas, Elements of Information Theory, 2nd ed., Secs. 8.4 and
 * 8.5), and the divergence between normal laws ½[σp²/σq² + (μq − μp)²/σq² − 1 + log(σq²/σp²)] (Kullback,
 * Information Theory and Statistics, 1959).
 */
import { mkdtempSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { describe, expect, it } from 'vitest';
import type { Estimator, Sample } from '../src/core/contracts.js';
import { type CheckName, type ConformanceReport, checksFor, INVARIANCE_N, runConformance } from '../src/analysis/conformance.js';
import { EstimateError, UsageError } from '../src/core/errors.js';
import { checkEstimator } from '../src/harness/modules.js';
import { getEstimator, listEstimators } from '../estimators/index.js';
import { parseScenario } from '../scenarios/index.js';
import { checkedPair } from '../estimators/divergence.js';
import { checkedSplit } from '../estimators/mutual-information.js';
import { defaultWindow } from '../estimators/spacing.js';
import { runCli } from './helpers/cli.js';
import teHistory from './fixtures/te-history.json' with { type: 'json' };

const root = join(__dirname, '..');
const example = join(root, 'examples', 'drift-corrected-estimators.mjs');
const firstHalfModule = join(root, 'test', 'fixtures', 'first-half-estimator.mjs');

function failing(report: ConformanceReport): CheckName[] {
  return report.checks.filter((c) => c.status === 'fail').map((c) => c.check);
}

/** Every check's line, shown when an expectation fails. */
function evidence(report: ConformanceReport): string {
  return `${report.spec}\n${report.checks.map((c) => `  ${c.status} ${c.check}: ${c.evidence}`).join('\n')}`;
}

/**
 * A check may be not applicable only for a structural reason or a declared exception: never silently.
 * Structural: no resolve (nothing to compare), a wrong dimension outside a divergence (the registry refuses it before estimate runs), d = 1
 * only (an affine map is a scale and a shift there).
 */
function expectNotApplicableOnlyForAReason(report: ConformanceReport, estimator: Estimator): void {
  for (const c of report.checks.filter((r) => r.status === 'not-applicable')) {
    const structural =
      (c.check === 'configured-resolved' && !estimator.resolve) ||
      // Outside a divergence's Q sample, a wrong dimension is refused by the registry before estimate runs.
      (c.check === 'rejects-wrong-dimension' && estimator.quantity !== 'divergence') ||
      (c.check === 'affine' && estimator.dims[1] === 1) ||
      // No tuning grid at these settings (a fixed bandwidth or width, a parametric method): nothing to vary.
      (c.check === 'tuning-responds' && !estimator.tuning?.(report.settings, INVARIANCE_N).length);
    expect(structural || c.declared !== undefined, `${report.estimator}: ${c.check} is not applicable without a declared reason: ${c.evidence}`).toBe(true);
  }
}

/**
 * Settings under which a built-in lacks an invariance, each measured below: the difference is real. A
 * default-settings exception whose measurement the estimator itself refuses is measured here instead
 * (histogram-divergence's default Freedman–Diaconis cells leave some P points without Q points on the
 * correlated 2-D sample of the affine check, so its plug-in is +∞ there; Sturges' coarser cells do not).
 */
const DECLARED: [string, Record<string, string | number>, CheckName][] = [
  ['histogram', { width: 0.5 }, 'scale'],
  ['kernel', { bandwidth: 0.3 }, 'scale'],
  ['mi-kernel', { bandwidth: 0.3 }, 'scale'],
  ['ksg2', { copula: 'rank' }, 'row-order'],
  ['mi-from-entropies', { entropy: 'kozachenko-leonenko-weighted' }, 'scale'],
  ['histogram-divergence', { bins: 'sturges' }, 'affine'],
  ['knn-divergence', { k: 3 }, 'affine'],
  ['lattice', { step: 0.3 }, 'scale'],
  ['lattice', { step: 0.3 }, 'translation'],
  // Swapped, the continuous Y becomes the label: refused, which is the measurement (the roles are not interchangeable).
  ['mi-discrete-continuous', {}, 'symmetry'],
];

/** A declared exception must be needed: the difference measured anyway is beyond what the check allows. */
function expectDeclaredExceptionsMeasured(report: ConformanceReport): void {
  for (const c of report.checks.filter((r) => r.declared)) {
    const compared = c.declared!.compared;
    if (
      compared === undefined &&
      DECLARED.some(([id, , check]) => id === report.estimator && check === c.check) &&
      /measured anyway: (the sample as drawn|Î\(Y; X\)): EstimateError/.test(c.evidence)
    )
      continue;
    expect(compared, `${report.spec}: ${c.check}: the declared exception could not be measured: ${c.evidence}`).toBeDefined();
    expect(compared!.difference, `${report.spec}: ${c.check}: declared lacking, yet it holds: ${c.evidence}`).toBeGreaterThan(compared!.tolerance);
  }
}

describe('every registered estimator passes the conformance suite', () => {
  const estimators = listEstimators();

  it('covers every id in the registry (25 built-ins at the time of writing)', () => {
    expect(estimators.length).toBeGreaterThanOrEqual(25);
  });

  // lattice (step=auto) and mi-discrete-continuous take data of a kind the quantity's usual draws are not (values on
  // a lattice, an X of labels): they declare the law the suite draws from, and pass on it like the rest.
  it('lattice and mi-discrete-continuous are checked on their declared laws, lattice data and labels', () => {
    expect(runConformance(getEstimator('lattice')).law).toBe('recorded[step=0.1;normal:mu=0,sigma=1]');
    expect(runConformance(getEstimator('mi-discrete-continuous')).law).toBe('mi-label-gaussian:m=3,gap=1');
    expect(runConformance(getEstimator('kozachenko-leonenko')).law).toBe('normal:mu=0,sigma=1');
  });
  for (const estimator of estimators) {
    it(`${estimator.id}: every applicable check passes with the default settings`, () => {
      const report = runConformance(estimator);
      expect(report.checks.map((c) => c.check)).toEqual(checksFor(estimator.quantity));
      expect(failing(report), evidence(report)).toEqual([]);
      expectNotApplicableOnlyForAReason(report, estimator);
      expectDeclaredExceptionsMeasured(report);
    });
  }
});

describe('declared exceptions follow the settings', () => {
  for (const [id, settings, check] of DECLARED) {
    it(`${id} with ${JSON.stringify(settings)}: ${check} is declared lacking, and measurably so`, () => {
      const report = runConformance(getEstimator(id), { settings, only: [check] });
      const result = report.checks[0];
      expect(result.declared, result.evidence).toBeDefined();
      expectDeclaredExceptionsMeasured(report);
    });
  }

  // Settings that take an invariance away must leave the rest of the contract whole: the refusals, determinism and
  // the known value hold as with the defaults (histogram width=0.5 once returned log(width) for a single point).
  const declaredSettings = [...new Map(DECLARED.map(([id, settings]) => [`${id} ${JSON.stringify(settings)}`, [id, settings] as const])).values()];
  for (const [id, settings] of declaredSettings) {
    it(`${id} with ${JSON.stringify(settings)}: every check but the declared exceptions passes`, () => {
      const estimator = getEstimator(id);
      const report = runConformance(estimator, { settings });
      expect(failing(report), evidence(report)).toEqual([]);
      expectNotApplicableOnlyForAReason(report, estimator);
    });
  }

  // Settings under which the built-ins have every invariance again: the checks run and pass.
  const holding: [string, Record<string, string | number>][] = [
    ['histogram', { bins: 'sturges' }],
    ['histogram', { bins: 'doane', correction: 'miller-madow' }],
    ['histogram', { bins: 20 }],
    ['kernel', { bandwidth: 'scott', scale: 2 }],
    ['kozachenko-leonenko', { norm: 'max', k: 1 }],
    ['vasicek', { m: 5 }],
    ['ksg1', { copula: 'rank' }],
    ['ksg2', { k: 5 }],
    ['mi-histogram', { copula: 'rank' }],
    ['mi-kernel', { copula: 'rank' }],
    ['mi-gaussian', { correction: 'none', copula: 'rank' }],
    ['mi-from-entropies', { entropy: 'kernel' }],
    ['mi-from-entropies', { entropy: 'histogram' }],
    ['cmi-ksg', { copula: 'rank', k: 2 }],
    ['cmi-gaussian', { correction: 'none', copula: 'rank' }],
    ['te-ksg', { copula: 'rank', k: 3, history: 2 }],
    ['te-gaussian', { correction: 'none', copula: 'rank', sourceHistory: 2 }],
  ];
  for (const [id, settings] of holding) {
    it(`${id} with ${JSON.stringify(settings)} passes every applicable check`, () => {
      const estimator = getEstimator(id);
      const report = runConformance(estimator, { settings });
      expect(failing(report), evidence(report)).toEqual([]);
      expectNotApplicableOnlyForAReason(report, estimator);
    });
  }

  it('transfer entropy lacks row order by definition, for every estimator of it: declared once for the quantity, and measurably so', () => {
    for (const id of ['te-ksg', 'te-gaussian']) {
      const result = runConformance(getEstimator(id), { only: ['row-order'] }).checks[0];
      expect(result.status).toBe('not-applicable');
      expect(result.evidence).toMatch(/^declared lacking \(lacks\.rowOrder\): transfer entropy is defined by the time order of the rows/);
      expect(result.declared!.compared!.difference).toBeGreaterThan(0.05);
    }
  });

  it('ksg1 and ksg2 lack per-variable scaling with copula=none, so scale checks one factor for X and Y; with copula=rank they have it', () => {
    const plain = runConformance(getEstimator('ksg1'), { only: ['scale'] }).checks[0];
    expect(plain.status).toBe('pass');
    expect(plain.declared?.invariance).toBe('separateScale');
    expect(plain.evidence).toMatch(/^one factor for X and Y: ×8/);
    const ranked = runConformance(getEstimator('ksg1'), { settings: { copula: 'rank' }, only: ['scale'] }).checks[0];
    expect(ranked.status).toBe('pass');
    expect(ranked.declared).toBeUndefined();
    expect(ranked.evidence).toMatch(/^X ×8, Y ×−1\/16/);
  });

  it('settings the estimator refuses are a usage mistake, not a failed check', () => {
    expect(() => runConformance(getEstimator('kozachenko-leonenko'), { settings: { k: 0 } })).toThrow(UsageError);
  });
});

// ---------------------------------------------------------------------------------------------------------
// Broken estimators: each is a working method with one fault, and exactly the check for that fault fails.

const vasicek = getEstimator('vasicek');
const gaussian = getEstimator('gaussian');
const miGaussian = getEstimator('mi-gaussian');
const gaussianDivergence = getEstimator('gaussian-divergence');
const ksg1 = getEstimator('ksg1');

function broken(base: Estimator, id: string, changes: Partial<Estimator>): Estimator {
  return { ...base, id, summary: `${base.summary} (broken for a test)`, ...changes };
}

function oneDimensional(values: Float64Array): Sample {
  return { n: values.length, dim: 1, data: values };
}

function meanAndVariance(values: Float64Array, centred = true): { mean: number; variance: number } {
  let mean = 0;
  for (const x of values) mean += x;
  mean /= values.length;
  let squares = 0;
  for (const x of values) squares += centred ? (x - mean) ** 2 : x * x;
  return { mean, variance: squares / (centred ? values.length - 1 : values.length) };
}

/** Divergence between N(μp, σp²) and N(μq, σq²) (Kullback 1959). */
function normalDivergence(p: { mean: number; variance: number }, q: { mean: number; variance: number }): number {
  return 0.5 * (p.variance / q.variance + (q.mean - p.mean) ** 2 / q.variance - 1 + Math.log(q.variance / p.variance));
}

/** A checked 1-D pair: the P and Q values, after the checks a divergence estimator owes. */
function oneDimensionalPair(id: string, sample: Sample): { p: Float64Array; q: Float64Array } {
  const { n, m, dim, p, q } = checkedPair(id, sample);
  if (dim !== 1) throw new EstimateError('dimension', `${id} is one-dimensional; d = ${dim}`);
  if (n < 2 || m < 2) throw new EstimateError('too-few-points', `${id} needs 2 points in each sample`);
  return { p, q };
}

/** A checked 1 + 1 dimensional MI sample as its X and Y columns. */
function xyColumns(id: string, sample: Sample): { x: Float64Array; y: Float64Array } {
  if (sample.dim !== 2) throw new EstimateError('dimension', `${id} needs one X and one Y column; d = ${sample.dim}`);
  const { n } = checkedSplit(id, sample);
  if (n < 3) throw new EstimateError('too-few-points', `${id} needs 3 points`);
  const x = new Float64Array(n);
  const y = new Float64Array(n);
  for (let i = 0; i < n; i++) {
    x[i] = sample.data[2 * i];
    y[i] = sample.data[2 * i + 1];
  }
  return { x, y };
}

/** −½ log(1 − r²) from the correlation of x and y, about their means or (centred = false) about 0. */
function correlationInformation(x: Float64Array, y: Float64Array, centred = true): number {
  const mx = centred ? meanAndVariance(x).mean : 0;
  const my = centred ? meanAndVariance(y).mean : 0;
  let sxy = 0;
  let sxx = 0;
  let syy = 0;
  for (let i = 0; i < x.length; i++) {
    sxy += (x[i] - mx) * (y[i] - my);
    sxx += (x[i] - mx) ** 2;
    syy += (y[i] - my) ** 2;
  }
  const r = sxy / Math.sqrt(sxx * syy);
  return -0.5 * Math.log1p(-r * r);
}

function ranks(values: Float64Array): Float64Array {
  const order = Array.from(values.keys()).sort((a, b) => values[a] - values[b]);
  const out = new Float64Array(values.length);
  order.forEach((row, rank) => (out[row] = rank + 1));
  return out;
}

const brokenEstimators: [CheckName, string, () => Promise<Estimator> | Estimator][] = [
  [
    'deterministic',
    'jitters the values with an unseeded random generator (to break ties)',
    () =>
      broken(vasicek, 'jittered-vasicek', {
        estimate(sample, settings) {
          const values = Float64Array.from(sample.data.subarray(0, sample.n));
          let low = Infinity;
          let high = -Infinity;
          for (const x of values) [low, high] = [Math.min(low, x), Math.max(high, x)];
          for (let i = 0; i < values.length; i++) values[i] += (high - low) * 1e-12 * (Math.random() - 0.5);
          return vasicek.estimate({ ...sample, data: values }, settings);
        },
      }),
  ],
  [
    'leaves-sample-unchanged',
    'sorts the caller’s array in place',
    () =>
      broken(vasicek, 'in-place-vasicek', {
        estimate(sample, settings) {
          sample.data.sort();
          return vasicek.estimate(sample, settings);
        },
      }),
  ],
  [
    'row-order',
    'fits only the first half of the rows (the module hhat check is tested on)',
    async () => ((await import(firstHalfModule)) as { estimators: Estimator[] }).estimators[0],
  ],
  [
    'configured-resolved',
    'reports a window one wider than the one it uses',
    () =>
      broken(vasicek, 'misreporting-vasicek', {
        resolve: (sample, settings) => ({ ...settings, m: settings.m === 'auto' ? defaultWindow(sample.n) + 1 : settings.m }),
      }),
  ],
  [
    'tuning-responds',
    'reads its window under a misspelt name, so every m of the tuning grid runs the default',
    () =>
      broken(vasicek, 'deaf-vasicek', {
        estimate: (sample, settings) => vasicek.estimate(sample, { ...settings, m: settings.window ?? 'auto' }),
      }),
  ],
  [
    'tuning-responds',
    'fixes k = 3 in its code whatever the setting says (mutual information)',
    () => broken(getEstimator('ksg1'), 'fixed-k-ksg1', { estimate: (sample, settings) => getEstimator('ksg1').estimate(sample, { ...settings, k: 3 }) }),
  ],
  [
    'scale',
    'standardises the data and forgets the log-Jacobian (entropy)',
    () =>
      broken(vasicek, 'standardised-vasicek', {
        estimate(sample, settings) {
          if (sample.dim !== 1) return vasicek.estimate(sample, settings);
          const values = Float64Array.from(sample.data.subarray(0, sample.n));
          const { mean, variance } = meanAndVariance(values);
          for (let i = 0; i < values.length; i++) values[i] = (values[i] - mean) / Math.sqrt(variance);
          return vasicek.estimate({ ...sample, data: values }, settings);
        },
      }),
  ],
  [
    'translation',
    'takes the second moment about 0 instead of about the mean (entropy)',
    () =>
      broken(gaussian, 'uncentred-gaussian', {
        dims: [1, 1],
        estimate(sample) {
          const values = Float64Array.from(sample.data.subarray(0, sample.n * sample.dim));
          if (sample.dim !== 1) throw new EstimateError('dimension', `d = ${sample.dim}`);
          if (sample.n < 2) throw new EstimateError('too-few-points', `n = ${sample.n}`);
          if (!values.every(Number.isFinite)) throw new EstimateError('invalid-input', 'non-finite value');
          return 0.5 * Math.log(2 * Math.PI * Math.E * meanAndVariance(values, false).variance);
        },
      }),
  ],
  [
    'known-value',
    'writes ½ log(2πσ²) for ½ log(2πeσ²): off by ½ nat (entropy)',
    () => broken(gaussian, 'no-e-gaussian', { estimate: (sample, settings) => gaussian.estimate(sample, settings) - 0.5 }),
  ],
  [
    'rejects-non-finite',
    'drops non-finite values quietly',
    () =>
      broken(vasicek, 'finite-only-vasicek', {
        estimate: (sample, settings) =>
          sample.dim === 1
            ? vasicek.estimate(oneDimensional(sample.data.subarray(0, sample.n).filter(Number.isFinite)), settings)
            : vasicek.estimate(sample, settings),
      }),
  ],
  [
    'rejects-too-few',
    'returns 0 for fewer than 3 points',
    () => broken(vasicek, 'zero-for-few-vasicek', { estimate: (sample, settings) => (sample.n < 3 ? 0 : vasicek.estimate(sample, settings)) }),
  ],
  [
    'scale',
    'ksg1 without its declared exception: rescaling X alone changes its neighbours (mutual information)',
    () => broken(ksg1, 'undeclared-ksg1', { lacks: undefined }),
  ],
  [
    'scale',
    'adds a term in the data’s unit, with per-variable scaling declared lacking (mutual information, one common factor)',
    () =>
      broken(ksg1, 'unit-bound-ksg1', {
        estimate(sample, settings) {
          // The product of the column variances: unchanged by shifts and by swapping X and Y, not by a unit.
          let spread = 1;
          for (let j = 0; j < sample.dim; j++)
            spread *= meanAndVariance(Float64Array.from({ length: sample.n }, (_, i) => sample.data[i * sample.dim + j])).variance;
          return ksg1.estimate(sample, settings) + 1e-3 * Math.log(spread);
        },
      }),
  ],
  [
    'translation',
    'takes moments about 0 instead of about the means (mutual information)',
    () =>
      broken(miGaussian, 'uncentred-mi', {
        dims: [2, 2],
        estimate(sample) {
          const { x, y } = xyColumns('uncentred-mi', sample);
          return correlationInformation(x, y, false);
        },
      }),
  ],
  [
    'symmetry',
    'ranks X but not Y before a Gaussian fit (mutual information)',
    () =>
      broken(miGaussian, 'half-ranked-mi', {
        dims: [2, 2],
        estimate(sample) {
          const { x, y } = xyColumns('half-ranked-mi', sample);
          return correlationInformation(ranks(x), y);
        },
      }),
  ],
  [
    'known-value',
    'reports bits for nats (mutual information)',
    () => broken(miGaussian, 'bits-mi', { estimate: (sample, settings) => miGaussian.estimate(sample, settings) / Math.LN2 }),
  ],
  [
    'known-value',
    'reports bits for nats (conditional mutual information)',
    () =>
      broken(getEstimator('cmi-gaussian'), 'bits-cmi', { estimate: (sample, settings) => getEstimator('cmi-gaussian').estimate(sample, settings) / Math.LN2 }),
  ],
  [
    'known-value',
    'reports bits for nats (transfer entropy)',
    () => broken(getEstimator('te-gaussian'), 'bits-te', { estimate: (sample, settings) => getEstimator('te-gaussian').estimate(sample, settings) / Math.LN2 }),
  ],
  [
    'known-value',
    'reports bits for nats (divergence)',
    () => broken(gaussianDivergence, 'bits-divergence', { estimate: (sample, settings) => gaussianDivergence.estimate(sample, settings) / Math.LN2 }),
  ],
  // Found by a tester: these checked their input and returned the suite's own truth, and passed every other check.
  ...(
    [
      ['mi-gaussian', 'mutual information', 'mi-gaussian:dimX=1,dimY=1,rho=0.9'],
      ['cmi-gaussian', 'conditional mutual information', 'cmi-gaussian:dimX=1,dimY=1,dimZ=1,rhoXY=0.9,rhoXZ=0.5,rhoYZ=0.5'],
      ['te-gaussian', 'transfer entropy', 'te-var1:a=0.5,b=0.5,cXY=1,cYX=0'],
    ] as const
  ).map(([id, quantity, law]): [CheckName, string, () => Estimator] => [
    'independence',
    `checks its input, then returns the known value whatever the data (${quantity})`,
    () =>
      broken(getEstimator(id), `constant-${id}`, {
        estimate: (sample, settings) => {
          getEstimator(id).estimate(sample, settings);
          return parseScenario(law).truth;
        },
      }),
  ]),
  [
    'known-value',
    'drops the minus sign of −½ log(1 − ρ²) (mutual information)',
    () => broken(miGaussian, 'sign-flipped-mi', { estimate: (sample, settings) => -miGaussian.estimate(sample, settings) }),
  ],
  [
    'scale',
    'adds a ridge of 1e-3 data units² to both variances (divergence)',
    () =>
      broken(gaussianDivergence, 'ridged-divergence', {
        dims: [1, 1],
        estimate(sample) {
          const { p, q } = oneDimensionalPair('ridged-divergence', sample);
          const [fitP, fitQ] = [meanAndVariance(p), meanAndVariance(q)];
          return normalDivergence({ ...fitP, variance: fitP.variance + 1e-3 }, { ...fitQ, variance: fitQ.variance + 1e-3 });
        },
      }),
  ],
  [
    'translation',
    'takes variances about 0 instead of about the means (divergence)',
    () =>
      broken(gaussianDivergence, 'uncentred-divergence', {
        dims: [1, 1],
        estimate(sample) {
          const { p, q } = oneDimensionalPair('uncentred-divergence', sample);
          const uncentred = (v: Float64Array) => ({ mean: meanAndVariance(v).mean, variance: meanAndVariance(v, false).variance });
          return normalDivergence(uncentred(p), uncentred(q));
        },
      }),
  ],
  [
    'affine',
    'fits diagonal covariances, ignoring correlation (divergence)',
    () =>
      broken(gaussianDivergence, 'diagonal-divergence', {
        estimate(sample) {
          const { n, m, dim, p, q } = checkedPair('diagonal-divergence', sample);
          if (n < 2 || m < 2) throw new EstimateError('too-few-points', 'needs 2 points in each sample');
          let total = 0;
          for (let j = 0; j < dim; j++) {
            const column = (values: Float64Array, rows: number) => Float64Array.from({ length: rows }, (_, i) => values[i * dim + j]);
            total += normalDivergence(meanAndVariance(column(p, n)), meanAndVariance(column(q, m)));
          }
          return total;
        },
      }),
  ],
  [
    'self-divergence',
    'reports at least 0.2 nats (a floor for log plots)',
    () => broken(gaussianDivergence, 'floored-divergence', { estimate: (sample, settings) => Math.max(0.2, gaussianDivergence.estimate(sample, settings)) }),
  ],
  [
    'known-value',
    'computes D(Q ‖ P) for D(P ‖ Q) (divergence)',
    () =>
      broken(gaussianDivergence, 'reversed-divergence', {
        estimate(sample, settings) {
          if (!sample.q) return gaussianDivergence.estimate(sample, settings);
          const { q, ...p } = sample;
          return gaussianDivergence.estimate({ ...q, q: p }, settings);
        },
      }),
  ],
  [
    'rejects-non-finite',
    'drops Q rows with non-finite values quietly (divergence)',
    () =>
      broken(gaussianDivergence, 'q-finite-only-divergence', {
        estimate(sample, settings) {
          const q = sample.q;
          if (!q) return gaussianDivergence.estimate(sample, settings);
          const rows: number[] = [];
          for (let i = 0; i < q.n; i++) for (let j = 0; j < q.dim; j++) if (Number.isFinite(q.data[i * q.dim + j])) rows.push(q.data[i * q.dim + j]);
          return gaussianDivergence.estimate({ ...sample, q: { n: rows.length / q.dim, dim: q.dim, data: Float64Array.from(rows) } }, settings);
        },
      }),
  ],
  [
    'rejects-wrong-dimension',
    'reads the Q sample in P’s dimension whatever its own (divergence)',
    () =>
      broken(gaussianDivergence, 'reshaping-divergence', {
        estimate(sample, settings) {
          const q = sample.q;
          if (!q) return gaussianDivergence.estimate(sample, settings);
          const rows = Math.floor(q.data.length / sample.dim);
          return gaussianDivergence.estimate({ ...sample, q: { n: rows, dim: sample.dim, data: q.data.subarray(0, rows * sample.dim) } }, settings);
        },
      }),
  ],
];

describe('each check fails, alone, on an estimator broken in that way', () => {
  for (const [check, fault, make] of brokenEstimators) {
    it(`${check}: an estimator that ${fault}`, async () => {
      const report = runConformance(await make());
      expect(failing(report), evidence(report)).toEqual([check]);
      expect(report.passed).toBe(false);
    });
  }

  it('every check of every quantity has a broken estimator above', () => {
    const covered = new Set(brokenEstimators.map(([check]) => check));
    const all = new Set((['entropy', 'mutual-information', 'divergence'] as const).flatMap((q) => checksFor(q)));
    expect([...all].filter((c) => !covered.has(c))).toEqual([]);
  });

  it('an estimator that throws a plain Error on bad input fails the refusal checks, naming what it threw', () => {
    const plain = broken(vasicek, 'plain-error-vasicek', {
      estimate(sample, settings) {
        try {
          return vasicek.estimate(sample, settings);
        } catch (error) {
          throw new Error((error as Error).message, { cause: error });
        }
      },
    });
    const report = runConformance(plain);
    // A wrong dimension is refused at the registry before estimate runs, so only the estimator's own refusals fail.
    expect(failing(report)).toEqual(['rejects-non-finite', 'rejects-too-few']);
    expect(report.checks.find((c) => c.check === 'rejects-too-few')!.evidence).toMatch(/n = 0: Error: vasicek: .*which is not an EstimateError/);
  });

  it('an estimator whose estimate itself throws on good data fails the checks that need a value, with the error as evidence', () => {
    const refusing = broken(gaussian, 'refusing', {
      estimate() {
        throw new EstimateError('numeric', 'refusing: always');
      },
    });
    const report = runConformance(refusing);
    const needValues = report.checks.filter((c) => !c.check.startsWith('rejects-') && c.status !== 'not-applicable');
    for (const c of needValues) {
      expect(c.status).toBe('fail');
      expect(c.evidence).toMatch(/EstimateError\(numeric\): refusing: always/);
    }
  });
});

describe('Estimator.conformanceLaw', () => {
  const valid = { id: 'my-method', family: 'f', quantity: 'entropy', summary: 's', settings: [], dims: [1, 1], reference: 'r', estimate: () => 0 };
  it('a module may name the scenario its checks draw from; the report and its known value use it', () => {
    // The variance-matched Gaussian entropy: right on any Gaussian law, so the known value passes on the declared one.
    const gaussian = checkEstimator('m', {
      ...valid,
      conformanceLaw: 'normal:mu=0,sigma=0.01',
      estimate: (s: Sample) => {
        let mean = 0;
        for (let i = 0; i < s.n; i++) mean += s.data[i] / s.n;
        let ss = 0;
        for (let i = 0; i < s.n; i++) ss += (s.data[i] - mean) ** 2;
        if (s.n < 2 || !Number.isFinite(ss)) throw new EstimateError(s.n < 2 ? 'too-few-points' : 'invalid-input', 'bad');
        return 0.5 * Math.log(2 * Math.PI * Math.E * (ss / (s.n - 1)));
      },
    });
    const report = runConformance(gaussian);
    expect(report.law).toBe('normal:mu=0,sigma=0.01');
    const known = report.checks.find((c) => c.check === 'known-value')!;
    expect(known.evidence).toMatch(/^normal:mu=0,sigma=0\.01, n = 4000: -3\.1\d* vs truth -3\.186/);
    expect(known.status).toBe('pass');
  });
  it('refuses a law that is no scenario, of another quantity or outside dims, in one line naming it', () => {
    const run = (law: unknown) => () => runConformance(checkEstimator('m', { ...valid, conformanceLaw: law }));
    expect(run('no-such-law')).toThrow(UsageError);
    expect(run('no-such-law')).toThrow(/^my-method: conformanceLaw "no-such-law" is no scenario: /);
    expect(run('kl-gaussian:dim=1,shift=1,sigma=1,rho=0')).toThrow(/is a divergence scenario; the estimator's quantity is entropy$/);
    expect(run('gaussian:dim=2,rho=0.5')).toThrow(/has d = 2, outside the estimator's dims \[1, 1\]$/);
    expect(run('')).toThrow(/conformanceLaw is ""; when given it must be a scenario spec/);
    expect(run(3)).toThrow(/conformanceLaw is 3; when given it must be a scenario spec/);
  });
  it('hhat check with no argument passes for every built-in: exit 0', async () => {
    const { code, out, err } = await runCli(['check']);
    expect(err).toBe('');
    expect(code).toBe(0);
    expect(out.match(/^\S+ \([a-z-]+, samples from \S+\): passes/gm)).toHaveLength(listEstimators().length);
  });
});

describe('Estimator.lacks in a module', () => {
  const valid = { id: 'my-method', family: 'f', quantity: 'entropy', summary: 's', settings: [], dims: [1, 1], reference: 'r', estimate: () => 0 };
  it('accepts a reason or a function per known invariance', () => {
    expect(() => checkEstimator('m', { ...valid, lacks: { rowOrder: 'fits a trend in recording order', scale: () => undefined } })).not.toThrow();
  });
  it('refuses an unknown invariance, an empty reason or a non-object, in one line', () => {
    expect(() => checkEstimator('m', { ...valid, lacks: { scales: 'x' } })).toThrow(
      /^m \("my-method"\): lacks\.scales is not an invariance hhat checks; the names are rowOrder, scale, separateScale, translation, symmetry, affine$/,
    );
    expect(() => checkEstimator('m', { ...valid, lacks: { scale: '' } })).toThrow(/lacks\.scale is "".*non-empty string/);
    expect(() => checkEstimator('m', { ...valid, lacks: ['scale'] })).toThrow(/lacks is \["scale"\]; give an object/);
  });
});

describe('hhat check', () => {
  const dir = mkdtempSync(join(tmpdir(), 'hhat-check-'));

  it('passes the shipped example module: exit 0, one line per check with its evidence', async () => {
    const { code, out, err } = await runCli(['check', example]);
    expect(err).toBe('');
    expect(code).toBe(0);
    expect(out).toMatch(/^detrended-kozachenko-leonenko:k=3,drift=linear \(entropy, samples from normal:mu=0,sigma=1\): passes: 8 pass, 3 not applicable/);
    for (const check of checksFor('entropy')) expect(out).toMatch(new RegExp(`^  (pass|n/a )  ${check} +\\S`, 'm'));
    expect(out).toMatch(/^ {2}n\/a {3}row-order +declared lacking \(lacks\.rowOrder\): drift=linear removes a trend fitted in recording order/m);
    expect(out).toMatch(/^ {2}pass {2}known-value +normal:mu=0,sigma=1, n = 4000: .* allowed 0\.15\)$/m);
  });

  it('exits 1 on a module whose estimate depends on the row order, naming the estimator and the check', async () => {
    const { code, out, err } = await runCli(['check', firstHalfModule]);
    expect(code).toBe(1);
    expect(err.trim()).toBe('hhat check: 1 of 1 estimator failed: first-half-gaussian: row-order');
    expect(out).toMatch(/^ {2}FAIL {2}row-order +rows permuted: \S+ vs \S+ \(\|Δ\| [0-9.e+-]+\); allowed/m);
    expect(out.match(/^ {2}FAIL/gm)).toHaveLength(1);
  });

  it('--json gives every check with its status, evidence and numbers, and the suite tolerances', async () => {
    const { code, out } = await runCli(['check', firstHalfModule, '--json']);
    expect(code).toBe(1);
    const parsed = JSON.parse(out) as {
      module: string;
      passed: boolean;
      suite: { knownValueTolerancePerDimension: Record<string, number> };
      estimators: ConformanceReport[];
    };
    expect(parsed.passed).toBe(false);
    expect(parsed.suite.knownValueTolerancePerDimension.entropy).toBe(0.15);
    const rowOrder = parsed.estimators[0].checks.find((c) => c.check === 'row-order')!;
    expect(rowOrder.status).toBe('fail');
    expect(rowOrder.compared!.difference).toBeGreaterThan(rowOrder.compared!.tolerance);
  });

  it('checks a transfer-entropy estimator with other histories against the truth at its own k and l, with a tolerance per three embedding columns', () => {
    const report = runConformance(getEstimator('te-gaussian'), { settings: { history: 3 } });
    const known = report.checks.find((c) => c.check === 'known-value')!;
    expect(known.status).toBe('pass');
    expect(known.evidence).toMatch(/^te-var1:a=0\.5,b=0\.5,cXY=1,cYX=0,history=3, n = 4000: /);
    // TE at k = 3, l = 1 by NumPy (test/fixtures/te-history.json, from make_te_history_fixture.py).
    const k3 = teHistory.cases.find((c) => c.cXY === 1 && c.history === 3 && c.sourceHistory === 1)!;
    expect(Math.abs(known.compared!.expected - k3.xToY)).toBeLessThan(1e-12);
    expect(known.compared!.tolerance).toBe(0.133); // 0.08 · (1 + 3 + 1)/3, to 3 digits
  });

  it('checks the built-ins without a module, and one estimator with settings', async () => {
    const { code, out } = await runCli(['check', '--estimator', 'ksg1:copula=rank']);
    expect(code).toBe(0);
    expect(out).toMatch(/^ksg1:k=3,copula=rank \(mutual-information, samples from mi-gaussian:dimX=1,dimY=1,rho=0.9,within=0\): passes/);
  });

  it('usage mistakes exit 2 with one line: no such file, not a module, no estimators, an unknown id, a refused setting', async () => {
    const empty = join(dir, 'empty.mjs');
    writeFileSync(empty, 'export const nothing = 1;\n');
    const cases: [string[], RegExp][] = [
      [['check', join(dir, 'absent.mjs')], /no such file$/],
      [['check', join(root, 'README.md')], /"\.md" files cannot be loaded/],
      [['check', empty], /exports no estimators/],
      [['check', example, '--estimator', 'kozachenko-leonenko'], /defines no estimator "kozachenko-leonenko"; it defines detrended-kozachenko-leonenko$/],
      [['check', example, '--estimator', 'detrended-kozachenko-leonenko:k=0'], /k=0 is not allowed/],
      // Echoed as typed: 1e400 is read as Infinity, which the user never wrote.
      [['check', '--estimator', 'histogram:width=1e400'], /^hhat: histogram: width=1e400 is not allowed; width must be one of none, or a number > 0$/],
      // --quantity says what an --estimator-command measures; for built-ins or a module it would be ignored.
      [['check', '--quantity', 'bogus'], /^hhat: --quantity bogus applies only to --estimator-command; the built-ins declare each estimator's quantity$/],
      [['check', example, '--quantity', 'divergence'], /--quantity divergence applies only to --estimator-command; a module declares/],
    ];
    for (const [args, message] of cases) {
      const { code, err } = await runCli(args);
      expect(code, args.join(' ')).toBe(2);
      expect(err.trim().split('\n')).toHaveLength(1);
      expect(err.trim()).toMatch(message);
    }
  });
});
