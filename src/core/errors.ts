/** A mistake in what the user asked for: printed as one line, exit code 2. */
export class UsageError extends Error {
  override name = 'UsageError';
}

/**
 * 'command': an estimator command (an external program) gave no value (see CommandError); 'module': an estimator
 * from a user's module was stopped or threw something other than an EstimateError (see ModuleError).
 */
export const ESTIMATE_ERROR_CODES = ['too-few-points', 'ties', 'dimension', 'invalid-input', 'numeric', 'command', 'module'] as const;
export type EstimateErrorCode = (typeof ESTIMATE_ERROR_CODES)[number];

/**
 * An estimator could not produce a finite value from this sample. The harness counts it as a failure of
 * the replicate; the CLI prints it as a usage error, since it is about the user's data or settings.
 */
export class EstimateError extends Error {
  override name = 'EstimateError';
  constructor(
    readonly code: EstimateErrorCode,
    message: string,
  ) {
    super(message);
  }
}

/**
 * An EstimateError, or an error of the same shape from a user's estimator module, which imports nothing from
 * hhat: an Error whose name is 'EstimateError' and whose `code` is one of ESTIMATE_ERROR_CODES.
 */
export function isEstimateError(error: unknown): error is EstimateError {
  if (error instanceof EstimateError) return true;
  if (!(error instanceof Error) || error.name !== 'EstimateError') return false;
  const code = (error as { code?: unknown }).code;
  return typeof code === 'string' && (ESTIMATE_ERROR_CODES as readonly string[]).includes(code);
}

/**
 * The machine would not let a command finish: a full disk, a read-only or missing folder, a file another
 * process holds. One line saying what happened and what to do (how to resume, where to write instead); exit 1.
 */
export class EnvironmentError extends Error {
  override name = 'EnvironmentError';
}

/**
 * An estimator command (an external program, src/harness/external/) gave no value for this estimate: it could
 * not be started, exited, timed out, broke the protocol, or reported an error of its own. A run records it as
 * the estimate's failure ("command: ..."); `hhat estimate` shows it in the estimator's row.
 */
export class CommandError extends EstimateError {
  /** True when the command answered with an error of its own (a refusal); false when it gave no answer at all. */
  readonly reported: boolean;
  constructor(message: string, reported = false) {
    super('command', message);
    this.reported = reported;
  }
}

/**
 * An estimator from a user's module gave no value for this estimate, and not by an EstimateError of its own: it
 * passed its time or memory limit, ended its thread (process.exit), or threw another error. `hhat estimate` shows
 * it in the estimator's row, as a run records any failed estimate.
 */
export class ModuleError extends EstimateError {
  constructor(message: string) {
    super('module', message);
  }
}
