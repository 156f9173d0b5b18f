/**
 * Joins shard run files into the run file an unsharded run of the same plan writes: same cells, same
 * per-replicate estimates, scores recomputed over all replicates.
 */
import { UsageError } from '../core/errors.js';
import { countOf } from '../core/format.js';
import { buildContext } from '../harness/context.js';
import { parsePerturbation } from '../harness/perturb.js';
import { codeDifference, planCode } from '../harness/plan.js';
import { shardUnits, type Shard } from '../harness/runner.js';
import { planUnits } from '../harness/work.js';
import { cellIdentity, cellKey, finishRun, type Cell, type CellIdentity, type RunFile } from './results.js';

/** Cells a merge would otherwise leave out: of one shard file, or (path null) of none that could be named. */
interface MissingCells {
  path: string | null;
  shard: Shard | null;
  cells: CellIdentity[];
  /** Whence the cells are known to belong there, for the refusal. */
  basis: string;
}

function describeCell(c: CellIdentity): string {
  const parts = [`scenario ${c.scenario}`, `estimator ${c.estimator}`, `n=${c.n}`];
  if (c.role !== 'main') parts.push(`role ${c.role}`);
  if (c.perturbation !== null) parts.push(`perturbation ${c.perturbation}`);
  if (c.tuning) parts.push(`tuning ${c.tuning.setting}=${c.tuning.value} of ${c.tuning.base}`);
  return parts.join(', ');
}

const LISTED = 4;

function refusal(m: MissingCells): string {
  const shown = m.cells.slice(0, LISTED).map(describeCell).join('; ');
  const more = m.cells.length > LISTED ? `; and ${m.cells.length - LISTED} more` : '';
  const cells = `${countOf(m.cells.length, 'cell')} ${m.basis}: ${shown}${more}`;
  if (m.path === null)
    return `none of the shards holds ${cells}; was a shard file edited, or a shard interrupted? rerun or resume the shard that runs them, then merge`;
  return `${m.path} (shard ${m.shard!.index}/${m.shard!.count}) lacks ${cells}; was the file edited, or the shard interrupted? rerun or resume that shard, then merge`;
}

/**
 * The cells each shard's units give it, split as the shards were (index i − 1 for shard i/N). Null when this hhat
 * cannot rebuild that split: merge loads no estimator modules or commands, and other code may plan other tuning
 * points or skips; the merge then falls back to impliedMissing.
 */
function plannedShardCells(run: RunFile): CellIdentity[][] | null {
  const { plan } = run;
  if (plan.modules.length || plan.commands?.length || codeDifference(run.code, planCode(plan)) !== null) return null;
  // With shifts, as the run itself built it: whether a perturbation applies can depend on its shift being known.
  const context = buildContext(plan);
  const { units } = planUnits(context);
  const { count } = run.shard!;
  return Array.from({ length: count }, (_, i) => {
    const cells = new Map<string, CellIdentity>();
    for (const u of shardUnits(units, { index: i + 1, count })) {
      const unit = units[u];
      for (const series of unit.series) {
        const cell = cellIdentity(context, unit, series);
        cells.set(cellKey(cell), cell);
      }
    }
    return [...cells.values()];
  });
}

/**
 * Without the split, what a shard must hold follows from what it does hold: a unit runs every series of its
 * scenario and n, so a shard with one cell of a scenario at an n has every cell the plan runs there. Tuning points
 * and dequantized twins are as any shard lists them (they depend on code, not on the plan alone). A scenario and n
 * of which no shard holds a cell cannot be laid at one shard's door.
 */
function impliedMissing(files: { path: string; run: RunFile }[]): MissingCells | null {
  const { plan, skipped } = files[0].run;
  const skips = new Set(skipped.map((s) => `${s.scenario}|${s.estimator}`));
  const variants = new Map<string, CellIdentity>();
  for (const f of files) for (const c of f.run.cells) if (c.tuning) variants.set(`${c.role}|${c.estimator}`, c);
  const robustness = plan.robustness;
  const expected = (scenario: string, n: number): CellIdentity[] => {
    const runnable = plan.estimators.filter((e) => !skips.has(`${scenario}|${e}`));
    const cell = (estimator: string, role: Cell['role'], perturbation: string | null, tuning: Cell['tuning'] = null): CellIdentity => ({
      scenario,
      estimator,
      n,
      role,
      perturbation,
      tuning,
    });
    const cells = runnable.map((e) => cell(e, 'main', null));
    if (!robustness || n !== robustness.sampleSize || !runnable.length) return cells;
    const of = (role: Cell['role']) => [...variants.values()].filter((v) => v.role === role && runnable.includes(v.tuning!.base));
    cells.push(...of('tuning').map((v) => cell(v.estimator, 'tuning', null, v.tuning)));
    for (const p of robustness.perturbations) {
      if (skips.has(`${scenario}|(all, under ${p})`)) continue;
      cells.push(...runnable.map((e) => cell(e, 'perturbed', p)));
      if (parsePerturbation(p).kind === 'quantize') cells.push(...of('perturbed').map((v) => cell(v.estimator, 'perturbed', p, v.tuning)));
    }
    return cells;
  };
  const group = (c: { scenario: string; n: number }) => JSON.stringify([c.scenario, c.n]);
  const heldSomewhere = new Set<string>();
  for (const f of files) {
    const held = new Set(f.run.cells.map(cellKey));
    const groups = new Map(f.run.cells.map((c) => [group(c), c]));
    const cells = [...groups.values()].flatMap((c) => expected(c.scenario, c.n)).filter((c) => !held.has(cellKey(c)));
    if (cells.length) return { path: f.path, shard: f.run.shard, cells, basis: 'that the plan runs beside the cells it holds at the same scenario and n' };
    for (const g of groups.keys()) heldSomewhere.add(g);
  }
  const cells = plan.scenarios.flatMap((s) => plan.sampleSizes.flatMap((n) => (heldSomewhere.has(group({ scenario: s, n })) ? [] : expected(s, n))));
  return cells.length ? { path: null, shard: null, cells, basis: 'that the plan runs' } : null;
}

/** Cells the plan gives a shard that its file does not hold: a cell deleted from the file is otherwise merged away unseen. */
function missingCells(files: { path: string; run: RunFile }[]): MissingCells | null {
  const planned = plannedShardCells(files[0].run);
  if (!planned) return impliedMissing(files);
  for (const f of files) {
    const held = new Set(f.run.cells.map(cellKey));
    const cells = planned[f.run.shard!.index - 1].filter((c) => !held.has(cellKey(c)));
    if (cells.length) return { path: f.path, shard: f.run.shard, cells, basis: 'that the plan gives that shard' };
  }
  return null;
}

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

  const missingCell = missingCells(files);
  if (missingCell) throw new UsageError(refusal(missingCell));

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
