/**
 * `npm ci` quiet: npm 11 skips and warns about every dependency install script that package.json's
 * `allowScripts` does not approve. The lock file (npm's own record, `hasInstallScript`) lists the packages that
 * have one; each must be approved or denied here, so a new one fails this test rather than warning on every
 * install. Checked by hand on 2026-12-03 with npm 11.19.1 in a fresh copy: `npm ci` printed the warning
 * without the entry and nothing with it (README, "From a fresh clone").
 */
import { readFileSync } from 'node:fs';
import { join } from 'node:path';
import { describe, expect, it } from 'vitest';

const root = join(__dirname, '..');
const read = (file: string) => JSON.parse(readFileSync(join(root, file), 'utf8')) as Record<string, unknown>;

describe('install scripts', () => {
  it('every locked package with an install script is approved or denied in allowScripts', () => {
    const lock = read('package-lock.json') as { packages: Record<string, { hasInstallScript?: boolean; version?: string }> };
    const withScripts = Object.entries(lock.packages)
      .filter(([path, entry]) => path !== '' && entry.hasInstallScript)
      .map(([path]) => path.slice(path.lastIndexOf('node_modules/') + 'node_modules/'.length));
    const allowed = (read('package.json').allowScripts ?? {}) as Record<string, boolean>;
    const covered = (name: string) => Object.keys(allowed).some((key) => key === name || key.startsWith(`${name}@`));
    for (const name of withScripts) expect(covered(name), `${name} has an install script that allowScripts does not mention`).toBe(true);
    // Only what the lock file needs: an approval for a package that is gone would outlive its review.
    for (const key of Object.keys(allowed))
      expect(
        withScripts.some((name) => key === name || key.startsWith(`${name}@`)),
        key,
      ).toBe(true);
  });
});
