import { Command, CommanderError } from 'commander';
import { EnvironmentError, EstimateError, UsageError } from './core/errors.js';
import { hhatVersion } from './core/provenance.js';
import { COMMANDS, type CommandName } from './commands/summaries.js';

type Print = (text: string) => void;
type Register = (program: Command, print: Print, printErr: Print) => void;

/** Each command's module, loaded only when that command runs (or its help is asked for). */
const LOADERS: Record<CommandName, () => Promise<Register>> = {
  bench: async () => (await import('./commands/bench.js')).registerBenchCommand,
  merge: async () => (await import('./commands/bench.js')).registerBenchCommand,
  scenarios: async () => (await import('./commands/scenarios.js')).registerScenariosCommand,
  estimators: async () => (await import('./commands/estimators.js')).registerEstimatorsCommand,
  estimate: async () => (await import('./commands/estimate.js')).registerEstimateCommand,
  convert: async () => (await import('./commands/convert.js')).registerConvertCommand,
  report: async () => (await import('./commands/report.js')).registerReportCommand,
  compare: async () => (await import('./commands/compare.js')).registerCompareCommand,
  check: async () => (await import('./commands/check.js')).registerCheckCommand,
  advise: async () => (await import('./commands/advise.js')).registerAdviseCommand,
  draw: async () => (await import('./commands/draw.js')).registerDrawCommand,
};

/** The command the arguments name (after global options, or after `help`), if it is one of ours. */
function chosenCommand(argv: string[]): CommandName | undefined {
  const words = argv.filter((a) => !a.startsWith('-'));
  const first = words[0] === 'help' ? words[1] : words[0];
  return first !== undefined && first in COMMANDS ? (first as CommandName) : undefined;
}

export interface CliIo {
  out: (text: string) => void;
  err: (text: string) => void;
}

const defaultIo: CliIo = {
  out: (text) => process.stdout.write(text.endsWith('\n') ? text : `${text}\n`),
  err: (text) => process.stderr.write(text.endsWith('\n') ? text : `${text}\n`),
};

/**
 * The program with every command listed; only `chosen` (and a command sharing its module) is defined in full,
 * the others by name and summary, enough for `hhat --help` and for commander to reject a misspelt command.
 */
export async function buildProgram(io: CliIo, chosen?: CommandName): Promise<Command> {
  const program = new Command();
  program
    .name('hhat')
    .description(
      'Benchmark estimators of differential entropy, mutual information (also conditional), transfer entropy and divergence on seeded samples whose true value is known.\nValues are in nats unless --bits is given.',
    )
    .version(hhatVersion(), '-V, --version', 'print the hhat version')
    // Set before the commands are added, so every command inherits the wording.
    .helpOption('-h, --help', 'show this help')
    .helpCommand('help [command]', 'show the help of a command')
    .option('--debug', 'print stack traces on errors')
    .configureOutput(outputFor(io, 'hhat', 'the commands and options'))
    .exitOverride();
  // bench.ts defines bench and merge together; every other module one command.
  const group = chosen === 'bench' || chosen === 'merge' ? ['bench', 'merge'] : chosen ? [chosen] : [];
  let loaded = false;
  for (const name of Object.keys(COMMANDS) as CommandName[]) {
    if (group.includes(name)) {
      if (!loaded) (await LOADERS[name]())(program, io.out, io.err);
      loaded = true;
    } else {
      program.command(name).description(COMMANDS[name]).allowUnknownOption().allowExcessArguments();
    }
  }
  for (const command of program.commands) command.exitOverride().configureOutput(outputFor(io, `hhat ${command.name()}`));
  return program;
}

/**
 * Where commander writes, and its complaints about the command line as one line like every other usage error:
 * "hhat: unknown option '--bogus' (hhat bench --help lists the options)"; a suggestion it adds joins that line.
 */
