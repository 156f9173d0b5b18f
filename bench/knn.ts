/**
 * The k-NN index (src/math/knn.ts) against SciPy's cKDTree on the same seeded data, in the same run.
 * Run alone with `npx tsx bench/knn.ts`; `npx tsx bench/knn.ts --accuracy` instead reruns the Monte-Carlo
 * study behind the weighted Kozachenko–Leonenko default k and the Gaussian tolerances in
 * test/nearest-neighbour.test.ts (several minutes).
 *
 * Speed: all-points 4-NN distances at n = 100000, tree build included on both sides, against SciPy's
 * `cKDTree(X).query(X, k=5, workers=1)` (which finds each point itself first, hence k = 5), best of 3 each
 * (one run each at d = 16, where a run takes minutes). Targets: at most 1.5× SciPy at d = 3 and at most
 * 1.3× at d = 8. Also the max norm, d = 1, a table for d = 5, 8, 10, 16 (normal and uniform data), radius
 * counts against `query_ball_point(..., return_length=True)`, and the npm package kd-tree-javascript at a
 * smaller n. Every SciPy result is also compared value by value with ours. The machine may be shared, so
 * every row shows the 1-minute load average when it finished (as `uptime` prints it); ratios are only
 * meaningful because both sides run in the same process run, one right after the other. `--dims 8` (or
 * `--dims 5,8`) limits the table to those dimensions; the d = 16 rows alone take several minutes.
 */
import { spawnSync } from 'node:child_process';
import { createRequire } from 'node:module';
import { mkdtempSync, readFileSync, rmSync, writeFileSync } from 'node:fs';
import { loadavg, tmpdir } from 'node:os';
import { join } from 'node:path';
import { fileURLToPath, pathToFileURL } from 'node:url';
import normalRandom from '@stdlib/random-base-normal';
import { KnnIndex, type KnnNorm } from '../src/math/knn.js';
import { rngFromSeed } from '../src/core/rng.js';
import { kozachenkoLeonenkoEntropy, weightedKozachenkoLeonenkoEntropy } from '../estimators/nearest-neighbour.js';

const TARGET_N = 100_000;
const K = 4;
const KD_TREE_JAVASCRIPT_N = 20_000;

type Shape = 'uniform' | 'normal';

function points(shape: Shape, n: number, dim: number, seed: string): Float64Array {
  const rng = rngFromSeed(seed);
  if (shape === 'uniform') return Float64Array.from({ length: n * dim }, () => rng());
  const draw = normalRandom.factory(0, 1, { prng: rng });
  return Float64Array.from({ length: n * dim }, () => draw());
}

/** Best wall time of `runs` runs, and the last run's result. */
export function bestOf<T>(runs: number, run: () => T): { seconds: number; result: T } {
  let best = Infinity;
  let result!: T;
  for (let r = 0; r < runs; r++) {
    const start = process.hrtime.bigint();
    result = run();
    best = Math.min(best, Number(process.hrtime.bigint() - start) / 1e9);
  }
  return { seconds: best, result };
}

/** Best wall time of three runs, and the last run's result. */
export function bestOf3<T>(run: () => T): { seconds: number; result: T } {
  return bestOf(3, run);
}

/** The 1-, 5- and 15-minute load averages, as `uptime` shows them. */
const load = (): string =>
  loadavg()
    .map((value) => value.toFixed(2))
    .join(', ');

const ms = (seconds: number): string => `${(seconds * 1000).toFixed(1)} ms`;

interface ScipyRun {
  version: string;
  seconds: number;
  output: Buffer;
}

