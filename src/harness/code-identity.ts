/**
 * Which code computed a result: hhat's own build (its version, a digest of every file of its code and the
 * installed version of each package it depends on), and for each estimator module a digest of the module and of every file it imports. Both enter a plan's
 * fingerprint, so a checkpoint or a shard made by other code is refused instead of mixed in.
 *
 *   codeIdentity()                       // { version: '0.1.0', build: 'sha256 of dist/ (or the sources)', dependencies: ['seedrandom@3.0.5', …] }
 *   moduleGraph('/lab/kl-edited.mjs')    // { digest, files: [{ path, sha256 }], packages: ['ml-matrix@6.15.1'] }
 *
 * Imports are followed by reading the source: static `import`/`export ... from`, `import('literal')` and
 * `require('literal')`. A module that imports by a computed name cannot be followed and is refused, since an
 * edit behind it would go unnoticed. Packages imported by name are recorded by name and version.
 */
import { createHash } from 'node:crypto';
import { existsSync, readdirSync, readFileSync, statSync } from 'node:fs';
import { builtinModules, createRequire } from 'node:module';
import { dirname, isAbsolute, join, relative, resolve } from 'node:path';
import { fileURLToPath } from 'node:url';
import { UsageError } from '../core/errors.js';
import { hhatVersion, packageRoot } from '../core/provenance.js';

export interface CodeIdentity {
  version: string;
  /** sha256 over the paths and contents of hhat's own code files. */
  build: string;
  /**
   * name@version of each package hhat depends on, as installed: the samplers and special functions come from
   * them, so a different version may give other draws or values under the same build.
   */
  dependencies: string[];
}

let identity: CodeIdentity | undefined;

/** The folders of hhat's code as it runs: dist/ when built, the TypeScript sources under tsx. */
function codeFolders(): string[] {
  const root = packageRoot();
  const running = fileURLToPath(import.meta.url);
  const base = running.endsWith('.ts') ? root : join(root, 'dist');
  // vendor/: the single-file copies of dependencies a built hhat loads (src/core/vendor.ts).
  return ['src', 'estimators', 'scenarios', 'vendor'].map((f) => join(base, f)).filter((f) => existsSync(f));
}

function listFiles(folder: string, out: string[] = []): string[] {
  for (const entry of readdirSync(folder, { withFileTypes: true })) {
    const path = join(folder, entry.name);
    if (entry.isDirectory()) listFiles(path, out);
    else if (/\.(js|mjs|cjs|ts|json)$/.test(entry.name) && !entry.name.endsWith('.d.ts') && !entry.name.endsWith('.map')) out.push(path);
  }
  return out;
}

export function codeIdentity(): CodeIdentity {
  if (identity) return identity;
  const root = packageRoot();
  const hash = createHash('sha256');
  for (const file of codeFolders()
    .flatMap((f) => listFiles(f))
    .sort()) {
    hash.update(relative(root, file)).update('\0').update(readFileSync(file)).update('\0');
  }
  const manifest = JSON.parse(readFileSync(join(root, 'package.json'), 'utf8')) as { dependencies?: Record<string, string> };
  const from = join(root, 'package.json');
  const dependencies = Object.keys(manifest.dependencies ?? {})
    .sort()
    .map((name) => packageVersion(name, from));
  identity = { version: hhatVersion(), build: hash.digest('hex'), dependencies };
  return identity;
}

export interface ModuleGraph {
  /** sha256 over every file's path and digest and every package version. */
  digest: string;
  files: { path: string; sha256: string }[];
  packages: string[];
}

