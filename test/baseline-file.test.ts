/**
 * The compact baseline (src/baseline-file.ts) that `npm run track` compares with: a small run written to it and
 * read back is bit-identical, compares as unchanged with src/compare.ts's paired tests, and an estimate moved by
 * one ulp is found as changed. The full default plans run in `npm run track`, not here.
 */
import { describe, expect, it } from 'vitest';
import { baselineOf, comparableBaseline, formatBaseline, parseBaseline, type BaselineCell } from '../src/analysis/baseline-file.js';
import { compareRuns } from '../src/analysis/compare.js';
import { UsageError } from '../src/core/errors.js';
import { resolvePlan, type PlanInput } from '../src/harness/plan.js';
import { runPlan } from '../src/harness/runner.js';
import { assembleRun, type Cell, type RunFile } from '../src/analysis/results.js';

const SMALL: PlanInput = {
  name: 'small',
  quantity: 'entropy',
  scenarios: ['normal', 'exponential'],
  estimators: ['kozachenko-leonenko', 'vasicek'],
  sampleSizes: [40, 80],
  replicates: 6,
  seed: 11,
  // quantize:step=0.5 makes ties, so spacing replicates fail: failed replicates are in the file too.
  robustness: { sampleSize: 80, perturbations: ['rescale:c=1000', 'quantize:step=0.5'], tuning: true },
};

async function smallRun(): Promise<RunFile> {
  const { plan } = resolvePlan(SMALL);
  return assembleRun(await runPlan(plan, { workers: 1, isolation: 'in-process' }), null);
}

const run = await smallRun();
const text = formatBaseline(baselineOf(run));

/**
 * The next double above x, from its IEEE 754 bit pattern (binary64: for a positive finite x the next value up is
 * the bit pattern plus one, for a negative x minus one), independently of the code under test.
 */
function nextUp(x: number): number {
  const view = new DataView(new ArrayBuffer(8));
  view.setFloat64(0, x);
  const bits = view.getBigUint64(0);
  view.setBigUint64(0, x >= 0 ? bits + 1n : bits - 1n);
  return view.getFloat64(0);
}

const identity = (c: Pick<Cell, 'scenario' | 'estimator' | 'n' | 'role' | 'perturbation' | 'tuning'> | BaselineCell) =>
  JSON.stringify([c.scenario, c.estimator, c.n, c.role, c.perturbation, c.tuning]);

