import type { Command } from 'commander';
import { UsageError, EstimateError, isEstimateError, type EstimateErrorCode } from '../core/errors.js';
import { countOf, formatSetting, formatValue, renderTable, SETTING_DIGITS, toBase, type Base } from '../core/format.js';
import { readSample, findRepeats, describeRepeats, STDIN_PATH, type LoadedSample } from '../data/index.js';
import { selectionWidth, sharedSelection } from '../data/columns.js';
import { showText } from '../data/table.js';
import { describeReference, meanLogReference, parseReference, type Reference } from '../analysis/reference.js';
import { unitLabel } from '../core/units.js';
import { describeRegistration, loadEstimatorModules, registerUserEstimators, resolveModulePath } from '../harness/modules.js';
import type { Limits } from '../harness/plan.js';
import type { Estimator, Quantity, Sample, Settings } from '../core/contracts.js';
import { declareCommandOptions } from '../harness/external/options.js';
import { collect, parseIntegerOption } from '../core/options.js';
import {
  checkDimension,
  defaultSet,
  estimatorLabel,
  parseEstimatorSpec,
  runEstimator,
  type ConfiguredEstimator,
  type EstimateResolution,
} from '../../estimators/index.js';
import { describeRecorded, recordedChoices, recordedData, type RecordedData } from './recorded-choices.js';
import { describeSeconds, predictedSeconds, rowsWithin } from '../harness/cost-model.js';
import { seededRowSubsample } from '../core/sample.js';
import { parseNumber, THIN_SETTING } from '../core/spec.js';
import { describeReadProgress, statusLine } from '../views/status-line.js';

/**
 * The default set for the data's dimension: the strongest methods of each family that apply, as the estimators
 * declare it (`defaultFor.estimate`; estimators/index.ts, defaultSet).
 */
export function defaultEstimatorsFor(dim: number, quantity: Quantity = 'entropy'): string[] {
  return defaultSet('estimate', quantity, dim);
}

interface EstimateRecord {
  estimator: string;
  settings: Settings;
  value: number | null;
  error?: string;
  /** Why the estimator could not run, as the estimator classified it (`ties` selects the repeated-value report). */
  code?: EstimateErrorCode;
  /** Rows the estimate used, when fewer than the file's (a seeded uniform subsample). */
  subsample?: { rows: number; of: number; seed: number; reason: string };
  /** Why the estimator was not run at all (predicted time over the limit even on a small subsample). */
  skipped?: string;
  /** Transfer entropy: which direction, e.g. "TE(heater → plant)". */
  direction?: string;
  /** With dequantize: the step jittered within, per column, and how it was found. */
  resolution?: EstimateResolution;
}

/** The estimators of the user's modules, whose code runs only on their supervised thread (module-thread.ts, estimateOnThread). */
export interface ModuleEstimators {
  owns: ReadonlySet<Estimator>;
  estimate: (configured: ConfiguredEstimator, sample: Sample) => Promise<{ value: number; settings: Settings; resolution?: EstimateResolution }>;
}

/** Rows every estimate in the default set may be cut to fit: below this a subsample says too little, so the estimator is skipped. */
export const MIN_SUBSAMPLE_ROWS = 1000;
/** Predicted seconds per estimator allowed for the default set, unless --max-seconds says otherwise. */
export const DEFAULT_MAX_SECONDS = 30;
export const DEFAULT_SUBSAMPLE_SEED = 1;

/** How one estimator is run: on all rows, on `rows` of them (a seeded uniform subsample), or skipped, and why. */
export interface RowPlan {
  rows: number;
  /** Predicted seconds on all rows (null: the cost model does not know the estimator). */
  predictedSeconds: number | null;
  reason?: string;
  skipped?: string;
}

/**
 * Which rows each estimator gets under a per-estimator limit on predicted seconds (src/harness/cost-model.ts): all
 * of them when the prediction is within the limit (or there is no limit, or no prediction), else the
 * largest subsample predicted to fit, rounded down to two digits; skipped when that is under
 * MIN_SUBSAMPLE_ROWS.
 */
export function planRows(configured: ConfiguredEstimator[], sample: Sample, limitSeconds: number | null): RowPlan[] {
  const context = { xDim: sample.xDim, qN: sample.q?.n };
  return configured.map((c) => {
    const predicted = predictedSeconds(c, sample.n, sample.dim, context);
    if (limitSeconds === null || predicted === null || predicted <= limitSeconds) return { rows: sample.n, predictedSeconds: predicted };
    const rows = rowsWithin(c, sample.n, sample.dim, limitSeconds, context);
    const why = `all ${sample.n} rows would take about ${describeSeconds(predicted)} by its cost model, over the ${limitSeconds} s limit (--max-seconds)`;
    if (rows < MIN_SUBSAMPLE_ROWS) return { rows: 0, predictedSeconds: predicted, skipped: `${why}, and even ${MIN_SUBSAMPLE_ROWS} rows would not fit` };
    return { rows, predictedSeconds: predicted, reason: why };
  });
}

