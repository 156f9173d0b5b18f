/**
 * Merging shard run files: a shard file that lost cells (edited by hand, or damaged) is refused, naming the file
 * and the cells, instead of being merged into a run file that says it is complete; intact shards still merge to
 * the unsharded run's estimates.
 */
import { existsSync, mkdtempSync, readFileSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { beforeAll, describe, expect, it } from 'vitest';
import { resolvePlan } from '../src/harness/plan.js';
import { runPlan } from '../src/harness/runner.js';
import { main } from '../src/cli.js';
import { assembleRun, readRunFile, writeRunFile, type RunFile } from '../src/analysis/results.js';
import { mergeShards } from '../src/analysis/merge.js';
import { UsageError } from '../src/core/errors.js';

const dir = mkdtempSync(join(tmpdir(), 'hhat-merge-'));

// Each of the three shards runs one scenario here (both n, with its tuning, perturbed and dequantized cells);
// vasicek does not run on the two-dimensional scenario, so the plan's skips matter too.
const plan = resolvePlan({
  scenarios: ['normal', 'exponential', 'gaussian:dim=2'],
  estimators: ['kozachenko-leonenko', 'vasicek', 'histogram:bins=sturges'],
  sampleSizes: [50, 400],
  replicates: 12,
  seed: 4242,
  robustness: { perturbations: ['rescale:c=1000', 'quantize:step=0.1'] },
}).plan;

const NORMAL = 'normal:mu=0,sigma=1';
const VASICEK = 'vasicek:m=auto';
const KL = 'kozachenko-leonenko:k=3,norm=euclidean';
const HISTOGRAM = 'histogram:bins=sturges,scale=1,width=none,correction=none';
const ADVICE = 'was the file edited, or the shard interrupted? rerun or resume that shard, then merge';

const shardPath = (i: number) => join(dir, `s${i}.json`);
let unsharded: RunFile;

beforeAll(async () => {
  unsharded = assembleRun(await runPlan(plan, { workers: 1, isolation: 'in-process' }), null);
  for (let i = 1; i <= 3; i++) {
    const shard = { index: i, count: 3 };
    writeRunFile(shardPath(i), assembleRun(await runPlan(plan, { workers: 1, isolation: 'in-process', shard }), shard));
  }
}, 120_000);

type Edit = (run: RunFile) => RunFile;

/**
 * The three shards as merge reads them, each written again after `all` changed its JSON, and shard 2 after `edit`
 * too (as `name`; the others as `name` with their own index after it).
 */
function shardsWith(name: string, edit: Edit, all: Edit = (r) => r): { path: string; run: RunFile }[] {
  return [1, 2, 3].map((i) => {
    const read = all(JSON.parse(readFileSync(shardPath(i), 'utf8')) as RunFile);
    const path = join(dir, i === 2 ? name : name.replace(/\.json$/, `.${i}.json`));
    writeFileSync(path, JSON.stringify(i === 2 ? edit(read) : read));
    return { path, run: readRunFile(path) };
  });
}

const without =
  (drop: (c: RunFile['cells'][number]) => boolean): Edit =>
  (run) => {
    const kept = run.cells.filter((c) => !drop(c));
    // The edit must remove something, or the refusals below would test nothing.
    expect(kept.length).toBeLessThan(run.cells.length);
    return { ...run, cells: kept };
  };

/** Shards written by other code than this build: merge cannot rebuild their split and falls back to what the cells imply. */
const otherCode: Edit = (run) => ({ ...run, code: { ...run.code, hhat: { ...run.code.hhat, build: 'f'.repeat(64) } } });

function refusal(files: { path: string; run: RunFile }[]): string {
  try {
    mergeShards(files);
  } catch (error) {
    expect(error).toBeInstanceOf(UsageError);
    return (error as Error).message;
  }
  throw new Error('merge accepted the shards');
}

const estimatesOf = (run: RunFile) => run.cells.map((c) => `${c.scenario}|${c.estimator}|${c.n}|${c.perturbation}|${JSON.stringify(c.estimates)}`);

describe('merge', () => {
  it('intact shards merge to the unsharded run, by the planned split and by what the cells imply', () => {
    for (const all of [(r: RunFile) => r, otherCode]) {
      const merged = mergeShards(shardsWith('s2-intact.json', (r) => r, all));
      expect(merged.complete).toBe(true);
      expect(estimatesOf(merged)).toEqual(estimatesOf(unsharded));
      expect(merged.rankings).toEqual(unsharded.rankings);
    }
  });

  it('a shard file with a cell deleted is refused by `hhat merge` with exit 2, one line naming the file and the cell, and no merged file', async () => {
    const files = shardsWith(
      's2fewer.json',
      without((c) => c.scenario === NORMAL && c.estimator === VASICEK && c.n === 400 && c.role === 'main'),
    );
    const out = join(dir, 'mt.json');
    let err = '';
    const code = await main(['merge', ...files.map((f) => f.path), '--out', out], { out: () => {}, err: (t) => (err += `${t}\n`) });
    expect({ code, err: err.trim().split('\n') }).toEqual({
      code: 2,
      err: [`hhat: ${files[1].path} (shard 2/3) lacks 1 cell that the plan gives that shard: scenario ${NORMAL}, estimator ${VASICEK}, n=400; ${ADVICE}`],
    });
    expect(existsSync(out)).toBe(false);
  });

  // Found by a tester: merge replaced an unrelated finished run at --out (hours of another plan's work), where bench
  // asks for --force.
  it('does not replace a run file at --out without --force, and does with it', async () => {
    const files = [1, 2, 3].map(shardPath);
    const out = join(dir, 'kept.json');
    writeRunFile(out, unsharded);
    const before = readFileSync(out, 'utf8');
    let err = '';
    const io = { out: () => {}, err: (t: string) => (err += `${t}\n`) };
    expect(await main(['merge', ...files, '--out', out, '--quiet'], io)).toBe(2);
    expect(err).toBe(`hhat: --out ${out} already holds a run file; add --force to replace it, or choose another --out\n`);
    expect(readFileSync(out, 'utf8')).toBe(before);
    expect(await main(['merge', ...files, '--out', out, '--quiet', '--force'], io)).toBe(0);
    expect(estimatesOf(readRunFile(out))).toEqual(estimatesOf(unsharded));
  });

  it('names the role, perturbation and tuning of a missing cell, and every cell of a scenario and n deleted whole', () => {
    const twin = `${VASICEK},dequantize=auto`;
    expect(
      refusal(
        shardsWith(
          's2-twin.json',
          without((c) => c.estimator === twin),
        ),
      ),
    ).toBe(
      `${join(dir, 's2-twin.json')} (shard 2/3) lacks 1 cell that the plan gives that shard: scenario ${NORMAL}, estimator ${twin}, n=400, role perturbed, perturbation quantize:step=0.1, tuning dequantize=auto of ${VASICEK}; ${ADVICE}`,
    );
    expect(
      refusal(
        shardsWith(
          's2-tuning.json',
          without((c) => c.estimator === 'vasicek:m=20'),
        ),
      ),
    ).toBe(
      `${join(dir, 's2-tuning.json')} (shard 2/3) lacks 1 cell that the plan gives that shard: scenario ${NORMAL}, estimator vasicek:m=20, n=400, role tuning, tuning m=20 of ${VASICEK}; ${ADVICE}`,
    );
    expect(
      refusal(
        shardsWith(
          's2-n50.json',
          without((c) => c.n === 50),
        ),
      ),
    ).toBe(
      `${join(dir, 's2-n50.json')} (shard 2/3) lacks 3 cells that the plan gives that shard: scenario ${NORMAL}, estimator ${KL}, n=50; scenario ${NORMAL}, estimator ${VASICEK}, n=50; scenario ${NORMAL}, estimator ${HISTOGRAM}, n=50; ${ADVICE}`,
    );
  });

  it('without the planned split (shards of other code), the cells a shard holds at a scenario and n imply the rest', () => {
    const edited = join(dir, 's2-other-code.json');
    const implied = (drop: Edit) => refusal(shardsWith('s2-other-code.json', drop, otherCode));
    expect(implied(without((c) => c.estimator === VASICEK && c.n === 400 && c.role === 'main'))).toBe(
      `${edited} (shard 2/3) lacks 1 cell that the plan runs beside the cells it holds at the same scenario and n: scenario ${NORMAL}, estimator ${VASICEK}, n=400; ${ADVICE}`,
    );
    expect(implied(without((c) => c.estimator === `${KL},dequantize=auto`))).toBe(
      `${edited} (shard 2/3) lacks 1 cell that the plan runs beside the cells it holds at the same scenario and n: scenario ${NORMAL}, estimator ${KL},dequantize=auto, n=400, role perturbed, perturbation quantize:step=0.1, tuning dequantize=auto of ${KL}; ${ADVICE}`,
    );
    // No cell of normal at n = 50 is left in any shard, so no file can be named; the cells still are.
    expect(implied(without((c) => c.n === 50))).toBe(
      `none of the shards holds 3 cells that the plan runs: scenario ${NORMAL}, estimator ${KL}, n=50; scenario ${NORMAL}, estimator ${VASICEK}, n=50; scenario ${NORMAL}, estimator ${HISTOGRAM}, n=50; was a shard file edited, or a shard interrupted? rerun or resume the shard that runs them, then merge`,
    );
  });
});
