import { Command, CommanderError } from 'commander';
import { EnvironmentError, EstimateError, UsageError } from './errors.js';
import { registerScenariosCommand } from './commands/scenarios.js';
import { hhatVersion } from './provenance.js';
import { registerBenchCommand } from './commands/bench.js';
import { registerEstimatorsCommand } from './commands/estimators.js';
import { registerEstimateCommand } from './commands/estimate.js';
import { registerConvertCommand } from './commands/convert.js';
import { registerReportCommand } from './commands/report.js';
import { registerCompareCommand } from './commands/compare.js';
import { registerAdviseCommand } from './commands/advise.js';


export interface CliIo {
  out: (text: string) => void;
  err: (text: string) => void;
}

const defaultIo: CliIo = {
  out: (text) => process.stdout.write(text.endsWith('\n') ? text : `${text}\n`),
  err: (text) => process.stderr.write(text.endsWith('\n') ? text : `${text}\n`),
};

export function buildProgram(io: CliIo): Command {
  const program = new Command();
  program
    .name('hhat')
    .description(
      'Benchmark estimators of differential entropy, mutual information and divergence on seeded samples whose true value is known.\nValues are in nats unless --bits is given.',
    )
    .version(hhatVersion(), '-V, --version', 'print the hhat version')
    // Set before the commands are added, so every command inherits the wording.
    .helpOption('-h, --help', 'show this help')
    .helpCommand('help [command]', 'show the help of a command')
    .option('--debug', 'print stack traces on errors')
    .showHelpAfterError('(run with --help for usage)')
    .configureOutput({ writeOut: io.out, writeErr: io.err })
    .exitOverride();
  registerBenchCommand(program, io.out, io.err);
  registerScenariosCommand(program, io.out);
  registerEstimatorsCommand(program, io.out);
  registerEstimateCommand(program, io.out, io.err);
  registerConvertCommand(program, io.out);
  registerReportCommand(program, io.out);
  registerCompareCommand(program, io.out, io.err);
  registerAdviseCommand(program, io.out, io.err);
  for (const command of program.commands) command.exitOverride().configureOutput({ writeOut: io.out, writeErr: io.err });
  return program;
}

/**
 * Runs the CLI; returns the exit code: 0 ok, 1 a computation that failed (an estimate that could not be made,
 * a comparison that found a regression) or an internal error, 2 a usage mistake.
 */
export async function main(argv: string[], io: CliIo = defaultIo): Promise<number> {
  const program = buildProgram(io);
  const debug = argv.includes('--debug');
  // Commands that finish but report a problem (an estimate that failed beside others) set process.exitCode;
  // it is read here and cleared, so the caller (bin/hhat.js, or a test calling main again) owns the code.
  process.exitCode = undefined;
  try {
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
    process.exitCode = undefined;
  }
}
