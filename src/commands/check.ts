import type { Command } from 'commander';
import { COMMANDS } from './summaries.js';
import type { Estimator, Quantity, SettingValue } from '../core/contracts.js';
import { UsageError } from '../core/errors.js';
import { runConformance } from '../analysis/conformance.js';
import { failedChecks, formatConformanceJson, formatConformanceText } from '../views/conformance.js';
import { loadEstimatorModules } from '../harness/modules.js';
import { collect } from '../core/options.js';
import { declareCommandOptions } from '../harness/external/options.js';
import { parseSpec, QUANTITIES } from '../core/spec.js';
import { listEstimators } from '../../estimators/index.js';

const exitCodesHelp = `
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
async function commandEstimators(texts: string[], quantity: string): Promise<Estimator[]> {
  if (!(QUANTITIES as readonly string[]).includes(quantity)) throw new UsageError(`--quantity ${quantity} is not allowed; use one of ${QUANTITIES.join(', ')}`);
  const ids = (await declareCommandOptions(texts, quantity as Quantity)).map((d) => d.id);
  return listEstimators().filter((e) => ids.includes(e.id));
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
    .addHelpText('after', exitCodesHelp)
    .action(
      async (
        module: string | undefined,
        options: { estimator?: string[]; json?: boolean; estimatorCommand?: string[]; quantity: string },
        command: Command,
      ) => {
        if (module !== undefined && options.estimatorCommand?.length) throw new UsageError('give an estimator MODULE or --estimator-command, not both');
        // Modules and built-ins declare their quantity; a --quantity for them would be silently ignored.
        if (!options.estimatorCommand?.length && command.getOptionValueSource('quantity') === 'cli')
          throw new UsageError(
            `--quantity ${options.quantity} applies only to --estimator-command; ${module === undefined ? 'the built-ins' : 'a module'} declare${module === undefined ? '' : 's'} each estimator's quantity`,
          );
        const candidates = options.estimatorCommand?.length
          ? await commandEstimators(options.estimatorCommand, options.quantity)
          : module === undefined
            ? listEstimators()
            : await loadEstimatorModules([module]);
        const where = options.estimatorCommand?.length ? '--estimator-command' : module === undefined ? 'hhat' : `estimator module ${module}`;
        const targets = chosen(candidates, options.estimator, where);
        const reports = targets.map(({ estimator, settings }) => runConformance(estimator, { settings }));
        print(options.json ? formatConformanceJson(reports, module ?? null) : formatConformanceText(reports));
        const failed = failedChecks(reports);
        if (failed.length) {
          printErr(`hhat check: ${failed.length} of ${reports.length} estimator${reports.length === 1 ? '' : 's'} failed: ${failed.join('; ')}`);
          process.exitCode = 1;
        }
      },
    );
}
