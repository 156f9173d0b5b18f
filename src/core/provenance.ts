import { execFile, execFileSync } from 'node:child_process';
import { existsSync, readFileSync, realpathSync } from 'node:fs';
import { cpus, platform, arch, totalmem } from 'node:os';
import { dirname, join } from 'node:path';
import { fileURLToPath } from 'node:url';

let root: string | undefined;

/** The package root: the nearest folder above this file with hhat's package.json (src/ or dist/src/). */
export function packageRoot(): string {
  if (root) return root;
  let dir = dirname(fileURLToPath(import.meta.url));
  for (;;) {
    const candidate = join(dir, 'package.json');
    if (existsSync(candidate) && (JSON.parse(readFileSync(candidate, 'utf8')) as { name?: string }).name === 'hhat') return (root = dir);
    const parent = dirname(dir);
    if (parent === dir) throw new Error('cannot find the hhat package.json above ' + fileURLToPath(import.meta.url));
    dir = parent;
  }
}

export function hhatVersion(): string {
  return (JSON.parse(readFileSync(join(packageRoot(), 'package.json'), 'utf8')) as { version: string }).version;
}

export interface Environment {
  hhatVersion: string;
  /** hhat's own commit when it runs from a git checkout. */
  git: { commit: string; dirty: boolean } | null;
  node: string;
  platform: string;
  arch: string;
  cpus: number;
  cpuModel: string;
  memoryGiB: number;
}

/**
 * hhat's commit from `git rev-parse` output, or null when the checkout found is not hhat's own: installed inside
 * another repository (a user's project), git would otherwise report that repository's commit as hhat's.
 */
function ownCommit(cwd: string, revParse: string): string | null {
  const [top, commit] = revParse.trim().split('\n');
  try {
    return realpathSync(top) === realpathSync(cwd) ? commit : null;
  } catch {
    return null;
  }
}

const REV_PARSE = ['rev-parse', '--show-toplevel', 'HEAD'];
const STATUS = ['status', '--porcelain', '--untracked-files=no'];

/** Found ahead of time by prefetchProvenance, so that a long run does not wait for git at its end. */
let prefetched: Environment['git'] | undefined;

function gitInfo(): Environment['git'] {
  if (prefetched !== undefined) return prefetched;
  try {
    const cwd = packageRoot();
    // One process for both answers of rev-parse (each git start costs about 15 ms).
    const commit = ownCommit(cwd, execFileSync('git', REV_PARSE, { cwd, stdio: ['ignore', 'pipe', 'ignore'] }).toString());
    if (commit === null) return null;
    return {
      commit,
      dirty:
        execFileSync('git', STATUS, { cwd, stdio: ['ignore', 'pipe', 'ignore'] })
          .toString()
          .trim() !== '',
    };
  } catch {
    return null;
  }
}

/**
 * Asks git in the background now (a benchmark run calls this as it starts, with its code already fixed); a later
 * environment() uses the answer if it has come, and otherwise asks again itself.
 */
export function prefetchProvenance(): Promise<void> {
  let cwd: string;
  try {
    cwd = packageRoot();
  } catch {
    return Promise.resolve();
  }
  const options = { cwd, windowsHide: true };
  return new Promise((resolve) => {
    const settle = (answer: Environment['git']) => {
      prefetched = answer;
      resolve();
    };
    execFile('git', REV_PARSE, options, (error, revParse) => {
      const commit = error ? null : ownCommit(cwd, revParse);
      if (commit === null) return settle(null);
      execFile('git', STATUS, options, (statusError, status) => settle(statusError ? null : { commit, dirty: status.trim() !== '' }));
    });
  });
}

export function environment(): Environment {
  const cpuList = cpus();
  return {
    hhatVersion: hhatVersion(),
    git: gitInfo(),
    node: process.version,
    platform: platform(),
    arch: arch(),
    cpus: cpuList.length,
    cpuModel: cpuList[0]?.model ?? 'unknown',
    memoryGiB: Math.round((totalmem() / 2 ** 30) * 10) / 10,
  };
}
