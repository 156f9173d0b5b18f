/**
 * The CommonJS packages on hhat's hot paths (the @stdlib special functions, distributions and samplers, and
 * seedrandom), each loaded from a single-file copy under dist/vendor/ when hhat runs built. As installed, one such
 * package is tens of small files (about 650 for the ones `hhat bench` uses), and opening and compiling them
 * one by one was most of the start-up of `hhat estimate` and of each worker thread. `npm run build` makes the
 * copies from the installed packages (tools/vendor.mjs: every @stdlib dependency and seedrandom); the packages
 * stay dependencies, the sources under a TypeScript loader (tests, tsx) load them as installed, and a run file
 * records their versions either way.
 *
 *   const digamma = loadPackage<typeof import('@stdlib/math-base-special-digamma')>('@stdlib/math-base-special-digamma');
 */
import { createRequire } from 'node:module';

const require = createRequire(import.meta.url);
const built = !import.meta.url.endsWith('.ts');

/**
 * The copy that holds `name`, or null when it has none. Two copies: the samplers in one, everything else in the
 * other, so a command that draws nothing does not load the samplers, and packages that share internals share one
 * copy of them (one file per package would repeat about 0.6 MB of common @stdlib code in each sampler).
 */
export function vendorFile(name: string): string | null {
  if (name.startsWith('@stdlib/random-')) return 'samplers.cjs';
  if (name.startsWith('@stdlib/') || name === 'seedrandom') return 'numeric.cjs';
  return null;
}

/** The package's exports: from dist/vendor/ when built, as installed otherwise. */
export function loadPackage<T>(name: string): T {
  const file = vendorFile(name);
  if (!file) throw new Error(`loadPackage: ${name} has no single-file copy (src/core/vendor.ts, vendorFile)`);
  if (!built) return require(name) as T;
  // Each package's code runs on its first use (a getter), not when the copy loads.
  const exported = (require(`../../vendor/${file}`) as Record<string, T>)[name];
  if (exported === undefined) throw new Error(`loadPackage: dist/vendor/${file} holds no ${name}; rebuild (npm run build)`);
  return exported;
}
