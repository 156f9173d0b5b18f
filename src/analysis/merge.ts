/**
 * Joins shard run files into the run file an unsharded run of the same plan writes: same cells, same
 * per-replicate estimates, scores recomputed over all replicates.
 */
import { UsageError } from '../core/errors.js';
import { codeDifference } from '../harness/plan.js';
import { cellKey, finishRun, type Cell, type RunFile } from './results.js';

export function mergeShards(files: { path: string; run: RunFile }[]): RunFile {
  if (!files.length) throw new UsageError('merge needs at least one shard file');
  const first = files[0];
  for (const f of files) {
    if (f.run.fingerprint !== first.run.fingerprint) {
      const difference = codeDifference(first.run.code, f.run.code);
      if (difference)
        throw new UsageError(
          `${f.path} and ${first.path} were computed by different code: comparing ${first.path} with ${f.path}, ${difference}; rerun the shards with one version`,
        );
      throw new UsageError(`${f.path} comes from a different plan than ${first.path} (fingerprints differ); merge only shards of one plan`);
    }
    if (!f.run.shard) throw new UsageError(`${f.path} is a complete run, not a shard; nothing to merge`);
  }
  const count = first.run.shard!.count;
  const seen = new Map<number, string>();
  for (const f of files) {
    const shard = f.run.shard!;
    if (shard.count !== count) throw new UsageError(`${f.path} is shard ${shard.index}/${shard.count}, but ${first.path} is one of ${count}`);
    if (seen.has(shard.index)) throw new UsageError(`shard ${shard.index}/${count} is given twice: ${seen.get(shard.index)} and ${f.path}`);
    seen.set(shard.index, f.path);
  }
  const missing = Array.from({ length: count }, (_, i) => i + 1).filter((i) => !seen.has(i));
  if (missing.length)
    throw new UsageError(`shard${missing.length > 1 ? 's' : ''} ${missing.map((i) => `${i}/${count}`).join(', ')} missing; merge needs all ${count}`);

  const { plan } = first.run;
  const cells = new Map<string, Cell>();
  const covered = new Map<string, Set<number>>();
  const order: string[] = [];
  for (const f of files) {
    for (const cell of f.run.cells) {
      const k = cellKey(cell);
      if (!cells.has(k)) {
        cells.set(k, { ...cell, estimates: new Array<number | null>(plan.replicates).fill(null), failures: [], timing: { totalMs: 0, meanMs: 0 } });
        covered.set(k, new Set());
        order.push(k);
      }
      const target = cells.get(k)!;
      const have = covered.get(k)!;
      const failed = new Set(cell.failures.map((x) => x.replicate));
      cell.estimates.forEach((v, r) => {
        if (v === null && !failed.has(r)) return;
        if (have.has(r))
          throw new UsageError(`${f.path}: replicate ${r} of ${k} is also in another shard; were the shards made with different --shard counts?`);
        have.add(r);
        target.estimates[r] = v;
      });
      target.failures.push(...cell.failures);
      target.timing.totalMs += cell.timing.totalMs;
    }
  }
  const merged: Cell[] = order.map((k) => {
    const cell = cells.get(k)!;
    const have = covered.get(k)!;
    if (have.size !== plan.replicates) {
      throw new UsageError(`the shards hold ${have.size} of ${plan.replicates} replicates of ${k}; was a shard interrupted? resume it, then merge`);
    }
    cell.failures.sort((a, b) => a.replicate - b.replicate);
    cell.timing.meanMs = cell.timing.totalMs / plan.replicates;
    return cell;
  });
  // Present cells in the order an unsharded run writes them: scenario, n, role, perturbation as planned; the sort
  // is stable, so ties keep the order in which the shards first list them.
  const rankOf = (list: readonly (string | number | null)[], value: string | number | null) => list.indexOf(value);
  const variants: (string | null)[] = [null, ...(plan.robustness?.perturbations ?? [])];
  const roles = ['main', 'tuning', 'perturbed'];
  merged.sort(
    (a, b) =>
      rankOf(plan.scenarios, a.scenario) - rankOf(plan.scenarios, b.scenario) ||
      rankOf(plan.sampleSizes, a.n) - rankOf(plan.sampleSizes, b.n) ||
      rankOf(roles, a.role) - rankOf(roles, b.role) ||
      rankOf(variants, a.perturbation) - rankOf(variants, b.perturbation),
  );
  return finishRun({
    plan,
    fingerprint: first.run.fingerprint,
    code: first.run.code,
    shard: null,
    complete: true,
    workers: Math.max(...files.map((f) => f.run.workers)),
    // Shards may run at once on many machines: the merged wall time is the longest shard's; sessions list them all.
    wallSeconds: Math.max(...files.map((f) => f.run.wallSeconds)),
    sessions: files.flatMap((f) => f.run.sessions),
    scenarios: first.run.scenarios,
    skipped: first.run.skipped,
    cells: merged,
  });
}