function outputFor(io: CliIo, command: string, lists = 'the options') {
  const oneLine = (text: string) =>
    text
      .replace(/^error: /, '')
      .trim()
      .replace(/\s*\n\s*\(Did you mean (.*)\)$/, '; did you mean $1')
      .replace(/\s*\n\s*/g, ' ');
  return {
    writeOut: io.out,
    writeErr: io.err,
    outputError: (text: string, write: (text: string) => void) => write(`hhat: ${oneLine(text)} (${command} --help lists ${lists})\n`),
  };
}

/** The value of `--flag V` or `--flag=V` in `argv` (the last one given), else undefined. */
function flagValue(argv: string[], flag: string): string | undefined {
  let value: string | undefined;
  argv.forEach((a, i) => {
    if (a === flag) value = argv[i + 1];
    else if (a.startsWith(`${flag}=`)) value = a.slice(flag.length + 1);
  });
  return value;
}

/**
 * `hhat bench` runs its units on worker threads, and each spends about 0.3 s loading its modules: they are started
 * now, from the command line alone, so that their loading overlaps this thread's (src/harness/threads.ts). Values
 * the command will refuse start none; a plan file that sets another heap limit gets fresh workers. Returns the
 * function that stops any the run did not adopt.
 */
async function startBenchWorkers(argv: string[]): Promise<() => void> {
  const none = () => undefined;
  if (argv.includes('--help') || argv.includes('-h') || argv.find((a) => !a.startsWith('-')) === 'help') return none;
  const { defaultWorkers, releaseEarlyWorkers, startWorkersEarly } = await import('./harness/threads.js');
  const { DEFAULT_WORKER_MEMORY_MIB } = await import('./core/memory.js');
  const workers = flagValue(argv, '--workers');
  const memory = flagValue(argv, '--memory-limit');
  const count = workers === undefined ? defaultWorkers() : Number(workers);
  const mib = memory === undefined ? DEFAULT_WORKER_MEMORY_MIB : Number(memory);
  // The bounds of --workers and of a plan's limits.workerMemoryMiB.
  if (!Number.isInteger(count) || count < 1 || count > 256 || !Number.isInteger(mib) || mib < 64 || mib > 1048576) return none;
  startWorkersEarly(count, mib);
  return releaseEarlyWorkers;
}

/**
 * Runs the CLI; returns the exit code: 0 ok, 1 a computation that failed (an estimate that could not be made,
 * a comparison that found a regression) or an internal error, 2 a usage mistake.
 */
export async function main(argv: string[], io: CliIo = defaultIo): Promise<number> {
  const debug = argv.includes('--debug');
  // Commands that finish but report a problem (an estimate that failed beside others) set process.exitCode;
  // it is read here and cleared, so the caller (bin/hhat.js, or a test calling main again) owns the code.
  process.exitCode = undefined;
  const chosen = chosenCommand(argv);
  let releaseWorkers = () => {};
  try {
    if (chosen === 'bench') releaseWorkers = await startBenchWorkers(argv);
    const program = await buildProgram(io, chosen);
    await program.parseAsync(argv, { from: 'user' });
    return typeof process.exitCode === 'number' ? process.exitCode : 0;
  } catch (error) {
    if (error instanceof CommanderError) {
      // Commander has already printed its one-line message; help and version exit 0.
      return error.exitCode === 0 ? 0 : 2;
    }
    if (error instanceof UsageError || error instanceof EstimateError || error instanceof EnvironmentError) {
      io.err(`hhat: ${error.message}`);
      if (debug) io.err(String(error.stack));
      // An estimator that cannot run on the data, or a disk that is full, is a failure of the computation, not of the command line.
      return error instanceof UsageError ? 2 : 1;
    }
    io.err(`hhat: internal error: ${error instanceof Error ? error.message : String(error)}`);
    io.err(debug && error instanceof Error ? String(error.stack) : 'run again with --debug for the stack trace, and please report it');
    return 1;
  } finally {
    releaseWorkers();
    process.exitCode = undefined;
  }
}
