import { Option, type Command } from 'commander';

/** estimate's options for the quantities advise does not cover: option key, flag, quantity. */
const OTHER_QUANTITY_OPTIONS = [
  ['xColumns', '--x-columns', 'mutual information'],
  ['yColumns', '--y-columns', 'mutual information'],
  ['zColumns', '--z-columns', 'conditional mutual information'],
  ['sourceColumn', '--source-column', 'transfer entropy'],
  ['targetColumn', '--target-column', 'transfer entropy'],
  ['against', '--against', 'a divergence'],
] as const;
import type { Support, Tails } from '../core/contracts.js';
import { UsageError } from '../core/errors.js';
import { readSample, STDIN_PATH } from '../data/index.js';
import { collect, MAX_REPLICATES, MAX_SAMPLE_SIZE, parseIntegerOption } from '../core/options.js';
import { declareCommandOptions } from '../harness/external/options.js';
import { toJson } from '../analysis/results.js';
import { parseNumber } from '../core/spec.js';
import { adviseFile } from '../analysis/advise/file.js';
import { adviseSituation, MAX_BUDGET_SECONDS } from '../analysis/advise/situation.js';
import { fileAdviceJson, renderFileAdvice, renderSituationAdvice, situationAdviceJson } from '../views/advice.js';
import { DEFAULT_BUDGET_SECONDS } from '../analysis/advise/benchmark.js';
import { checkSampleMemory } from '../core/memory.js';
import { DEFAULT_LIMITS } from '../harness/plan.js';
import { defaultWorkers } from '../harness/runner.js';
import { describeReadProgress, statusLine } from '../views/status-line.js';

interface AdviseOptions {
  n?: string;
  dim?: string;
  tails?: string;
  support?: string;
  columns?: string;
  interval?: string;
  budget?: string;
  seed?: string;
  workers?: string;
  replicates?: string;
  resamples?: string;
  estimatorCommand?: string[];
  json?: boolean;
}

const TAILS: readonly Tails[] = ['light', 'exponential', 'heavy'];
const SUPPORTS: readonly Support[] = ['bounded', 'half', 'unbounded'];

function parseBudget(text: string | undefined): number {
  if (text === undefined) return DEFAULT_BUDGET_SECONDS;
  const value = parseNumber(text);
  if (value === undefined || !(value > 0) || value > MAX_BUDGET_SECONDS)
    throw new UsageError(`--budget ${text} is not allowed; it must be a number of seconds > 0 and ≤ ${MAX_BUDGET_SECONDS}`);
  return value;
}

function parseLevel(text: string | undefined): number | null {
  if (text === undefined) return 0.95;
  if (text === 'none') return null;
  const value = parseNumber(text);
  if (value === undefined || !(value > 0 && value < 1))
    throw new UsageError(`--interval ${text} is not allowed; it must be a coverage between 0 and 1 (e.g. 0.95), or none`);
  return value;
}

function choice<T extends string>(flag: string, text: string | undefined, allowed: readonly T[]): T | undefined {
  if (text === undefined) return undefined;
  if (!allowed.includes(text as T)) throw new UsageError(`${flag} ${text} is not allowed; it must be one of ${allowed.join(', ')}`);
  return text as T;
}

