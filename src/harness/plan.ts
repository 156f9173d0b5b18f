/**
 * Plans: scenarios × estimators-with-settings × sample sizes × replicates × base seed, from flags or a JSON
 * plan file. A plan is normalised (canonical scenario ids and estimator specs with every setting spelled out)
 * so that its fingerprint names the draws and the work exactly.
 */
import { createHash } from 'node:crypto';
import { readFileSync } from 'node:fs';
import type { ErrorObject, ValidateFunction } from 'ajv/dist/2020.js';
import { loadAjv } from '../core/schema-validator.js';
import type { Quantity, Scenario } from '../core/contracts.js';
import { UsageError } from '../core/errors.js';
import { findDuplicateKey, locateJsonError } from '../data/json-syntax.js';
import { readFailureReason } from '../core/files.js';
import { DEFAULT_SEED } from '../core/rng.js';
import { formatNumber } from '../core/spec.js';
import { configureEstimator, parseEstimatorSpec, type ConfiguredEstimator } from '../../estimators/index.js';
import { parseScenario } from '../../scenarios/index.js';
import { parsePerturbation } from './perturb.js';
import { DEFAULT_WORKER_MEMORY_MIB } from '../core/memory.js';
import { codeIdentity, moduleGraph, type CodeIdentity } from './code-identity.js';
import { commandDigest, type CommandDeclaration } from './external/declaration.js';
import planSchema from '../schemas/plan.schema.json' with { type: 'json' };

/** How verdicts are reached (README, "Ranks and the best set"): part of a plan, so a run file states them. */
export interface VerdictSettings {
  /** Confidence level of the best set (1 − α). */
  level: number;
  /** Failure rate above which an estimator counts as not having run the cell. */
  maxFailureRate: number;
}

export const DEFAULT_VERDICTS: VerdictSettings = { level: 0.95, maxFailureRate: 0 };

export interface Plan {
  name: string;
  quantity: Quantity;
  /** Canonical scenario ids. */
  scenarios: string[];
  /** Canonical estimator specs, every setting spelled out. */
  estimators: string[];
  sampleSizes: number[];
  replicates: number;
  seed: number;
  /** Perturbations and tuning grids, run at one sample size on the same draws; null: none. */
  robustness: RobustnessPlan | null;
  /** Absolute paths of the user's estimator modules, loaded before the plan resolves (and in every worker). */
  modules: string[];
  /**
   * Estimator commands (external programs, src/harness/external/), registered before the plan resolves (and in
   * every worker). Absent in run files written before commands existed.
   */
  commands?: CommandDeclaration[];
  /** How ranks and best sets are decided; not part of the fingerprint, since they change no estimate. */
  verdicts: VerdictSettings;
  /** Per-estimate time and per-worker memory limits; an estimate that exceeds one is a failure with its reason. */
  limits: Limits;
}

export interface Limits {
  /** Seconds an estimate may take: estimateSeconds + estimateSecondsPerPoint × n. */
  estimateSeconds: number;
  estimateSecondsPerPoint: number;
  /** Heap limit of each worker thread, MiB. */
  workerMemoryMiB: number;
}

/**
 * A minute plus a millisecond per point: generous for every built-in estimator (the slowest, the kernel
 * estimator in 3-D, takes about 1 ms per point at n = 1e5), tight enough that a hung estimator costs little.
 */
export const DEFAULT_LIMITS: Limits = { estimateSeconds: 60, estimateSecondsPerPoint: 0.001, workerMemoryMiB: DEFAULT_WORKER_MEMORY_MIB };

/** The time limit of one estimate at sample size n, in seconds. */
export function estimateTimeLimit(limits: Limits, n: number): number {
  return limits.estimateSeconds + limits.estimateSecondsPerPoint * n;
}

/** "5 s (the limit ...)": the time limit at sample size n and where it was set, for a failure's reason. */
export function timeLimitText(limits: Limits, n: number): string {
  const seconds = +estimateTimeLimit(limits, n).toPrecision(3);
  return limits.estimateSecondsPerPoint === 0
    ? `${seconds} s (the limit at every n: --time-limit, or plan limits.estimateSeconds)`
    : `${seconds} s (the limit at n = ${n}: plan limits.estimateSeconds + estimateSecondsPerPoint × n)`;
}

