import { existsSync, readdirSync, readFileSync, rmSync, statSync } from 'node:fs';
import { COMMANDS } from './summaries.js';
import { dirname, join, resolve } from 'node:path';
import { describeRegistration, QUANTITIES, resolveModulePath, useEstimatorModules } from '../harness/modules.js';
import { normalizeCommand, parseCommandOption, type CommandInput } from '../harness/external/declaration.js';
import { useEstimatorCommands } from '../harness/external/client.js';
import { historyNotes } from '../harness/target-notes.js';
import type { Command } from 'commander';
import { UsageError } from '../core/errors.js';
import { hasOption, hhatCommand } from '../core/shell.js';
import type { Quantity } from '../core/contracts.js';
import { parseScenario } from '../../scenarios/index.js';
import { countOf, type Base } from '../core/format.js';
import { defaultPlan } from '../harness/default-plan.js';
import {
  collect,
  DEFAULT_LIMITS,
  MAX_ESTIMATE_SECONDS,
  MAX_REPLICATES,
  parseFraction,
  parseSeconds,
  WORKER_MEMORY_MIB,
  planFingerprint,
  parseIntegerOption,
  parseLevel,
  parseSampleSizes,
  parsePhiList,
  readPlanFile,
  resolveCheckedPlan,
  COMMAND_LINE,
  MAX_WORKERS,
  type Plan,
  type PlanInput,
} from '../harness/plan.js';
import { progressReporter } from '../views/progress.js';
import { assembleRun, readRunFile, writeFileAtomic, writeRunFile, type RunFile } from '../analysis/results.js';
import {
  acquireLock,
  ensureFolder,
  isSpecialFile,
  refuseFolderOutput,
  refuseForeignOutput,
  refuseNonFolder,
  nonEmptyFile,
  refuseSameFile,
  removeLeftoverTemporaries,
  sameFile,
} from '../core/files.js';
import { prefetchProvenance } from '../core/provenance.js';
import { OUT_OF_RANGE } from '../harness/draw-range.js';
import { checkPlanMemory, checkpointStarted, defaultWorkers, runPlan, type RunOptions, type RunOutcome, type Shard } from '../harness/runner.js';
import { parseShard } from '../harness/shard.js';
import { dependenceTables, detailTable, overallTable, robustnessTable, scenarioTables, scoresCsv } from '../views/tables.js';
import { estimatorLabel } from '../../estimators/index.js';
import { rankLegend } from '../views/verdict-text.js';
import { mergeShards } from '../analysis/merge.js';
import { biasTextChart } from '../views/report/text-chart.js';

interface BenchOptions {
  plan?: string;
  quantity?: string;
  scenario?: string[];
  estimator?: string[];
  n?: string;
  phi?: string;
  replicates?: string;
  seed?: string;
  workers?: string;
  shard?: string;
  out?: string;
  resume?: boolean;
  csv?: string;
  robustness?: boolean;
  perturb?: string[];
  robustnessN?: string;
  tuning?: boolean;
  estimatorModule?: string[];
  estimatorCommand?: string[];
  bits?: boolean;
  detail?: boolean;
  quiet?: boolean;
  report?: string | boolean;
  svgDir?: string;
  chart?: boolean;
  level?: string;
  maxFailureRate?: string;
  timeLimit?: string;
  memoryLimit?: string;
  allowPlanModules?: boolean;
  force?: boolean;
}

function timestamp(): string {
  return new Date().toISOString().replace(/[-:]/g, '').replace('T', '-').slice(0, 15);
}

function checkpointFor(out: string): string {
  return `${out}.checkpoint.jsonl`;
}

/** The finished run file at `path`, or null when there is none (a missing, partial or foreign file is not one). */
function finishedRun(path: string): Pick<RunFile, 'fingerprint' | 'createdAt' | 'plan'> | null {
  if (!existsSync(path)) return null;
  try {
    const value = JSON.parse(readFileSync(path, 'utf8')) as Partial<RunFile>;
    // Run files are written only when a run (or a shard of it) finishes: whatever is there is finished work.
    return value.kind === 'hhat-run' && value.fingerprint && value.plan && value.createdAt ? (value as RunFile) : null;
  } catch {
    return null;
  }
}

