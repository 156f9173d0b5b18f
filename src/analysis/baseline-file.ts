/**
 * The committed baselines' compact form (results/baseline/QUANTITY.jsonl): what `npm run track` compares a fresh
 * run of a default plan with, and nothing that changes when the estimates do not.
 *
 * JSON Lines, in this order:
 *   1. a header: format name and version, hhat's version, the plan's name and quantity, the digest of line 2,
 *      the draws fingerprint, and how many scenario and cell lines follow;
 *   2. the resolved plan, as `{"plan":{...}}`;
 *   3. one line per scenario with its true value (a comparison scores each run against its own truth);
 *   4. one line per cell: its identity (scenario, estimator spec, n, role, and the perturbation with its truth
 *      shift or the tuning point) and every replicate's estimate (null: the replicate failed).
 * Numbers are written in the shortest form that reads back as the same double (and -0 as -0), so a cell read
 * back is bit-identical and the paired tests of src/compare.ts run on it exactly as on a run file. Lines are
 * sorted (scenario, n, role, estimator, perturbation, tuning point; plain code-unit order, no locale), so a
 * refresh with the same estimates writes the same bytes, and a change shows in `git diff` as the lines of the
 * cells that moved. No date, timing, machine, commit or code digest is kept: those change on every run.
 *
 *   writeBaseline('results/baseline/entropy.jsonl', run);
 *   const comparison = compareRuns(comparableBaseline(readBaseline('results/baseline/entropy.jsonl')), run);
 */
import { createHash } from 'node:crypto';
import type { Quantity } from '../core/contracts.js';
import { UsageError } from '../core/errors.js';
import { writeFileAtomic } from '../core/files.js';
import { drawsFingerprint, readTextFile, type Plan } from '../harness/plan.js';
import type { Cell, RunFile } from './results.js';
import { scoreCell } from './score.js';
import type { ComparableRun } from './compare.js';

export const BASELINE_FORMAT = 'hhat-baseline';
export const BASELINE_VERSION = 1;

export interface BaselineHeader {
  format: typeof BASELINE_FORMAT;
  version: typeof BASELINE_VERSION;
  hhat: string;
  plan: string;
  quantity: Quantity;
  /** sha256 of the plan line as written: a hand-edited plan line is caught on reading. */
  planDigest: string;
  drawsFingerprint: string;
  scenarios: number;
  cells: number;
}

export interface BaselineCell {
  scenario: string;
  estimator: string;
  n: number;
  role: Cell['role'];
  perturbation: string | null;
  shift: number | null;
  tuning: Cell['tuning'];
  estimates: (number | null)[];
}

export interface Baseline {
  header: BaselineHeader;
  plan: Plan;
  truths: { scenario: string; truth: number }[];
  cells: BaselineCell[];
}

const ROLE_ORDER: Record<Cell['role'], number> = { main: 0, perturbed: 1, tuning: 2 };

function byCodeUnits(a: string, b: string): number {
  return a < b ? -1 : a > b ? 1 : 0;
}

function compareCells(a: BaselineCell, b: BaselineCell): number {
  return (
    byCodeUnits(a.scenario, b.scenario) ||
    a.n - b.n ||
    ROLE_ORDER[a.role] - ROLE_ORDER[b.role] ||
    byCodeUnits(a.estimator, b.estimator) ||
    byCodeUnits(a.perturbation ?? '', b.perturbation ?? '') ||
    byCodeUnits(a.tuning?.base ?? '', b.tuning?.base ?? '') ||
    byCodeUnits(a.tuning?.setting ?? '', b.tuning?.setting ?? '')
  );
}

/** A cell's identity in words, for messages. */
export function describeBaselineCell(cell: Pick<BaselineCell, 'scenario' | 'estimator' | 'n' | 'perturbation'>): string {
  return `${cell.scenario} | ${cell.estimator} | n=${cell.n}${cell.perturbation ? ` | ${cell.perturbation}` : ''}`;
}