/** Runs bench/scipy_knn.py on data written to a temporary directory; a string on failure. */
function runScipy(mode: 'knn' | 'count', data: Float64Array, dim: number, norm: KnnNorm, extra: number | Float64Array, runs = 3): ScipyRun | string {
  const dir = mkdtempSync(join(tmpdir(), 'hhat-bench-knn-'));
  try {
    const pointsPath = join(dir, 'points.f64');
    const outPath = join(dir, 'out.bin');
    writeFileSync(pointsPath, new Uint8Array(data.buffer, data.byteOffset, data.byteLength)); // little-endian
    let argument = String(extra);
    if (extra instanceof Float64Array) {
      argument = join(dir, 'radii.f64');
      writeFileSync(argument, new Uint8Array(extra.buffer, extra.byteOffset, extra.byteLength));
    }
    const script = fileURLToPath(new URL('./scipy_knn.py', import.meta.url));
    const run = spawnSync('python3', [script, mode, pointsPath, String(dim), argument, norm, outPath, String(runs)], { encoding: 'utf8', maxBuffer: 1 << 20 });
    if (run.status !== 0) return `SciPy run failed: ${(run.stderr || run.error?.message || '').trim().split('\n').pop()}`;
    const parsed = JSON.parse(run.stdout) as { scipy: string; numpy: string; seconds: number };
    return { version: `SciPy ${parsed.scipy}, NumPy ${parsed.numpy}`, seconds: parsed.seconds, output: readFileSync(outPath) };
  } finally {
    rmSync(dir, { recursive: true, force: true });
  }
}

function agreement(ours: Float64Array, theirs: Float64Array): string {
  if (ours.length !== theirs.length) return `lengths differ (${ours.length} vs ${theirs.length})`;
  let identical = 0;
  let largest = 0;
  for (let i = 0; i < ours.length; i++) {
    if (ours[i] === theirs[i]) identical++;
    else largest = Math.max(largest, Math.abs(ours[i] - theirs[i]) / Math.abs(theirs[i]));
  }
  return identical === ours.length
    ? `all ${ours.length} distances identical to SciPy's`
    : `${identical} of ${ours.length} distances identical to SciPy's, the rest within ${largest.toExponential(1)} relative`;
}

/** The dimensions of the higher-dimensional table: 5, 8, 10, 16, or those given as `--dims 8,10`. */
function highDims(): number[] {
  const at = process.argv.indexOf('--dims');
  if (at < 0) return [5, 8, 10, 16];
  return (process.argv[at + 1] ?? '')
    .split(',')
    .map(Number)
    .filter((dim) => Number.isInteger(dim) && dim >= 1);
}

interface KnnRow {
  label: string;
  /** Our best time, tree build included, and the build alone. */
  ours: number;
  build: number;
  scipy: ScipyRun | string;
  agreement: string;
}

/** All-points k-NN on one seeded point set: SciPy first, then ours, `runs` times each. */
function compareKnn(shape: Shape, dim: number, norm: KnnNorm, runs: number): KnnRow {
  const data = points(shape, TARGET_N, dim, `bench-knn-${shape}-${dim}`);
  const scipy = runScipy('knn', data, dim, norm, K, runs);
  const ours = bestOf(runs, () => new KnnIndex(data, dim, { norm }).nearestOthers(K).distances);
  const build = bestOf(runs, () => new KnnIndex(data, dim, { norm }));
  let agreementText = '';
  if (typeof scipy !== 'string') {
    agreementText = agreement(ours.result, new Float64Array(scipy.output.buffer, scipy.output.byteOffset, scipy.output.byteLength / 8));
  }
  return {
    label: `${shape} n = ${TARGET_N}, d = ${dim}, ${norm}, ${K}-NN of every point`,
    ours: ours.seconds,
    build: build.seconds,
    scipy,
    agreement: agreementText,
  };
}

