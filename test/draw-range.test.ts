/**
 * Draws beyond the double range (src/harness/draw-range.ts): a scenario whose law or sampler reaches past
 * ±1.8e308, or a perturbation that carries its draws there, is refused before anything is drawn or run, in one
 * line naming it; the masses it quotes are the laws' closed forms and match the samplers' share of ±Infinity; a
 * draw that still leaves the range is the scenario's or the perturbation's failure, not the estimators'.
 */
import { existsSync, mkdtempSync, rmSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { afterAll, describe, expect, it } from 'vitest';
import { drawReplicate } from '../src/core/rng.js';
import { catalog, parseScenario } from '../scenarios/index.js';
import { prepareDraw } from '../src/harness/draw.js';
import { OUT_OF_RANGE, perturbationRangeProblem, scenarioRangeProblem } from '../src/harness/draw-range.js';
import { parsePerturbation, type PreparedPerturbation } from '../src/harness/perturb.js';
import { resolvePlan } from '../src/harness/plan.js';
import { runPlan } from '../src/harness/runner.js';
import { buildContext } from '../src/harness/context.js';
import { executeReplicate, planUnits } from '../src/harness/work.js';
import { assembleRun } from '../src/analysis/results.js';
import { printRun } from '../src/commands/bench.js';
import { runCli } from './helpers/cli.js';
import { usageMessage } from './helpers/usage-error.js';

const dir = mkdtempSync(join(tmpdir(), 'hhat-range-'));
afterAll(() => rmSync(dir, { recursive: true, force: true }));

const MAX = Number.MAX_VALUE;

/** The mass a refusal quotes, "P(X > 1.8e308) = 0.49" → 0.49. */
function quotedMass(message: string): number {
  const match = /P\(\|?X\|? [<>] −?1\.8e308\) = ([\d.e+-]+)/.exec(message);
  if (!match) throw new Error(`no mass in: ${message}`);
  return Number(match[1]);
}

function prepared(spec: string, scenario: string): PreparedPerturbation {
  const ready = parsePerturbation(spec).prepare(parseScenario(scenario));
  if ('skip' in ready) throw new Error(ready.skip);
  return ready;
}

describe('scenarios whose draws leave the double range', () => {
  const listed = ['generalized-normal:beta=1e-3', 'student-t:nu=1e-3', 'pareto:alpha=1e-3', 'frechet:alpha=1e-3', 'inverse-gamma:alpha=1e-3', 'weibull:k=1e-3'];
  for (const spec of listed) {
    it(`hhat draw ${spec}: one line naming it, exit 2, nothing written`, async () => {
      const out = join(dir, `${spec.replace(/\W+/g, '-')}.npy`);
      const { code, out: printed, err } = await runCli(['draw', spec, '--n', '1000', '--out', out]);
      expect(code).toBe(2);
      expect(printed).toBe('');
      const lines = err.trim().split('\n');
      expect(lines).toHaveLength(1);
      expect(lines[0]).toContain(`scenario ${parseScenario(spec).id}: its draws leave the double range`);
      expect(existsSync(out)).toBe(false);
    });
  }

  it('bench refuses one before it runs (exit 2), instead of reporting every estimator failed', async () => {
    const out = join(dir, 'gn.json');
    const args = ['bench', '--scenario', 'generalized-normal:beta=1e-3', '--estimator', 'histogram', '--n', '100', '--replicates', '3', '--out', out];
    const { code, err } = await runCli(args);
    expect(code).toBe(2);
    expect(err).toMatch(/^hhat: scenario generalized-normal:mu=0,alpha=1,beta=0\.001: its draws leave the double range .*P\(\|X\| > 1\.8e308\) = 1,/);
    expect(existsSync(out)).toBe(false);
  });

  it("quotes each law's own mass beyond 1.8e308 (closed forms), which the samplers' share of ±Infinity matches", () => {
    const quoted = (spec: string) => quotedMass(usageMessage(() => prepareDraw({ scenario: spec, n: 1000, seed: 1 })));
    // Pareto: (x_m/x)^α; Weibull: exp(−(x/λ)^k); Fréchet: 1 − exp(−(x/s)^−α); inverse gamma: P(G < β/x) for
    // G ~ Gamma(α), which is (β/x)^α/Γ(α + 1) to a relative O(β/x), with Γ(1.001) = 0.999424 (Abramowitz & Stegun 6.1).
    const cases: [string, number][] = [
      ['pareto:alpha=1e-3', MAX ** -1e-3],
      ['weibull:k=1e-3', Math.exp(-(MAX ** 1e-3))],
      ['frechet:alpha=1e-3', -Math.expm1(-(MAX ** -1e-3))],
      ['inverse-gamma:alpha=1e-3', MAX ** -1e-3 / 0.999424],
    ];
    for (const [spec, mass] of cases) expect({ spec, quoted: quoted(spec) }).toEqual({ spec, quoted: Number(mass.toPrecision(2)) });
    // The sampler (@stdlib's, inversion) against the law: 20000 draws, within 4 binomial SEs.
    const pareto = drawReplicate(parseScenario('pareto:alpha=1e-3'), 7, 20000, 0);
    const share = pareto.data.filter((x) => x === Infinity).length / 20000;
    const p = MAX ** -1e-3;
    expect(Math.abs(share - p)).toBeLessThan(4 * Math.sqrt((p * (1 - p)) / 20000));
  });

  it("Student's t tail past |z| = 1.3e154, where z² overflows, is the law's: Cauchy's closed form, and continuous at the switch", () => {
    const cauchy = parseScenario('student-t:nu=1').univariate!;
    for (const z of [1e160, 1e200, 1e300, MAX]) {
      // P(T > z) = atan(1/z)/π for ν = 1, = 1/(πz) to double precision here (a subnormal at z = MAX: 1e-10).
      const exact = 1 / z / Math.PI;
      expect(Math.abs(cauchy.survival!(z) / exact - 1)).toBeLessThan(1e-10);
      expect(Math.abs(cauchy.cdf(-z) / exact - 1)).toBeLessThan(1e-10);
    }
    const small = parseScenario('student-t:nu=0.001').univariate!;
    const switchAt = Math.sqrt(MAX);
    const below = small.survival!(switchAt * (1 - 1e-12));
    const above = small.survival!(switchAt * (1 + 1e-12));
    expect(Math.abs(above / below - 1)).toBeLessThan(1e-9);
    expect(small.survival!(MAX)).toBeGreaterThan(0.2);
  });

  it('a sampler that overflows where its law does not is refused by the pilot draw (the triangular law squares its width)', () => {
    expect(usageMessage(() => prepareDraw({ scenario: 'triangular:a=-1e300', n: 100, seed: 1 }))).toMatch(
      /^scenario triangular:a=-1e\+300,b=1,c=0\.5: its draws leave the double range: replicate 0 at n = 100 holds 100 values beyond ±1\.8e308 .*its sampler overflows/,
    );
  });

  it('normal parameters still run: heavy tails within the range, and every catalog scenario at 50 × 10000 values', () => {
    for (const spec of ['normal', 'cauchy', 'student-t:nu=0.5', 'pareto:alpha=0.1', 'levy', 'weibull:k=0.1', 'student-t:nu=0.05'])
      expect(() => prepareDraw({ scenario: spec, n: 1000, seed: 1, replicates: 50 })).not.toThrow();
    const refused = catalog()
      .map((s) => [s.id, scenarioRangeProblem(s, 50 * 10000)])
      .filter(([, problem]) => problem !== null);
    expect(refused).toEqual([]);
  });
});

describe('perturbations that carry the draws beyond the double range', () => {
  it('bench --perturb rescale:c=1e308 is refused before the run, naming the perturbation (not "ties after rounding")', async () => {
    const out = join(dir, 'rescale.json');
    const args = ['bench', '--scenario', 'normal', '--estimator', 'histogram', '--n', '100', '--replicates', '3', '--perturb', 'rescale:c=1e308', '--out', out];
    const { code, err } = await runCli(args);
    expect(code).toBe(2);
    expect(err.trim().split('\n')).toEqual([
      expect.stringMatching(/^hhat: perturbation rescale:c=1e\+308 takes draws of normal:mu=0,sigma=1 beyond the double range .* it maps -5\.9 to -Infinity;/),
    ]);
    expect(existsSync(out)).toBe(false);
  });

  it("refuses by the box the draws stay in: 1e300 × a normal's ±5.9 fits, 1e300 × a Cauchy's ±1.9e8 does not", () => {
    expect(perturbationRangeProblem(parseScenario('normal'), 'rescale:c=1e300', prepared('rescale:c=1e300', 'normal'), 300)).toBeNull();
    expect(perturbationRangeProblem(parseScenario('cauchy'), 'rescale:c=1e300', prepared('rescale:c=1e300', 'cauchy'), 300)).toMatch(
      /^perturbation rescale:c=1e300 takes draws of cauchy:x0=0,gamma=1 beyond the double range .* lie within -1\.9e\+8 to 1\.9e\+8/,
    );
  });

  it("the library's runPlan refuses it too, and hhat draw --perturb", async () => {
    const { plan } = resolvePlan({
      scenarios: ['normal'],
      estimators: ['histogram'],
      sampleSizes: [100],
      replicates: 3,
      robustness: { perturbations: ['rescale:c=1e308'], tuning: false },
    });
    await expect(runPlan(plan, { isolation: 'in-process' })).rejects.toThrow(/^perturbation rescale:c=1e\+308 takes draws of normal/);
    const { code, err } = await runCli(['draw', 'normal', '--n', '100', '--perturb', 'rescale:c=1e308', '--out', join(dir, 'p.npy')]);
    expect({ code, lines: err.trim().split('\n').length }).toEqual({ code: 2, lines: 1 });
  });
});

describe('a draw that still leaves the range is not blamed on the estimators', () => {
  function contextWith(overflowEvery: number) {
    const { plan } = resolvePlan({
      scenarios: ['uniform'],
      estimators: ['histogram', 'gaussian'],
      sampleSizes: [20],
      replicates: 6,
      robustness: { perturbations: ['rescale:c=1e308'], tuning: false },
    });
    const context = buildContext(plan);
    const [unit] = planUnits(context).units;
    const uniform = context.scenarios[0];
    let draws = 0;
    // Values in [0, 2): rescale:c=1e308 takes those above 1.8 beyond the range; every `overflowEvery`-th draw holds an infinity itself.
    context.scenarios[0] = {
      ...uniform,
      sample: (rng, n) => {
        const data = Float64Array.from({ length: n }, () => 2 * rng());
        if (++draws % overflowEvery === 0) data[3] = Infinity;
        return { n, dim: 1, data };
      },
    };
    return { context, unit };
  }

  it('a draw with ±Infinity fails every series as the scenario’s, a perturbed copy with it as the perturbation’s; no estimator runs on either', () => {
    const { context, unit } = contextWith(2);
    const first = executeReplicate(unit, context, 0);
    const second = executeReplicate(unit, context, 1);
    const variantOf = (k: number) => unit.series[k].variant;
    // Draw 1 is finite: the estimators run on it; its rescaled copy overflows (20 values in [0, 2) × 1e308).
    for (let k = 0; k < unit.series.length; k++) {
      if (variantOf(k) === 0) expect(Number.isFinite(first.values[k])).toBe(true);
      else expect(first.failures.find((f) => f.series === k)?.message).toMatch(/^out-of-range draw: perturbation rescale:c=1e\+308 took draws of uniform/);
    }
    // Draw 2 holds an Infinity: every series fails as the scenario's.
    expect(second.failures.map((f) => f.series).sort()).toEqual(unit.series.map((_, k) => k));
    for (const f of second.failures)
      expect(f.message).toMatch(/^out-of-range draw: scenario uniform:a=0,b=1 drew values beyond ±1\.8e308 .*not the estimator's$/);
  });

  it("bench's summary names such failures once, by their cause, not as each estimator's or as ties after rounding", async () => {
    const { plan } = resolvePlan({
      scenarios: ['normal'],
      estimators: ['histogram', 'gaussian'],
      sampleSizes: [50],
      replicates: 3,
      robustness: { perturbations: ['rescale:c=10'], tuning: false },
    });
    const run = assembleRun(await runPlan(plan, { isolation: 'in-process' }), null);
    const message = `${OUT_OF_RANGE}: perturbation rescale:c=10 took draws of normal:mu=0,sigma=1 beyond ±1.8e308 (±Infinity) on this replicate; the perturbation's failure, not the estimator's`;
    for (const cell of run.cells.filter((c) => c.role === 'perturbed')) {
      cell.failures = [{ replicate: 0, message }];
      cell.scores.failures = 1;
    }
    let printed = '';
    printRun(run, 'nats', (text) => (printed += `${text}\n`), false);
    expect(printed).toContain('2 estimates failed on perturbed samples or tuning variants (2 out-of-range draw); the robustness table counts them.');
    expect(printed).toContain(`  ${message.slice(OUT_OF_RANGE.length + 2)} (2 times)\n`);
    expect(printed).not.toContain('ties after rounding');
  });
});