/** The compact baseline of a finished, unsharded run. */
export function baselineOf(run: RunFile): Baseline {
  if (run.shard || !run.complete) throw new UsageError('a baseline needs a complete, unsharded run; finish or merge it first');
  const cells = run.cells
    .map((c): BaselineCell => ({
      scenario: c.scenario,
      estimator: c.estimator,
      n: c.n,
      role: c.role,
      perturbation: c.perturbation,
      shift: c.shift,
      tuning: c.tuning,
      estimates: [...c.estimates],
    }))
    .sort(compareCells);
  for (let i = 1; i < cells.length; i++) {
    if (compareCells(cells[i - 1], cells[i]) === 0)
      throw new UsageError(`the run holds the cell ${describeBaselineCell(cells[i])} twice; a baseline needs each cell once`);
  }
  const truths = run.scenarios.map((s) => ({ scenario: s.id, truth: s.truth })).sort((a, b) => byCodeUnits(a.scenario, b.scenario));
  const planLine = formatPlanLine(run.plan);
  return {
    header: {
      format: BASELINE_FORMAT,
      version: BASELINE_VERSION,
      hhat: run.environment.hhatVersion,
      plan: run.plan.name,
      quantity: run.plan.quantity,
      planDigest: sha256(planLine),
      drawsFingerprint: drawsFingerprint(run.plan),
      scenarios: truths.length,
      cells: cells.length,
    },
    plan: run.plan,
    truths,
    cells,
  };
}

function sha256(text: string): string {
  return createHash('sha256').update(text).digest('hex');
}

function formatPlanLine(plan: Plan): string {
  return JSON.stringify({ plan });
}

/** The shortest decimal that reads back as the same double; -0 keeps its sign (JSON.stringify would drop it). */
function formatNumber(x: number): string {
  if (!Number.isFinite(x)) throw new Error(`a baseline holds finite numbers only, not ${x}`);
  return Object.is(x, -0) ? '-0' : String(x);
}

function formatCell(cell: BaselineCell): string {
  const parts = [
    `"scenario":${JSON.stringify(cell.scenario)}`,
    `"estimator":${JSON.stringify(cell.estimator)}`,
    `"n":${cell.n}`,
    `"role":${JSON.stringify(cell.role)}`,
  ];
  if (cell.perturbation !== null) parts.push(`"perturbation":${JSON.stringify(cell.perturbation)}`);
  if (cell.shift !== null) parts.push(`"shift":${formatNumber(cell.shift)}`);
  if (cell.tuning !== null) parts.push(`"tuning":${JSON.stringify(cell.tuning)}`);
  parts.push(`"estimates":[${cell.estimates.map((v) => (v === null ? 'null' : formatNumber(v))).join(',')}]`);
  return `{${parts.join(',')}}`;
}

/** The file's text: one line per record, each ending in a newline. */
export function formatBaseline(baseline: Baseline): string {
  const lines = [
    JSON.stringify(baseline.header),
    formatPlanLine(baseline.plan),
    ...baseline.truths.map((t) => `{"scenario":${JSON.stringify(t.scenario)},"truth":${formatNumber(t.truth)}}`),
    ...baseline.cells.map(formatCell),
  ];
  return `${lines.join('\n')}\n`;
}

type Json = Record<string, unknown>;

function isNumberOrNull(v: unknown): v is number | null {
  return v === null || (typeof v === 'number' && Number.isFinite(v));
}

