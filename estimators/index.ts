/**
 * The estimator registry: the only way the harness and the CLI reach estimators.
 *
 * Every file directly in this folder is an estimator file: it exports `registration` (src/contracts.ts,
 * EstimatorFile), and the registry imports them all, so a new estimator file needs no edit here. Helpers live
 * in subfolders (shared/, kernel/). The registry lists the files by their `catalogOrder` and each file's
 * estimators in their own order; that order is the catalog's, the default plans' and, at equal `order`, the
 * default sets'. Every estimator passes the declaration check (src/spec.ts, checkEstimator) when registered.
 */
import { readdirSync } from 'node:fs';
import { basename, dirname, extname, join } from 'node:path';
import { fileURLToPath, pathToFileURL } from 'node:url';
import type {
  DefaultEntry,
  DefaultSets,
  Estimator,
  EstimateDefaultEntry,
  EstimatorFile,
  Quantity,
  Sample,
  Settings,
  SettingValue,
} from '../src/core/contracts.js';
import { EstimateError, UsageError } from '../src/core/errors.js';
import { didYouMean } from '../src/core/suggest.js';
import { ordinal } from '../src/core/format.js';
import {
  checkEstimator,
  checkSpecText,
  describeValue,
  DEQUANTIZE_FAMILIES,
  DEQUANTIZE_SETTING,
  formatSpec,
  parseDequantize,
  parseSpec,
  parseThin,
  THIN_SETTING,
  validateSettings,
  type Dequantize,
} from '../src/core/spec.js';
import { copyOfSample, thinRows } from '../src/core/sample.js';
import { dequantizeSample, type EstimateResolution } from './shared/dequantize.js';

export type { EstimateResolution };

/**
 * The estimator files of this folder, imported: `.ts` under a TypeScript loader (tests, tsx), `.js` when built
 * (dist/ also holds .d.ts and .map files, which are skipped). `npm run build` clears dist/ first, so a file
 * deleted or moved from the sources does not linger there as a stale estimator file.
 */
async function importEstimatorFiles(): Promise<{ file: string; registration: EstimatorFile }[]> {
  const self = fileURLToPath(import.meta.url);
  const folder = dirname(self);
  const extension = extname(self);
  const names = readdirSync(folder, { withFileTypes: true })
    .filter((entry) => entry.isFile() && entry.name.endsWith(extension) && !entry.name.endsWith(`.d${extension}`) && entry.name !== basename(self))
    .map((entry) => entry.name)
    .sort();
  const files = await Promise.all(
    names.map(async (name) => {
      const namespace = (await import(pathToFileURL(join(folder, name)).href)) as { registration?: Partial<EstimatorFile> };
      const registration = namespace.registration;
      const file = `estimators/${name}`;
      if (!registration || typeof registration.catalogOrder !== 'number' || !Array.isArray(registration.estimators)) {
        throw new Error(
          `${file} does not export registration = { catalogOrder, estimators }: every file directly in estimators/ is an estimator file, and helpers go in a subfolder (a stale build output? npm run build clears dist/)`,
        );
      }
      return { file, registration: registration as EstimatorFile };
    }),
  );
  const byOrder = new Map<number, string>();
  for (const { file, registration } of files) {
    const other = byOrder.get(registration.catalogOrder);
    if (other) throw new Error(`${file} and ${other} both have catalogOrder ${registration.catalogOrder}; give each estimator file its own place`);
    byOrder.set(registration.catalogOrder, file);
  }
  return files.sort((a, b) => a.registration.catalogOrder - b.registration.catalogOrder);
}

const files = await importEstimatorFiles();
const builtIn: { file: string; estimator: Estimator }[] = files.flatMap(({ file, registration }) =>
  registration.estimators.map((estimator) => ({ file, estimator })),
);

const registry = new Map<string, Estimator>();
const builtInById = new Map(builtIn.map(({ estimator }) => [estimator.id, estimator]));
/**
 * Ids whose estimator exists only in this process's memory (registered or replaced by code, not built in and
 * not loaded from a module file): a worker thread rebuilds the registry from the built-ins and the plan's
 * module files, so it would not see them, or would run the built-in in their place.
 */
const inProcessOnly = new Set<string>();
/**
 * Default-set membership by id. A replacement that declares no `defaultFor` keeps the replaced estimator's:
 * the sets name slots (a replaced built-in keeps its cell names), and an edited copy should run where the
 * original did.
 */
const membership = new Map<string, DefaultSets>();

function record(estimator: Estimator, fromModule: boolean): void {
  registry.set(estimator.id, estimator);
  if (estimator.defaultFor) membership.set(estimator.id, estimator.defaultFor);
  if (fromModule || builtInById.get(estimator.id) === estimator) inProcessOnly.delete(estimator.id);
  else inProcessOnly.add(estimator.id);
}

for (const { file, estimator } of builtIn) {
  if (registry.has(estimator.id)) throw new Error(`${file}: estimator id "${estimator.id}" is already registered by another estimator file`);
  record(checkEstimator(`${file}: estimator`, estimator), false);
}

