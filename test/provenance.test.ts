/**
 * The commit a run file names (src/core/provenance.ts): asked of git in the background while a run works, it must
 * be the answer git gives when asked directly here (`git rev-parse HEAD`, `git status --porcelain`).
 */
import { execFileSync } from 'node:child_process';
import { describe, expect, it } from 'vitest';
import { environment, packageRoot, prefetchProvenance } from '../src/core/provenance.js';

describe('provenance', () => {
  it("names hhat's commit and whether the checkout is dirty, the same asked ahead in the background as asked at the end", async () => {
    const cwd = packageRoot();
    let expected: { commit: string; dirty: boolean } | null = null;
    try {
      const top = execFileSync('git', ['rev-parse', '--show-toplevel'], { cwd, stdio: ['ignore', 'pipe', 'ignore'] })
        .toString()
        .trim();
      if (top === cwd) {
        const commit = execFileSync('git', ['rev-parse', 'HEAD'], { cwd }).toString().trim();
        const status = execFileSync('git', ['status', '--porcelain', '--untracked-files=no'], { cwd }).toString();
        expected = { commit, dirty: status.trim() !== '' };
      }
    } catch {
      expected = null; // not a git checkout (an installed package): no commit is named
    }
    const asked = environment().git;
    expect(asked).toEqual(expected);
    await prefetchProvenance();
    expect(environment().git).toEqual(expected);
  });
});