/** With --resume and no --out: the newest interrupted run under results/. */
function latestCheckpoint(dir: string): string | undefined {
  if (!existsSync(dir)) return undefined;
  const candidates = readdirSync(dir)
    .filter((f) => f.endsWith('.json.checkpoint.jsonl'))
    .map((f) => join(dir, f))
    .sort((a, b) => statSync(b).mtimeMs - statSync(a).mtimeMs);
  return candidates[0];
}

export function planInputFromOptions(options: BenchOptions): PlanInput {
  let input: PlanInput;
  if (options.plan) {
    if (options.scenario?.length || options.estimator?.length || options.quantity) {
      throw new UsageError('--plan cannot be combined with --scenario, --estimator or --quantity; put them in the plan file');
    }
    input = readPlanFile(options.plan);
    // Modules are code that runs with the user's rights: a plan file, which may come from anywhere, names them only with consent.
    if (input.modules?.length && !options.allowPlanModules) {
      throw new UsageError(
        `${options.plan} names estimator modules (${input.modules.join(', ')}), which are JavaScript that runs with your rights; read them, then add --allow-plan-modules to load them (or pass them with --estimator-module)`,
      );
    }
    // Module paths in a plan file are relative to the file.
    if (input.modules) input.modules = input.modules.map((m) => resolveModulePath(m, dirname(resolve(options.plan!))));
    if (input.commands?.length) {
      if (!options.allowPlanModules) {
        throw new UsageError(
          `${options.plan} names estimator commands (${input.commands.map((c) => c.id).join(', ')}), which are programs that run with your rights; read them, then add --allow-plan-modules to start them (or pass them with --estimator-command)`,
        );
      }
      // A plan file's entries are raw (a command line as a string, settings by name); commands run in the file's folder by default.
      const raw = input.commands as unknown as CommandInput[];
      input.commands = raw.map((c, i) => normalizeCommand(c, input.quantity ?? 'entropy', dirname(resolve(options.plan!)), `${options.plan}: commands[${i}]`));
    }
  } else {
    if (options.quantity !== undefined && !(QUANTITIES as readonly string[]).includes(options.quantity)) {
      throw new UsageError(`--quantity ${options.quantity} is not allowed; use one of ${QUANTITIES.join(', ')}`);
    }
    // Without --quantity, scenarios given by flag say which quantity the plan is about.
    const inferred = !options.quantity && options.scenario?.length ? parseScenario(options.scenario[0]).quantity : undefined;
    const base = defaultPlan((options.quantity ?? inferred ?? 'entropy') as Quantity);
    const custom = Boolean(options.scenario?.length || options.estimator?.length);
    input = {
      ...base,
      name: custom ? 'custom' : base.name,
      scenarios: options.scenario?.length ? options.scenario : base.scenarios,
      estimators: options.estimator?.length ? options.estimator : base.estimators,
      // A plan built from flags measures robustness only when asked (--robustness, --perturb, ...).
      robustness: custom ? null : base.robustness,
    };
  }
  // New sample sizes: let the robustness size be chosen among them again.
  if (options.n !== undefined && input.robustness) input.robustness = { ...input.robustness, sampleSize: undefined };
  if (options.n !== undefined) input.sampleSizes = parseSampleSizes(options.n);
  if (options.phi !== undefined) input.phi = parsePhiList(options.phi);
  if (options.replicates !== undefined) input.replicates = parseIntegerOption('--replicates', options.replicates, 2, MAX_REPLICATES);
  if (options.seed !== undefined) input.seed = parseIntegerOption('--seed', options.seed, 0);
  if (options.level !== undefined) input.verdicts = { ...input.verdicts, level: parseLevel(options.level) };
  if (options.maxFailureRate !== undefined) input.verdicts = { ...input.verdicts, maxFailureRate: parseFraction('--max-failure-rate', options.maxFailureRate) };
  // One limit whatever n: what a user who types a number of seconds expects (the plan's per-point term is for plans).
  if (options.timeLimit !== undefined)
    input.limits = { ...input.limits, estimateSeconds: parseSeconds('--time-limit', options.timeLimit, MAX_ESTIMATE_SECONDS), estimateSecondsPerPoint: 0 };
  if (options.memoryLimit !== undefined) {
    input.limits = {
      ...input.limits,
      workerMemoryMiB: parseIntegerOption('--memory-limit', options.memoryLimit, WORKER_MEMORY_MIB.minimum, WORKER_MEMORY_MIB.maximum),
    };
  }
  if (options.estimatorModule?.length) input.modules = [...(input.modules ?? []), ...options.estimatorModule.map((m) => resolveModulePath(m))];
  if (options.estimatorCommand?.length) {
    const declared = options.estimatorCommand.map((text) =>
      normalizeCommand(parseCommandOption(text), input.quantity ?? 'entropy', process.cwd(), `--estimator-command ${text}`),
    );
    input.commands = [...(input.commands ?? []), ...declared];
  }
  const ids = (input.commands ?? []).map((c) => c.id);
  const twice = ids.find((id, i) => ids.indexOf(id) !== i);
  if (twice) throw new UsageError(`estimator command "${twice}" is declared twice; each id may be declared once`);
  const wantsRobustness = options.robustness || options.perturb?.length || options.robustnessN !== undefined || options.tuning === false;
  if (wantsRobustness) {
    input.robustness = {
      ...(input.robustness ?? {}),
      ...(options.perturb?.length ? { perturbations: options.perturb } : {}),
      ...(options.robustnessN !== undefined ? { sampleSize: parseIntegerOption('--robustness-n', options.robustnessN, 2) } : {}),
      ...(options.tuning === false ? { tuning: false } : {}),
    };
  }
  return input;
}

