import { execFileSync } from 'node:child_process';
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

function gitInfo(): Environment['git'] {
  try {
    const cwd = packageRoot();
    // Only hhat's own checkout counts: installed inside another repository (a user's project), git would
    // otherwise report that repository's commit as hhat's.
    // One process for both answers (each git start costs about 15 ms).
    const [top, commit] = execFileSync('git', ['rev-parse', '--show-toplevel', 'HEAD'], { cwd, stdio: ['ignore', 'pipe', 'ignore'] })
      .toString()
      .trim()
      .split('\n');
    if (realpathSync(top) !== realpathSync(cwd)) return null;
    const status = execFileSync('git', ['status', '--porcelain', '--untracked-files=no'], { cwd, stdio: ['ignore', 'pipe', 'ignore'] }).toString();
    return { commit, dirty: status.trim() !== '' };
  } catch {
    return null;
  }
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
