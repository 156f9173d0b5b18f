/**
 * Worker threads started before the plan is known (src/harness/threads.ts): a run adopts them and its estimates
 * are those of workers it starts itself; those it cannot use, and those of a command that stops first, end.
 */
import { describe, expect, it } from 'vitest';
import { resolvePlan, type Plan } from '../src/harness/plan.js';
import { runPlan } from '../src/harness/runner.js';
import { assembleRun, type RunFile } from '../src/analysis/results.js';
import { earlyWorkerCounts, releaseEarlyWorkers, startWorkersEarly } from '../src/harness/threads.js';
import { main } from '../src/cli.js';

function smallPlan(): Plan {
  return resolvePlan({
    scenarios: ['normal', 'gaussian:dim=2'],
    estimators: ['kozachenko-leonenko', 'vasicek', 'histogram:bins=sturges'],
    sampleSizes: [50, 200],
    replicates: 6,
    seed: 77,
  }).plan;
}

const estimatesOf = (run: RunFile) => run.cells.map((c) => `${c.scenario}|${c.estimator}|${c.n}|${JSON.stringify(c.estimates)}`);

/** Resolves once every early worker has ended (or fails after `ms`). */
async function earlyWorkersEnded(ms = 20000): Promise<void> {
  const until = Date.now() + ms;
  while (earlyWorkerCounts.running > 0) {
    if (Date.now() > until) throw new Error(`${earlyWorkerCounts.running} early workers still running`);
    await new Promise((resolve) => setTimeout(resolve, 20));
  }
}

describe('workers started early', () => {
  it('a run adopts them, and its estimates are those of workers it starts itself', async () => {
    const plan = smallPlan();
    const own = assembleRun(await runPlan(plan, { workers: 2 }), null);
    const before = { ...earlyWorkerCounts };
    startWorkersEarly(2, plan.limits.workerMemoryMiB);
    const adopted = assembleRun(await runPlan(plan, { workers: 2 }), null);
    expect(earlyWorkerCounts.started - before.started).toBe(2);
    expect(earlyWorkerCounts.adopted - before.adopted).toBe(2);
    expect(estimatesOf(adopted)).toEqual(estimatesOf(own));
    await earlyWorkersEnded();
  });

  it('workers with another heap limit, or more than the run uses, are stopped, and the run still completes', async () => {
    const plan = smallPlan();
    const own = assembleRun(await runPlan(plan, { workers: 1, isolation: 'in-process' }), null);
    const before = { ...earlyWorkerCounts };
    startWorkersEarly(2, 128);
    startWorkersEarly(2, plan.limits.workerMemoryMiB);
    const run = assembleRun(await runPlan(plan, { workers: 1 }), null);
    expect(earlyWorkerCounts.adopted - before.adopted).toBe(1);
    expect(estimatesOf(run)).toEqual(estimatesOf(own));
    await earlyWorkersEnded();
  });

  it('a command refused on its flags, or one that never reaches a run, leaves no worker running', async () => {
    const quiet = { out: () => {}, err: () => {} };
    const before = earlyWorkerCounts.started;
    expect(await main(['bench', '--workers', '2', '--n', 'ten'], quiet)).toBe(2);
    expect(earlyWorkerCounts.started - before).toBe(2);
    await earlyWorkersEnded();
    // Help and values the command refuses start none.
    expect(await main(['bench', '--help'], quiet)).toBe(0);
    expect(await main(['bench', '--workers', '0'], quiet)).toBe(2);
    expect(earlyWorkerCounts.started - before).toBe(2);
    releaseEarlyWorkers();
  });
});