const MAX_REASON_LINES = 6;

/** Whether a failure is a draw's that left the double range (src/harness/draw-range.ts), not the estimator's. */
function outOfRange(message: string): boolean {
  return message.startsWith(`${OUT_OF_RANGE}: `);
}

/**
 * "estimator: reason (count)" for each distinct failure reason, the most frequent first, at most `limit` lines;
 * a draw that left the double range is named once for all the estimators it failed, as the scenario's or perturbation's.
 */
function failureReasons(cells: RunFile['cells'], limit: number): string[] {
  const counts = new Map<string, number>();
  for (const cell of cells) {
    for (const f of cell.failures) {
      const key = outOfRange(f.message) ? f.message.slice(OUT_OF_RANGE.length + 2) : `${estimatorLabel(cell.estimator)}: ${f.message}`;
      counts.set(key, (counts.get(key) ?? 0) + 1);
    }
  }
  const lines = [...counts.entries()].sort((a, b) => b[1] - a[1]).map(([key, count]) => `${key}${count > 1 ? ` (${count} times)` : ''}`);
  return lines.length > limit ? [...lines.slice(0, limit), `… and ${lines.length - limit} other reasons`] : lines;
}

/** "41 ties, 3 out-of-range draw": failures counted by the code their messages start with, the most frequent first. */
function failureCauses(cells: RunFile['cells']): string {
  const counts = new Map<string, number>();
  for (const cell of cells) {
    for (const f of cell.failures) {
      const code = outOfRange(f.message) ? OUT_OF_RANGE : (/^([a-z-]+): /.exec(f.message)?.[1] ?? 'other');
      counts.set(code, (counts.get(code) ?? 0) + 1);
    }
  }
  return [...counts.entries()]
    .sort((a, b) => b[1] - a[1])
    .map(([code, count]) => `${count} ${code}`)
    .join(', ');
}

