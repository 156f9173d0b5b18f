/**
 * A user's estimator that writes into its input must not change what the other estimators of the replicate see
 * (found by a tester: a module that zeroed its sample made gaussian and kozachenko-leonenko fail every replicate,
 * and the failures were counted against them; with the module listed last, they succeeded).
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

beforeAll(() => ensureBuilt(['estimators/index.ts', 'src/core/sample.ts']));

function bench(out: string, estimators: string[]): RunFile {
  const args = [
    'bench',
    '--estimator-module',
    'writer.mjs',
    '--scenario',
    'normal',
    '--n',
    '100',
    '--replicates',
    '3',
    '--workers',
    '1',
    '--out',
    out,
    '--quiet',
  ];
  const result = spawnSync(process.execPath, [bin, ...args, ...estimators.flatMap((e) => ['--estimator', e])], { cwd: dir, encoding: 'utf8' });
  expect(result.status, result.stderr).toBe(0);
  return JSON.parse(readFileSync(join(dir, out), 'utf8')) as RunFile;
}

describe('an estimator module that writes into its sample', () => {
  it('changes nothing for the estimators after it: their estimates equal a run without it, bit for bit', () => {
    writeFileSync(
      join(dir, 'writer.mjs'),
      `export const estimators = [{ id: 'writer', family: 'test', quantity: 'entropy', summary: 'zeroes its input', settings: [], dims: [1, 10],
  reference: 'none', estimate(sample) { sample.data.fill(0); if (sample.q) sample.q.data.fill(0); return 1.4; } }];\n`,
    );
    const others = ['gaussian', 'kozachenko-leonenko'];
    const alone = bench('alone.json', others);
    const after = bench('after.json', ['writer', ...others]);
    for (const id of others) {
      const cellOf = (run: RunFile) => run.cells.find((c) => c.estimator.startsWith(`${id}:`) || c.estimator === id)!;
      expect(cellOf(after).failures, id).toEqual([]);
      expect(cellOf(after).estimates, id).toEqual(cellOf(alone).estimates);
    }
  });
});
