/**
 * Run files: the versioned JSON record of a plan's results, with the raw per-replicate estimates (so later
 * comparisons can be paired), scores, rates, rankings and provenance. Written to a temporary name and
 * renamed, so a crash never leaves half a file.
 */
import { writeFileAtomic } from '../core/files.js';
import type { ErrorObject, ValidateFunction } from 'ajv/dist/2020.js';
import { loadAjv } from '../core/schema-validator.js';
import type { Scenario } from '../core/contracts.js';
import { UsageError } from '../core/errors.js';
import { locateJsonError } from '../data/json-syntax.js';
import { DEQUANTIZE_SETTING, describeValue } from '../core/spec.js';
import { drawsFingerprint, readTextFile, type Plan, type PlanCode } from '../harness/plan.js';
import { environment, type Environment } from '../core/provenance.js';
import type { RunOutcome, Session, Shard } from '../harness/runner.js';
import { fitRate, scoreCell, type CellScores, type RateFit } from './score.js';
import { overallRanks, rankCells, type OverallRank, type Ranking } from './ranking.js';
import type { Skip, Unit, WorkContext } from '../harness/work.js';
import runSchema from '../schemas/run.schema.json' with { type: 'json' };
import { robustnessSection, type RobustnessSection } from './robustness.js';
import type { Cell, CellFailure, ScenarioInfo } from './cells.js';
import { dependenceSection, type DependenceSection } from './dependence.js';

export const SCHEMA_VERSION = 2;

/**
 * A cell's key: scenario, estimator spec, n and perturbation. The role is left out on purpose: within a run it
 * follows from these (only perturbed cells have a perturbation; a tuning point's spec is never a plan
 * estimator's), and `compare` matches the cells of two runs whatever role each plan gave them.
 */
export function cellKey(cell: Pick<Cell, 'scenario' | 'estimator' | 'n' | 'perturbation'>): string {
  return `${cell.scenario}|${cell.estimator}|${cell.n}|${cell.perturbation ?? ''}`;
}

export interface Rate {
  scenario: string;
  estimator: string;
  bias: RateFit | null;
  rmse: RateFit | null;
}

export interface RunFile {
  schemaVersion: number;
  kind: 'hhat-run';
  createdAt: string;
  environment: Environment;
  plan: Plan;
  /** Identifies the whole plan (draws, work and code): shards and checkpoints must share it. */
  fingerprint: string;
  /** The code that computed the estimates: hhat's version and build, each module's import-graph digest. */
  code: PlanCode;
  /** Identifies the draws only (seed, scenarios, sizes, replicates): equal values mean paired comparisons are valid. */
  drawsFingerprint: string;
  shard: Shard | null;
  complete: boolean;
  /** The most worker threads any session used. */
  workers: number;
  /** Wall time summed over the sessions (a resumed run's parts added up). */
  wallSeconds: number;
  /** Each stretch of work: the first start and every resume. */
  sessions: Session[];
  scenarios: ScenarioInfo[];
  skipped: Skip[];
  cells: Cell[];
  rates: Rate[];
  rankings: Ranking[];
  overall: OverallRank[];
  robustness: RobustnessSection | null;
  /** Variance inflation under autocorrelation and thinning comparisons (src/analysis/dependence.ts); absent when the plan has neither. */
  dependence?: DependenceSection;
}

function scenarioInfo(s: Scenario): ScenarioInfo {
  return {
    id: s.id,
    family: s.family,
    dim: s.dim,
    truth: s.truth,
    truthSource: s.truthSource,
    support: s.support,
    tails: s.tails,
    logDensityVariance: s.logDensityVariance ?? null,
    // A plain copy: the discrete entropy is a getter computed on first read.
    ...(s.recorded && { recorded: { ...s.recorded } }),
  };
}

/** What names a cell: its scenario, estimator, n, role, perturbation and tuning, without its results. */
export type CellIdentity = Pick<Cell, 'scenario' | 'estimator' | 'n' | 'role' | 'perturbation' | 'tuning'>;

/** The cell a series of a unit fills (assembleRun; merge, to know which cells a shard owes). */
export function cellIdentity(context: WorkContext, unit: Unit, series: Unit['series'][number]): CellIdentity {
  const planned = context.estimators.length;
  const twinsFrom = planned + context.tuning.length;
  const e = series.estimator;
  let tuning: Cell['tuning'] = null;
  if (e >= twinsFrom) {
    // A dequantized twin is its plan estimator with one setting changed, as a tuning point is.
    tuning = { base: context.estimators[context.dequantized[e - twinsFrom].base].spec, setting: DEQUANTIZE_SETTING, value: 'auto' };
  } else if (e >= planned) {
    const point = context.tuning[e - planned];
    tuning = { base: context.estimators[point.base].spec, setting: point.setting, value: point.value };
  }
  return {
    scenario: context.scenarios[unit.scenario].id,
    estimator: context.all[e].spec,
    n: unit.n,
    role: series.variant > 0 ? 'perturbed' : e < planned ? 'main' : 'tuning',
    perturbation: series.variant > 0 ? context.perturbations[series.variant - 1].spec : null,
    tuning,
  };
}