export function printRun(run: RunFile, base: Base, print: (text: string) => void, detail: boolean): void {
  print(scenarioTables(run, base));
  const overall = overallTable(run);
  if (overall) print(overall);
  const robustness = robustnessTable(run, base);
  if (robustness) print(robustness);
  const dependence = dependenceTables(run, base);
  if (dependence) print(dependence);
  if (detail) print(detailTable(run, base));
  if (run.skipped.length) {
    print(`Skipped ${run.skipped.length} estimator–scenario pair${run.skipped.length === 1 ? '' : 's'}:`);
    const reasons = new Map<string, number>();
    for (const s of run.skipped) reasons.set(s.reason, (reasons.get(s.reason) ?? 0) + 1);
    for (const [reason, count] of reasons) print(`  ${reason}${count > 1 ? ` (${count} scenarios)` : ''}`);
  }
  const failedMain = run.cells.filter((c) => c.role === 'main').reduce((s, c) => s + c.scores.failures, 0);
  const failedOther = run.cells.filter((c) => c.role !== 'main').reduce((s, c) => s + c.scores.failures, 0);
  if (failedMain) {
    print(
      `${failedMain} estimate${failedMain === 1 ? '' : 's'} failed in the benchmark cells; the run file lists each with its reason (cells[].failures). The reasons:`,
    );
    for (const line of failureReasons(
      run.cells.filter((c) => c.role === 'main'),
      MAX_REASON_LINES,
    ))
      print(`  ${line}`);
  }
  if (failedOther) {
    const other = run.cells.filter((c) => c.role !== 'main');
    print(
      `${failedOther} estimate${failedOther === 1 ? '' : 's'} failed on perturbed samples or tuning variants (${failureCauses(other)}); the robustness table counts them.`,
    );
    // Ties after rounding are expected there; a draw carried beyond the double range is not, and is named.
    const ranged = other.map((c) => ({ ...c, failures: c.failures.filter((f) => outOfRange(f.message)) })).filter((c) => c.failures.length);
    for (const line of failureReasons(ranged, MAX_REASON_LINES)) print(`  ${line}`);
  }
  print(
    `RMSE ± Monte-Carlo SE (${countOf(run.plan.replicates, 'replicate')} per cell). ${rankLegend(run.plan.verdicts.level, run.plan.verdicts.maxFailureRate)} ` +
      'RMSE slope vs n: the weighted least-squares slope of log RMSE on log n ± its SE (−0.5 is the parametric rate); sizes whose RMSE is below 2 SE are left out, and "[k of K n]" says when some were.',
  );
}

/** Declares bench's options; their texts are what `hhat bench --help` shows. */
function declareBenchOptions(command: Command): Command {
  return command
    .option('--plan <file>', 'a JSON plan file (schema: src/schemas/plan.schema.json)')
    .option(
      '--quantity <q>',
      'entropy (default), mutual-information, conditional-mutual-information, transfer-entropy or divergence: the default plan of that quantity',
    )
    .option('--scenario <spec>', 'a scenario to include (repeatable; see `hhat scenarios`)', collect)
    .option('--estimator <spec>', 'an estimator with settings, ID[:key=value,...] (repeatable; see `hhat estimators`)', collect)
    .option('--n <sizes>', 'sample sizes, comma-separated (e.g. 100,1000,10000)')
    .option('--phi <list>', 'also run each scenario with autocorrelated rows, one AR(1) coefficient each, comma-separated (e.g. 0,0.5,0.9; 0 = as drawn)')
    .option('--replicates <r>', 'independent draws per cell')
    .option('--seed <s>', "base seed; a replicate's sample depends only on it, the scenario, n and the replicate index")
    .option('--workers <w>', `worker threads (default: ${defaultWorkers()}, the number of cores)`)
    .option('--shard <i/N|auto>', 'run only slice i of N (1-based), or read it from a batch scheduler (auto)')
    .option('--out <file>', 'run file to write (default: results/run-TIMESTAMP.json)')
    .option('--resume', 'continue an interrupted run from its checkpoint (the same --out, or the newest under results/)')
    .option('--force', 'replace a finished run at --out, or an existing file at --out, --csv or --report that hhat did not write')
    .option('--robustness', 'also measure perturbations and tuning grids at one sample size (the default plan does)')
    .option(
      '--perturb <spec>',
      'a perturbation for the robustness section (repeatable): rescale:c=1000, monotone:map=asinh, affine:condition=10, quantize:step=0.1, contaminate:fraction=0.01',
      collect,
    )
    .option('--robustness-n <n>', 'the sample size of the robustness section (one of --n; default: the largest up to 1000)')
    .option('--no-tuning', 'leave the tuning grids out of the robustness section')
    .option('--estimator-module <file>', 'load estimators from a JavaScript module (repeatable); an id matching a built-in replaces it', collect)
    .option(
      '--estimator-command <id=command>',
      'run an estimator written in any language: ID=PROGRAM [ARG...] speaking hhat\'s estimator protocol (repeatable; README, "Estimators in other languages"); it joins the plan\'s estimators',
      collect,
    )
    .option(
      '--allow-plan-modules',
      'load the estimator modules and start the estimator commands a --plan file names (they are code that runs with your rights)',
    )
    .option('--level <c>', 'confidence level of each cell\'s best set (default 0.95; README, "Ranks and the best set")')
    .option('--max-failure-rate <p>', "an estimator failing on a larger share of a cell's replicates is ranked last there (default 0: any failure)")
    .option(
      '--time-limit <s>',
      'seconds an estimate may run before it is stopped and counted as a failure, whatever n (default: 60 + 0.001 × n; README, "Estimators that misbehave")',
    )
    .option('--memory-limit <MiB>', 'heap limit of each worker thread in MiB; an estimate that passes it is counted as a failure (default 4096)')
    .option('--csv <file>', 'also write the score table as CSV')
    .option('--bits', 'print values in bits instead of nats (the run file is always in nats)')
    .option('--detail', 'also print every score of every cell')
    .option('--report [file]', 'also write the HTML report (default: next to the run file, .html)')
    .option('--svg-dir <dir>', 'with --report: also write every chart as an SVG file')
    .option('--no-chart', 'leave out the text chart of |bias| against n')
    .option('--quiet', QUIET_HELP);
}