export interface RobustnessPlan {
  /** One of the plan's sample sizes. */
  sampleSize: number;
  /** Canonical perturbation specs. */
  perturbations: string[];
  /** Whether each estimator's tuning grid runs too. */
  tuning: boolean;
}

/** What `--robustness` (or `"robustness": {}`) runs when it names no perturbations. */
export const DEFAULT_PERTURBATIONS = [
  'rescale:c=0.001',
  'rescale:c=1000',
  'monotone:map=asinh',
  'affine:condition=10,scale=1',
  'quantize:step=0.001',
  'quantize:step=0.01',
  'quantize:step=0.1',
  'quantize:step=0.3',
  'contaminate:fraction=0.01',
];

export const DEFAULT_REPLICATES = 50;
export const DEFAULT_SAMPLE_SIZES = [100, 1000, 10000];

export interface ResolvedPlan {
  plan: Plan;
  scenarios: Scenario[];
  estimators: ConfiguredEstimator[];
}

/** What the flags or the plan file give, before normalisation. */
export interface PlanInput {
  name?: string;
  quantity?: Quantity;
  scenarios: string[];
  estimators: (string | { id: string; settings?: Record<string, number | string> })[];
  sampleSizes?: number[];
  /** AR(1) coefficients: every scenario also runs autocorrelated (phiScenarios); 0 keeps the scenario itself. */
  phi?: number[];
  replicates?: number;
  seed?: number;
  robustness?: { sampleSize?: number; perturbations?: string[]; tuning?: boolean } | null;
  modules?: string[];
  /** Normalised declarations (see normalizeCommand); a plan file's raw entries are normalised by the bench command. */
  commands?: CommandDeclaration[];
  verdicts?: Partial<VerdictSettings>;
  limits?: Partial<Limits>;
}

/** `instancePath` /estimators/2/settings/k → estimators[2].settings.k */
export function jsonPath(pointer: string): string {
  if (!pointer) return '(plan)';
  return pointer
    .split('/')
    .slice(1)
    .map((part) => part.replace(/~1/g, '/').replace(/~0/g, '~'))
    .reduce((path, part) => (/^\d+$/.test(part) ? `${path}[${part}]` : path ? `${path}.${part}` : part), '');
}

/** "an object", "an integer", "an array", "a string", "null": a JSON type with its article. */
function withArticle(type: string): string {
  return type === 'null' ? type : `${/^[aeiou]/.test(type) ? 'an' : 'a'} ${type}`;
}

function describeSchemaError(error: ErrorObject, types: string[] = [String((error.params as { type?: unknown }).type)]): string {
  const path = jsonPath(error.instancePath);
  switch (error.keyword) {
    case 'additionalProperties': {
      // parentSchema (ajv's verbose mode) holds the object's schema, so the message can list what is allowed.
      const known = Object.keys((error.parentSchema as { properties?: object } | undefined)?.properties ?? {});
      const key = (error.params as { additionalProperty: string }).additionalProperty;
      const meant = known.find((k) => k.toLowerCase().includes(key.toLowerCase()) || key.toLowerCase().includes(k.toLowerCase()));
      return `${path === '(plan)' ? '' : `${path}.`}${key}: unknown key${meant ? `, did you mean ${meant}?` : ''}${known.length ? ` (allowed: ${known.join(', ')})` : ''}`;
    }
    case 'required':
      return `${path === '(plan)' ? '' : `${path}.`}${(error.params as { missingProperty: string }).missingProperty}: is required`;
    case 'enum':
      return `${path}: must be one of ${(error.params as { allowedValues: unknown[] }).allowedValues.join(', ')}`;
    case 'minimum':
      return `${path}: must be ≥ ${(error.params as { limit: number }).limit}`;
    case 'maximum':
      return `${path}: must be ≤ ${(error.params as { limit: number }).limit}`;
    case 'type':
      return `${path === '(plan)' ? 'the plan' : `${path}:`} must be ${[...new Set(types)]
        .sort((a, b) => Number(a === 'null') - Number(b === 'null'))
        .map(withArticle)
        .join(' or ')}`;
    case 'minItems':
      // Not countOf from core/format.ts: that module loads the table library, which plan reading does not need.
      return `${path}: must list at least ${(error.params as { limit: number }).limit} item${(error.params as { limit: number }).limit === 1 ? '' : 's'}`;
    default:
      return `${path}: ${error.message ?? 'is not valid'}`;
  }
}

