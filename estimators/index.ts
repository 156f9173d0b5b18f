/**
 * The estimator registry: the only way the harness and the CLI reach estimators.
 */
import type { Estimator, Sample, Settings, SettingValue } from '../src/core/contracts.js';
import { UsageError } from '../src/core/errors.js';
import { formatSpec, parseSpec, validateSettings } from '../src/core/spec.js';
import { histogramEstimators } from './histogram.js';
import { spacingEstimators } from './spacing.js';
import { nearestNeighbourEstimators } from './nearest-neighbour.js';
import { kernelEstimators } from './kernel.js';
import { parametricEstimators } from './parametric.js';
import { mutualInformationEstimators } from './mutual-information.js';
import { divergenceEstimators } from './divergence.js';

const builtIn: Estimator[] = [
  ...histogramEstimators,
  ...spacingEstimators,
  ...nearestNeighbourEstimators,
  ...kernelEstimators,
  ...parametricEstimators,
  ...mutualInformationEstimators,
  ...divergenceEstimators,
];

const registry = new Map<string, Estimator>();
const builtInById = new Map(builtIn.map((e) => [e.id, e]));
/**
 * Ids whose estimator exists only in this process's memory (registered or replaced by code, not built in and
 * not loaded from a module file): a worker thread rebuilds the registry from the built-ins and the plan's
 * module files, so it would not see them, or would run the built-in in their place.
 */
const inProcessOnly = new Set<string>();

function record(estimator: Estimator, fromModule: boolean): void {
  registry.set(estimator.id, estimator);
  if (fromModule || builtInById.get(estimator.id) === estimator) inProcessOnly.delete(estimator.id);
  else inProcessOnly.add(estimator.id);
}

for (const estimator of builtIn) registerEstimator(estimator);

export function registerEstimator(estimator: Estimator): void {
  if (registry.has(estimator.id)) throw new UsageError(`estimator id "${estimator.id}" is already registered`);
  record(estimator, false);
}

/**
 * Registers an estimator, replacing any with the same id, and returns the one it replaced (undefined when the
 * id is new). Replacing keeps a built-in's cell names, so an edited copy can be compared with the original;
 * passing the returned estimator back restores it.
 */
export function replaceEstimator(estimator: Estimator, origin: 'code' | 'module' = 'code'): Estimator | undefined {
  const previous = registry.get(estimator.id);
  record(estimator, origin === 'module');
  return previous;
}

/** Those of `ids` whose estimator only this process has (see inProcessOnly): runs on worker threads must refuse them. */
export function inProcessOnlyIds(ids: Iterable<string>): string[] {
  return [...new Set(ids)].filter((id) => inProcessOnly.has(id));
}

export function listEstimators(): Estimator[] {
  return [...registry.values()];
}

export function getEstimator(id: string): Estimator {
  const estimator = registry.get(id);
  if (!estimator) {
    throw new UsageError(`unknown estimator "${id}"; known: ${[...registry.keys()].join(', ')}`);
  }
  return estimator;
}

/** An estimator with validated settings (sample-dependent keywords such as 'auto' still unresolved). */
export interface ConfiguredEstimator {
  estimator: Estimator;
  settings: Settings;
  /** Canonical `id:key=value,...` with every setting spelled out. */
  spec: string;
}

export function configureEstimator(id: string, given: Record<string, SettingValue> = {}): ConfiguredEstimator {
  const estimator = getEstimator(id);
  const settings = validateSettings(estimator.id, estimator.settings, given);
  return { estimator, settings, spec: formatSpec(estimator.id, settings, estimator.settings.map((s) => s.name)) };
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

/**
 * Runs an estimator on a sample after checking the dimension. Estimators take their settings as configured
 * (keywords such as 'auto' included); with `report`, the settings actually used are resolved too, which costs
 * a second look at the sample, so the harness's hot path leaves it off.
 */
export function runEstimator(configured: ConfiguredEstimator, sample: Sample, options: { report?: boolean } = {}): { value: number; settings: Settings } {
  const { estimator } = configured;
  const [minDim, maxDim] = estimator.dims;
  if (sample.dim < minDim || sample.dim > maxDim) throw new UsageError(`${estimator.id} does not support d = ${sample.dim}; it needs ${dimsRange(estimator.dims)}`);
  const value = estimator.estimate(sample, configured.settings);
  return { value, settings: options.report ? resolveSettings(configured, sample) : configured.settings };
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