const STATIC_IMPORT = /(?:^|[\s;])(?:import|export)\s[^'"`;]*?\bfrom\s*(['"])([^'"]+)\1|(?:^|[\s;])import\s*(['"])([^'"]+)\3/g;
const CALL = /\b(import|require)\s*\(\s*([^)]*?)\s*\)/g;

/** Strips comments so that an import named in a comment is not followed (strings are kept). */
function withoutComments(source: string): string {
  return source.replace(/\/\*[\s\S]*?\*\//g, ' ').replace(/(^|[^:'"`\\])\/\/[^\n]*/g, '$1');
}

/** The specifiers a module imports; throws when one is computed at run time. */
export function importSpecifiers(source: string, where: string): string[] {
  const code = withoutComments(source);
  const found: string[] = [];
  for (const match of code.matchAll(STATIC_IMPORT)) found.push(match[2] ?? match[4]);
  for (const match of code.matchAll(CALL)) {
    const argument = match[2];
    const literal = /^(['"])([^'"]+)\1$/.exec(argument) ?? /^`([^`$]+)`$/.exec(argument);
    if (!literal) {
      const line = code.slice(0, match.index).split('\n').length;
      throw new UsageError(
        `estimator module ${where} (line ${line}) calls ${match[1]}(${argument.slice(0, 40)}) with a computed name; hhat follows only literal imports to fingerprint the code a run used, so import it by a fixed path`,
      );
    }
    found.push(literal[2] ?? literal[1]);
  }
  return [...new Set(found)];
}

const BUILTINS = new Set(builtinModules);

function resolveRelative(specifier: string, from: string): string {
  const base = specifier.startsWith('file:') ? fileURLToPath(specifier) : isAbsolute(specifier) ? specifier : resolve(dirname(from), specifier);
  // Under a TypeScript loader an import may leave out its extension or name .js for a .ts file.
  const candidates = [base, `${base}.ts`, `${base}.js`, `${base}.mjs`, base.replace(/\.js$/, '.ts'), join(base, 'index.js'), join(base, 'index.ts')];
  const hit = candidates.find((c) => existsSync(c) && statSync(c).isFile());
  if (!hit) throw new UsageError(`estimator module ${from} imports ${specifier}, which does not exist`);
  return hit;
}

function packageVersion(name: string, from: string): string {
  const packageName = name.startsWith('@') ? name.split('/').slice(0, 2).join('/') : name.split('/')[0];
  try {
    const manifest = createRequire(from).resolve(`${packageName}/package.json`);
    return `${packageName}@${(JSON.parse(readFileSync(manifest, 'utf8')) as { version?: string }).version ?? '?'}`;
  } catch {
    // Packages that do not export their package.json: look for it in the node_modules folders above.
    for (let dir = dirname(from); ; dir = dirname(dir)) {
      const manifest = join(dir, 'node_modules', packageName, 'package.json');
      if (existsSync(manifest)) return `${packageName}@${(JSON.parse(readFileSync(manifest, 'utf8')) as { version?: string }).version ?? '?'}`;
      if (dirname(dir) === dir) return `${packageName}@unresolved`;
    }
  }
}

/** The module and every file it imports, by content; packages by version. */
export function moduleGraph(path: string): ModuleGraph {
  const files = new Map<string, string>();
  const packages = new Set<string>();
  const visit = (file: string) => {
    if (files.has(file)) return;
    const content = readFileSync(file);
    files.set(file, createHash('sha256').update(content).digest('hex'));
    if (/\.json$/.test(file)) return;
    for (const specifier of importSpecifiers(content.toString('utf8'), file)) {
      const bare = specifier.replace(/^node:/, '');
      if (specifier.startsWith('node:') || BUILTINS.has(bare) || BUILTINS.has(bare.split('/')[0])) continue;
      if (specifier.startsWith('.') || specifier.startsWith('/') || specifier.startsWith('file:')) visit(resolveRelative(specifier, file));
      else packages.add(packageVersion(specifier, file));
    }
  };
  visit(resolve(path));
  const list = [...files.entries()].map(([p, sha256]) => ({ path: p, sha256 })).sort((a, b) => a.path.localeCompare(b.path));
  const sortedPackages = [...packages].sort();
  const digest = createHash('sha256')
    .update(JSON.stringify({ files: list, packages: sortedPackages }))
    .digest('hex');
  return { digest, files: list, packages: sortedPackages };
}