let planValidator: ValidateFunction | undefined;
/** Compiled on first use: most commands never read a plan file, and compiling costs start-up time. */
function validatePlanShape(value: unknown): boolean {
  planValidator ??= loadAjv({ allErrors: false, strict: true, allowUnionTypes: true, verbose: true }).compile(planSchema);
  const valid = planValidator(value);
  validatePlanShape.errors = planValidator.errors;
  return valid;
}
validatePlanShape.errors = undefined as ErrorObject[] | null | undefined;

/** Checks a parsed plan file against the shipped schema; errors name the path. */
export function checkPlanShape(value: unknown, source: string): PlanInput {
  if (!validatePlanShape(value)) {
    const errors = validatePlanShape.errors ?? [];
    // oneOf failures report every branch; the most specific error is the deepest path, and at one depth a
    // type mismatch or the oneOf summary only says that another branch's shape was meant: any other error says more.
    const vague = (e: ErrorObject) => Number(e.keyword === 'type' || e.keyword === 'oneOf');
    const deepest = [...errors].sort((a, b) => b.instancePath.length - a.instancePath.length || vague(a) - vague(b))[0];
    // A value of the wrong type where several are allowed (an object or null) fails once per branch: name them all.
    const types = errors
      .filter((e) => e.keyword === 'type' && deepest && e.instancePath === deepest.instancePath)
      .flatMap((e) => String((e.params as { type: unknown }).type).split(','));
    throw new UsageError(`${source}: ${deepest ? describeSchemaError(deepest, types.length ? types : undefined) : 'is not a valid plan'}`);
  }
  return value as PlanInput;
}

/** Reads a user-named text file; failing that, a usage error "cannot read <what> <path>: <why>". */
export function readTextFile(path: string, what: string): string {
  try {
    // Editors on some systems start UTF-8 files with a byte-order mark; JSON.parse would call it an invalid character.
    return readFileSync(path, 'utf8').replace(/^\uFEFF/, '');
  } catch (error) {
    throw new UsageError(`cannot read ${what} ${path}: ${readFailureReason(error)}`);
  }
}

export function readPlanFile(path: string): PlanInput {
  const text = readTextFile(path, 'plan file');
  let value: unknown;
  try {
    value = JSON.parse(text);
  } catch (error) {
    // V8's message gives a character offset at best; the line and column are what an editor shows.
    const problem = locateJsonError(text);
    if (problem) throw new UsageError(`${path} line ${problem.line}, column ${problem.column}: invalid JSON: ${problem.problem}`);
    throw new UsageError(`${path} is not valid JSON: ${(error as Error).message.replace(/\s+/g, ' ')}`);
  }
  const duplicate = findDuplicateKey(text);
  if (duplicate) {
    throw new UsageError(
      `${path} line ${duplicate.line}, column ${duplicate.column}: "${duplicate.key}" is given twice in one object; keep one (JSON readers keep only the last)`,
    );
  }
  return checkPlanShape(value, path);
}

/** The source `resolvePlan` names for a plan built from flags: its messages then quote the flag as typed. */
export const COMMAND_LINE = 'command line';

/**
 * A plan given in code checked as a plan file is: the same schema and the same one-line messages, so a library
 * call with `sampleSizes: [1.5]` or `replicates: 0` is refused as `--plan` would refuse it, not run into cells
 * that all fail. `commands` hold declarations already normalised (normalizeCommand), which the schema's raw
 * form does not describe; only their shape is checked.
 */
