/** A mistake in what the user asked for: printed as one line, exit code 2. */
export class UsageError extends Error {
  override name = 'UsageError';
}

export type EstimateErrorCode = 'too-few-points' | 'ties' | 'dimension' | 'invalid-input' | 'numeric';

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
 * The machine would not let a command finish: a full disk, a read-only or missing folder, a file another
 * process holds. One line saying what happened and what to do (how to resume, where to write instead); exit 1.
 */
export class EnvironmentError extends Error {
  override name = 'EnvironmentError';
}
