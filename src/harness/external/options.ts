/**
 * `--estimator-command ID=PROGRAM ...` for the commands that estimate directly (estimate, check, advise): the
 * declarations, registered in this thread. The client (and with it the worker-thread machinery) loads only
 * when a command is given, so the usual call pays nothing for it at start-up.
 */
import type { Quantity } from '../../core/contracts.js';
import { UsageError } from '../../core/errors.js';
import { normalizeCommand, parseCommandOption, type CommandDeclaration } from './declaration.js';
import type { Limits } from '../plan.js';

/** `limits`: from --time-limit; without them a benchmark's defaults (plan.ts, DEFAULT_LIMITS). */
export async function declareCommandOptions(texts: readonly string[], quantity: Quantity, limits?: Limits): Promise<CommandDeclaration[]> {
  const declarations = texts.map((text) => normalizeCommand(parseCommandOption(text), quantity, process.cwd(), `--estimator-command ${text}`));
  const ids = declarations.map((d) => d.id);
  const twice = ids.find((id, i) => ids.indexOf(id) !== i);
  if (twice) throw new UsageError(`estimator command "${twice}" is declared twice; each id may be declared once`);
  const { useEstimatorCommands } = await import('./client.js');
  useEstimatorCommands(declarations, limits);
  return declarations;
}