export function checkPlanInput(input: unknown, source: string): PlanInput {
  if (typeof input !== 'object' || input === null || Array.isArray(input)) return checkPlanShape(input, source);
  const { commands, ...rest } = input as Record<string, unknown>;
  checkPlanShape(rest, source);
  if (commands === undefined) return input as PlanInput;
  if (!Array.isArray(commands)) throw new UsageError(`${source}: commands: must be an array`);
  commands.forEach((entry: unknown, i) => {
    const c = entry as Partial<CommandDeclaration> | null;
    if (typeof c !== 'object' || c === null || typeof c.id !== 'string' || !Array.isArray(c.command) || typeof c.cwd !== 'string')
      throw new UsageError(`${source}: commands[${i}]: must be an estimator command declaration as hhat normalises it (id, command as an array, cwd, ...)`);
  });
  return input as PlanInput;
}

/** Plans this process resolved: runPlan checks any other plan it is given against the schema first. */
const resolvedPlans = new WeakSet<Plan>();

/** Whether `plan` came from resolvePlan (or resolveCheckedPlan) in this process. */
export function isResolvedPlan(plan: Plan): boolean {
  return resolvedPlans.has(plan);
}

/**
 * Normalises a plan input: canonical ids, settings validated with their paths, sizes sorted. The input is first
 * checked against the plan schema (checkPlanInput); a mistake is a UsageError naming `source` and the path.
 */
export function resolvePlan(input: PlanInput, source = 'plan'): ResolvedPlan {
  return resolveCheckedPlan(checkPlanInput(input, source), source);
}

/**
 * resolvePlan for an input already checked: a plan file read by readPlanFile and changed only by parsed flags
 * (bench), a plan this process resolved (the run's context), or one built by hhat's own code (advise). It spares
 * the command line loading the schema validator, about 75 ms.
 */