/**
 * Every estimator on the sample; one that cannot run on these data becomes a record with its reason instead
 * of stopping the others. Usage mistakes still throw: they are checked before any estimate is made. With
 * `plans` (from planRows), an estimator runs on its seeded subsample or is skipped, and the record says so.
 */
export async function estimateAll(
  sample: Sample,
  configured: ConfiguredEstimator[],
  base: Base,
  plans?: RowPlan[],
  options: { seed?: number; onStart?: (configured: ConfiguredEstimator, rows: number) => void; modules?: ModuleEstimators } = {},
): Promise<EstimateRecord[]> {
  const seed = options.seed ?? DEFAULT_SUBSAMPLE_SEED;
  // The harness's thinning is not among the estimator's own settings, but it changes what the estimate used.
  const used = (c: ConfiguredEstimator, settings: Settings): Settings => ((c.thin ?? 1) > 1 ? { ...settings, [THIN_SETTING]: c.thin } : settings);
  const records: EstimateRecord[] = [];
  for (const [index, c] of configured.entries()) records.push(await estimateOne(c, plans?.[index]));
  return records;

  async function estimateOne(c: ConfiguredEstimator, plan: RowPlan | undefined): Promise<EstimateRecord> {
    if (plan?.skipped) return { estimator: c.estimator.id, settings: used(c, c.settings), value: null, skipped: plan.skipped };
    const rows = plan ? plan.rows : sample.n;
    const subsample = rows < sample.n ? { rows, of: sample.n, seed, reason: plan?.reason ?? '' } : undefined;
    try {
      options.onStart?.(c, rows);
      const on = seededRowSubsample(sample, rows, String(seed));
      const { value, settings, resolution } = options.modules?.owns.has(c.estimator)
        ? await options.modules.estimate(c, on)
        : runEstimator(c, on, { report: true });
      if (!Number.isFinite(value)) throw new EstimateError('numeric', `${c.estimator.id} gave ${value} on this sample`);
      return {
        estimator: c.estimator.id,
        settings: used(c, settings),
        value: toBase(value, base),
        ...(resolution ? { resolution } : {}),
        ...(subsample ? { subsample } : {}),
      };
    } catch (error) {
      // A user's module refuses with an error of EstimateError's shape (it imports nothing from hhat).
      if (isEstimateError(error)) {
        return {
          estimator: c.estimator.id,
          settings: used(c, c.settings),
          value: null,
          error: error.message,
          code: error.code,
          ...(subsample ? { subsample } : {}),
        };
      }
      throw error;
    }
  }
}

/** --max-seconds: a positive number of seconds, or none. */
function parseMaxSeconds(text: string): number | null {
  if (text === 'none') return null;
  const value = parseNumber(text);
  if (value === undefined || !(value > 0) || !Number.isFinite(value))
    throw new UsageError(`--max-seconds ${text} is not allowed; it must be a number of seconds > 0, or none`);
  return value;
}

/** The reason as one line that names the estimator once, whether or not the message already starts with it. */
function failureLine(record: EstimateRecord): string {
  const message = record.error ?? '';
  return message.startsWith(record.estimator) ? message : `${record.estimator}: ${message}`;
}

const exitCodesHelp = `
Large files:
  Without --estimator, each estimator of the default set whose predicted
  time on all rows is over --max-seconds (default ${DEFAULT_MAX_SECONDS} s per estimator)
  runs on the largest seeded uniform subsample of rows predicted to fit
  (--seed, default ${DEFAULT_SUBSAMPLE_SEED}), or is skipped when even ${MIN_SUBSAMPLE_ROWS} rows would not; the
  output says which and why (the "rows" of the table, "subsample" and
  "skipped" in --json). Predictions come from a fixed cost model of each
  method (src/harness/cost-model.ts), so the choice is the same on every machine.
  Estimators named with --estimator run on all rows unless --max-seconds
  is given. --max-seconds none turns the limit off.

Exit codes:
  0  every estimate was made; or only estimators of the default set (no
     --estimator) could not run on these data: their rows say "failed" with
     the reason, and one note on stderr counts them
  1  an estimator named with --estimator could not run on these data (its
     reason is on stderr; the other values are still printed), or no
     estimator of the default set could, or every estimator was skipped
     under --max-seconds; an --estimator-module estimator runs on a
     supervised thread, and one that passes --time-limit or --memory-limit
     or calls process.exit could not run ("failed (module)")
  2  a mistake in the command: an unknown option, estimator or setting, a
     value that is not allowed, a file that cannot be read, an estimator for
     another quantity or dimension; nothing is estimated`;

type EstimateOptions = {
  columns?: string;
  estimator?: string[];
  bits?: boolean;
  json?: boolean;
  unit?: string;
  reference?: string;
  estimatorModule?: string[];
  estimatorCommand?: string[];
  xColumns?: string;
  yColumns?: string;
  zColumns?: string;
  sourceColumn?: string;
  targetColumn?: string;
  history?: string;
  against?: string;
  maxSeconds?: string;
  seed?: string;
  timeLimit?: string;
  memoryLimit?: string;
};