/**
 * --quiet: stdout is the run file's absolute path and nothing else, so `out=$(hhat bench ... --quiet)` works;
 * no tables, chart, progress or closing counts. What needs attention still goes to stderr: errors, warnings
 * (a worker replaced, a checkpoint problem), an interruption's resume hint, and that a --resume found the run finished.
 */
const QUIET_HELP = "print only the run file's path on stdout (no tables, chart, progress or counts); errors, warnings and notes still go to stderr";

/** The run file's absolute path: --out, else with --resume the newest interrupted run under results/, else a new timestamped name. */
function benchOutPath(options: BenchOptions, shard: Shard | undefined): string {
  let out = options.out;
  if (!out && options.resume) {
    const checkpoint = latestCheckpoint('results');
    if (!checkpoint) throw new UsageError('--resume found no interrupted run under results/; give its --out');
    out = checkpoint.slice(0, -'.checkpoint.jsonl'.length);
  }
  out ??= join('results', `run-${timestamp()}${shard ? `.shard-${shard.index}-of-${shard.count}` : ''}.json`);
  if (isSpecialFile(out)) {
    throw new UsageError(
      `--out ${out} is a device, pipe or socket; a run file must be a file, with its checkpoint and lock beside it (write the tables with --csv, or the path with --quiet)`,
    );
  }
  return resolve(out);
}

/** The plan of the flags or plan file, with its estimator modules loaded; refused before any work when its largest n would not fit in memory. */
async function benchPlan(options: BenchOptions, workers: number, printErr: (text: string) => void): Promise<Plan> {
  const input = planInputFromOptions(options);
  const registration = await useEstimatorModules(input.modules ?? []);
  useEstimatorCommands(input.commands, { ...DEFAULT_LIMITS, ...input.limits });
  const note = describeRegistration(registration);
  if (note && !options.quiet) printErr(note);
  // Errors name where the plan came from: the plan file, or the flags.
  // planInputFromOptions checked every part: the plan file against the schema, each flag as it was parsed.
  const { plan, scenarios, estimators } = resolveCheckedPlan(input, options.plan ?? COMMAND_LINE);
  for (const text of historyNotes(scenarios, estimators)) printErr(`hhat: note: ${text}`);
  // Refused before any work starts (runPlan checks again, for library callers), with what it would need, rather than a crash part way.
  checkPlanMemory(plan, scenarios, workers, 'threads', "--memory-limit or a plan's limits.workerMemoryMiB");
  return plan;
}

/** Makes --out's folder, and refuses an --out that is itself a folder now rather than when the finished run is written. */
function prepareOutFolder(out: string): void {
  ensureFolder(dirname(out), 'choose another --out');
  if (existsSync(out) && statSync(out).isDirectory())
    throw new UsageError(`--out ${out} is a folder; give the run file's path, e.g. --out ${join(out, 'run.json')}`);
}

/** True when --out holds a finished run of this plan and --resume has nothing to do; refuses to replace another without --force. */
function alreadyFinished(out: string, checkpoint: string, plan: Plan, options: BenchOptions): boolean {
  const finished = finishedRun(out);
  if (!finished || checkpointStarted(checkpoint)) return false;
  if (options.resume && finished.fingerprint === planFingerprint(plan)) return true;
  if (!options.force) {
    throw new UsageError(
      `${out} already holds a finished run (${finished.plan.name}, ${finished.createdAt.slice(0, 16).replace('T', ' ')}${options.resume ? ', of another plan' : ''}); add --force to replace it, or choose another --out`,
    );
  }
  return false;
}

