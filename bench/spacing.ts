/**
 * The four spacing estimators at n = 10^6 against scipy.stats.differential_entropy on the same data.
 * Run alone with `npx tsx bench/spacing.ts`. Both sides: best of 3 wall-clock times, including the sort.
 * SciPy's Correa cannot run at 10^6 (its index arrays need ~16 GB), so Correa is compared at 10^5 and our
 * time at 10^6 is listed alone.
 */
import { spawnSync } from 'node:child_process';
import { mkdtempSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { fileURLToPath, pathToFileURL } from 'node:url';
import normalRandom from '@stdlib/random-base-normal';
import type { Sample } from '../src/core/contracts.js';
import { rngFromSeed } from '../src/core/rng.js';
import { spacingEstimators } from '../estimators/spacing.js';
import { sortAscending } from '../src/math/sort.js';

const N = 1_000_000;
const CORREA_SCIPY_N = 100_000;

interface ScipyRun {
  n: number;
  seconds: number;
  value: number;
}

function bestOf3(run: () => number): { seconds: number; value: number } {
  let best = Infinity;
  let value = NaN;
  for (let r = 0; r < 3; r++) {
    const start = process.hrtime.bigint();
    value = run();
    best = Math.min(best, Number(process.hrtime.bigint() - start) / 1e9);
  }
  return { seconds: best, value };
}

function runScipy(path: string): { version: string; results: Record<string, ScipyRun> } | string {
  const script = fileURLToPath(new URL('./scipy_spacing.py', import.meta.url));
  const run = spawnSync('python3', [script, path, '--correa-n', String(CORREA_SCIPY_N)], { encoding: 'utf8', maxBuffer: 1 << 20 });
  if (run.status !== 0) return `SciPy run failed: ${(run.stderr || run.error?.message || '').trim().split('\n').pop()}`;
  const parsed = JSON.parse(run.stdout) as { scipy: string; numpy: string; results: Record<string, ScipyRun> };
  return { version: `SciPy ${parsed.scipy}, NumPy ${parsed.numpy}`, results: parsed.results };
}

const ms = (seconds: number): string => `${(seconds * 1000).toFixed(1)} ms`;

export async function benchSpacing(): Promise<string[]> {
  const draw = normalRandom.factory(0, 1, { prng: rngFromSeed('bench-spacing') });
  const data = Float64Array.from({ length: N }, () => draw());
  const sample: Sample = { n: N, dim: 1, data };
  const lines: string[] = [];
  const dir = mkdtempSync(join(tmpdir(), 'hhat-bench-spacing-'));
  let scipy: ReturnType<typeof runScipy>;
  try {
    const path = join(dir, 'values.f64');
    writeFileSync(path, new Uint8Array(data.buffer, data.byteOffset, data.byteLength)); // little-endian doubles
    scipy = runScipy(path);
  } finally {
    rmSync(dir, { recursive: true, force: true });
  }
  if (typeof scipy === 'string') lines.push(scipy);
  else lines.push(`reference: ${scipy.version}; standard normal sample, n = ${N}, default window m = ${Math.floor(Math.sqrt(N) + 0.5)}`);

  const typedSort = bestOf3(() => Float64Array.from(data).sort()[0]);
  const radixSort = bestOf3(() => sortAscending(Float64Array.from(data))[0]);
  lines.push(`sort ${N} doubles (copy included): Float64Array.prototype.sort ${ms(typedSort.seconds)}, radix sort ${ms(radixSort.seconds)}`);

  for (const estimator of spacingEstimators) {
    const ours = bestOf3(() => estimator.estimate(sample, { m: 'auto' }));
    const reference = typeof scipy === 'string' ? undefined : scipy.results[estimator.id];
    if (!reference) {
      lines.push(`${estimator.id}: n = ${N} ours ${ms(ours.seconds)}`);
      continue;
    }
    if (reference.n === N) {
      const agreement = Math.abs(ours.value - reference.value) / Math.abs(reference.value);
      lines.push(
        `${estimator.id}: n = ${N} ours ${ms(ours.seconds)}, SciPy ${ms(reference.seconds)}, ` +
          `SciPy/ours ${(reference.seconds / ours.seconds).toFixed(2)}×; values agree to ${agreement.toExponential(1)} relative`,
      );
      continue;
    }
    const subsample: Sample = { n: reference.n, dim: 1, data: data.subarray(0, reference.n) };
    const oursSmall = bestOf3(() => estimator.estimate(subsample, { m: 'auto' }));
    const agreement = Math.abs(oursSmall.value - reference.value) / Math.abs(reference.value);
    lines.push(
      `${estimator.id}: n = ${reference.n} ours ${ms(oursSmall.seconds)}, SciPy ${ms(reference.seconds)}, ` +
        `SciPy/ours ${(reference.seconds / oursSmall.seconds).toFixed(1)}×, values agree to ${agreement.toExponential(1)} relative; ` +
        `n = ${N} ours ${ms(ours.seconds)} (SciPy's index arrays would need ~${(((2 * Math.floor(Math.sqrt(N) + 0.5) + 1) * N * 8) / 1e9).toFixed(0)} GB each)`,
    );
  }
  return lines;
}

if (import.meta.url === pathToFileURL(process.argv[1] ?? '').href) {
  for (const line of await benchSpacing()) console.log(line);
}