export function registerEstimateCommand(program: Command, print: (text: string) => void, printErr: (text: string) => void): void {
  program
    .command('estimate')
    .description(
      'estimate the differential entropy of a data file (CSV/TSV/TXT, JSON, NumPy .npy) with one or more estimators; the mutual information with --x-columns and --y-columns (conditional: and --z-columns), the transfer entropy both ways with --source-column and --target-column, a divergence with --against',
    )
    .argument(
      '<file>',
      'the sample: rows are points, columns are coordinates; "-" reads standard input; its format, and that of a name without an extension, comes from its first bytes; with --against, the sample from P',
    )
    .option('--columns <list>', 'columns to use: positions from 1 ("1,3", "2-4") or header names ("x,y")')
    .option('--estimator <spec>', 'ID[:key=value,...] (repeatable; default: a set suited to the dimension)', collect)
    .option('--bits', 'values in bits instead of nats')
    .option('--unit <name>', 'the unit the data are recorded in, for labelling: values are relative to 1 unit^d (see hhat convert)')
    .option('--reference <m>', 'also give the entropy relative to a reference density m: unit:W, uniform:a,b or gaussian (minus the negentropy)')
    .option('--estimator-module <file>', 'load estimators from a JavaScript module (repeatable)', collect)
    .option(
      '--estimator-command <id=command>',
      "an estimator written in any language: ID=PROGRAM [ARG...] speaking hhat's estimator protocol (repeatable); it joins the estimators",
      collect,
    )
    .option('--x-columns <list>', 'mutual information between these columns (X) ...')
    .option('--y-columns <list>', '... and these (Y)')
    .option('--z-columns <list>', 'with --x-columns and --y-columns: the conditional mutual information I(X; Y | Z) given these columns (Z)')
    .option('--source-column <col>', 'transfer entropy between two series, rows in time order: this column (position or name) ...')
    .option('--target-column <col>', '... and this one; both directions are estimated, TE(source → target) and TE(target → source)')
    .option('--history <k[,l]>', 'with --source-column/--target-column: k past values of the target (and l of the source; default l = k) (default 1)')
    .option('--against <q-file>', 'estimate the divergence D(P‖Q) with P = <file>, Q = <q-file>: the sample from Q, read like <file>')
    .option(
      '--json',
      'print {"n", "dim", "base", "estimates": [...]} with the settings actually used (a divergence adds "pFile", "qFile" and "qN"); an estimate that failed has value null, its error and its code',
    )
    .option(
      '--max-seconds <s>',
      `limit on each estimator's predicted seconds: over it, a seeded uniform subsample of rows (default ${DEFAULT_MAX_SECONDS} for the default set, none for estimators named with --estimator; "none": no limit)`,
    )
    .option('--seed <s>', `seed of the row subsamples that --max-seconds may call for (default ${DEFAULT_SUBSAMPLE_SEED})`)
    .option(
      '--time-limit <s>',
      'seconds an estimate of an --estimator-module estimator (or an --estimator-command) may run before it is stopped and counted as failed (default: 60 + 0.001 × n, as hhat bench)',
    )
    .option(
      '--memory-limit <MiB>',
      'heap limit in MiB of the thread that runs the --estimator-module estimators; an estimate that passes it fails (default 4096)',
    )
    .addHelpText('after', exitCodesHelp)
    .action((file: string, options: EstimateOptions) => runEstimate(file, options, print, printErr));
}

/** What to change when an estimator of another quantity is named: the options that ask for its quantity. */
function quantityMismatch(id: string, estimates: Quantity, asked: Quantity): string {
  const how: Record<Quantity, string> = {
    entropy: 'leave out --x-columns/--y-columns, --source-column/--target-column and --against',
    'mutual-information': `give --x-columns and --y-columns to choose X and Y among the columns (e.g. --x-columns 1 --y-columns 2)`,
    'conditional-mutual-information': 'give --x-columns, --y-columns and --z-columns to choose X, Y and Z (e.g. --x-columns 1 --y-columns 2 --z-columns 3)',
    'transfer-entropy': 'give --source-column and --target-column, two series in time order (e.g. --source-column 1 --target-column 2)',
    divergence: 'give --against Q-FILE, the sample from Q',
  };
  const options: Record<Quantity, string> = {
    entropy: '',
    'mutual-information': '--x-columns/--y-columns',
    'conditional-mutual-information': '--x-columns/--y-columns/--z-columns',
    'transfer-entropy': '--source-column/--target-column',
    divergence: '--against',
  };
  const given = asked === 'entropy' ? '' : ` (given by ${options[asked]})`;
  return `${id} estimates ${estimates}, but this call asks for ${asked}${given}; for ${estimates}, ${how[estimates]}`;
}