export async function benchKnn(): Promise<string[]> {
  const lines: string[] = [];
  let versionShown = false;
  const cases: [Shape, number, KnnNorm][] = [
    ['uniform', 3, 'euclidean'],
    ['normal', 3, 'euclidean'],
    ['uniform', 3, 'max'],
    ['normal', 3, 'max'],
    ['normal', 1, 'euclidean'],
    ['uniform', 1, 'euclidean'],
  ];
  for (const [shape, dim, norm] of cases) {
    const row = compareKnn(shape, dim, norm, 3);
    if (typeof row.scipy === 'string') {
      lines.push(`${row.label}: ours ${ms(row.ours)} (build ${ms(row.build)}); ${row.scipy}`);
      continue;
    }
    if (!versionShown) {
      lines.push(`reference: ${row.scipy.version}, cKDTree(X).query(X, k=${K + 1}, workers=1), build included; best of 3 on both sides`);
      versionShown = true;
    }
    const target = dim === 3 ? ' (target ≤ 1.5×)' : '';
    lines.push(
      `${row.label}: ours ${ms(row.ours)} (build ${ms(row.build)}), SciPy ${ms(row.scipy.seconds)}, ` +
        `ours/SciPy ${(row.ours / row.scipy.seconds).toFixed(2)}×${target}; ${row.agreement}; load ${load()}`,
    );
  }

  // Higher dimensions, as a table.
  const highCases: [Shape, number, KnnNorm][] = [];
  for (const dim of highDims()) {
    for (const shape of ['normal', 'uniform'] as const) {
      highCases.push([shape, dim, 'euclidean']);
      if (dim === 8) highCases.push([shape, dim, 'max']);
    }
  }
  lines.push('', `${K}-NN of every point, n = ${TARGET_N}, build included (target at d = 8: ours/SciPy ≤ 1.3×)`);
  lines.push(' d  data     norm       runs     ours (build)        SciPy  ours/SciPy  load (1, 5, 15 min)  agreement with SciPy');
  for (const [shape, dim, norm] of highCases) {
    const runs = dim >= 16 ? 1 : 3;
    const row = compareKnn(shape, dim, norm, runs);
    const cells = [
      String(dim).padStart(2),
      shape.padEnd(8),
      norm.padEnd(10),
      (runs === 1 ? '1 run' : `best/${runs}`).padEnd(6),
      `${ms(row.ours)} (${ms(row.build)})`.padStart(22),
    ];
    if (typeof row.scipy === 'string') {
      lines.push(`${cells.join(' ')}  ${row.scipy}`);
      continue;
    }
    cells.push(ms(row.scipy.seconds).padStart(12), `${(row.ours / row.scipy.seconds).toFixed(2)}×`.padStart(10), load().padEnd(19), row.agreement);
    lines.push(cells.join(' '));
  }
  lines.push('');

  // Radius counts as the KSG estimator uses them: radius = each point's own 4th-neighbour distance.
  for (const norm of ['euclidean', 'max'] as const) {
    const dim = 3;
    const data = points('normal', TARGET_N, dim, `bench-knn-normal-${dim}`);
    const index = new KnnIndex(data, dim, { norm });
    const kth = index.nearestOthers(K).distances;
    const radii = Float64Array.from({ length: TARGET_N }, (_, i) => kth[i * K + K - 1]);
    const ours = bestOf3(() => new KnnIndex(data, dim, { norm }).countOthersWithin(radii, { inclusive: true }));
    const scipy = runScipy('count', data, dim, norm, radii);
    const label = `normal n = ${TARGET_N}, d = 3, ${norm}, count within each point's ${K}th-neighbour distance (inclusive)`;
    if (typeof scipy === 'string') {
      lines.push(`${label}: ours ${ms(ours.seconds)}; ${scipy}`);
      continue;
    }
    const theirs = new BigInt64Array(scipy.output.buffer, scipy.output.byteOffset, scipy.output.byteLength / 8);
    let same = 0;
    let oneLower = 0;
    for (let i = 0; i < TARGET_N; i++) {
      const difference = Number(theirs[i]) - (ours.result[i] + 1); // SciPy counts the point itself
      if (difference === 0) same++;
      else if (difference === -1) oneLower++;
    }
    // SciPy compares squared distances with r² rounded, which can fall an ulp below the squared distance
    // of the point at exactly distance r; ours count exactly what Math.sqrt(squared) <= r says (and match
    // a brute-force count in test/knn.test.ts).
    const explanation =
      oneLower > 0 ? `; ${oneLower} are one lower in SciPy, which drops the point at exactly distance r (it compares d² with a rounded r²)` : '';
    const other = TARGET_N - same - oneLower;
    lines.push(
      `${label}: ours ${ms(ours.seconds)}, SciPy query_ball_point ${ms(scipy.seconds)}, ours/SciPy ${(ours.seconds / scipy.seconds).toFixed(2)}×; ` +
        `${same} of ${TARGET_N} counts equal SciPy's${explanation}${other > 0 ? `; ${other} differ otherwise` : ''}`,
    );
  }

  // kd-tree-javascript (npm): object points, so a smaller n.
  {
    interface KdTreeLike {
      nearest(point: number[], count: number): [number[], number][];
    }
    const require = createRequire(import.meta.url);
    const { kdTree } = require('kd-tree-javascript') as {
      kdTree: new (points: number[][], metric: (a: number[], b: number[]) => number, dimensions: string[]) => KdTreeLike;
    };
    const n = KD_TREE_JAVASCRIPT_N;
    const data = points('normal', n, 3, 'bench-knn-kd-tree-javascript');
    const rows = Array.from({ length: n }, (_, i) => Array.from(data.subarray(i * 3, i * 3 + 3)));
    const squared = (a: number[], b: number[]) => (a[0] - b[0]) ** 2 + (a[1] - b[1]) ** 2 + (a[2] - b[2]) ** 2;
    const theirs = bestOf3(() => {
      const tree = new kdTree(rows.slice(), squared, ['0', '1', '2']);
      let sum = 0;
      for (const row of rows) sum += tree.nearest(row, K + 1).length;
      return sum;
    });
    const ours = bestOf3(() => new KnnIndex(data, 3).nearestOthers(K).distances);
    lines.push(
      `kd-tree-javascript 1.0.3, normal n = ${n}, d = 3, ${K}-NN of every point (build included): ` +
        `theirs ${ms(theirs.seconds)}, ours ${ms(ours.seconds)}, theirs/ours ${(theirs.seconds / ours.seconds).toFixed(1)}×`,
    );
  }
  return lines;
}

