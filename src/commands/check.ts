import type { Command } from 'commander';
import { COMMANDS } from './summaries.js';
import type { Estimator, Quantity, SettingValue } from '../core/contracts.js';
import { UsageError } from '../core/errors.js';
import { runConformance, type ConformanceReport } from '../analysis/conformance.js';
import { failedChecks, formatConformanceJson, formatConformanceText } from '../views/conformance.js';
import { loadEstimatorModules, resolveModulePath } from '../harness/modules.js';
import { collect } from '../core/options.js';
import { declareCommandOptions } from '../harness/external/options.js';
import { parseSpec, QUANTITIES } from '../core/spec.js';
import { listEstimators } from '../../estimators/index.js';

const exitCodesHelp = `
A module's estimators run on a supervised thread: an estimate that passes
--time-limit or --memory-limit, or ends its thread (process.exit), fails the
check it ran in, with the reason as its evidence.

Exit codes: 0 every applicable check passes; 1 a check failed (the estimator and
check are named on stderr); 2 a usage mistake (no such file, not an estimator
module, an id the module does not define, a setting the estimator refuses).`;

/** The estimators to check with their settings: every one of `candidates`, or those the specs name. */
function chosen(candidates: Estimator[], specs: string[] | undefined, where: string): { estimator: Estimator; settings: Record<string, SettingValue> }[] {
  if (!specs?.length) return candidates.map((estimator) => ({ estimator, settings: {} }));
  return specs.map((text) => {
    const { id, values } = parseSpec(text, 'estimator');
    const estimator = candidates.find((e) => e.id === id);
    if (!estimator) throw new UsageError(`${where} defines no estimator "${id}"; it defines ${candidates.map((e) => e.id).join(', ')}`);
    return { estimator, settings: values };
  });
}

/** The --estimator-command estimators, registered (loaded only when given). */
async function commandEstimators(texts: string[], quantity: string, timeLimit: string | undefined): Promise<Estimator[]> {
  if (!(QUANTITIES as readonly string[]).includes(quantity)) throw new UsageError(`--quantity ${quantity} is not allowed; use one of ${QUANTITIES.join(', ')}`);
  const limits = timeLimit === undefined ? undefined : (await import('../harness/module-thread.js')).parseLimits({ timeLimit });
  const ids = (await declareCommandOptions(texts, quantity as Quantity, limits)).map((d) => d.id);
  return listEstimators().filter((e) => ids.includes(e.id));
}

type CheckOptions = { estimator?: string[]; json?: boolean; estimatorCommand?: string[]; quantity: string; timeLimit?: string; memoryLimit?: string };

/** The built-ins (trusted, fast) and estimator commands (held by their broker): the suite runs in this thread. */
async function checkInProcess(options: CheckOptions): Promise<ConformanceReport[]> {
  const commands = Boolean(options.estimatorCommand?.length);
  const candidates = commands ? await commandEstimators(options.estimatorCommand!, options.quantity, options.timeLimit) : listEstimators();
  return chosen(candidates, options.estimator, commands ? '--estimator-command' : 'hhat').map(({ estimator, settings }) =>
    runConformance(estimator, { settings }),
  );
}

/** A module's estimators: their code runs only on the supervised thread, so that no estimate can end or hang hhat. */
async function checkModule(module: string, options: CheckOptions): Promise<ConformanceReport[]> {
  const { ModuleThread, parseLimits } = await import('../harness/module-thread.js');
  const { checkOnThread, conformanceJobUrl } = await import('../analysis/conformance-job.js');
  const thread = new ModuleThread([resolveModulePath(module)], parseLimits(options), conformanceJobUrl());
  try {
    // The thread loads the module while this one does, behind the load probe that refuses a module whose top-level
    // code would end or hang this thread.
    thread.start();
    const targets = chosen(await loadEstimatorModules([module]), options.estimator, `estimator module ${module}`);
    const reports: ConformanceReport[] = [];
    for (const { estimator, settings } of targets) reports.push(await checkOnThread(thread, estimator, settings));
    return reports;
  } finally {
    thread.close();
  }
}

export function registerCheckCommand(program: Command, print: (text: string) => void, printErr: (text: string) => void): void {
  program
    .command('check')
    .description(COMMANDS.check)
    .argument('[module]', 'a JavaScript module of estimators, as `hhat bench --estimator-module` loads it; without it, the built-in estimators')
    .option(
      '--estimator <spec>',
      'ID[:key=value,...]: check only this estimator, with these settings (repeatable; default: every one, default settings)',
      collect,
    )
    .option(
      '--estimator-command <id=command>',
      "check an estimator written in any language: ID=PROGRAM [ARG...] speaking hhat's estimator protocol (repeatable; instead of MODULE)",
      collect,
    )
    .option(
      '--quantity <q>',
      'what the --estimator-command estimators measure: entropy, mutual-information, conditional-mutual-information, transfer-entropy or divergence',
      'entropy',
    )
    .option('--json', 'print the reports as JSON, with the suite sizes and tolerances')
    .option(
      '--time-limit <s>',
      "seconds each estimate of a module's estimator (or an --estimator-command) may run before it is stopped and its check fails (default: 60 + 0.001 × n, as hhat bench)",
    )
    .option(
      '--memory-limit <MiB>',
      "heap limit in MiB of the thread that runs a module's estimators; an estimate that passes it fails its check (default 4096)",
    )
    .addHelpText('after', exitCodesHelp)
    .action(async (module: string | undefined, options: CheckOptions, command: Command) => {
      if (module !== undefined && options.estimatorCommand?.length) throw new UsageError('give an estimator MODULE or --estimator-command, not both');
      // Modules and built-ins declare their quantity; a --quantity for them would be silently ignored.
      if (!options.estimatorCommand?.length && command.getOptionValueSource('quantity') === 'cli')
        throw new UsageError(
          `--quantity ${options.quantity} applies only to --estimator-command; ${module === undefined ? 'the built-ins' : 'a module'} declare${module === undefined ? '' : 's'} each estimator's quantity`,
        );
      // Built-ins run unsupervised in this thread, so a limit given for them would be silently ignored.
      if (options.timeLimit !== undefined && module === undefined && !options.estimatorCommand?.length)
        throw new UsageError(`--time-limit ${options.timeLimit} applies to a MODULE's estimators and to --estimator-command; the built-ins have none`);
      if (options.memoryLimit !== undefined && module === undefined)
        throw new UsageError(`--memory-limit ${options.memoryLimit} applies to a MODULE's estimators, which run on a thread of their own`);
      const reports = module === undefined ? await checkInProcess(options) : await checkModule(module, options);
      print(options.json ? formatConformanceJson(reports, module ?? null) : formatConformanceText(reports));
      const failed = failedChecks(reports);
      if (failed.length) {
        printErr(`hhat check: ${failed.length} of ${reports.length} estimator${reports.length === 1 ? '' : 's'} failed: ${failed.join('; ')}`);
        process.exitCode = 1;
      }
    });
}