export function resolveCheckedPlan(input: PlanInput, source = 'plan'): ResolvedPlan {
  const quantity = input.quantity ?? 'entropy';
  const specs = input.phi ? phiScenarios(input.scenarios, input.phi, source) : input.scenarios;
  const scenarios = specs.map((spec, i) => {
    let scenario;
    try {
      scenario = parseScenario(spec);
    } catch (error) {
      if (error instanceof UsageError) throw new UsageError(`${source}: scenarios[${i}]: ${error.message}`);
      throw error;
    }
    // Errors are measured against the true value; an infinite one (a law squeezed to a point) leaves none to measure.
    if (!Number.isFinite(scenario.truth)) {
      const value = Number.isNaN(scenario.truth) ? 'not a number' : scenario.truth > 0 ? '+∞ nats' : '−∞ nats';
      throw new UsageError(
        `${source}: scenarios[${i}]: ${scenario.id} has a true ${scenario.quantity.replace(/-/g, ' ')} of ${value}; a benchmark needs a finite true value, so choose parameters that give one (\`hhat scenarios\` lists each family's)`,
      );
    }
    return scenario;
  });
  // A declared command that no estimator entry names runs with its default settings: declaring it is asking for it.
  const named = new Set(input.estimators.map((e) => (typeof e === 'string' ? e.split(':')[0] : e.id)));
  const entries = [...input.estimators, ...(input.commands ?? []).filter((c) => !named.has(c.id)).map((c) => c.id)];
  const estimators = entries.map((entry, i) => {
    try {
      return typeof entry === 'string' ? parseEstimatorSpec(entry) : configureEstimator(entry.id, entry.settings ?? {});
    } catch (error) {
      if (!(error instanceof UsageError)) throw error;
      // From the flags, the entry as typed: "--estimator kozachenko-leonenko:k=0: k=0 is not allowed; k must be ...".
      if (source === COMMAND_LINE && typeof entry === 'string') throw new UsageError(`--estimator ${entry}: ${error.message.replace(/^[^:\s]+: /, '')}`);
      // "kozachenko-leonenko: k=0 is not allowed; ..." → "estimators[2].settings.k: 0 is not allowed; it must be ..."
      const match = /^[^:]+: (\w+)=(.*) is not allowed; \1 (must be .*)$/.exec(error.message);
      const detail = match ? `.settings.${match[1]}: ${match[2]} is not allowed; it ${match[3]}` : `: ${error.message}`;
      throw new UsageError(`${source}: estimators[${i}]${detail}`);
    }
  });
  const mismatched = [
    ...scenarios.filter((s) => s.quantity !== quantity).map((s) => s.id),
    ...estimators.filter((e) => e.estimator.quantity !== quantity).map((e) => e.spec),
  ];
  if (mismatched.length)
    throw new UsageError(
      `${source}: ${mismatched[0]} is not ${quantity === 'entropy' ? 'an' : 'a'} ${quantity} ${scenarios.some((s) => s.id === mismatched[0]) ? 'scenario' : 'estimator'}; the plan's quantity is ${quantity}`,
    );
  const sampleSizes = [...new Set(input.sampleSizes ?? DEFAULT_SAMPLE_SIZES)].sort((a, b) => a - b);
  let robustness: RobustnessPlan | null = null;
  if (input.robustness) {
    // Default size: the largest planned n up to 1000, where perturbation effects are measured well and cheaply.
    const upTo1000 = sampleSizes.filter((n) => n <= 1000);
    const sampleSize = input.robustness.sampleSize ?? (upTo1000.length ? upTo1000[upTo1000.length - 1] : sampleSizes[0]);
    if (!sampleSizes.includes(sampleSize)) {
      throw new UsageError(`${source}: robustness.sampleSize: must be one of the plan's sample sizes (${sampleSizes.join(', ')}); got ${sampleSize}`);
    }
    const perturbations = (input.robustness.perturbations ?? DEFAULT_PERTURBATIONS).map((spec, i) => {
      try {
        return parsePerturbation(spec).spec;
      } catch (error) {
        if (error instanceof UsageError) throw new UsageError(`${source}: robustness.perturbations[${i}]: ${error.message}`);
        throw error;
      }
    });
    robustness = { sampleSize, perturbations: dedupe(perturbations), tuning: input.robustness.tuning ?? true };
  }
  const plan: Plan = {
    name: input.name ?? 'custom',
    quantity,
    scenarios: dedupe(scenarios.map((s) => s.id)),
    estimators: dedupe(estimators.map((e) => e.spec)),
    sampleSizes,
    replicates: input.replicates ?? DEFAULT_REPLICATES,
    seed: input.seed ?? DEFAULT_SEED,
    robustness,
    modules: input.modules ?? [],
    ...(input.commands?.length ? { commands: input.commands } : {}),
    verdicts: { ...DEFAULT_VERDICTS, ...input.verdicts },
    limits: { ...DEFAULT_LIMITS, ...input.limits },
  };
  resolvedPlans.add(plan);
  return {
    plan,
    scenarios: plan.scenarios.map((id) => parseScenario(id)),
    estimators: plan.estimators.map((spec) => parseEstimatorSpec(spec)),
  };
}

/**
 * A plan's `phi` list: each scenario once per φ, as autocorrelated[phi=φ;SCENARIO] (scenarios/autocorrelated.ts),
 * φ = 0 as the scenario itself, so one table shows the error against autocorrelation on paired base draws.
 */
export function phiScenarios(scenarios: readonly string[], phi: readonly number[], source = 'plan'): string[] {
  phi.forEach((value, i) => {
    if (!(typeof value === 'number' && value > -1 && value < 1))
      throw new UsageError(`${source}: phi[${i}]: ${value} is not allowed; each φ must be a number with −1 < φ < 1`);
  });
  return scenarios.flatMap((spec) => phi.map((value) => (value === 0 ? spec : `autocorrelated[phi=${formatNumber(value)};${spec}]`)));
}

function dedupe(list: string[]): string[] {
  return [...new Set(list)];
}

/** The code a plan runs: hhat's build, and each estimator module with every file it imports. */
export interface PlanCode {
  hhat: CodeIdentity;
  modules: { path: string; digest: string }[];
  /** Each estimator command: its declaration and the files it names (absent when the plan has none). */
  commands?: { id: string; digest: string }[];
}