/** `hhat estimate FILE`: read the sample, choose the estimators, estimate, print, and set the exit code. */
async function runEstimate(file: string, options: EstimateOptions, print: (text: string) => void, printErr: (text: string) => void): Promise<void> {
  // Built-ins run unsupervised in this thread, so a limit given for them alone would be silently ignored.
  if (options.timeLimit !== undefined && !options.estimatorModule?.length && !options.estimatorCommand?.length)
    throw new UsageError(
      `--time-limit ${options.timeLimit} applies to the estimators of --estimator-module and --estimator-command; the built-ins have none (--max-seconds subsamples their rows)`,
    );
  if (options.memoryLimit !== undefined && !options.estimatorModule?.length)
    throw new UsageError(`--memory-limit ${options.memoryLimit} applies to the estimators of --estimator-module, which run on a thread of their own`);
  const supervision = options.estimatorModule?.length || options.timeLimit !== undefined ? await import('../harness/module-thread.js') : null;
  const limits = supervision?.parseLimits(options);
  let modules: (ModuleEstimators & { close: () => void }) | undefined;
  if (options.estimatorModule?.length) {
    const paths = options.estimatorModule.map((m) => resolveModulePath(m));
    const list = await loadEstimatorModules(paths);
    const note = describeRegistration(registerUserEstimators(list, { replace: true }));
    if (note && !options.json) printErr(note);
    // Their code runs only there, so that an estimate cannot end or hang this command; it loads them while this
    // thread reads the data.
    const thread = new supervision!.ModuleThread(paths, limits!);
    thread.start();
    modules = { owns: new Set(list), estimate: (c, on) => supervision!.estimateOnThread(thread, c, on), close: () => thread.close() };
  }
  try {
    await estimateWith(file, options, print, printErr, modules, options.timeLimit !== undefined ? limits : undefined);
  } finally {
    modules?.close();
  }
}