/** Runs the plan with progress on stderr (unless quiet); SIGINT or SIGTERM stop it cleanly, and the one that did is returned. */
async function runWithSignals(
  plan: Plan,
  runOptions: RunOptions,
  quiet: boolean | undefined,
): Promise<{ outcome: RunOutcome; stoppedBy: NodeJS.Signals | null }> {
  const controller = new AbortController();
  let stoppedBy: NodeJS.Signals | null = null;
  // Kept until the run has stopped, not once: a second signal (`timeout` and some terminals send two) would
  // otherwise take the default action and kill the process before it says what it saved.
  const onSignal = (signal: NodeJS.Signals) => {
    stoppedBy ??= signal;
    controller.abort();
  };
  process.on('SIGINT', onSignal);
  process.on('SIGTERM', onSignal);
  const progress = quiet ? undefined : progressReporter(process.stderr);
  // The run file names hhat's commit; git answers while the estimators run instead of after them.
  void prefetchProvenance();
  try {
    const outcome = await runPlan(plan, { ...runOptions, onProgress: progress?.update, signal: controller.signal });
    return { outcome, stoppedBy };
  } finally {
    progress?.done();
    process.off('SIGINT', onSignal);
    process.off('SIGTERM', onSignal);
  }
}

/** Says what an interrupted run saved and how to continue it, and exits as shells report a process stopped by the signal. */
function reportInterrupted(
  outcome: RunOutcome,
  checkpoint: string,
  out: string,
  stoppedBy: NodeJS.Signals | null,
  args: string[],
  printErr: (text: string) => void,
): void {
  // The count the progress line ended on (finished units, restored ones included) and the checkpoint's unit lines.
  printErr(`interrupted: ${outcome.results.size} of ${outcome.owned.length} units are saved in ${checkpoint}`);
  const resume = [...args, ...(hasOption(args, '--resume') ? [] : ['--resume']), ...(hasOption(args, '--out') ? [] : ['--out', out])];
  printErr(`continue with: ${hhatCommand(resume)}`);
  // 128 + the signal's number, as shells report a process stopped by it.
  process.exitCode = stoppedBy === 'SIGTERM' ? 143 : 130;
}

/** Writes the run file, then drops the checkpoint it made redundant, and writes the CSV when asked. */
function writeRunFiles(run: RunFile, out: string, checkpoint: string, options: BenchOptions, base: Base): void {
  writeRunFile(out, run, `every estimate is saved in ${checkpoint}; fix that and rerun with --resume --out ${out} (nothing is computed again)`);
  rmSync(checkpoint, { force: true });
  if (options.csv) writeFileAtomic(options.csv, scoresCsv(run, base));
}

/** Where `hhat bench --report` writes: its value, else the run file's name with .html; none for a shard. */
function benchReportPath(out: string, options: BenchOptions, shard: Shard | undefined): string | undefined {
  if (!options.report || shard) return undefined;
  return resolve(typeof options.report === 'string' ? options.report : out.replace(/\.json$/, '') + '.html');
}

/**
 * Refused before the run: outputs that would replace one another (a report written over its own run file), and,
 * without --force, an existing file that is not what hhat writes there (a data file named by mistake).
 */
function refuseOutputClashes(out: string, checkpoint: string, options: BenchOptions, shard: Shard | undefined): void {
  const written: [string, string][] = [
    ['--out', out],
    ["--out's checkpoint", checkpoint],
  ];
  const reportPath = benchReportPath(out, options, shard);
  for (const [flag, path] of [
    ['--report', reportPath],
    ['--csv', options.csv],
  ] as const) {
    if (!path) continue;
    for (const earlier of written) refuseSameFile(earlier, [flag, path]);
    written.push([flag, path]);
  }
  if (options.force) return;
  const hint = (flag: string) => `add --force to replace it, or choose another ${flag}`;
  refuseForeignOutput('--out', out, 'run', hint('--out'));
  if (reportPath) refuseForeignOutput('--report', reportPath, 'report', hint('--report'));
  if (options.csv) refuseForeignOutput('--csv', options.csv, 'scores', hint('--csv'));
}

