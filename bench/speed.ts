/**
 * `npm run bench:speed`: every speed figure in one run, each as a ratio against a reference measured in the
 * same run (SciPy through python3 where a reference exists). Not a test: nothing here passes or fails.
 */
import { benchKnn } from './knn.js';
import { benchSpacing } from './spacing.js';
import { benchKernel } from './kernel.js';
import { benchData } from './data.js';

const sections: [string, () => Promise<string[]>][] = [
  ['all-points k-NN index vs SciPy cKDTree', benchKnn],
  ['spacing estimators vs SciPy differential_entropy', benchSpacing],
  ['kernel estimator growth', benchKernel],
  ['data file loading', benchData],
];

const only = process.argv.slice(2);
for (const [title, run] of sections) {
  if (only.length && !only.some((word) => title.includes(word))) continue;
  console.log(`\n== ${title}`);
  for (const line of await run()) console.log(line);
}
