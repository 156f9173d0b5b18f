/**
 * dequantize=auto|STEP (src/core/spec.ts, DEQUANTIZE_SETTING): x + (u − ½)·Δ_j on every value of a column with a
 * recording step Δ_j, u uniform on [0, 1). For data recorded on a lattice of step Δ this is a continuous
 * variable whose differential entropy is never below the recorded one's and tends to the underlying variable's
 * as Δ → 0, and it has no exact repeats, so estimators that take logs of distances can run.
 *
 * The noise is seeded by the sample's own bytes (SHA-256 of the values, n and dim), so the same data always
 * give the same estimate, whichever run, worker or command makes it; a divergence's Q sample is jittered with
 * its own bytes' seed.
 */
import { createHash } from 'node:crypto';
import type { Sample } from '../../src/core/contracts.js';
import { withRows } from '../../src/core/sample.js';
import { rngFromSeed } from '../../src/core/rng.js';
import type { Dequantize } from '../../src/core/spec.js';
import { detectSteps, formatStep } from '../../src/math/lattice.js';
import { SampleMemo } from './sample-memo.js';

/** What dequantize did, per column: the step jittered within (null: left as recorded) and how it was found. */
export interface EstimateResolution {
  steps: (number | null)[];
  methods: string[];
  details: string[];
}

function contentSeed(sample: Sample): string {
  const bytes = new Uint8Array(sample.data.buffer, sample.data.byteOffset, sample.n * sample.dim * 8);
  return createHash('sha256').update(`hhat-dequantize-v1\nn=${sample.n}\ndim=${sample.dim}\n`).update(bytes).digest('hex');
}

function jitterOne(sample: Sample, how: Exclude<Dequantize, 'none'>): { sample: Sample; resolution: EstimateResolution } {
  const resolution: EstimateResolution =
    how === 'auto'
      ? (() => {
          const reports = detectSteps(sample);
          return { steps: reports.map((r) => r.step), methods: reports.map((r) => r.method), details: reports.map((r) => r.detail) };
        })()
      : {
          steps: Array.from({ length: sample.dim }, () => how),
          methods: Array.from({ length: sample.dim }, () => 'given'),
          details: Array.from({ length: sample.dim }, () => `step ${formatStep(how)}, as given`),
        };
  if (!resolution.steps.some((s) => s !== null)) return { sample, resolution };
  const { n, dim } = sample;
  const rng = rngFromSeed(contentSeed(sample));
  const data = sample.data.slice();
  const steps = resolution.steps;
  for (let i = 0; i < n; i++) {
    for (let j = 0; j < dim; j++) {
      const step = steps[j];
      const u = rng();
      if (step !== null) data[i * dim + j] += (u - 0.5) * step;
    }
  }
  return { sample: withRows(sample, sample.n, data), resolution };
}

/**
 * One jittered copy per sample and setting, kept while the sample lives: every estimator that dequantizes the
 * same draw gets the same array, so the work kept per draw (the k-NN estimators' shared neighbour search) is
 * shared too, and the content hash is taken once.
 */
const jittered = new SampleMemo<{ sample: Sample; resolution: EstimateResolution }>();

function jitterOnce(sample: Sample, how: Exclude<Dequantize, 'none'>): { sample: Sample; resolution: EstimateResolution } {
  const data = sample.data.subarray(0, sample.n * sample.dim);
  const done = jittered.get(data, `${how}|${sample.n}|${sample.dim}`, () => jitterOne({ n: sample.n, dim: sample.dim, data }, how));
  // The sample's other fields (X's and Y's widths, a divergence's Q) are the caller's; the kept array is shared.
  return { sample: withRows(sample, sample.n, done.sample.data), resolution: done.resolution };
}

/** The sample jittered within its recording steps (and its Q sample within Q's), with what was done. */
export function dequantizeSample(sample: Sample, how: Dequantize): { sample: Sample; resolution: EstimateResolution | undefined } {
  if (how === 'none') return { sample, resolution: undefined };
  const p = jitterOnce(sample, how);
  if (!sample.q) return p;
  const q = jitterOnce(sample.q, how);
  return { sample: withRows(p.sample, p.sample.n, p.sample.data, q.sample), resolution: p.resolution };
}
