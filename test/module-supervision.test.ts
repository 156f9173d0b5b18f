/**
 * Every command refuses a module whose top-level code ends its thread (src/harness/modules.ts, the load probe).
 * Found by a tester: a process.exit at a module's top level ended bench, estimate and check silently with its exit
 * code, and bench wrote no run file. Each case runs the built command in a process of its own, so that a
 * regression ends that process, not the test.
 */
import { spawnSync } from 'node:child_process';
import { existsSync, mkdtempSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { beforeAll, describe, expect, it } from 'vitest';
import { parseScenario } from '../scenarios/index.js';
import { replicateRng } from '../src/core/rng.js';
import { ensureBuilt } from './helpers/built.js';

const bin = join(__dirname, '..', 'bin', 'hhat.js');
const dir = mkdtempSync(join(tmpdir(), 'hhat-supervision-'));

/** The built command, stopped after 60 s. */
function hhat(args: string[]): { code: number | null; out: string; err: string } {
  const result = spawnSync(process.execPath, [bin, ...args], { encoding: 'utf8', timeout: 60_000 });
  return { code: result.status, out: result.stdout, err: result.stderr };
}

function lines(text: string): string[] {
  return text.split('\n').filter((line) => line !== '');
}

const values = parseScenario('normal').sample(replicateRng(3, 'normal', 300, 0), 300).data;
const data = join(dir, 'data.csv');
writeFileSync(data, `x\n${Array.from(values).join('\n')}\n`);

beforeAll(() => {
  ensureBuilt(['src/harness/modules.ts']);
});

describe('a module whose top-level code calls process.exit is refused, exit 2, one line', () => {
  const moduleExiting = (code: number): string => {
    const path = join(dir, `exits-${code}-at-load.mjs`);
    writeFileSync(path, `process.exit(${code});\nexport const estimators = [];\n`);
    return path;
  };
  const refusal = (path: string, code: number) =>
    `hhat: estimator module ${path} ended the thread loading it (exit code ${code}) before it finished loading: code at its top level calls process.exit (or awaits something that never settles), which would end hhat too`;

  it.each([0, 3])('process.exit(%i): check, estimate and bench (which writes no run file)', (exitCode) => {
    const path = moduleExiting(exitCode);
    const out = join(dir, `run-${exitCode}.json`);
    for (const args of [
      ['check', path],
      ['estimate', data, '--estimator-module', path],
      ['bench', '--estimator-module', path, '--scenario', 'normal', '--estimator', 'gaussian', '--n', '50', '--replicates', '2', '--out', out, '--quiet'],
    ]) {
      const result = hhat(args);
      expect(result.code, args[0]).toBe(2);
      expect(lines(result.err), args[0]).toEqual([refusal(path, exitCode)]);
    }
    expect(existsSync(out)).toBe(false);
  });
});