/** Reads a baseline's text; `label` names the file in errors, each of which is one line naming the line at fault. */
export function parseBaseline(text: string, label: string): Baseline {
  const lines = text.split('\n');
  if (lines[lines.length - 1] === '') lines.pop();
  const bad = (index: number, what: string): never => {
    throw new UsageError(`${label} line ${index + 1}: ${what}; refresh the baseline with npm run baseline (results/README.md)`);
  };
  const record = (index: number): Json => {
    if (index >= lines.length) bad(index, 'missing (the file ends early)');
    let value: unknown;
    try {
      value = JSON.parse(lines[index]);
    } catch (error) {
      bad(index, `not valid JSON (${(error as Error).message})`);
    }
    if (typeof value !== 'object' || value === null || Array.isArray(value)) bad(index, 'not a JSON object');
    return value as Json;
  };

  const header = record(0);
  if (header.format !== BASELINE_FORMAT) bad(0, `not an hhat baseline (the header's "format" must be "${BASELINE_FORMAT}")`);
  if (header.version !== BASELINE_VERSION) bad(0, `format version ${String(header.version)}; this hhat reads version ${BASELINE_VERSION}`);
  for (const key of ['hhat', 'plan', 'quantity', 'planDigest', 'drawsFingerprint'] as const)
    if (typeof header[key] !== 'string') bad(0, `the header has no "${key}" string`);
  for (const key of ['scenarios', 'cells'] as const)
    if (!Number.isInteger(header[key]) || (header[key] as number) < 0) bad(0, `the header's "${key}" must be a count`);
  const counts = { scenarios: header.scenarios as number, cells: header.cells as number };
  if (lines.length !== 2 + counts.scenarios + counts.cells)
    bad(
      Math.min(lines.length, 2 + counts.scenarios + counts.cells),
      `the header announces ${counts.scenarios} scenario and ${counts.cells} cell lines after the plan, and the file has ${lines.length - 2}`,
    );

  if (sha256(lines[1]) !== header.planDigest) bad(1, "the plan line does not match the header's planDigest (edited by hand?)");
  const plan = record(1).plan as Plan;
  if (typeof plan !== 'object' || plan === null || !Array.isArray(plan.scenarios) || !Number.isInteger(plan.replicates))
    bad(1, 'no "plan" object with scenarios and replicates');
  if (drawsFingerprint(plan) !== header.drawsFingerprint) bad(0, "the header's drawsFingerprint does not match the plan");

  const truths: Baseline['truths'] = [];
  for (let i = 2; i < 2 + counts.scenarios; i++) {
    const t = record(i);
    if (typeof t.scenario !== 'string' || typeof t.truth !== 'number') bad(i, 'a scenario line needs "scenario" (a string) and "truth" (a number)');
    truths.push({ scenario: t.scenario as string, truth: t.truth as number });
  }
  const known = new Set(truths.map((t) => t.scenario));

  const cells: BaselineCell[] = [];
  for (let i = 2 + counts.scenarios; i < lines.length; i++) {
    const c = record(i);
    if (typeof c.scenario !== 'string' || !known.has(c.scenario)) bad(i, `the cell's scenario ${JSON.stringify(c.scenario)} has no scenario line`);
    if (typeof c.estimator !== 'string') bad(i, 'the cell has no "estimator" string');
    if (!Number.isInteger(c.n) || (c.n as number) < 1) bad(i, 'the cell\'s "n" must be a positive integer');
    if (typeof c.role !== 'string' || !Object.hasOwn(ROLE_ORDER, c.role)) bad(i, `the cell's role ${JSON.stringify(c.role)} must be main, perturbed or tuning`);
    if (c.perturbation !== undefined && typeof c.perturbation !== 'string') bad(i, 'the cell\'s "perturbation" must be a string');
    if (c.shift !== undefined && typeof c.shift !== 'number') bad(i, 'the cell\'s "shift" must be a number');
    const estimates = c.estimates;
    if (!Array.isArray(estimates) || estimates.length !== plan.replicates || !estimates.every(isNumberOrNull)) {
      bad(i, `the cell's "estimates" must hold ${plan.replicates} numbers or nulls (one per replicate)`);
    }
    cells.push({
      scenario: c.scenario as string,
      estimator: c.estimator as string,
      n: c.n as number,
      role: c.role as Cell['role'],
      perturbation: (c.perturbation as string | undefined) ?? null,
      shift: (c.shift as number | undefined) ?? null,
      tuning: (c.tuning as Cell['tuning'] | undefined) ?? null,
      estimates: estimates as (number | null)[],
    });
  }
  return { header: header as unknown as BaselineHeader, plan, truths, cells };
}

export function readBaseline(path: string): Baseline {
  return parseBaseline(readTextFile(path, 'baseline'), path);
}

export function writeBaseline(path: string, run: RunFile): Baseline {
  const baseline = baselineOf(run);
  writeFileAtomic(path, formatBaseline(baseline));
  return baseline;
}

/**
 * The baseline as src/compare.ts reads a run: each cell scored against its scenario's stored truth (moved by the
 * cell's shift), as the run that made it was; the fingerprint is the plan digest, since no code digest is kept.
 */
export function comparableBaseline(baseline: Baseline): ComparableRun {
  const truth = new Map(baseline.truths.map((t) => [t.scenario, t.truth]));
  return {
    createdAt: null,
    environment: { hhatVersion: baseline.header.hhat, git: null },
    plan: baseline.plan,
    fingerprint: baseline.header.planDigest,
    drawsFingerprint: baseline.header.drawsFingerprint,
    shard: null,
    complete: true,
    scenarios: baseline.truths.map((t) => ({ id: t.scenario, truth: t.truth })),
    cells: baseline.cells.map((c) => ({
      scenario: c.scenario,
      estimator: c.estimator,
      n: c.n,
      perturbation: c.perturbation,
      estimates: c.estimates,
      scores: scoreCell(
        c.estimates.map((v) => v ?? NaN),
        truth.get(c.scenario)! + (c.shift ?? 0),
        c.n,
      ),
    })),
  };
}