/** runEstimate once the modules are loaded: `limits` for the estimator commands, when --time-limit gives them. */
async function estimateWith(
  file: string,
  options: EstimateOptions,
  print: (text: string) => void,
  printErr: (text: string) => void,
  modules: ModuleEstimators | undefined,
  limits: Limits | undefined,
): Promise<void> {
  const base: Base = options.bits ? 'bits' : 'nats';
  const reference = options.reference === undefined ? undefined : parseReference(options.reference);
  const givenLimit = options.maxSeconds === undefined ? undefined : parseMaxSeconds(options.maxSeconds);
  const seed = options.seed === undefined ? DEFAULT_SUBSAMPLE_SEED : parseIntegerOption('--seed', options.seed, 0);
  const status = statusLine(process.stderr, 'hhat estimate');
  const load = (columns: string | undefined, path = file) => {
    try {
      return readSample(path, { columns, onProgress: (done, total) => status.show(`reading ${sampleName(path)}: ${describeReadProgress(done, total)}`) });
    } finally {
      status.clear();
    }
  };
  const { loaded, sample, quantity } = readEstimateSample(file, options, load);
  if (reference && quantity !== 'entropy') throw new UsageError('--reference applies to entropy; mutual information and divergences are already unit-free');
  // A unit labels an entropy ("nats relative to 1 mV"); accepted silently elsewhere it would suggest the value depends on it.
  if (options.unit !== undefined && quantity !== 'entropy')
    throw new UsageError(`--unit ${options.unit} applies to entropy; mutual information, transfer entropy and divergences do not depend on the data's unit`);
  const offset = reference ? meanLogReference(reference, sample) : 0;
  const commands = options.estimatorCommand?.length ? await declareCommandOptions(options.estimatorCommand, quantity, limits) : [];
  const named = Boolean(options.estimator?.length);
  const listed = named ? options.estimator! : defaultEstimatorsFor(sample.dim, quantity);
  // A command the user declared runs, with its defaults, unless --estimator already names it.
  const given = [...listed, ...commands.map((c) => c.id).filter((id) => !listed.some((spec) => spec.split(':')[0] === id))];
  const specs = quantity === 'transfer-entropy' ? withHistory(given, options.history) : given;
  if (!specs.length) throw new UsageError(`no ${quantity} estimator supports d = ${sample.dim}; see hhat estimators`);
  const configured = specs.map(parseEstimatorSpec);
  for (const c of configured) {
    if (c.estimator.quantity !== quantity) throw new UsageError(quantityMismatch(c.estimator.id, c.estimator.quantity, quantity));
    // Checked before estimating, so that asking for the wrong dimension stops the command before any estimate
    // is made; the default set only holds estimators that support the dimension.
    checkDimension(c.estimator, sample.dim);
  }
  // The limit applies to the default set; to named estimators only when the user gives it.
  // A subsample of rows would break a time series apart, so transfer entropy always uses every row.
  if (quantity === 'transfer-entropy' && givenLimit !== undefined && givenLimit !== null)
    throw new UsageError(
      '--max-seconds cannot be used with --source-column/--target-column: a row subsample would break the time order; give --max-seconds none or leave it out',
    );
  const limitSeconds = quantity === 'transfer-entropy' ? null : givenLimit !== undefined ? givenLimit : named ? null : DEFAULT_MAX_SECONDS;
  const estimateEach = async (list: ConfiguredEstimator[]): Promise<EstimateRecord[]> => {
    const plans = planRows(list, sample, limitSeconds);
    const run = (on: Sample) =>
      estimateAll(on, list, base, plans, {
        seed,
        onStart: (c, rows) => status.show(`${c.estimator.id} on ${rows === on.n ? 'all' : rows} of ${on.n} rows`, true),
        modules,
      });
    if (quantity !== 'transfer-entropy') return run(sample);
    // Both directions: the same estimators on the series with source and target swapped.
    const [source, target] = directionNames(loaded.columnNames, options.sourceColumn!, options.targetColumn!);
    return [
      ...(await run(sample)).map((r) => ({ ...r, direction: `TE(${source} → ${target})` })),
      ...(await run(swapSeries(sample))).map((r) => ({ ...r, direction: `TE(${target} → ${source})` })),
    ];
  };
  let estimated: EstimateRecord[];
  // Recorded data (values repeated on a lattice): the estimators built for them, beside the ones asked for.
  const recorded = recordedData(sample, loaded.columnNames);
  const choices = recorded ? recordedChoices(sample, quantity, recorded, configured) : [];
  let chosen: (EstimateRecord & { how: string })[] = [];
  try {
    estimated = await estimateEach(configured);
    // A transfer entropy's records come direction by direction, each in the order of `choices`.
    if (choices.length)
      chosen = (await estimateEach(choices.map((c) => c.configured))).map((r, i) => ({
        ...r,
        estimator: choices[i % choices.length].configured.spec,
        how: choices[i % choices.length].how,
      }));
  } finally {
    status.clear();
  }
  const records = estimated.map((r) => ({
    ...r,
    ...(reference ? { relative: r.value === null ? null : r.value + toBase(offset, base) } : {}),
  }));
  const label = unitLabel(base, options.unit, sample.dim);
  const failed = records.filter((r) => r.error);
  const skipped = records.filter((r) => r.skipped);
  const cutNotes = records.flatMap((r) =>
    r.skipped
      ? [`skipped: ${r.estimator}: ${r.skipped}`]
      : r.subsample
        ? [
            `subsample: ${r.estimator} ran on a seeded uniform subsample of ${r.subsample.rows} of the ${r.subsample.of} rows (seed ${r.subsample.seed}): ${r.subsample.reason}`,
          ]
        : [],
  );
  const hints = failed.some((r) => r.code === 'ties') ? describeRepeats(findRepeats(sample), loaded.columnNames) : [];
  const recordedOutput = recorded
    ? { data: recorded, estimates: chosen.map((r) => (r.value === null ? r : { ...r, ...(reference ? { relative: r.value + toBase(offset, base) } : {}) })) }
    : null;
  // A default-set estimator that cannot run on these data is information about the data, not an error the
  // user made or asked to hear about; one the user named, or a default set with no value at all, is.
  const declared = new Set(commands.map((c) => c.id));
  const failedAsError = failed.length > 0 && (named || failed.some((r) => declared.has(r.estimator)) || failed.length + skipped.length === records.length);
  if (options.json)
    printEstimateJson(print, {
      file,
      sample,
      quantity,
      base,
      options,
      label,
      reference,
      offset,
      loaded,
      limitSeconds,
      records,
      hints,
      recorded: recordedOutput,
    });
  else
    printEstimateTable(print, {
      file,
      against: options.against,
      sample,
      quantity,
      base,
      label,
      reference,
      loaded,
      records,
      cutNotes,
      failed,
      failedAsError,
      hints,
      recorded: recordedOutput,
    });
  if (skipped.length === records.length) {
    printErr(`hhat: no estimate was made: every estimator was skipped under the ${limitSeconds} s limit; raise --max-seconds or give --max-seconds none`);
    process.exitCode = 1;
    return;
  }
  if (!failed.length) return;
  if (failedAsError) {
    for (const r of failed) printErr(`hhat: ${failureLine(r)}`);
    for (const h of hints) printErr(`  ${h}`);
    // Only when that is so: a failed --estimator-command beside defaults that ran is said by its own line above.
    if (!named && failed.length + skipped.length === records.length) printErr(`hhat: none of the ${records.length} default estimators could run on this data`);
    process.exitCode = 1;
  } else {
    printErr(
      `hhat: note: ${failed.length} of the ${records.length} default estimators could not run on this data (${failed.map((r) => r.estimator).join(', ')}), ` +
        'which leaves the exit code at 0; name an estimator with --estimator to make its failure an error',
    );
  }
}

/** The series with its two columns swapped: the target becomes the source. */
function swapSeries(sample: Sample): Sample {
  const data = new Float64Array(2 * sample.n);
  for (let i = 0; i < sample.n; i++) {
    data[2 * i] = sample.data[2 * i + 1];
    data[2 * i + 1] = sample.data[2 * i];
  }
  return { ...sample, data };
}

/** How the directions are named: by the header's column names when there is one, else by the options as given. */
function directionNames(columnNames: readonly string[], source: string, target: string): [string, string] {
  return columnNames.length === 2 ? [columnNames[0], columnNames[1]] : [`column ${source}`, `column ${target}`];
}

/**
 * `--history k[,l]` as settings of every transfer-entropy estimator (history = k, sourceHistory = l, l = k when
 * omitted); a spec that sets them itself keeps its own, unless --history is given too, which is a conflict.
 */