/** Assembles cells from unit results (a shard holds only its own replicates; the rest stay null). */
export function assembleRun(outcome: RunOutcome, shard: Shard | null): RunFile {
  if (typeof outcome !== 'object' || outcome === null || !(outcome.results instanceof Map) || typeof outcome.context !== 'object')
    throw new UsageError(`assembleRun: the outcome must be what runPlan resolves to; got ${describeValue(outcome)}`);
  if (shard !== null && !(typeof shard === 'object' && Number.isInteger(shard.index) && Number.isInteger(shard.count)))
    throw new UsageError(`assembleRun: the shard must be null (a whole run) or the { index, count } given to runPlan; got ${describeValue(shard)}`);
  const { plan, context } = outcome;
  const cellIndex = new Map<string, Cell>();
  const cells: Cell[] = [];
  const key = (s: number, e: number, n: number, v: number) => `${s}|${e}|${n}|${v}`;
  for (const unit of outcome.units) {
    for (const series of unit.series) {
      const k = key(unit.scenario, series.estimator, unit.n, series.variant);
      if (cellIndex.has(k)) continue;
      const configured = context.all[series.estimator];
      const prepared = series.variant > 0 ? context.prepared[unit.scenario][series.variant - 1] : null;
      const { scenario, estimator, n, role, perturbation, tuning } = cellIdentity(context, unit, series);
      const cell: Cell = {
        scenario,
        estimator,
        estimatorId: configured.estimator.id,
        family: configured.estimator.family,
        n,
        role,
        perturbation,
        shift: prepared && 'shift' in prepared ? prepared.shift : null,
        tuning,
        estimates: new Array<number | null>(plan.replicates).fill(null),
        failures: [],
        scores: undefined as unknown as CellScores,
        timing: { totalMs: 0, meanMs: 0 },
      };
      cellIndex.set(k, cell);
      cells.push(cell);
    }
  }
  const ran = new Map<Cell, number>();
  for (const [unitIndex, result] of outcome.results) {
    const unit = outcome.units[unitIndex];
    unit.series.forEach((series, k) => {
      const cell = cellIndex.get(key(unit.scenario, series.estimator, unit.n, series.variant))!;
      const values = result.estimates[k];
      for (let r = 0; r < values.length; r++) cell.estimates[unit.repStart + r] = Number.isNaN(values[r]) ? null : values[r];
      cell.timing.totalMs += result.timeMs[k];
      ran.set(cell, (ran.get(cell) ?? 0) + values.length);
    });
    for (const f of result.failures) {
      const series = unit.series[f.series];
      cellIndex.get(key(unit.scenario, series.estimator, unit.n, series.variant))!.failures.push({ replicate: f.replicate, message: f.message });
    }
  }
  for (const cell of cells) {
    cell.failures.sort((a, b) => a.replicate - b.replicate);
    const count = ran.get(cell) ?? 0;
    cell.timing.meanMs = count ? cell.timing.totalMs / count : 0;
  }
  // Cells with no replicate in this shard are dropped from a shard file; merge brings them back.
  const present = shard ? cells.filter((c) => (ran.get(c) ?? 0) > 0) : cells;
  return finishRun({
    plan,
    fingerprint: outcome.fingerprint,
    code: outcome.code,
    shard,
    complete: shard === null && !outcome.interrupted,
    workers: Math.max(...outcome.sessions.map((x) => x.workers)),
    wallSeconds: outcome.sessions.reduce((sum, x) => sum + x.wallSeconds, 0),
    sessions: outcome.sessions,
    scenarios: context.scenarios.map(scenarioInfo),
    skipped: outcome.skipped,
    cells: present,
  });
}

/** Scores, rates and rankings from cells; shared by fresh runs and merges. */
export function finishRun(
  base: Omit<RunFile, 'schemaVersion' | 'kind' | 'createdAt' | 'environment' | 'drawsFingerprint' | 'rates' | 'rankings' | 'overall' | 'robustness'>,
): RunFile {
  const truth = new Map(base.scenarios.map((s) => [s.id, s]));
  for (const cell of base.cells) {
    const info = truth.get(cell.scenario)!;
    const failed = new Set(cell.failures.map((f) => f.replicate));
    // In a shard, replicates not run here are neither estimates nor failures: leave them out.
    const values = cell.estimates.flatMap((v, r) => (v !== null ? [v] : failed.has(r) ? [NaN] : []));
    // A perturbed cell is scored against the moved truth; its efficiency bound is the unperturbed one's only for shifts.
    cell.scores = scoreCell(values, info.truth + (cell.shift ?? 0), cell.n, cell.role === 'main' ? (info.logDensityVariance ?? undefined) : undefined);
  }
  const main = base.cells.filter((c) => c.role === 'main');
  const rankings = base.complete
    ? rankCells(
        main,
        (id) => truth.get(id)!.truth,
        base.plan.verdicts,
        (scenario, n) => `seed=${base.plan.seed}\nscenario=${scenario}\nn=${n}`,
      )
    : [];
  return {
    schemaVersion: SCHEMA_VERSION,
    kind: 'hhat-run',
    createdAt: new Date().toISOString(),
    environment: environment(),
    ...base,
    drawsFingerprint: drawsFingerprint(base.plan),
    rates: rates(main),
    rankings,
    overall: overallRanks(rankings, (id) => groupName(truth.get(id)!)),
    robustness: base.complete && base.plan.robustness ? robustnessSection(base.plan, base.cells, truth) : null,
    ...withDependence(base.complete ? dependenceSection(base.cells, base.scenarios, base.plan.verdicts.level) : null),
  };
}

