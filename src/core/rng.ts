import { createHash } from 'node:crypto';
import type { Rng, Sample, Scenario } from './contracts.js';
import { loadPackage } from './vendor.js';

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
  return scenario.sample(replicateRng(baseSeed, scenario.id, n, replicate), n);
}