export function withHistory(specs: readonly string[], history: string | undefined): string[] {
  if (history === undefined) return [...specs];
  const parts = history.split(',').map((t) => t.trim());
  const values = parts.map((t) => (/^\d+$/.test(t) ? Number(t) : Number.NaN));
  if (parts.length > 2 || !values.every((v) => Number.isInteger(v) && v >= 1 && v <= 50)) {
    throw new UsageError(`--history ${history} is not allowed; give k or k,l, whole numbers from 1 to 50 (k past values of the target, l of the source)`);
  }
  const [k, l = k] = values;
  return specs.map((spec) => {
    const [id, rest] = spec.split(/:(.*)/s);
    if (rest !== undefined && /(^|,)\s*(history|sourceHistory)\s*=/.test(rest)) {
      throw new UsageError(`--history ${history} and the estimator spec ${spec} both set the history; give it in one place`);
    }
    return `${id}:${rest ? `${rest},` : ''}history=${k},sourceHistory=${l}`;
  });
}

/** How the table and messages name a sample's file: standard input by that name, a file by its path as given. */
function sampleName(file: string): string {
  return file === STDIN_PATH ? 'standard input' : file;
}

/** The sample as the options ask: all or some columns; X and Y for mutual information; P and Q for a divergence. */
function readEstimateSample(
  file: string,
  options: EstimateOptions,
  load: (columns: string | undefined, path?: string) => LoadedSample,
): { loaded: LoadedSample; sample: Sample; quantity: Quantity } {
  let quantity: Quantity = 'entropy';
  const transfer = options.sourceColumn !== undefined || options.targetColumn !== undefined;
  if (!transfer && options.history !== undefined) throw new UsageError('--history applies to transfer entropy; give --source-column and --target-column too');
  if (transfer) {
    if (options.sourceColumn === undefined || options.targetColumn === undefined)
      throw new UsageError('transfer entropy needs both --source-column and --target-column');
    const other = [
      ['--columns', options.columns],
      ['--x-columns', options.xColumns],
      ['--y-columns', options.yColumns],
      ['--z-columns', options.zColumns],
      ['--against', options.against],
    ].find(([, value]) => value !== undefined);
    if (other) throw new UsageError(`${other[0]} cannot be combined with --source-column/--target-column (transfer entropy)`);
    for (const [flag, value] of [
      ['--source-column', options.sourceColumn],
      ['--target-column', options.targetColumn],
    ]) {
      if (selectionWidth(value) !== 1 || value.includes(','))
        throw new UsageError(`${flag} ${value} is not allowed; give one column (a position from 1 or a header name)`);
    }
    const shared = sharedSelection(options.sourceColumn, options.targetColumn);
    if (shared !== undefined)
      throw new UsageError(`--source-column and --target-column both name column ${showText(shared)}; source and target must be different columns`);
    const loaded = load(`${options.sourceColumn},${options.targetColumn}`);
    const sample: Sample = { ...loaded.sample, xDim: 1 };
    return { loaded: { ...loaded, sample }, sample, quantity: 'transfer-entropy' };
  }
  const conditional = options.zColumns !== undefined;
  const mutualInformation = options.xColumns !== undefined || options.yColumns !== undefined || conditional;
  if (mutualInformation) {
    const what = conditional
      ? 'conditional mutual information needs --x-columns, --y-columns and --z-columns'
      : 'mutual information needs both --x-columns and --y-columns';
    if (options.xColumns === undefined || options.yColumns === undefined) throw new UsageError(what);
    const flags = conditional ? '--x-columns/--y-columns/--z-columns' : '--x-columns/--y-columns';
    if (options.columns !== undefined) throw new UsageError(`--columns cannot be combined with ${flags}`);
    if (options.against !== undefined)
      throw new UsageError(`--against (a divergence) cannot be combined with ${flags} (${conditional ? 'conditional ' : ''}mutual information)`);
    const parts: [string, string][] = [
      ['--x-columns', options.xColumns],
      ['--y-columns', options.yColumns],
      ...(conditional ? [['--z-columns', options.zColumns!] as [string, string]] : []),
    ];
    for (let a = 0; a < parts.length; a++) {
      for (let b = a + 1; b < parts.length; b++) {
        const shared = sharedSelection(parts[a][1], parts[b][1]);
        if (shared !== undefined) {
          throw new UsageError(
            `${parts[a][0]} and ${parts[b][0]} both name column ${showText(shared)}; ${conditional ? 'X, Y and Z' : 'X and Y'} must be different columns`,
          );
        }
      }
    }
  }
  // For (conditional) mutual information only X's, Y's (and Z's) columns are read, in that order (other
  // columns may hold text).
  const informationColumns = conditional ? `${options.xColumns},${options.yColumns},${options.zColumns}` : `${options.xColumns},${options.yColumns}`;
  let loaded = load(mutualInformation ? informationColumns : options.columns);
  let sample = loaded.sample;
  if (mutualInformation) {
    sample = {
      ...sample,
      xDim: selectionWidth(options.xColumns!),
      ...(conditional ? { yDim: selectionWidth(options.yColumns!) } : {}),
    };
    loaded = { ...loaded, sample };
    quantity = conditional ? 'conditional-mutual-information' : 'mutual-information';
  } else if (options.against !== undefined) {
    if (options.against === STDIN_PATH && file === STDIN_PATH)
      throw new UsageError('FILE and --against cannot both be - (standard input holds one sample); name a file for one of them');
    const q = load(options.columns, options.against);
    if (q.sample.dim !== sample.dim)
      throw new UsageError(
        `${sampleName(options.against)} (Q) has ${countOf(q.sample.dim, 'column')} and ${sampleName(file)} (P) has ${sample.dim}; a divergence compares samples of the same dimension`,
      );
    sample = { ...sample, q: matchColumns(loaded, q, file, options.against) };
    quantity = 'divergence';
  }
  return { loaded, sample, quantity };
}

