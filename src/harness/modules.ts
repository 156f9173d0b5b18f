/**
 * Estimator modules: the user's own estimators, loaded from a JavaScript file and registered beside (or in
 * place of) the built-in ones. A module exports `estimators` (an array), a default array, or a single
 * default estimator, each following the Estimator contract of src/core/contracts.ts. Each is checked here, at the
 * boundary, by the same declaration check every built-in passes at registration (src/core/spec.ts, checkEstimator),
 * so a mistake is one line naming the file and the problem rather than a failure deep in a run.
 *
 *   const list = await loadEstimatorModules(['lab/estimators.mjs']);
 *   const { replaced, added } = registerUserEstimators(list, { replace: true });
 */
import { existsSync, statSync } from 'node:fs';
import { extname, isAbsolute, resolve } from 'node:path';
import { pathToFileURL } from 'node:url';
import { isMainThread, Worker } from 'node:worker_threads';
import type { Estimator } from '../core/contracts.js';
import { UsageError } from '../core/errors.js';
import { checkEstimator, showValue as show } from '../core/spec.js';
import { listEstimators, replaceEstimator } from '../../estimators/index.js';

export { checkEstimator, QUANTITIES } from '../core/spec.js';
const JAVASCRIPT = new Set(['.js', '.mjs', '.cjs']);
const TYPESCRIPT = new Set(['.ts', '.mts']);

/** Resolves a module path as written by the user against a base folder (the working folder, or a plan file's). */
export function resolveModulePath(path: string, baseDir = process.cwd()): string {
  return isAbsolute(path) ? path : resolve(baseDir, path);
}

function firstLine(text: string): string {
  return text.split('\n')[0].trim();
}

async function importModule(path: string): Promise<Record<string, unknown>> {
  const extension = extname(path).toLowerCase();
  if (!JAVASCRIPT.has(extension) && !TYPESCRIPT.has(extension)) {
    throw new UsageError(
      `estimator module ${path}: "${extension || '(no extension)'}" files cannot be loaded; use .js or .mjs (or .ts when hhat runs under tsx)`,
    );
  }
  if (!existsSync(path)) throw new UsageError(`estimator module ${path}: no such file`);
  if (!statSync(path).isFile()) throw new UsageError(`estimator module ${path}: is a folder, not a file`);
  await refuseEndlessLoad(path);
  try {
    return (await import(pathToFileURL(path).href)) as Record<string, unknown>;
  } catch (error) {
    const code = (error as NodeJS.ErrnoException).code;
    if (TYPESCRIPT.has(extension) && code === 'ERR_UNKNOWN_FILE_EXTENSION') {
      throw new UsageError(
        `estimator module ${path}: TypeScript modules load only under a TypeScript loader (NODE_OPTIONS="--import tsx" npx hhat ...); compile it to .mjs, or run hhat that way`,
      );
    }
    const message = firstLine(error instanceof Error ? error.message : String(error));
    if (error instanceof SyntaxError && /export|import/.test(message) && extension === '.js') {
      throw new UsageError(
        `estimator module ${path}: ${message}; a .js file is an ES module only under a package.json with "type": "module", so rename it to .mjs`,
      );
    }
    throw new UsageError(`estimator module ${path} could not be loaded: ${message}`);
  }
}

/** How long a module may take to load before it is taken for one whose top-level code never ends. */
export const MODULE_LOAD_SECONDS = 60;

/**
 * Code at a module's top level runs when it is imported: a loop there that never ends would hang this thread
 * with no way to stop it, and a `process.exit` there would end hhat at once, silently and with the module's exit
 * code (0 passed a CI gate). So the main thread first loads the module on a throwaway worker thread, which can be
 * stopped and whose `process.exit` ends only that thread, and refuses the module when that load does not finish
 * in time or ends the thread before it reports. A load that fails there is left for the real import to report
 * in its own words; workers load only modules the main thread has loaded.
 */
async function refuseEndlessLoad(path: string): Promise<void> {
  if (!isMainThread) return;
  // The tests' shorter limit.
  const seconds = Number(process.env.HHAT_MODULE_LOAD_SECONDS) || MODULE_LOAD_SECONDS;
  const url = pathToFileURL(path).href;
  // Only import(): the thread inherits this process's options, and under --input-type=module `require` is not defined.
  const probe = new Worker(
    `import('node:worker_threads').then(({ parentPort }) => import(${JSON.stringify(url)}).then(() => parentPort.postMessage('loaded'), () => parentPort.postMessage('failed')));`,
    { eval: true, stdout: true, stderr: true },
  );
  let timer: ReturnType<typeof setTimeout> | undefined;
  // null: loaded, or failed to load (the real import says how); else why the module is refused.
  const refusal = await Promise.race([
    new Promise<string | null>((done) => {
      probe.once('message', () => done(null));
      probe.once('error', () => done(null));
      probe.once('exit', (code) =>
        done(
          `ended the thread loading it (exit code ${code}) before it finished loading: code at its top level calls process.exit (or awaits something that never settles), which would end hhat too`,
        ),
      );
    }),
    new Promise<string>(
      (done) =>
        (timer = setTimeout(
          () => done(`did not finish loading in ${seconds} s: code at its top level runs when it loads, and some of it never ends`),
          seconds * 1000,
        )),
    ),
  ]);
  clearTimeout(timer);
  await probe.terminate();
  if (refusal !== null) throw new UsageError(`estimator module ${path} ${refusal}`);
}

