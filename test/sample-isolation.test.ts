/**
 * What a user's estimator module does beside estimating must not reach the rest of the run (found by a tester):
 * - writing into its input changed what the other estimators of the replicate saw (a module that zeroed its
 *   sample made gaussian and kozachenko-leonenko fail every replicate, and the failures were counted against them);
 * - printing on standard output broke `--quiet`, whose standard output is the run file's path alone.
 */
import { spawnSync } from 'node:child_process';
import { mkdtempSync, readFileSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { beforeAll, describe, expect, it } from 'vitest';
import { ensureBuilt } from './helpers/built.js';
import type { RunFile } from '../src/analysis/results.js';

const root = join(__dirname, '..');
const bin = join(root, 'bin', 'hhat.js');
const dir = mkdtempSync(join(tmpdir(), 'hhat-isolation-'));

beforeAll(() => ensureBuilt(['estimators/index.ts', 'src/core/sample.ts', 'src/harness/threads.ts']));

/** `hhat bench --quiet` on normal draws (n = 100, 3 replicates, 1 worker) with the module and the estimators. */
function bench(module: string, out: string, estimators: string[]): { run: RunFile; stdout: string; stderr: string } {
  const args = ['bench', '--estimator-module', module, '--scenario', 'normal', '--n', '100', '--replicates', '3', '--workers', '1', '--out', out, '--quiet'];
  const result = spawnSync(process.execPath, [bin, ...args, ...estimators.flatMap((e) => ['--estimator', e])], { cwd: dir, encoding: 'utf8' });
  expect(result.status, result.stderr).toBe(0);
  return { run: JSON.parse(readFileSync(join(dir, out), 'utf8')) as RunFile, stdout: result.stdout, stderr: result.stderr };
}

/** A module of one entropy estimator whose estimate runs `body`. */
const moduleWith = (id: string, body: string) =>
  `export const estimators = [{ id: '${id}', family: 'test', quantity: 'entropy', summary: 'for a test', settings: [], dims: [1, 10],
  reference: 'none', estimate(sample) { ${body} } }];\n`;

describe('an estimator module that writes into its sample', () => {
  it('changes nothing for the estimators after it: their estimates equal a run without it, bit for bit', () => {
    writeFileSync(join(dir, 'writer.mjs'), moduleWith('writer', 'sample.data.fill(0); if (sample.q) sample.q.data.fill(0); return 1.4;'));
    const others = ['gaussian', 'kozachenko-leonenko'];
    const alone = bench('writer.mjs', 'alone.json', others).run;
    const after = bench('writer.mjs', 'after.json', ['writer', ...others]).run;
    for (const id of others) {
      const cellOf = (run: RunFile) => run.cells.find((c) => c.estimator.startsWith(`${id}:`) || c.estimator === id)!;
      expect(cellOf(after).failures, id).toEqual([]);
      expect(cellOf(after).estimates, id).toEqual(cellOf(alone).estimates);
    }
  });
});

describe('an estimator module that prints', () => {
  it('prints on standard error: bench --quiet still gives the run file path alone on standard output', () => {
    writeFileSync(join(dir, 'talker.mjs'), moduleWith('talker', "console.log('estimating now'); return 1.4;"));
    const { stdout, stderr } = bench('talker.mjs', 'talker.json', ['talker']);
    expect(stdout).toBe(`${join(dir, 'talker.json')}\n`);
    // Lines a worker prints just before the run stops it may not arrive (Node hands them over asynchronously, and CI
    // saw 2 of 3), so the test asks that they arrive on standard error, not that every one does.
    const arrived = stderr.split('\n').filter((line) => line === 'estimating now').length;
    expect(arrived).toBeGreaterThanOrEqual(1);
    expect(arrived).toBeLessThanOrEqual(3);
  });
});
