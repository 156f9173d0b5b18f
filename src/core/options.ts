/**
 * Parsing command-line option values, one line per mistake naming the value and what is allowed. Kept apart
 * from the plan machinery so that commands which only parse options load nothing else.
 */
import { UsageError } from './errors.js';
import planSchema from '../schemas/plan.schema.json' with { type: 'json' };

/** The plan schema's ranges, which the command line shares. */
export const MAX_SAMPLE_SIZE = planSchema.properties.sampleSizes.items.maximum;
export const MAX_REPLICATES = planSchema.properties.replicates.maximum;
export const MAX_ESTIMATE_SECONDS = planSchema.properties.limits.properties.estimateSeconds.maximum;
export const WORKER_MEMORY_MIB = planSchema.properties.limits.properties.workerMemoryMiB;
/** The most worker threads a run may ask for (--workers, runPlan's options.workers). */
export const MAX_WORKERS = 256;

/** Parses "100,1000,1e4" for --n. */
export function parseSampleSizes(text: string): number[] {
  const sizes = text.split(',').map((part) => {
    const value = Number(part.trim());
    if (part.trim() === '' || !Number.isInteger(value) || value < 2 || value > MAX_SAMPLE_SIZE) {
      throw new UsageError(
        `--n: "${part.trim()}" is not allowed; sample sizes must be integers from 2 to ${MAX_SAMPLE_SIZE}, comma-separated (e.g. 100,1000,10000)`,
      );
    }
    return value;
  });
  return sizes;
}

/** --phi 0,0.5,0.9: AR(1) coefficients, each with −1 < φ < 1. */
export function parsePhiList(text: string): number[] {
  return text.split(',').map((part) => {
    const value = Number(part.trim());
    if (part.trim() === '' || !Number.isFinite(value) || !(value > -1 && value < 1)) {
      throw new UsageError(`--phi: "${part.trim()}" is not allowed; each φ must be a number with −1 < φ < 1, comma-separated (e.g. 0,0.5,0.9)`);
    }
    return value;
  });
}

export function parseIntegerOption(flag: string, text: string, min: number, max = Number.MAX_SAFE_INTEGER): number {
  const value = Number(text);
  if (text.trim() === '' || !Number.isInteger(value) || value < min || value > max) throw integerRangeError(flag, text, value, min, max);
  return value;
}

function integerRangeError(name: string, shown: string, value: number, min: number, max: number): UsageError {
  // Above MAX_SAFE_INTEGER (2^53 − 1) integers are no longer exact as doubles: that bound is named when it is the one passed.
  const range = max === Number.MAX_SAFE_INTEGER && !(value > max) ? `≥ ${min}` : `from ${min} to ${max}`;
  return new UsageError(`${name} ${shown} is not allowed; it must be an integer ${range}`);
}

/** An integer argument from code (a library call), held to the range its flag has: "drawReplicate: n 1.5 is not allowed; ...". */
export function checkIntegerArgument(name: string, value: unknown, min: number, max = Number.MAX_SAFE_INTEGER): number {
  if (typeof value === 'number' && Number.isInteger(value) && value >= min && value <= max) return value;
  const shown = typeof value === 'string' ? `the string ${JSON.stringify(value)}` : String(value);
  throw integerRangeError(name, shown, typeof value === 'number' ? value : NaN, min, max);
}

/** A confidence level strictly between 0 and 1 (e.g. 0.95), for --level. */
export function parseLevel(text: string, flag = '--level'): number {
  const value = Number(text);
  if (text.trim() === '' || !(value > 0 && value < 1))
    throw new UsageError(`${flag} ${text} is not allowed; the confidence level is a number between 0 and 1 (e.g. 0.95)`);
  return value;
}

/** A share from 0 to 1 inclusive (e.g. 0.05). */
export function parseFraction(flag: string, text: string): number {
  const value = Number(text);
  if (text.trim() === '' || !(value >= 0 && value <= 1))
    throw new UsageError(`${flag} ${text} is not allowed; it must be a number from 0 to 1 (e.g. 0.05 for 5%)`);
  return value;
}

/** Seconds, more than 0 and at most `max` (e.g. 5 or 0.5). */
export function parseSeconds(flag: string, text: string, max: number): number {
  const value = Number(text);
  if (text.trim() === '' || !(value > 0 && value <= max))
    throw new UsageError(`${flag} ${text} is not allowed; it must be a number of seconds above 0 and at most ${max} (e.g. 5 or 0.5)`);
  return value;
}

/** For a repeatable flag (--scenario, --estimator, ...): each use adds its value to the list. */
export function collect(value: string, previous: string[] = []): string[] {
  return [...previous, value];
}