/**
 * The Monte-Carlo study behind the weighted estimator's default k and the tolerances of the 3-D Gaussian
 * test: bias, SD and RMSE against the closed form (d/2) log(2πe) on standard Gaussians.
 */
export function accuracyStudy(): string[] {
  const lines: string[] = [];
  const gaussian = (seed: string, n: number, dim: number) => points('normal', n, dim, seed);
  const summary = (values: number[], truth: number) => {
    const mean = values.reduce((a, b) => a + b, 0) / values.length;
    const sd = Math.sqrt(values.reduce((a, b) => a + (b - mean) ** 2, 0) / (values.length - 1));
    const rmse = Math.sqrt(values.reduce((a, b) => a + (b - truth) ** 2, 0) / values.length);
    return `bias ${(mean - truth).toFixed(4)} SD ${sd.toFixed(4)} RMSE ${rmse.toFixed(4)}`;
  };
  {
    const dim = 3;
    const n = 20000;
    const truth = (dim / 2) * Math.log(2 * Math.PI * Math.E);
    const kl: number[] = [];
    const weighted: number[] = [];
    for (let r = 0; r < 100; r++) {
      // The same draws as the test's seeds would give: one stream per replicate.
      const data = gaussian(`sim-g3-${r}`, n, dim);
      kl.push(kozachenkoLeonenkoEntropy(data, dim, 3, 'euclidean'));
      weighted.push(weightedKozachenkoLeonenkoEntropy(data, dim, 12, 'euclidean'));
    }
    lines.push(`3-D standard Gaussian, n = ${n}, 100 replicates: kozachenko-leonenko k = 3 ${summary(kl, truth)}`);
    lines.push(`3-D standard Gaussian, n = ${n}, 100 replicates: kozachenko-leonenko-weighted k = 12 ${summary(weighted, truth)}`);
  }
  const ks = [4, 8, 12, 16, 24, 32];
  for (const n of [1000, 10000]) {
    for (const dim of [1, 2, 3, 4, 5, 8]) {
      const truth = (dim / 2) * Math.log(2 * Math.PI * Math.E);
      const estimates = ks.map(() => [] as number[]);
      for (let r = 0; r < 40; r++) {
        const data = gaussian(`sim-k-${n}-${dim}-${r}`, n, dim);
        ks.forEach((k, c) => estimates[c].push(weightedKozachenkoLeonenkoEntropy(data, dim, k, 'euclidean')));
      }
      lines.push(`weighted, Gaussian n = ${n}, d = ${dim}, 40 replicates: ` + ks.map((k, c) => `k = ${k}: ${summary(estimates[c], truth)}`).join('; '));
    }
  }
  return lines;
}

if (import.meta.url === pathToFileURL(process.argv[1] ?? '').href) {
  const lines = process.argv.includes('--accuracy') ? accuracyStudy() : await benchKnn();
  for (const line of lines) console.log(line);
}
