/**
 * Estimator modules: the user's own estimators, loaded from a JavaScript file and registered beside (or in
 * place of) the built-in ones. A module exports `estimators` (an array), a default array, or a single
 * default estimator, each following the Estimator contract of src/contracts.ts. Everything is checked here,
 * at the boundary, so a mistake is one line naming the file and the problem rather than a failure deep in a
 * run.
 *
 *   const list = await loadEstimatorModules(['lab/estimators.mjs']);
 *   const { replaced, added } = registerUserEstimators(list, { replace: true });
 */
import { createHash } from 'node:crypto';
import { existsSync, readFileSync, statSync } from 'node:fs';
import { extname, isAbsolute, resolve } from 'node:path';
import { pathToFileURL } from 'node:url';
import type { Estimator, InvarianceName, SettingSpec, SettingValue } from './contracts.js';
import { UsageError } from './errors.js';
import { describeSetting } from './spec.js';
import { listEstimators, replaceEstimator } from '../estimators/index.js';

export const QUANTITIES = ['entropy', 'mutual-information', 'divergence'] as const;
const SETTING_KINDS = ['integer', 'number', 'choice', 'choice-or-integer', 'choice-or-number'] as const;
const JAVASCRIPT = new Set(['.js', '.mjs', '.cjs']);
const TYPESCRIPT = new Set(['.ts', '.mts']);
/** Ids and setting names end up inside `id:key=value,...` specs, so they must not contain `:`, `,`, `=` or brackets. */
const ID_PATTERN = /^[a-z][a-z0-9]*(-[a-z0-9]+)*$/;
const SETTING_NAME_PATTERN = /^[a-z][a-z0-9_-]*$/i;
const CHOICE_PATTERN = /^[^\s,=:[\];]+$/;

/** Resolves a module path as written by the user against a base folder (the working folder, or a plan file's). */
export function resolveModulePath(path: string, baseDir = process.cwd()): string {
  return isAbsolute(path) ? path : resolve(baseDir, path);
}

/** sha256 of a module's source: put it beside the path in a plan or run file so an edited module is noticed. */
export function moduleDigest(path: string): string {
  return createHash('sha256').update(readFileSync(resolveModulePath(path))).digest('hex');
}

/** A value as a one-line error message shows it. */
function show(value: unknown): string {
  if (value === undefined) return 'nothing';
  if (typeof value === 'function') return 'a function';
  if (typeof value === 'string') return JSON.stringify(value);
  if (typeof value === 'number') return String(value);
  if (Array.isArray(value)) return `[${value.map(show).join(', ')}]`;
  if (value === null) return 'null';
  if (typeof value === 'object') return 'an object';
  return String(value);
}

function firstLine(text: string): string {
  return text.split('\n')[0].trim();
}

