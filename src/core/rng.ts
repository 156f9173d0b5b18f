import { createHash } from 'node:crypto';
import type { Rng, Sample, Scenario } from './contracts.js';
import { loadPackage } from './vendor.js';
import { UsageError } from './errors.js';
import { describeValue } from './spec.js';
import { checkIntegerArgument, MAX_REPLICATES, MAX_SAMPLE_SIZE } from './options.js';
import { checkSampleMemory } from './memory.js';

const seedrandom = loadPackage<typeof import('seedrandom')>('seedrandom');

/** The base seed when none is given: plans without one, the default plans and the advice's benchmarks. */
export const DEFAULT_SEED = 20261201;

/**
 * Per-replicate seeds. A replicate's sample depends only on (base seed, scenario id, n, replicate index),
 * through a hash of a canonical string, so any replicate can be regenerated alone and every estimator sees
 * the same draws whatever the worker count, shard split or order.
 */
export function replicateSeed(baseSeed: number, scenarioId: string, n: number, replicate: number): string {
  const canonical = `hhat-sample-v1\nseed=${baseSeed}\nscenario=${scenarioId}\nn=${n}\nreplicate=${replicate}`;
  return createHash('sha256').update(canonical).digest('hex');
}

/**
 * A uniform stream on [0, 1) with 53-bit resolution. xor4096 (Brent's xorgens) has a period far beyond
 * any run; the 53-bit `double` matters because 32-bit draws collide (ties) in samples of 10^5 and more.
 */
export function rngFromSeed(seed: string): Rng {
  const generator = seedrandom.xor4096(seed);
  return () => generator.double();
}

export function replicateRng(baseSeed: number, scenarioId: string, n: number, replicate: number): Rng {
  return rngFromSeed(replicateSeed(baseSeed, scenarioId, n, replicate));
}

/**
 * The sample replicate `replicate` of a cell sees (its Q sample too, for a divergence): the runner draws every
 * cell's samples here, and `hhat draw` writes them out, so both see the same bytes.
 */
export function drawReplicate(scenario: Scenario, baseSeed: number, n: number, replicate: number): Sample {
  // A library call is held to what `hhat draw` allows; a fractional n would otherwise be a RangeError in the sampler.
  if (typeof scenario !== 'object' || scenario === null || typeof scenario.sample !== 'function')
    throw new UsageError(`drawReplicate: the scenario must be one parseScenario returns; got ${describeValue(scenario)}`);
  checkIntegerArgument('drawReplicate: seed', baseSeed, 0);
  checkIntegerArgument('drawReplicate: n', n, 1, MAX_SAMPLE_SIZE);
  checkIntegerArgument('drawReplicate: replicate', replicate, 0, MAX_REPLICATES - 1);
  checkSampleMemory(`drawReplicate: n = ${n}`, n, scenario.dim);
  return drawCheckedReplicate(scenario, baseSeed, n, replicate);
}

/**
 * drawReplicate without its argument checks, for the harness, whose plan was checked once before the run: the
 * checks (and a memory probe of the machine) would otherwise run on every replicate of every cell.
 */
export function drawCheckedReplicate(scenario: Scenario, baseSeed: number, n: number, replicate: number): Sample {
  return scenario.sample(replicateRng(baseSeed, scenario.id, n, replicate), n);
}
