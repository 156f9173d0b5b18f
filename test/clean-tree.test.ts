/**
 * `npm run baseline` refuses a tree with uncommitted changes, so the commit that adds a baseline holds the code
 * that made it. Checked on throw-away git repositories (git itself, outside the project, says what is
 * changed): the refusal's exact words from the script as a user runs it, and which changes count.
 */
import { execFileSync, spawnSync } from 'node:child_process';
import { mkdirSync, mkdtempSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { afterAll, describe, expect, it } from 'vitest';
import { dirtyTreeRefusal, uncommittedChanges } from '../bench/clean-tree.js';

const root = join(__dirname, '..');
const dirs: string[] = [];
afterAll(() => dirs.forEach((d) => rmSync(d, { recursive: true, force: true })));

/** A repository with one committed source file and one committed baseline file. */
function repository(): string {
  const dir = mkdtempSync(join(tmpdir(), 'hhat-clean-tree-'));
  dirs.push(dir);
  const git = (...args: string[]) => execFileSync('git', ['-c', 'user.name=test', '-c', 'user.email=test@example.org', ...args], { cwd: dir, stdio: 'ignore' });
  git('init', '-q');
  mkdirSync(join(dir, 'src'));
  mkdirSync(join(dir, 'results', 'baseline'), { recursive: true });
  writeFileSync(join(dir, 'src', 'a.ts'), 'export const a = 1;\n');
  writeFileSync(join(dir, 'results', 'baseline', 'entropy.jsonl'), '{}\n');
  git('add', '-A');
  git('commit', '-qm', 'start');
  return dir;
}

describe('npm run baseline on a dirty tree', () => {
  it('refuses before any work, naming the changes (exact text, exit 2)', () => {
    const dir = repository();
    writeFileSync(join(dir, 'src', 'a.ts'), 'export const a = 2;\n');
    writeFileSync(join(dir, 'src', 'new-estimator.ts'), 'export {};\n');
    const started = Date.now();
    const result = spawnSync(process.execPath, [join(root, 'node_modules', 'tsx', 'dist', 'cli.mjs'), join(root, 'bench', 'track.ts'), '--refresh'], {
      cwd: dir,
      encoding: 'utf8',
    });
    expect(result.stderr).toBe(
      'track: the tree has uncommitted changes (M src/a.ts, ?? src/new-estimator.ts); a baseline must come from a commit that holds the code that made it: commit them (or stash them) first, then npm run baseline (DEVELOPERS.md, Baselines)\n',
    );
    expect(result.status).toBe(2);
    expect(result.stdout).toBe('');
    // Refused up front: no default plan ran (one takes tens of seconds).
    expect(Date.now() - started).toBeLessThan(15_000);
  }, 30_000);

  it('counts tracked and untracked changes outside results/baseline/, and only those', () => {
    const dir = repository();
    expect(uncommittedChanges(dir)).toEqual([]);
    expect(dirtyTreeRefusal(dir)).toBeNull();
    // A refresh rewrites the baseline itself: that is not a change of the code.
    writeFileSync(join(dir, 'results', 'baseline', 'entropy.jsonl'), '{"changed":true}\n');
    writeFileSync(join(dir, 'results', 'baseline', 'divergence.jsonl'), '{}\n');
    expect(dirtyTreeRefusal(dir)).toBeNull();
    writeFileSync(join(dir, 'results', 'notes.txt'), 'x\n');
    expect(uncommittedChanges(dir)).toEqual(['?? results/notes.txt']);
    for (let i = 0; i < 6; i++) writeFileSync(join(dir, 'src', `f${i}.ts`), '\n');
    expect(dirtyTreeRefusal(dir)).toMatch(
      /^the tree has uncommitted changes \(\?\? results\/notes\.txt, \?\? src\/f0\.ts, .*, \?\? src\/f3\.ts and 2 more\); /,
    );
  });

  it('refuses outside a git checkout', () => {
    const dir = mkdtempSync(join(tmpdir(), 'hhat-no-git-'));
    dirs.push(dir);
    expect(dirtyTreeRefusal(dir)).toBe(`${dir} is not a git checkout; a baseline is made from a commit (DEVELOPERS.md, Baselines)`);
  });
});
