import { configDefaults, defineConfig } from 'vitest/config';

/**
 * Whole-run fault injection (hung, looping, memory-hungry and crashing estimator modules and external commands):
 * about a minute of real runs with one-second limits. `npm run test:slow` runs them with the slow statistical
 * checks (CI runs it), which keeps `npm test` near three minutes on a two-core machine.
 */
const SLOW_FILES = ['test/faults.test.ts', 'test/external-commands.test.ts'];

export default defineConfig({
  test: {
    include: ['test/**/*.test.ts'],
    exclude: process.env.HHAT_SLOW ? configDefaults.exclude : [...configDefaults.exclude, ...SLOW_FILES],
    testTimeout: 120_000,
    hookTimeout: 120_000,
  },
});
