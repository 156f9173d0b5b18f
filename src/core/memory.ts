/**
 * Will a sample size fit in this machine's memory? Checked before any work starts, so `--n 1e12` is a
 * one-line usage error naming what it would need, not a crash part way ("Invalid typed array length") or
 * a process that grows until the system kills it.
 *
 *   checkSampleMemory('--n 1000000000', 1e9, 1, { workers: 2 });   // throws UsageError: needs about 540 GB ...
 *
 * The estimate is deliberately simple: each worker thread holds a replicate's sample (n·d doubles) and the
 * working copies an estimate makes of it (sorted, whitened, rescaled, the kd-tree's reordered points: about
 * SAMPLE_COPIES of them), plus per-point arrays that do not grow with d (neighbour distances and indices for
 * up to 12 neighbours, kd-tree order, kernel sums: about PER_POINT_DOUBLES doubles). Measured with
 * `/usr/bin/time -v node bin/hhat.js advise --n 1000000 --dim 1 --budget 10` on 2 workers: 678 MB peak, or
 * about 290 bytes per point per worker over the process's own ~100 MB; the formula gives 272 + the base.
 */
import { totalmem } from 'node:os';
import { UsageError } from './errors.js';

/** Copies of the n·d sample values one estimate may hold at once. */
export const SAMPLE_COPIES = 6;

/** Heap limit of a worker thread, MiB, unless the plan or --memory-limit says otherwise. */
export const DEFAULT_WORKER_MEMORY_MIB = 4096;
/** Doubles per point in arrays whose size does not depend on d. */
export const PER_POINT_DOUBLES = 28;
/** The process itself: Node, the code, the catalog, result tables. */
export const BASE_BYTES = 150e6;
/**
 * The most elements a Float64Array may have: V8's limit on 64-bit Node 20 (new Float64Array(2 ** 32 + 1)
 * throws "Invalid typed array length"; 2 ** 31 + 1 does not).
 */
export const MAX_TYPED_ARRAY_LENGTH = 2 ** 32;

/** Bytes one worker needs for n points in d dimensions (see the file comment). */
export function bytesPerWorker(n: number, dim: number): number {
  return n * 8 * (SAMPLE_COPIES * dim + PER_POINT_DOUBLES);
}

/** Bytes a run with n points in d dimensions on `workers` threads needs, base included. */
export function sampleMemoryBytes(n: number, dim: number, workers = 1): number {
  return BASE_BYTES + workers * bytesPerWorker(n, dim);
}

/** 1.2 GB, 340 MB, 12 kB. */
export function formatBytes(bytes: number): string {
  const units: [number, string][] = [
    [1e15, 'PB'],
    [1e12, 'TB'],
    [1e9, 'GB'],
    [1e6, 'MB'],
    [1e3, 'kB'],
  ];
  for (const [size, unit] of units) if (bytes >= size) return `${Number((bytes / size).toPrecision(2))} ${unit}`;
  return `${Math.round(bytes)} B`;
}

/** Room for the supervising thread beside its workers, MiB. */
const SUPERVISOR_MIB = 1024;
/** The share of the machine's memory a run may take, leaving the rest to the system. */
const MACHINE_FRACTION = 0.85;

/**
 * The memory a run on worker threads may use: each worker's heap limit plus the supervisor's room, at most
 * MACHINE_FRACTION of the machine. Typed arrays live outside a worker's heap, so its heap limit cannot stop an
 * estimate that hoards them; the pool's watchdog stops the estimate running longest once the process passes
 * this, and `checkSampleMemory` refuses a plan that would need more before it starts.
 */
export function processMemoryLimitBytes(workers: number, workerMemoryMiB: number, totalBytes = totalmem()): number {
  return Math.min((workers * workerMemoryMiB + SUPERVISOR_MIB) * 2 ** 20, MACHINE_FRACTION * totalBytes);
}

export interface MemoryCheckOptions {
  /** Worker threads that each hold a sample (default 1). */
  workers?: number;
  /** The machine's memory in bytes (default os.totalmem()); for tests. */
  totalBytes?: number;
  /**
   * For runs on worker threads: the plan's limits.workerMemoryMiB. The sample must then fit the run's
   * process limit (processMemoryLimitBytes), which the pool's watchdog enforces, not just the machine.
   */
  workerMemoryMiB?: number;
  /** How the user can raise workerMemoryMiB from where they are (e.g. "--memory-limit"), named in the message. */
  raise?: string;
}

/**
 * Throws a UsageError when n points in d dimensions cannot be held: more values than a typed array allows,
 * or more memory than the machine has (`sampleMemoryBytes` against os.totalmem()). `what` names the
 * request in the message, e.g. "--n 1000000000" or "sample size 50000000 in the plan".
 */
export function checkSampleMemory(what: string, n: number, dim: number, options: MemoryCheckOptions = {}): void {
  const workers = Math.max(1, options.workers ?? 1);
  const total = options.totalBytes ?? totalmem();
  if (n * dim > MAX_TYPED_ARRAY_LENGTH) {
    throw new UsageError(
      `${what} asks for ${n} points in d = ${dim}, ${n * dim} values in one array, beyond the ${MAX_TYPED_ARRAY_LENGTH} a JavaScript typed array can hold (it would need about ${formatBytes(sampleMemoryBytes(n, dim, workers))} of memory); use n ≤ ${Math.floor(MAX_TYPED_ARRAY_LENGTH / dim)}`,
    );
  }
  const needed = sampleMemoryBytes(n, dim, workers);
  const mib = options.workerMemoryMiB;
  const limit = mib === undefined ? total : processMemoryLimitBytes(workers, mib, total);
  if (needed <= limit) return;
  const fitting = Math.floor((limit - BASE_BYTES) / (workers * bytesPerWorker(1, dim)));
  const limitOf = (w: number) => (mib === undefined ? total : processMemoryLimitBytes(w, mib, total));
  let fewer = workers - 1;
  while (fewer >= 1 && sampleMemoryBytes(n, dim, fewer) > limitOf(fewer)) fewer--;
  const fewerWorkers = fewer >= 1 ? `, or fewer workers (--workers ${fewer})` : '';
  const against =
    mib === undefined || limit >= MACHINE_FRACTION * total
      ? `this machine's ${formatBytes(total)}${mib === undefined ? '' : ` (a run may use ${Math.round(MACHINE_FRACTION * 100)}% of it)`}`
      : `the run's limit of ${formatBytes(limit)} (${workers} × limits.workerMemoryMiB ${mib} MiB + ${SUPERVISOR_MIB} MiB${options.raise ? `; ${options.raise} may raise it up to ${Math.round(MACHINE_FRACTION * 100)}% of this machine's ${formatBytes(total)}` : ''})`;
  throw new UsageError(
    `${what} needs about ${formatBytes(needed)} of memory (${workers} worker${workers === 1 ? '' : 's'} × ${n} points in d = ${dim}, about ${bytesPerWorker(1, dim)} bytes per point for the sample and the estimators' working copies), more than ${against}; use n ≤ ${Math.max(0, fitting)}${fewerWorkers}`,
  );
}