/** Registers a new estimator after checking its declaration (src/spec.ts, checkEstimator). */
export function registerEstimator(estimator: Estimator): void {
  checkEstimator('registered estimator', estimator);
  if (registry.has(estimator.id)) throw new UsageError(`estimator id "${estimator.id}" is already registered`);
  record(estimator, false);
}

/**
 * Registers an estimator, replacing any with the same id, and returns the one it replaced (undefined when the
 * id is new). Replacing keeps a built-in's cell names, so an edited copy can be compared with the original;
 * passing the returned estimator back restores it.
 */
export function replaceEstimator(estimator: Estimator, origin: 'code' | 'module' | 'command' = 'code'): Estimator | undefined {
  checkEstimator(origin === 'module' ? 'module estimator' : origin === 'command' ? 'estimator command' : 'registered estimator', estimator);
  const previous = registry.get(estimator.id);
  record(estimator, origin !== 'code');
  return previous;
}

/** Those of `ids` whose estimator only this process has (see inProcessOnly): runs on worker threads must refuse them. */
export function inProcessOnlyIds(ids: Iterable<string>): string[] {
  return [...new Set(ids)].filter((id) => inProcessOnly.has(id));
}

export function listEstimators(): Estimator[] {
  return [...registry.values()];
}

/** Whether an estimator of this id is registered (built in, or from a module or command). */
export function hasEstimator(id: string): boolean {
  return registry.has(id);
}

export function getEstimator(id: string): Estimator {
  const estimator = registry.get(id);
  if (!estimator) {
    throw new UsageError(`unknown estimator "${id}"${didYouMean(id, [...registry.keys()])}; known: ${[...registry.keys()].join(', ')}`);
  }
  return estimator;
}

/** An estimator with validated settings (sample-dependent keywords such as 'auto' still unresolved). */
export interface ConfiguredEstimator {
  estimator: Estimator;
  settings: Settings;
  /** Canonical `id:key=value,...` with every setting spelled out (then dequantize and thin=t, each only when it does something). */
  spec: string;
  /** The harness's thinning: the estimator sees rows 0, t, 2t, … (src/core/spec.ts, THIN_SETTING). */
  thin: number;
  /** The harness's jitter within the recording step (src/core/spec.ts, DEQUANTIZE_SETTING): none, auto or a step. */
  dequantize: Dequantize;
}

/** Whether the estimator takes dequantize (the families that take logs of distances between points). */
export function takesDequantize(estimator: Estimator): boolean {
  return DEQUANTIZE_FAMILIES.includes(estimator.family);
}

/** The same estimator, settings and thinning with dequantize=auto; null when it does not take the setting or sets it already. */
export function dequantizedVariant(configured: ConfiguredEstimator): ConfiguredEstimator | null {
  if (!takesDequantize(configured.estimator) || configured.dequantize !== 'none') return null;
  return configureEstimator(configured.estimator.id, { ...configured.settings, [DEQUANTIZE_SETTING]: 'auto', [THIN_SETTING]: configured.thin ?? 1 });
}

/** The one place settings are validated: every declared setting present and valid, defaults filled in. */
export function configureEstimator(id: string, given: Record<string, SettingValue> = {}): ConfiguredEstimator {
  checkSpecText(id, 'estimator');
  const estimator = getEstimator(id);
  if (typeof given !== 'object' || given === null || Array.isArray(given))
    throw new UsageError(`${estimator.id}: settings must be an object of name: value pairs (e.g. { k: 5 }); got ${describeValue(given)}`);
  const { [THIN_SETTING]: thinGiven, [DEQUANTIZE_SETTING]: dequantizeGiven, ...declared } = given;
  const thin = parseThin(estimator.id, thinGiven);
  if (thin !== 1 && estimator.quantity === 'transfer-entropy') {
    // Every t-th row of a series is another process, whose transfer entropy (lag t) is not the scenario's truth.
    throw new UsageError(
      `${estimator.id}: ${THIN_SETTING}=${thin} is not allowed for transfer entropy: every ${ordinal(thin)} row of a series is another process with another transfer entropy; only ${THIN_SETTING}=1`,
    );
  }
  const dequantize = parseDequantize(estimator.id, estimator.family, dequantizeGiven);
  const settings = validateSettings(estimator.id, estimator.settings, declared);
  let spec = formatSpec(
    estimator.id,
    settings,
    estimator.settings.map((s) => s.name),
  );
  // The harness's settings go last, each only when it does something, so every other spec is unchanged.
  const extra = [...(dequantize !== 'none' ? [`${DEQUANTIZE_SETTING}=${dequantize}`] : []), ...(thin !== 1 ? [`${THIN_SETTING}=${thin}`] : [])];
  if (extra.length) spec = `${spec}${spec === estimator.id ? ':' : ','}${extra.join(',')}`;
  return { estimator, settings, spec, thin, dequantize };
}

/** Parses `id:key=value,...` as typed on the command line. */
export function parseEstimatorSpec(text: string): ConfiguredEstimator {
  const { id, values } = parseSpec(text, 'estimator');
  return configureEstimator(id, values);
}