describe('compact baseline file', () => {
  it('the small run has main, perturbed and tuning cells, and failed replicates (so the round trip covers them)', () => {
    const roles = new Set(run.cells.map((c) => c.role));
    expect([...roles].sort()).toEqual(['main', 'perturbed', 'tuning']);
    expect(run.cells.some((c) => c.estimates.includes(null))).toBe(true);
    expect(run.cells.some((c) => c.role === 'perturbed' && c.shift !== null)).toBe(true);
  });

  it('reads back every estimate bit for bit (Object.is), with the cell identities, shifts and truths', () => {
    const back = parseBaseline(text, 'small.jsonl');
    expect(back.cells).toHaveLength(run.cells.length);
    const byIdentity = new Map(back.cells.map((c) => [identity(c), c]));
    for (const cell of run.cells) {
      const read = byIdentity.get(identity(cell))!;
      expect(read, identity(cell)).toBeDefined();
      expect(Object.is(read.shift, cell.shift)).toBe(true);
      cell.estimates.forEach((v, r) => expect(Object.is(read.estimates[r], v), `${identity(cell)} r=${r}`).toBe(true));
    }
    for (const s of run.scenarios) expect(back.truths.find((t) => t.scenario === s.id)!.truth).toBe(s.truth);
    expect(back.plan).toEqual(run.plan);
  });

  it('writes the same bytes for the same estimates: re-encoded, in another cell order, and from a second run', async () => {
    expect(formatBaseline(parseBaseline(text, 'small.jsonl'))).toBe(text);
    const reversed = { ...run, cells: [...run.cells].reverse() };
    expect(formatBaseline(baselineOf(reversed))).toBe(text);
    expect(formatBaseline(baselineOf(await smallRun()))).toBe(text);
    // Nothing of the machine, the date or the timings is in it.
    expect(text).not.toMatch(/createdAt|timing|wallSeconds|dirty|cpuModel|"node"/);
  });

  it('keeps -0 and any double exactly (the shortest round-trip decimal of ECMA-262 Number::toString)', () => {
    const edited = structuredClone(run);
    const cell = edited.cells.find((c) => c.estimates[0] !== null)!;
    cell.estimates[0] = -0;
    cell.estimates[1] = 5e-324; // the smallest subnormal
    cell.estimates[2] = 0.1 + 0.2; // 0.30000000000000004: 17 significant digits needed
    const read = parseBaseline(formatBaseline(baselineOf(edited)), 'edited.jsonl').cells.find((c) => identity(c) === identity(cell))!;
    expect(Object.is(read.estimates[0], -0)).toBe(true);
    expect(read.estimates[1]).toBe(5e-324);
    expect(read.estimates[2]).toBe(0.30000000000000004);
  });

  it('an identical run compares as unchanged in every cell, paired, with the scores the run file has', () => {
    const base = comparableBaseline(parseBaseline(text, 'small.jsonl'));
    const comparison = compareRuns(base, run);
    expect(comparison.pairing.paired).toBe(true);
    expect(comparison.counts).toMatchObject({ unchanged: run.cells.length, worse: 0, improved: 0, 'changed-within-noise': 0, added: 0, removed: 0 });
    // The rebuilt scores are those the run file computed from the same estimates and truth (shifted where perturbed).
    const scored = new Map(run.cells.map((c) => [`${c.scenario}|${c.estimator}|${c.n}|${c.perturbation}`, c.scores]));
    for (const cell of base.cells) {
      const scores = scored.get(`${cell.scenario}|${cell.estimator}|${cell.n}|${cell.perturbation}`)!;
      for (const key of ['failures', 'successes'] as const) expect(cell.scores[key]).toBe(scores[key]);
      for (const key of ['bias', 'sd', 'rmse'] as const) expect(Object.is(cell.scores[key].value, scores[key].value)).toBe(true);
    }
  });

  it('an estimate moved by one ulp: that cell alone is changed, by the shift it says, and one line of the file differs', () => {
    const edited = structuredClone(run);
    // A normal cell: its estimates lie within a factor 2 of the truth, so estimate − truth is exact (Sterbenz).
    const cell = edited.cells.find((c) => c.role === 'main' && c.scenario.startsWith('normal:') && c.estimates.every((v) => v !== null))!;
    const before = cell.estimates[3]!;
    cell.estimates[3] = nextUp(before);
    expect(cell.estimates[3]).not.toBe(before);

    const comparison = compareRuns(comparableBaseline(parseBaseline(text, 'small.jsonl')), edited);
    const changed = comparison.cells.filter((c) => c.status !== 'unchanged');
    expect(changed).toHaveLength(1);
    expect(changed[0]).toMatchObject({ scenario: cell.scenario, estimator: cell.estimator, n: cell.n, perturbation: null });
    // One replicate up by one ulp: the paired mean shift is that ulp over the replicate count (up to rounding of the mean).
    const ulp = cell.estimates[3] - before;
    expect(ulp).toBe(2 ** -52 * 2 ** Math.floor(Math.log2(before)));
    expect(Math.abs(changed[0].shift!.value - ulp / cell.estimates.length)).toBeLessThan(1e-9 * (ulp / cell.estimates.length));
    // One ulp is far within noise: not worse.
    expect(changed[0].status).toBe('changed-within-noise');

    const editedLines = formatBaseline(baselineOf(edited)).split('\n');
    const differing = text.split('\n').filter((line, i) => line !== editedLines[i]);
    expect(differing).toHaveLength(1);
    expect(differing[0]).toContain(JSON.stringify(cell.estimator));
  });

  it('refuses a broken or hand-edited file with one line naming the line at fault', () => {
    const lines = text.trimEnd().split('\n');
    const expectError = (broken: string, pattern: RegExp) => {
      expect(() => parseBaseline(broken, 'b.jsonl')).toThrow(UsageError);
      expect(() => parseBaseline(broken, 'b.jsonl')).toThrow(pattern);
    };
    expectError(text.replace('"version":1', '"version":9'), /b\.jsonl line 1: format version 9; this hhat reads version 1/);
    expectError(text.replace('"format":"hhat-baseline"', '"format":"other"'), /line 1: not an hhat baseline/);
    expectError([lines[0], lines[1].replace('"seed":11', '"seed":12'), ...lines.slice(2)].join('\n'), /line 2: the plan line does not match/);
    expectError(lines.slice(0, -1).join('\n'), /announces .* cell lines/);
    const last = lines.length - 1;
    expectError(
      [...lines.slice(0, last), lines[last].replace(/"estimates":\[[^,]*,/, '"estimates":[')].join('\n'),
      new RegExp(`line ${last + 1}: the cell's "estimates" must hold 6`),
    );
    expectError([...lines.slice(0, last), '{"scenario":'].join('\n'), new RegExp(`line ${last + 1}: not valid JSON`));
  });
});