function withDependence(section: DependenceSection | null): { dependence?: DependenceSection } {
  return section ? { dependence: section } : {};
}

function rates(cells: Cell[]): Rate[] {
  const groups = new Map<string, Cell[]>();
  for (const c of cells) {
    if (c.perturbation !== null) continue;
    const k = `${c.scenario}|${c.estimator}`;
    if (!groups.has(k)) groups.set(k, []);
    groups.get(k)!.push(c);
  }
  return [...groups.values()]
    .filter((g) => g.length >= 2)
    .map((g) => ({
      scenario: g[0].scenario,
      estimator: g[0].estimator,
      bias: fitRate(g.map((c) => ({ n: c.n, value: Math.abs(c.scores.bias.value), se: c.scores.bias.se }))),
      rmse: fitRate(g.map((c) => ({ n: c.n, value: c.scores.rmse.value, se: c.scores.rmse.se }))),
    }));
}

export function groupName(info: ScenarioInfo): string {
  return `d=${info.dim}/${info.tails}`;
}

/** The groups (dimension / tail class) that hold an overall rank, in the order of the run's scenarios. */
export function rankedGroups(run: Pick<RunFile, 'scenarios' | 'overall'>): string[] {
  return [...new Set(run.scenarios.map(groupName))].filter((g) => run.overall.some((o) => o.groups[g]));
}

/** JSON with NaN and ±Infinity written as null (JSON has no such numbers). */
export function toJson(value: unknown): string {
  return JSON.stringify(value, (_k, v: unknown) => (typeof v === 'number' && !Number.isFinite(v) ? null : v), 1);
}

export function writeRunFile(path: string, run: RunFile, hint?: string): void {
  if (typeof path !== 'string' || path.trim() === '') throw new UsageError(`writeRunFile: the path must be a file name; got ${describeValue(path)}`);
  writeFileAtomic(path, `${toJson(run)}\n`, hint);
}

let runValidator: ValidateFunction | undefined;
/** Compiled on first use (reading a run file), not at start-up. */
function validateRun(value: unknown): boolean {
  runValidator ??= loadAjv({ allErrors: false, strict: false }).compile(runSchema);
  const valid = runValidator(value);
  validateRun.errors = runValidator.errors;
  return valid;
}
validateRun.errors = undefined as ErrorObject[] | null | undefined;

export function runFileErrors(value: unknown): string | null {
  if (validateRun(value)) return null;
  const e = validateRun.errors?.[0];
  return e ? `${e.instancePath || '(root)'} ${e.message ?? 'is not valid'}` : 'is not valid';
}

/** Reads and checks a run file: wrong kind, another schema version, or a broken file is a clear usage error. */
export function readRunFile(path: string): RunFile {
  const text = readTextFile(path, 'run file');
  let value: { kind?: unknown; schemaVersion?: unknown };
  try {
    value = JSON.parse(text) as typeof value;
  } catch (error) {
    // The line and column, as an editor shows them; V8's message quotes the file, newlines and all.
    const problem = locateJsonError(text);
    const where = problem ? `line ${problem.line}, column ${problem.column}: ${problem.problem}` : (error as Error).message.replace(/\s+/g, ' ');
    throw new UsageError(`${path} is not valid JSON (${where}); is it a complete hhat run file?`);
  }
  if (typeof value !== 'object' || value === null || value.kind !== 'hhat-run') throw new UsageError(`${path} is not an hhat run file (no "kind": "hhat-run")`);
  if (value.schemaVersion !== SCHEMA_VERSION) {
    throw new UsageError(
      `${path} has schemaVersion ${String(value.schemaVersion)}; this hhat reads version ${SCHEMA_VERSION}; rerun its plan with this version`,
    );
  }
  const problem = runFileErrors(value);
  if (problem) throw new UsageError(`${path} does not match the run file schema: ${problem}`);
  return value as unknown as RunFile;
}

export type { Cell, CellFailure, OverallRank, Ranking, ScenarioInfo };
export { writeFileAtomic };
export type { RankEntry } from './ranking.js';