export function registerAdviseCommand(program: Command, print: (text: string) => void, printErr: (text: string) => void): void {
  program
    .command('advise')
    .description(
      'which estimator to use: for a described situation (--n, --dim), or for a data file, with an estimate, a bootstrap interval and a look-alike bias correction',
    )
    .argument('[file]', 'a data file (CSV/TSV/TXT, JSON, NumPy .npy; "-": standard input); rows are points, columns are coordinates')
    .option('--n <n>', 'sample size of the setting (without a file)')
    .option('--dim <d>', 'dimension of the setting (without a file)')
    .option('--tails <class>', `tail class of the setting: ${TAILS.join(', ')}`)
    .option('--support <class>', `support of the setting: ${SUPPORTS.join(', ')}`)
    .option('--columns <list>', 'with a file: columns to use, positions from 1 ("1,3", "2-4") or header names ("x,y")')
    .option('--interval <level>', 'with a file: coverage of the bootstrap interval (default 0.95; none for no interval)')
    .option('--budget <seconds>', `time budget in seconds (default ${DEFAULT_BUDGET_SECONDS})`)
    .option('--seed <s>', 'base seed of the benchmark draws, the EM starts and the bootstrap')
    .option('--workers <w>', 'worker threads for the benchmark (default: the number of cores)')
    .option('--replicates <r>', 'exactly this many benchmark replicates instead of as many as the budget allows (reproducible advice)')
    .option('--resamples <b>', 'with a file: exactly this many bootstrap resamples instead of as many as the budget allows')
    .option(
      '--estimator-command <id=command>',
      "an entropy estimator written in any language: ID=PROGRAM [ARG...] speaking hhat's estimator protocol (repeatable); it is compared with the built-ins",
      collect,
    )
    .option('--json', 'print the advice as JSON (values in nats)')
    // estimate's options for the other quantities, accepted only to say that advise covers entropy alone
    // (commander would suggest --columns, which gives advice on a different quantity, the joint entropy).
    .addOption(new Option('--x-columns <list>').hideHelp())
    .addOption(new Option('--y-columns <list>').hideHelp())
    .addOption(new Option('--z-columns <list>').hideHelp())
    .addOption(new Option('--source-column <c>').hideHelp())
    .addOption(new Option('--target-column <c>').hideHelp())
    .addOption(new Option('--against <q-file>').hideHelp())
    .addHelpText(
      'after',
      `
Large files:
  When a file has more rows than the budget can benchmark (by a fixed cost
  model of each estimator, src/harness/cost-model.ts), the advice works on a seeded
  uniform subsample of rows (--seed), and says so: profile, look-alike,
  benchmark, estimates, interval and bias correction are all for those rows.
  The chosen estimator then also runs on as many of the file's rows as a
  tenth of the budget allows, all of them when they fit.
Ranges: --n from 10 to ${MAX_SAMPLE_SIZE}, --replicates from 2 to ${MAX_REPLICATES} (as in plan
  files); an --n whose samples would not fit in this machine's memory, or
  whose fewest useful replicates the budget cannot cover, is refused before
  anything runs, with what it would need.`,
    )
    .action(async (file: string | undefined, options: AdviseOptions) => {
      const other = OTHER_QUANTITY_OPTIONS.find(([key]) => (options as Record<string, unknown>)[key] !== undefined);
      if (other) {
        throw new UsageError(
          `${other[1]}: advise covers differential entropy only; for ${other[2]}, compare estimators with hhat bench on a scenario like your data (hhat scenarios lists them) and estimate with hhat estimate`,
        );
      }
      const budgetSeconds = parseBudget(options.budget);
      const seed = options.seed === undefined ? undefined : parseIntegerOption('--seed', options.seed, 0);
      const workers = options.workers === undefined ? undefined : parseIntegerOption('--workers', options.workers, 1, 256);
      // The plan schema's ranges (src/schemas/plan.schema.json), so a setting that a plan accepts is accepted here.
      const replicates = options.replicates === undefined ? undefined : parseIntegerOption('--replicates', options.replicates, 2, MAX_REPLICATES);
      const commands = options.estimatorCommand?.length ? await declareCommandOptions(options.estimatorCommand, 'entropy') : undefined;
      const stage = !options.json && process.stderr.isTTY ? (text: string) => printErr(`hhat advise: ${text}…`) : undefined;
      if (file !== undefined) {
        const setting = (['n', 'dim', 'tails', 'support'] as const).filter((k) => options[k] !== undefined);
        if (setting.length) {
          throw new UsageError(
            `--${setting[0]} describes a situation; with a data file the data describe themselves (drop --${setting[0]}, or drop the file for advice on the described situation)`,
          );
        }
        const readStarted = performance.now();
        const status = statusLine(process.stderr, 'hhat advise');
        let loaded;
        try {
          loaded = readSample(file, {
            columns: options.columns,
            onProgress: (done, total) => status.show(`reading ${file}: ${describeReadProgress(done, total)}`),
          });
        } finally {
          status.clear();
        }
        const level = parseLevel(options.interval);
        const resamples = options.resamples === undefined ? undefined : parseIntegerOption('--resamples', options.resamples, 20, 1_000_000);
        const advice = await adviseFile(loaded.sample, {
          // Reading a large file takes seconds of the budget too.
          elapsedBeforeSeconds: (performance.now() - readStarted) / 1000,
          budgetSeconds,
          level,
          seed,
          workers,
          replicates,
          resamples,
          columnNames: loaded.columnNames,
          commands,
          onStage: stage,
        });
        print(options.json ? toJson(fileAdviceJson(advice, file)) : renderFileAdvice(advice, file === STDIN_PATH ? 'standard input' : file));
        return;
      }
      const fileOnly = (['columns', 'interval', 'resamples'] as const).find((k) => options[k] !== undefined);
      if (fileOnly)
        throw new UsageError(
          `--${fileOnly} applies to a data file: hhat advise FILE --${fileOnly} ${fileOnly === 'columns' ? 'LIST' : fileOnly === 'interval' ? '0.95' : 'B'}`,
        );
      if (options.n === undefined || options.dim === undefined) {
        throw new UsageError(
          'give a data file (hhat advise data.csv) or describe the setting with --n and --dim (hhat advise --n 500 --dim 2 [--tails heavy] [--support bounded])',
        );
      }
      // At least 10 points, not the schema's 2: advice on fewer says nothing (adviseSituation refuses them too).
      const n = parseIntegerOption('--n', options.n, 10, MAX_SAMPLE_SIZE);
      const dim = parseIntegerOption('--dim', options.dim, 1, 1000);
      // Before anything runs: a sample that the benchmark's workers could not hold is refused with what it would need.
      checkSampleMemory(`--n ${options.n}`, n, dim, { workers: workers ?? defaultWorkers(), workerMemoryMiB: DEFAULT_LIMITS.workerMemoryMiB });
      const advice = await adviseSituation({
        n,
        dim,
        tails: choice('--tails', options.tails, TAILS),
        support: choice('--support', options.support, SUPPORTS),
        budgetSeconds,
        seed,
        workers,
        replicates,
        commands,
        onStage: stage,
      });
      print(options.json ? toJson(situationAdviceJson(advice)) : renderSituationAdvice(advice));
    });
}