export function planCode(plan: Plan): PlanCode {
  const code: PlanCode = { hhat: codeIdentity(), modules: plan.modules.map((path) => ({ path, digest: moduleGraph(path).digest })) };
  if (plan.commands?.length) code.commands = plan.commands.map((c) => ({ id: c.id, digest: commandDigest(c) }));
  return code;
}

/**
 * sha256 of the canonical plan and the code that runs it: two runs with the same fingerprint saw the same
 * draws and did the same work with the same code.
 */
export function planFingerprint(plan: Plan, code: PlanCode = planCode(plan)): string {
  const canonical = JSON.stringify({
    quantity: plan.quantity,
    scenarios: plan.scenarios,
    estimators: plan.estimators,
    sampleSizes: plan.sampleSizes,
    replicates: plan.replicates,
    seed: plan.seed,
    robustness: plan.robustness,
    // A limit decides which estimates fail.
    limits: plan.limits,
    // Edited code (hhat's or a module's, or a file a module imports) changes the work under the same names.
    code,
  });
  return createHash('sha256').update(canonical).digest('hex');
}

/** Why two plans' code differs, in words, for refusing to mix their results; null when it does not. */
export function codeDifference(made: PlanCode, now: PlanCode): string | null {
  const reasons: string[] = [];
  if (made.hhat.version !== now.hhat.version || made.hhat.build !== now.hhat.build) {
    reasons.push(
      `it was made by hhat ${made.hhat.version} (build ${made.hhat.build.slice(0, 12)}) and this is hhat ${now.hhat.version} (build ${now.hhat.build.slice(0, 12)})`,
    );
  }
  // Checkpoints written before dependencies were recorded have none: that is a difference too.
  const then = made.hhat.dependencies ?? [];
  const thenOnly = then.filter((d) => !now.hhat.dependencies.includes(d)).map((d) => `${d} then`);
  const nowOnly = now.hhat.dependencies.filter((d) => !then.includes(d)).map((d) => `${d} now`);
  if (!made.hhat.dependencies || thenOnly.length || nowOnly.length) {
    reasons.push(`the packages hhat uses differ (${[...thenOnly, ...nowOnly].slice(0, 4).join(', ') || 'not recorded then'})`);
  }
  const before = new Map(made.modules.map((m) => [m.path, m.digest]));
  for (const m of now.modules) {
    const was = before.get(m.path);
    if (was === undefined) reasons.push(`module ${m.path} was not in it`);
    else if (was !== m.digest)
      reasons.push(`module ${m.path} or a file it imports changed since (digest ${was.slice(0, 12)} then, ${m.digest.slice(0, 12)} now)`);
  }
  for (const path of before.keys()) if (!now.modules.some((m) => m.path === path)) reasons.push(`it used module ${path}, which this run does not`);
  const commandsThen = new Map((made.commands ?? []).map((c) => [c.id, c.digest]));
  for (const c of now.commands ?? []) {
    const was = commandsThen.get(c.id);
    if (was === undefined) reasons.push(`estimator command ${c.id} was not in it`);
    else if (was !== c.digest) reasons.push(`estimator command ${c.id} (its command line, folder, settings or a file it names) changed since`);
  }
  for (const id of commandsThen.keys())
    if (!(now.commands ?? []).some((c) => c.id === id)) reasons.push(`it used estimator command ${id}, which this run does not`);
  return reasons.length ? reasons.join('; ') : null;
}

/**
 * sha256 of what determines the samples alone (seed, scenarios, sizes, replicates): two runs with the same
 * draws fingerprint saw identical draws, so their estimates can be compared pairwise.
 */
export function drawsFingerprint(plan: Plan): string {
  const canonical = JSON.stringify({ scenarios: plan.scenarios, sampleSizes: plan.sampleSizes, replicates: plan.replicates, seed: plan.seed });
  return createHash('sha256').update(canonical).digest('hex');
}

export {
  collect,
  MAX_ESTIMATE_SECONDS,
  MAX_REPLICATES,
  MAX_WORKERS,
  parseFraction,
  parseIntegerOption,
  parseLevel,
  parsePhiList,
  parseSampleSizes,
  parseSeconds,
  WORKER_MEMORY_MIB,
} from '../core/options.js';