/**
 * Q's sample with its columns in P's order. Where both files name their columns, the names decide, not the
 * positions: P (temp, pressure) against Q (pressure, temp) would otherwise compare temperatures with pressures.
 */
function matchColumns(p: LoadedSample, q: LoadedSample, pFile: string, qFile: string): Sample {
  if (!p.namedColumns || !q.namedColumns || p.columnNames.every((name, j) => q.columnNames[j] === name)) return q.sample;
  const order = p.columnNames.map((name) => q.columnNames.indexOf(name));
  if (order.some((j) => j < 0) || new Set(q.columnNames).size !== q.columnNames.length) {
    throw new UsageError(
      `${sampleName(pFile)} (P) has columns ${p.columnNames.join(', ')} and ${sampleName(qFile)} (Q) has ${q.columnNames.join(', ')}; a divergence compares the same coordinates, so give both files the same column names (or choose them with --columns)`,
    );
  }
  const { n, dim, data } = q.sample;
  const reordered = new Float64Array(n * dim);
  for (let i = 0; i < n; i++) for (let j = 0; j < dim; j++) reordered[i * dim + j] = data[i * dim + order[j]];
  return { ...q.sample, data: reordered };
}

interface EstimateOutput {
  sample: Sample;
  quantity: Quantity;
  base: Base;
  label: string;
  reference: Reference | undefined;
  loaded: LoadedSample;
  records: (EstimateRecord & { relative?: number | null })[];
  hints: string[];
  /** Recorded data: each column's step and the estimators offered for them (recorded-choices.ts). */
  recorded: { data: RecordedData; estimates: (EstimateRecord & { how: string; relative?: number | null })[] } | null;
}

/** `--json`: the sample's shape, the unit, and every estimate with the settings it used. */
function printEstimateJson(
  print: (text: string) => void,
  {
    file,
    sample,
    quantity,
    base,
    options,
    label,
    reference,
    offset,
    loaded,
    limitSeconds,
    records,
    hints,
    recorded,
  }: EstimateOutput & {
    file: string;
    options: EstimateOptions;
    offset: number;
    limitSeconds: number | null;
  },
): void {
  print(
    JSON.stringify(
      {
        n: sample.n,
        dim: sample.dim,
        ...(quantity !== 'entropy' ? { quantity } : {}),
        ...(sample.xDim !== undefined ? { xDim: sample.xDim } : {}),
        ...(sample.yDim !== undefined ? { yDim: sample.yDim } : {}),
        // Both samples named: a divergence is not symmetric, so which file was P matters.
        ...(sample.q ? { divergence: 'D(P‖Q)', pFile: file, qFile: options.against, qN: sample.q.n } : {}),
        base,
        ...(options.unit ? { unit: options.unit, label } : {}),
        ...(reference ? { reference: describeReference(reference), meanLogReference: toBase(offset, base) } : {}),
        columns: loaded.columnNames,
        maxSeconds: limitSeconds,
        estimates: records,
        ...(hints.length ? { repeats: hints } : {}),
        ...(recorded ? { recorded: { repeatedRows: recorded.data.repeatedRows, columns: recorded.data.columns, estimates: recorded.estimates } } : {}),
      },
      null,
      2,
    ),
  );
}