/** A whole run's tables and text chart (unless quiet) and its HTML report (when asked); a shard shows neither. */
async function presentRun(
  run: RunFile,
  out: string,
  options: BenchOptions,
  base: Base,
  shard: Shard | undefined,
  print: (text: string) => void,
): Promise<void> {
  if (!options.quiet && !shard) {
    printRun(run, base, print, Boolean(options.detail));
    if (options.chart !== false) print(biasTextChart(run, base));
  }
  const reportPath = benchReportPath(out, options, shard);
  if (reportPath) {
    // The charting stack (about a quarter of a second to load) only when a report is asked for.
    const { writeReport } = await import('../views/report/report.js');
    await writeReport(run, { base, out: reportPath, svgDir: options.svgDir });
    if (!options.quiet) print(`report: ${reportPath}`);
  }
}

/** The closing lines: what ran, how long it took on how many workers, and where the run file is. */
function printRunSummary(
  run: RunFile,
  outcome: RunOutcome,
  out: string,
  shard: Shard | undefined,
  quiet: boolean | undefined,
  print: (text: string) => void,
): void {
  if (quiet) {
    print(out);
    return;
  }
  const resumed = outcome.resumedUnits ? `, ${countOf(outcome.resumedUnits, 'unit')} from the checkpoint` : '';
  print(
    `${shard ? `shard ${shard.index}/${shard.count}: ` : ''}${countOf(run.cells.length, 'cell')} in ${run.wallSeconds.toFixed(1)} s on ${countOf(run.workers, 'worker')}${resumed}`,
  );
  print(`run file: ${out}`);
}

/**
 * Under --quiet the tables are not printed, and with them the failures: an estimator that failed (a command that
 * could not be started, say) would pass unseen. One line on stderr counts them by estimator.
 */
function printQuietFailures(run: RunFile, printErr: (text: string) => void): void {
  const byEstimator = new Map<string, number>();
  for (const c of run.cells) if (c.role === 'main' && c.scores.failures) byEstimator.set(c.estimator, (byEstimator.get(c.estimator) ?? 0) + c.scores.failures);
  if (!byEstimator.size) return;
  const total = [...byEstimator.values()].reduce((a, b) => a + b, 0);
  const each = [...byEstimator].map(([estimator, count]) => `${estimator} ${count}`).join(', ');
  printErr(`hhat: ${countOf(total, 'estimate')} failed in the benchmark cells (${each}); the run file lists each with its reason (cells[].failures)`);
}

/** An empty file name or shard ('' from an unset shell variable) would otherwise fall back to a default unsaid. */
function refuseEmptyValues(options: BenchOptions): void {
  const given: [string, unknown][] = [
    ['--plan', options.plan],
    ['--out', options.out],
    ['--csv', options.csv],
    ['--report', options.report],
    ['--svg-dir', options.svgDir],
    ['--shard', options.shard],
  ];
  for (const [flag, value] of given) {
    if (typeof value === 'string' && value.trim() === '')
      throw new UsageError(
        `${flag} was given an empty value; it needs ${flag === '--shard' ? 'a slice, i/N or auto' : flag === '--svg-dir' ? 'a folder name' : 'a file name'}`,
      );
  }
  // Refused now, not after the run: the charts come with the report, and a folder cannot take a file's place.
  if (options.svgDir !== undefined && !options.report) throw new UsageError("--svg-dir writes the report's charts; give --report too");
  if (options.csv) refuseFolderOutput('--csv', options.csv, 'scores.csv');
  if (typeof options.report === 'string') refuseFolderOutput('--report', options.report, 'report.html');
  if (options.svgDir) refuseNonFolder('--svg-dir', options.svgDir);
}

