/**
 * The installed command runs dist/, which `npm test` builds before vitest starts. A single test file run on
 * its own (npx vitest run test/x.test.ts) may meet a dist/ older than the sources it checks; rebuilding
 * then keeps such a run from testing yesterday's binary.
 */
import { spawnSync } from 'node:child_process';
import { existsSync, statSync } from 'node:fs';
import { join } from 'node:path';

const root = join(__dirname, '..', '..');

function builtFrom(source: string): string {
  return join(root, 'dist', source.replace(/\.ts$/, '.js'));
}

function isFresh(source: string): boolean {
  const built = builtFrom(source);
  return existsSync(built) && statSync(built).mtimeMs >= statSync(join(root, source)).mtimeMs;
}

/** Rebuilds dist/ when the build of any of `sources` (paths from the project root) is missing or older. */
export function ensureBuilt(sources: string[]): void {
  if (sources.every(isFresh)) return;
  // tsc writes its output even when other files of the tree fail to type-check (the type check is a
  // separate step of npm test), so the outcome is judged by the files this test needs, not by tsc's status.
  const tsc = spawnSync(process.execPath, [join(root, 'node_modules', 'typescript', 'bin', 'tsc'), '-p', join(root, 'tsconfig.build.json')], {
    encoding: 'utf8',
  });
  const stale = sources.filter((s) => !isFresh(s));
  if (stale.length) throw new Error(`dist/ is stale for ${stale.join(', ')} and the build did not refresh it:\n${tsc.stdout}${tsc.stderr}`);
}
