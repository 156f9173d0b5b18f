/**
 * Kraskov–Stögbauer–Grassberger speed: ksg1 and ksg2 at n = 100000 on a 2+2-dimensional Gaussian
 * (mi-gaussian:dimX=2,dimY=2,rho=0.6), k = 3, against the time of the all-points k-NN query that every KSG
 * estimate starts with (tree build plus `KnnIndex.nearestOthers(3)` on the same 4-D points, max norm). The
 * ratio says what the marginal radius counts and digamma sums add to the neighbour search. Best of 3 each.
 * Run alone with `npx tsx bench/mutual-information.ts`.
 */
import { pathToFileURL } from 'node:url';
import { getEstimator } from '../estimators/index.js';
import { KnnIndex } from '../src/math/knn.js';
import { replicateRng } from '../src/core/rng.js';
import { parseScenario } from '../scenarios/index.js';
import { bestOf3 } from './knn.js';

const N = 100_000;
const K = 3;

const ms = (seconds: number): string => `${(seconds * 1000).toFixed(0)} ms`;

export async function benchMutualInformation(): Promise<string[]> {
  const scenario = parseScenario('mi-gaussian:dimX=2,dimY=2,rho=0.6,within=0');
  const sample = scenario.sample(replicateRng(1, scenario.id, N, 0), N);
  const lines = [`${scenario.id}, n = ${N}, k = ${K} (truth ${scenario.truth.toFixed(4)} nats)`];
  const knn = bestOf3(() => new KnnIndex(sample.data, sample.dim, { norm: 'max' }).nearestOthers(K));
  lines.push(`  all-points ${K}-NN, 4-D max norm (build + query): ${ms(knn.seconds)}`);
  for (const id of ['ksg1', 'ksg2']) {
    const estimator = getEstimator(id);
    const run = bestOf3(() => estimator.estimate(sample, { k: K, copula: 'none' }));
    lines.push(`  ${id}: ${ms(run.seconds)} = ${(run.seconds / knn.seconds).toFixed(2)}× the k-NN query (estimate ${run.result.toFixed(4)})`);
  }
  const ranked = bestOf3(() => getEstimator('ksg1').estimate(sample, { k: K, copula: 'rank' }));
  lines.push(`  ksg1 with copula=rank: ${ms(ranked.seconds)} = ${(ranked.seconds / knn.seconds).toFixed(2)}× (estimate ${ranked.result.toFixed(4)})`);
  return lines;
}

if (process.argv[1] && import.meta.url === pathToFileURL(process.argv[1]).href) {
  for (const line of await benchMutualInformation()) console.log(line);
}