async function importModule(path: string): Promise<Record<string, unknown>> {
  const extension = extname(path).toLowerCase();
  if (!JAVASCRIPT.has(extension) && !TYPESCRIPT.has(extension)) {
    throw new UsageError(`estimator module ${path}: "${extension || '(no extension)'}" files cannot be loaded; use .js or .mjs (or .ts when hhat runs under tsx)`);
  }
  if (!existsSync(path)) throw new UsageError(`estimator module ${path}: no such file`);
  if (!statSync(path).isFile()) throw new UsageError(`estimator module ${path}: is a folder, not a file`);
  try {
    return (await import(pathToFileURL(path).href)) as Record<string, unknown>;
  } catch (error) {
    const code = (error as NodeJS.ErrnoException).code;
    if (TYPESCRIPT.has(extension) && code === 'ERR_UNKNOWN_FILE_EXTENSION') {
      throw new UsageError(`estimator module ${path}: TypeScript modules load only under a TypeScript loader (NODE_OPTIONS="--import tsx" npx hhat ...); compile it to .mjs, or run hhat that way`);
    }
    const message = firstLine(error instanceof Error ? error.message : String(error));
    if (error instanceof SyntaxError && /export|import/.test(message) && extension === '.js') {
      throw new UsageError(`estimator module ${path}: ${message}; a .js file is an ES module only under a package.json with "type": "module", so rename it to .mjs`);
    }
    throw new UsageError(`estimator module ${path} could not be loaded: ${message}`);
  }
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

function checkSettingSpec(where: string, raw: unknown, index: number): SettingSpec {
  const at = `${where}: settings[${index}]`;
  if (raw === null || typeof raw !== 'object' || Array.isArray(raw)) {
    throw new UsageError(`${at} is ${show(raw)}; each setting is an object with name, meaning, default and kind`);
  }
  const spec = raw as Partial<SettingSpec> & Record<string, unknown>;
  if (typeof spec.name !== 'string' || !SETTING_NAME_PATTERN.test(spec.name)) {
    throw new UsageError(`${at}: name ${show(spec.name)} is not allowed; a setting name is letters, digits, '-' or '_', starting with a letter`);
  }
  const named = `${at} ("${spec.name}")`;
  if (typeof spec.meaning !== 'string' || spec.meaning.trim() === '') throw new UsageError(`${named}: meaning is missing; give one line saying what the setting does`);
  if (typeof spec.kind !== 'string' || !(SETTING_KINDS as readonly string[]).includes(spec.kind)) {
    throw new UsageError(`${named}: kind ${show(spec.kind)} is not allowed; it must be one of ${SETTING_KINDS.join(', ')}`);
  }
  if (spec.kind.startsWith('choice')) {
    if (!Array.isArray(spec.choices) || !spec.choices.length || !spec.choices.every((c) => typeof c === 'string' && CHOICE_PATTERN.test(c))) {
      throw new UsageError(`${named}: kind "${spec.kind}" needs choices, a non-empty array of words without spaces, ',', '=', ':' or brackets; got ${show(spec.choices)}`);
    }
  }
  for (const bound of ['min', 'max'] as const) {
    const value = spec[bound];
    if (value !== undefined && (typeof value !== 'number' || Number.isNaN(value))) throw new UsageError(`${named}: ${bound} is ${show(value)}; it must be a number when given`);
  }
  if (spec.min !== undefined && spec.max !== undefined && spec.min > spec.max) throw new UsageError(`${named}: min ${spec.min} is above max ${spec.max}`);
  if (spec.minExclusive !== undefined && typeof spec.minExclusive !== 'boolean') throw new UsageError(`${named}: minExclusive is ${show(spec.minExclusive)}; it must be true or false`);
  const checked = spec as SettingSpec;
  if (!defaultAllowed(checked, spec.default)) {
    throw new UsageError(`${named}: default ${show(spec.default)} is not allowed; ${spec.name} must be ${describeSetting(checked)}`);
  }
  return checked;
}

/** The same rules the registry applies to typed settings, except that a default keyword need not be a choice (it is resolved per sample). */
function defaultAllowed(spec: SettingSpec, value: unknown): value is SettingValue {
  const integer = spec.kind.endsWith('integer');
  if (typeof value === 'string') return spec.kind !== 'integer' && spec.kind !== 'number' && CHOICE_PATTERN.test(value);
  if (typeof value !== 'number' || !Number.isFinite(value) || spec.kind === 'choice') return false;
  if (integer && !Number.isInteger(value)) return false;
  if (spec.min !== undefined && (spec.minExclusive ? value <= spec.min : value < spec.min)) return false;
  if (spec.max !== undefined && value > spec.max) return false;
  return true;
}

/** Every invariance an estimator may declare it lacks (a Record, so a name added to the type must be listed). */
const INVARIANCES: Record<InvarianceName, true> = { rowOrder: true, scale: true, separateScale: true, translation: true, symmetry: true, affine: true };

function checkLacks(where: string, lacks: unknown): void {
  const names = Object.keys(INVARIANCES).join(', ');
  if (lacks === null || typeof lacks !== 'object' || Array.isArray(lacks)) {
    throw new UsageError(`${where}: lacks is ${show(lacks)}; give an object naming the invariances the method lacks (${names}), each with its reason`);
  }
  for (const [name, reason] of Object.entries(lacks)) {
    if (!(name in INVARIANCES)) throw new UsageError(`${where}: lacks.${name} is not an invariance hhat checks; the names are ${names}`);
    if (typeof reason === 'function' || (typeof reason === 'string' && reason.trim() !== '')) continue;
    throw new UsageError(`${where}: lacks.${name} is ${show(reason)}; give the reason as a non-empty string, or a function (settings, dim) returning it (undefined where the invariance holds)`);
  }
}

function checkDims(where: string, dims: unknown): void {
  const ok =
    Array.isArray(dims) &&
    dims.length === 2 &&
    Number.isInteger(dims[0]) &&
    (dims[0] as number) >= 1 &&
    (Number.isInteger(dims[1]) || dims[1] === Infinity) &&
    (dims[1] as number) >= (dims[0] as number);
  if (!ok) throw new UsageError(`${where}: dims must be [min, max], whole numbers with 1 ≤ min ≤ max (max may be Infinity); got ${show(dims)}`);
}

/** Checks one exported value against the Estimator contract; `where` names the file and the export. */
export function checkEstimator(where: string, value: unknown): Estimator {
  if (value === null || typeof value !== 'object' || Array.isArray(value)) {
    throw new UsageError(`${where} is ${show(value)}; an estimator is an object with id, family, quantity, summary, settings, dims, reference and estimate`);
  }
  const e = value as Partial<Estimator> & Record<string, unknown>;
  if (e.id === undefined) throw new UsageError(`${where} has no id; give a lowercase hyphenated name such as "my-method"`);
  if (typeof e.id !== 'string' || !ID_PATTERN.test(e.id)) {
    throw new UsageError(`${where}: id ${show(e.id)} is not allowed; an id is lowercase letters and digits in hyphenated words, e.g. "my-method"`);
  }
  const at = `${where} ("${e.id}")`;
  if (typeof e.estimate !== 'function') throw new UsageError(`${at}: estimate is ${show(e.estimate)}, not a function; give estimate(sample, settings) returning nats`);
  if (e.resolve !== undefined && typeof e.resolve !== 'function') throw new UsageError(`${at}: resolve is ${show(e.resolve)}; when given it must be a function (sample, settings) => settings`);
  if (typeof e.quantity !== 'string' || !(QUANTITIES as readonly string[]).includes(e.quantity)) {
    throw new UsageError(`${at}: quantity ${show(e.quantity)} is not allowed; it must be one of ${QUANTITIES.join(', ')}`);
  }
  for (const [field, meaning] of [
    ['family', 'a family name such as "nearest-neighbour"'],
    ['summary', 'one line for catalogs'],
    ['reference', 'the paper or book that defines the method (or where your lab describes it)'],
  ] as const) {
    const text = e[field];
    if (typeof text !== 'string' || text.trim() === '') {
      throw new UsageError(`${at}: ${field} is ${text === undefined ? 'missing' : show(text)}; give ${meaning} as a non-empty string`);
    }
  }
  checkDims(at, e.dims);
  if (!Array.isArray(e.settings)) throw new UsageError(`${at}: settings is ${show(e.settings)}; give an array of setting specs ([] for none)`);
  const seen = new Set<string>();
  e.settings.forEach((spec, i) => {
    const checked = checkSettingSpec(at, spec, i);
    if (seen.has(checked.name)) throw new UsageError(`${at}: settings[${i}]: the name "${checked.name}" is used twice`);
    seen.add(checked.name);
  });
  if (e.lacks !== undefined) checkLacks(at, e.lacks);
  return e as Estimator;
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
        throw new UsageError(`estimator module ${given}: the id "${estimator.id}" is also defined ${other === given ? 'earlier in the same file' : `in ${other}`}; each id may be defined once`);
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