/** Settings with per-sample defaults filled in: what the estimate actually used. */
export function resolveSettings(configured: ConfiguredEstimator, sample: Sample): Settings {
  return configured.estimator.resolve ? configured.estimator.resolve(sample, configured.settings) : { ...configured.settings };
}

/** An estimator's supported dimensions as text: "d = 1", "d ≥ 2" or "1 ≤ d ≤ 3". */
export function dimsRange([minDim, maxDim]: Estimator['dims']): string {
  return maxDim === Infinity ? `d ≥ ${minDim}` : minDim === maxDim ? `d = ${minDim}` : `${minDim} ≤ d ≤ ${maxDim}`;
}

/** Whether data of dimension `dim` are within the estimator's declared `dims`. */
export function supportsDimension(estimator: Estimator, dim: number): boolean {
  return dim >= estimator.dims[0] && dim <= estimator.dims[1];
}

/**
 * The one dimension check: asking an estimator for data of a dimension it does not support is a usage mistake
 * (exit 2), found before any estimate is made. Estimators themselves never check it; plans skip such cells.
 */
export function checkDimension(estimator: Estimator, dim: number): void {
  if (!supportsDimension(estimator, dim)) throw new UsageError(`${estimator.id} does not support d = ${dim}; it needs ${dimsRange(estimator.dims)}`);
}

/**
 * Runs an estimator on a sample after checking the dimension. Estimators take their settings as configured
 * (keywords such as 'auto' included); with `report`, the settings actually used are resolved too, which costs
 * a second look at the sample, so the harness's hot path leaves it off.
 */
export function runEstimator(
  configured: ConfiguredEstimator,
  sample: Sample,
  options: { report?: boolean } = {},
): { value: number; settings: Settings; resolution?: EstimateResolution } {
  checkDimension(configured.estimator, sample.dim);
  // Thinning is the harness's, so every estimator (built-in, module or command) has it without a line of its own.
  const { sample: used, resolution } = dequantizeSample(thinRows(sample, configured.thin ?? 1), configured.dequantize);
  // A user's estimator (a module, a command) gets a copy: one that writes into its input would change what every
  // later estimator of the replicate sees, and the failures would land on them. Built-ins are held to leaving their
  // input unchanged by the conformance suite (leaves-sample-unchanged) and share the one array.
  const given = builtInById.get(configured.estimator.id) === configured.estimator ? used : copyOfSample(used);
  const value: unknown = configured.estimator.estimate(given, configured.settings);
  // A user's module is plain JavaScript: a string such as "1.5" must not pass for an estimate.
  if (typeof value !== 'number')
    throw new EstimateError('numeric', `${configured.estimator.id}: estimate must return a number (nats); it returned ${describeValue(value)}`);
  return { value, settings: options.report ? resolveSettings(configured, used) : configured.settings, ...(options.report && resolution ? { resolution } : {}) };
}

/** The estimator's id plus only the settings that differ from their defaults (the spec itself for an unknown id). */
export function estimatorLabel(spec: string): string {
  const { id, values } = parseSpec(spec, 'estimator');
  let defaults: Record<string, string> = {};
  try {
    defaults = Object.fromEntries(getEstimator(id).settings.map((s) => [s.name, String(s.default)]));
  } catch {
    return spec;
  }
  const changed = Object.entries(values).filter(([k, v]) => defaults[k] !== v);
  return changed.length ? `${id}:${changed.map(([k, v]) => `${k}=${v}`).join(',')}` : id;
}

/**
 * A default set as the estimators declare it (their `defaultFor`): `estimate` for `hhat estimate` without
 * --estimator on data of dimension `dim`, `bench` for the default plan of `quantity`. Estimator specs (the bare
 * id where an entry keeps the default settings), by increasing `order`, equal orders in registry order.
 */
export function defaultSet(set: keyof DefaultSets, quantity: Quantity, dim?: number): string[] {
  const members: { spec: string; order: number; position: number }[] = [];
  listEstimators().forEach((estimator, position) => {
    const declared = membership.get(estimator.id)?.[set];
    if (estimator.quantity !== quantity || !declared) return;
    const entries: readonly EstimateDefaultEntry[] = declared === true ? [{}] : declared;
    for (const entry of entries) {
      const [minDim, maxDim] = entry.dims ?? estimator.dims;
      if (set === 'estimate' && dim !== undefined && !(supportsDimension(estimator, dim) && dim >= minDim && dim <= maxDim)) continue;
      members.push({ spec: entrySpec(estimator, entry), order: entry.order ?? 0, position });
    }
  });
  return members.sort((a, b) => a.order - b.order || a.position - b.position).map((m) => m.spec);
}

function entrySpec(estimator: Estimator, entry: DefaultEntry): string {
  if (!entry.settings) return estimator.id;
  return formatSpec(estimator.id, validateSettings(estimator.id, estimator.settings, entry.settings), Object.keys(entry.settings));
}
