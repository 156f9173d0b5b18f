/**
 * Whether the checkout is clean, for `npm run baseline`. A baseline holds no commit (it would change every byte
 * of a refresh), so its origin is the commit that adds it: that commit must hold exactly the code that made
 * it. A tree with uncommitted or untracked files outside results/baseline/ (an untracked estimator file joins
 * the registry, so it counts) would make a baseline no commit reproduces; the refresh refuses it.
 */
import { execFileSync } from 'node:child_process';

/** The baseline files themselves: a refresh may rewrite them before they are committed. */
const OWN_OUTPUT = 'results/baseline/';

/** `git status --porcelain` lines (e.g. " M src/a.ts", "?? estimators/b.ts") outside results/baseline/; null outside a git checkout. */
export function uncommittedChanges(cwd: string): string[] | null {
  let status: string;
  try {
    status = execFileSync('git', ['status', '--porcelain=v1', '--untracked-files=all'], { cwd, stdio: ['ignore', 'pipe', 'ignore'], encoding: 'utf8' });
  } catch {
    return null;
  }
  return status
    .split('\n')
    .filter((line) => line.trim() !== '')
    .filter((line) => {
      // "XY path" or "XY old -> new" for renames: both sides must be baseline files to be ours.
      const paths = line.slice(3).split(' -> ');
      return !paths.every((p) => p.replace(/^"|"$/g, '').startsWith(OWN_OUTPUT));
    });
}

/** The one-line refusal, or null when the refresh may run. */
export function dirtyTreeRefusal(cwd: string): string | null {
  const changes = uncommittedChanges(cwd);
  if (changes === null) return `${cwd} is not a git checkout; a baseline is made from a commit (DEVELOPERS.md, Baselines)`;
  if (!changes.length) return null;
  const shown = changes.slice(0, 5).map((l) => l.trim().replace(/\s+/, ' '));
  const more = changes.length > shown.length ? ` and ${changes.length - shown.length} more` : '';
  return `the tree has uncommitted changes (${shown.join(', ')}${more}); a baseline must come from a commit that holds the code that made it: commit them (or stash them) first, then npm run baseline (DEVELOPERS.md, Baselines)`;
}
