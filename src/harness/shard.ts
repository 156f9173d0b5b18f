/**
 * `--shard i/N` (1-based) or `--shard auto`: the slice read from a batch scheduler's array-job environment.
 *   Slurm job arrays:        SLURM_ARRAY_TASK_ID, SLURM_ARRAY_TASK_MIN, SLURM_ARRAY_TASK_COUNT
 *   Kubernetes indexed Jobs: JOB_COMPLETION_INDEX (0-based) with the count from HHAT_SHARD_COUNT
 *   anything else (a CI matrix): HHAT_SHARD_INDEX (1-based) and HHAT_SHARD_COUNT
 * `--shard auto/N` gives the count explicitly when the environment only has an index.
 */
import { UsageError } from '../core/errors.js';
import type { Shard } from './runner.js';

function integer(name: string, text: string | undefined): number | undefined {
  if (text === undefined || text.trim() === '') return undefined;
  const value = Number(text);
  if (!Number.isInteger(value)) throw new UsageError(`--shard auto: ${name}=${text} is not an integer`);
  return value;
}

function checked(index: number, count: number, from: string): Shard {
  if (!(count >= 1)) throw new UsageError(`--shard: the shard count ${count} (${from}) must be at least 1`);
  if (!(index >= 1 && index <= count)) throw new UsageError(`--shard: shard ${index} of ${count} (${from}) is out of range; shards are numbered 1 to ${count}`);
  return { index, count };
}

export function shardFromEnvironment(env: NodeJS.ProcessEnv, explicitCount?: number): Shard {
  const slurmId = integer('SLURM_ARRAY_TASK_ID', env.SLURM_ARRAY_TASK_ID);
  if (slurmId !== undefined) {
    const min = integer('SLURM_ARRAY_TASK_MIN', env.SLURM_ARRAY_TASK_MIN) ?? 0;
    const count = explicitCount ?? integer('SLURM_ARRAY_TASK_COUNT', env.SLURM_ARRAY_TASK_COUNT);
    if (count === undefined) throw new UsageError('--shard auto: Slurm gives SLURM_ARRAY_TASK_ID but no SLURM_ARRAY_TASK_COUNT; use --shard auto/N');
    return checked(slurmId - min + 1, count, 'from SLURM_ARRAY_TASK_ID − SLURM_ARRAY_TASK_MIN + 1');
  }
  const k8sIndex = integer('JOB_COMPLETION_INDEX', env.JOB_COMPLETION_INDEX);
  if (k8sIndex !== undefined) {
    const count = explicitCount ?? integer('HHAT_SHARD_COUNT', env.HHAT_SHARD_COUNT);
    if (count === undefined)
      throw new UsageError(
        "--shard auto: JOB_COMPLETION_INDEX is set but the count is not; set HHAT_SHARD_COUNT to the Job's completions, or use --shard auto/N",
      );
    return checked(k8sIndex + 1, count, 'from JOB_COMPLETION_INDEX + 1');
  }
  const index = integer('HHAT_SHARD_INDEX', env.HHAT_SHARD_INDEX);
  const count = explicitCount ?? integer('HHAT_SHARD_COUNT', env.HHAT_SHARD_COUNT);
  if (index !== undefined && count !== undefined) return checked(index, count, 'from HHAT_SHARD_INDEX/HHAT_SHARD_COUNT');
  if (index !== undefined)
    throw new UsageError('--shard auto: HHAT_SHARD_INDEX is set but HHAT_SHARD_COUNT is not; set it to the number of shards, or use --shard auto/N');
  throw new UsageError(
    '--shard auto found no array-job variables; it reads SLURM_ARRAY_TASK_ID (Slurm), JOB_COMPLETION_INDEX (Kubernetes) or HHAT_SHARD_INDEX and HHAT_SHARD_COUNT',
  );
}

export function parseShard(text: string, env: NodeJS.ProcessEnv = process.env): Shard {
  const auto = /^auto(?:\/(\d+))?$/.exec(text.trim());
  if (auto) return shardFromEnvironment(env, auto[1] === undefined ? undefined : Number(auto[1]));
  const match = /^(\d+)\/(\d+)$/.exec(text.trim());
  if (!match) throw new UsageError(`--shard ${text} is not allowed; write i/N (1 ≤ i ≤ N), auto, or auto/N`);
  return checked(Number(match[1]), Number(match[2]), `--shard ${text}`);
}
