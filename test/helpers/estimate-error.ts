/** The EstimateError a call throws; any other outcome (another error, or none) fails the test. */
import { EstimateError } from '../../src/core/errors.js';

export function estimateErrorOf(run: () => unknown): EstimateError {
  try {
    run();
  } catch (error) {
    if (error instanceof EstimateError) return error;
    throw error;
  }
  throw new Error('expected an EstimateError');
}
