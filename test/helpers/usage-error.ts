/**
 * The one-line message of the UsageError a call throws. Anything else thrown (a TypeError is a bug in hhat),
 * a message over several lines, or no error at all fails the test.
 */
import { UsageError } from '../../src/core/errors.js';

function messageOf(error: unknown): string {
  if (!(error instanceof UsageError)) throw error;
  if (error.message.includes('\n')) throw new Error(`a usage error must be one line: ${error.message}`);
  return error.message;
}

export function usageMessage(call: () => unknown): string {
  try {
    call();
  } catch (error) {
    return messageOf(error);
  }
  throw new Error('expected a UsageError, but the call returned');
}

export async function asyncUsageMessage(call: () => Promise<unknown>): Promise<string> {
  try {
    await call();
  } catch (error) {
    return messageOf(error);
  }
  throw new Error('expected a UsageError, but the call returned');
}
