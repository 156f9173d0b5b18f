import { availableParallelism } from 'node:os';
import { configDefaults, defineConfig } from 'vitest/config';

/**
 * Whole-run fault injection (hung, looping, memory-hungry and crashing estimator modules and external commands):
 * about a minute of real runs with one-second limits. `npm run test:slow` runs them with the slow statistical
 * checks (CI runs it), which keeps `npm test` near three minutes on a two-core machine.
 */
const SLOW_FILES = ['test/faults.test.ts', 'test/external-commands.test.ts'];

/**
 * Files whose checks depend on the machine's pace: advice measures it and fits its work to a budget, fault runs
 * hold estimates to one-second limits, and the clean-tree check times a whole build. They run one at a time,
 * after the rest, so no other test file competes with them for the cores; every other file runs one per core (vitest's
 * own default leaves a core free, which on two cores meant one file at a time).
 */
const PACED_FILES = ['test/advise.test.ts', 'test/advise-slow.test.ts', 'test/large-data.test.ts', 'test/clean-tree.test.ts', ...SLOW_FILES];

const excluded = process.env.HHAT_SLOW ? configDefaults.exclude : [...configDefaults.exclude, ...SLOW_FILES];

export default defineConfig({
  test: {
    testTimeout: 120_000,
    hookTimeout: 120_000,
    projects: [
      {
        extends: true,
        test: {
          name: 'parallel',
          include: ['test/**/*.test.ts'],
          exclude: [...excluded, ...PACED_FILES],
          maxWorkers: availableParallelism(),
          sequence: { groupOrder: 0 },
        },
      },
      {
        extends: true,
        test: { name: 'paced', include: PACED_FILES, exclude: excluded, fileParallelism: false, sequence: { groupOrder: 1 } },
      },
    ],
  },
});