/** What the module exports as its estimators, with a label for each for error messages. */
function exportedEstimators(path: string, namespace: Record<string, unknown>): { value: unknown; label: string }[] {
  const expected = 'export `const estimators = [...]`, a default array, or a single default estimator object';
  let list: unknown;
  let label: string;
  // A named `estimators` export wins: CommonJS modules expose module.exports both as default and by name.
  if ('estimators' in namespace && namespace.estimators !== undefined) {
    list = namespace.estimators;
    label = 'estimators';
    if (!Array.isArray(list)) throw new UsageError(`estimator module ${path}: "estimators" is ${show(list)}, not an array; ${expected}`);
  } else if ('default' in namespace && namespace.default !== undefined) {
    const value = namespace.default;
    if (Array.isArray(value)) {
      list = value;
      label = 'default';
    } else if (value !== null && typeof value === 'object' && Array.isArray((value as { estimators?: unknown }).estimators)) {
      list = (value as { estimators: unknown[] }).estimators;
      label = 'default.estimators';
    } else if (value !== null && typeof value === 'object') {
      return [{ value, label: 'the default export' }];
    } else {
      throw new UsageError(`estimator module ${path}: the default export is ${show(value)}; ${expected}`);
    }
  } else {
    throw new UsageError(`estimator module ${path}: exports no estimators; ${expected}`);
  }
  const items = list as unknown[];
  if (!items.length) throw new UsageError(`estimator module ${path}: "${label}" is an empty array; list at least one estimator`);
  return items.map((value, i) => ({ value, label: `${label}[${i}]` }));
}

/**
 * Imports each module (relative paths from the working folder) and checks every estimator it exports.
 * Node caches modules, so loading the same file twice gives the same objects.
 */
export async function loadEstimatorModules(paths: string[]): Promise<Estimator[]> {
  const out: Estimator[] = [];
  const origin = new Map<string, string>();
  for (const given of paths) {
    const path = resolveModulePath(given);
    const namespace = await importModule(path);
    for (const { value, label } of exportedEstimators(given, namespace)) {
      const estimator = checkEstimator(`estimator module ${given}: ${label}`, value);
      const other = origin.get(estimator.id);
      if (other !== undefined) {
        throw new UsageError(
          `estimator module ${given}: the id "${estimator.id}" is also defined ${other === given ? 'earlier in the same file' : `in ${other}`}; each id may be defined once`,
        );
      }
      origin.set(estimator.id, given);
      out.push(estimator);
    }
  }
  return out;
}

export interface Registration {
  /** Ids that were already registered (built-in or from an earlier module) and now run the user's code. */
  replaced: string[];
  /** Ids that are new. */
  added: string[];
}

/**
 * Registers the user's estimators. With `replace`, one whose id is already registered takes its place, so
 * an edited copy of a built-in runs under the built-in's cell names; without it, such an id is an error.
 * Registering the same object again (main thread, then in-process run) changes nothing and reports nothing.
 */
export function registerUserEstimators(list: Estimator[], options: { replace: boolean } = { replace: true }): Registration {
  const known = new Map(listEstimators().map((e) => [e.id, e]));
  if (!options.replace) {
    const clash = list.find((e) => known.has(e.id) && known.get(e.id) !== e);
    if (clash) throw new UsageError(`estimator "${clash.id}" is already registered; choose another id, or replace it on purpose`);
  }
  const replaced: string[] = [];
  const added: string[] = [];
  for (const estimator of list) {
    const previous = known.get(estimator.id);
    if (previous === estimator) continue;
    replaceEstimator(estimator, 'module');
    (previous ? replaced : added).push(estimator.id);
  }
  return { replaced, added };
}

/**
 * Loads and registers modules in one step (replacing built-ins with the same id): what the bench command,
 * an in-process run and every worker thread call with the plan's module paths before building a context.
 */
export async function useEstimatorModules(paths: string[]): Promise<Registration> {
  if (!paths.length) return { replaced: [], added: [] };
  return registerUserEstimators(await loadEstimatorModules(paths), { replace: true });
}

/** One line for the terminal, or '' when nothing changed. */
export function describeRegistration(registration: Registration): string {
  const parts: string[] = [];
  if (registration.replaced.length) parts.push(`replaced ${registration.replaced.join(', ')} (cells keep their names and now run the module's code)`);
  if (registration.added.length) parts.push(`added ${registration.added.join(', ')}`);
  return parts.length ? `estimator modules: ${parts.join('; ')}` : '';
}