/** The table of estimates, with the rows each used when some ran on a subsample, and the failures that are not errors. */
function printEstimateTable(
  print: (text: string) => void,
  {
    file,
    against,
    sample,
    quantity,
    base,
    label,
    reference,
    loaded,
    records,
    cutNotes,
    failed,
    failedAsError,
    hints,
    recorded,
  }: EstimateOutput & {
    file: string;
    against: string | undefined;
    cutNotes: string[];
    failed: EstimateRecord[];
    failedAsError: boolean;
  },
): void {
  const columns = loaded.columnNames.length ? ` (columns ${loaded.columnNames.join(', ')})` : '';
  if (sample.q && against !== undefined) {
    print(`D(P‖Q) with P = ${sampleName(file)} (n = ${sample.n}), Q = ${sampleName(against)} (n = ${sample.q.n}); d = ${sample.dim}${columns}`);
  } else {
    print(
      `${sampleName(file)}: n = ${sample.n}, d = ${sample.dim}${columns}${quantity === 'transfer-entropy' ? '; rows read as a time series, in file order' : ''}`,
    );
  }
  const cut = cutNotes.length > 0;
  const transfer = quantity === 'transfer-entropy';
  const rows = records.map((r) => [
    r.estimator,
    ...(transfer ? [r.direction ?? ''] : []),
    Object.entries(r.settings)
      .map(([k, v]) => `${k}=${formatSetting(v)}`)
      .join(', ') || '–',
    ...(cut ? [r.skipped ? '–' : r.subsample ? `${r.subsample.rows} (subsample)` : `${sample.n} (all)`] : []),
    r.skipped ? 'skipped (time)' : r.value === null ? `failed (${r.code})` : formatValue(r.value, 7),
    ...(reference ? [r.relative === null || r.relative === undefined ? (r.skipped ? 'skipped' : 'failed') : formatValue(r.relative, 7)] : []),
  ]);
  const head = [
    'estimator',
    ...(transfer ? ['direction'] : []),
    'settings used',
    ...(cut ? ['rows'] : []),
    `${quantity === 'divergence' ? 'D(P‖Q)' : quantity} (${quantity === 'entropy' ? label : base})`,
    ...(reference ? [`relative to ${describeReference(reference)} (${base})`] : []),
  ];
  print(renderTable(head, rows, { align: ['left', 'left', ...(transfer ? ['left' as const] : []), ...(cut ? ['right' as const] : []), 'right', 'right'] }));
  const rounded = records.some((r) => Object.values(r.settings).some((v) => formatSetting(v) !== String(v)));
  if (rounded) print(`settings used: to ${SETTING_DIGITS} significant digits; --json gives every digit`);
  for (const note of cutNotes) print(note);
  const negative = quantity === 'entropy' ? [] : records.filter((r) => r.value !== null && r.value < 0);
  if (negative.length) print(negativeNote(quantity, negative));
  // Failures that are not errors go with the table, so saved output explains its own "failed" rows;
  // errors go to stderr alone, so a terminal does not show each reason twice.
  if (!failedAsError) {
    for (const r of failed) print(`failed: ${failureLine(r)}`);
    // On recorded data the step report below says the same and more.
    if (hints.length && !recorded) print(['repeated values in the data:', ...hints.map((h) => `  ${h}`)].join('\n'));
  }
  if (recorded) printRecorded(print, file, sample, quantity, recorded, head[head.length - (reference ? 2 : 1)], reference !== undefined);
}

/**
 * Mutual information, its conditional form, transfer entropy and divergence are never below 0, so a negative
 * estimate is the estimator's own error (bias or noise) where the true value is small; saying so keeps a reader
 * from taking it for a finding.
 */
export function negativeNote(quantity: Quantity, negative: Pick<EstimateRecord, 'estimator' | 'value' | 'direction'>[]): string {
  const what = quantity === 'divergence' ? 'a divergence' : quantity === 'transfer-entropy' ? 'transfer entropy' : `${quantity.replace(/-/g, ' ')}`;
  const list = negative.map((r) => `${r.estimator}${r.direction ? ` ${r.direction}` : ''} ${formatValue(r.value, 2)}`).join(', ');
  // Whether a value is "small" is the estimator's spread at this n, which only a benchmark measures: both readings are given.
  return `note: ${what} is never negative; ${list} ${negative.length > 1 ? 'are' : 'is'} below 0 by the estimator's bias and noise: read a value within its spread as "about 0", and one beyond it as the estimator failing on these data (too few rows for the columns, say); hhat bench --quantity ${quantity} shows each estimator's spread where the truth is small`;
}

/** The recording step of each column and the estimators for recorded data, each saying how it treats the step. */
function printRecorded(
  print: (text: string) => void,
  file: string,
  sample: Sample,
  quantity: Quantity,
  recorded: NonNullable<EstimateOutput['recorded']>,
  valueHead: string,
  relative: boolean,
): void {
  print(['recorded data, values repeated on a lattice:', ...describeRecorded(recorded.data, sample.n).map((l) => `  ${l}`)].join('\n'));
  if (!recorded.estimates.length) return;
  const advice = quantity === 'entropy' ? `; which is least biased at this n and step: hhat advise ${file === STDIN_PATH ? 'FILE' : file}` : '';
  print(`estimators for recorded data${advice}`);
  const transfer = quantity === 'transfer-entropy';
  const rows = recorded.estimates.map((r) => [
    estimatorLabel(r.estimator),
    ...(transfer ? [r.direction ?? ''] : []),
    r.how,
    r.skipped ? 'skipped (time)' : r.value === null ? `failed (${r.code})` : formatValue(r.value, 7),
    ...(relative ? [r.relative === null || r.relative === undefined ? '' : formatValue(r.relative, 7)] : []),
  ]);
  print(
    renderTable(['estimator', ...(transfer ? ['direction'] : []), 'how it treats the recording step', valueHead, ...(relative ? ['relative'] : [])], rows, {
      align: ['left', ...(transfer ? ['left' as const] : []), 'left', 'right', 'right'],
    }),
  );
  for (const r of recorded.estimates) if (r.error) print(`failed: ${failureLine(r)}`);
}