/** `hhat bench`: builds the plan, runs it under the --out lock with a checkpoint, then writes and shows the run. */
async function runBench(options: BenchOptions, args: string[], print: (text: string) => void, printErr: (text: string) => void): Promise<void> {
  const base: Base = options.bits ? 'bits' : 'nats';
  refuseEmptyValues(options);
  const shard: Shard | undefined = options.shard ? parseShard(options.shard) : undefined;
  const workers = options.workers === undefined ? defaultWorkers() : parseIntegerOption('--workers', options.workers, 1, MAX_WORKERS);
  const out = benchOutPath(options, shard);
  refuseOutputClashes(out, checkpointFor(out), options, shard);
  const plan = await benchPlan(options, workers, printErr);
  const checkpoint = checkpointFor(out);
  const resumeHint = `the finished units are saved in ${checkpoint}; fix that and rerun with --resume --out ${out}`;
  prepareOutFolder(out);
  const release = acquireLock(out, 'choose another --out');
  try {
    removeLeftoverTemporaries(out);
    removeLeftoverTemporaries(checkpoint);
    if (alreadyFinished(out, checkpoint, plan, options)) {
      // Under --quiet stdout stays the path alone; that nothing ran is still said, on stderr.
      if (options.quiet) {
        print(out);
        printErr(`hhat: ${out} is already a finished run of this plan; nothing to resume`);
      } else print(`${out} is already a finished run of this plan; nothing to resume`);
      return;
    }
    // Not refused, so that a script may always pass --resume; but a mistyped --out must not start afresh unsaid.
    if (options.resume && !checkpointStarted(checkpoint)) {
      const why = existsSync(checkpoint) ? `its checkpoint ${checkpoint} is empty, from a crash before the first unit` : `no checkpoint ${checkpoint}`;
      printErr(`hhat: nothing to resume at ${out} (${why}); starting the run afresh`);
    }
    const { outcome, stoppedBy } = await runWithSignals(
      plan,
      {
        workers,
        shard,
        checkpointPath: checkpoint,
        checkpointHint: resumeHint,
        resume: options.resume,
        onWarning: (text) => printErr(`hhat: ${text}`),
        command: args,
      },
      options.quiet,
    );
    if (outcome.interrupted) return reportInterrupted(outcome, checkpoint, out, stoppedBy, args, printErr);
    const run = assembleRun(outcome, shard ?? null);
    writeRunFiles(run, out, checkpoint, options, base);
    await presentRun(run, out, options, base, shard, print);
    printRunSummary(run, outcome, out, shard, options.quiet, print);
    if (options.quiet) printQuietFailures(run, printErr);
  } finally {
    release();
  }
}

/** Adds `hhat bench` and `hhat merge` to the program. */
export function registerBenchCommand(program: Command, print: (text: string) => void, printErr: (text: string) => void): void {
  // The program's raw arguments (commander keeps them, untyped) are the command line after `hhat`: kept in the
  // checkpoint and printed to resume.
  declareBenchOptions(program.command('bench').description(COMMANDS.bench)).action((options: BenchOptions, command: Command) =>
    runBench(options, (command.parent as unknown as { rawArgs?: string[] } | null)?.rawArgs ?? [], print, printErr),
  );

  program
    .command('merge')
    .description(COMMANDS.merge)
    .argument('<shards...>', 'shard run files (all N of them)')
    .requiredOption('--out <file>', 'the merged run file')
    .option('--bits', 'print values in bits instead of nats')
    .option('--quiet', "print only the merged run file's path on stdout")
    .option('--force', 'replace an existing file at --out')
    .action((files: string[], options: { out: string; bits?: boolean; quiet?: boolean; force?: boolean }) => {
      if (options.out.trim() === '') throw new UsageError('--out was given an empty value; it needs a file name');
      // Writing over a shard would lose it if anything went wrong later; the merged file is a new one.
      const input = files.find((f) => sameFile(f, options.out));
      if (input) throw new UsageError(`--out ${options.out} is one of the shards being merged (${input}); choose another --out`);
      refuseFolderOutput('--out', options.out, 'run.json');
      // A finished run at --out may be another plan's hours of work: replaced only on request, as bench does.
      if (!options.force) {
        refuseForeignOutput('--out', options.out, 'run', 'choose another --out, or add --force to replace it');
        if (nonEmptyFile(options.out))
          throw new UsageError(`--out ${options.out} already holds a run file; add --force to replace it, or choose another --out`);
      }
      const run = mergeShards(files.map((path) => ({ path, run: readRunFile(path) })));
      writeRunFile(options.out, run);
      if (options.quiet) return print(resolve(options.out));
      printRun(run, options.bits ? 'bits' : 'nats', print, false);
      print(`merged ${countOf(files.length, 'shard')}: ${countOf(run.cells.length, 'cell')}`);
      print(`run file: ${resolve(options.out)}`);
    });
}
