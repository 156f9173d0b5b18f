import type { DefaultEntry, Estimator, EstimateDefaultEntry, InvarianceName, ParamSpec, SettingSpec, SettingValue, Settings } from './contracts.js';
import { UsageError } from './errors.js';
import { didYouMean } from './suggest.js';

/** A parsed `id:key=value,key=value` string; values are kept as text until validated. */
export interface ParsedSpec {
  id: string;
  values: Record<string, string>;
}

/** A value of the wrong type as a message names it: nothing, null, the number 3, an array, an object. */
export function describeValue(value: unknown): string {
  if (value === undefined) return 'nothing';
  if (value === null) return 'null';
  if (typeof value === 'string') return `the string ${JSON.stringify(value.length > 40 ? `${value.slice(0, 40)}…` : value)}`;
  if (typeof value === 'number' || typeof value === 'boolean') return `the ${typeof value} ${String(value)}`;
  if (typeof value === 'bigint') return `the bigint ${value}n`;
  return Array.isArray(value) ? 'an array' : `${typeof value === 'object' ? 'an' : 'a'} ${typeof value}`;
}

/** Library callers pass specs from code: anything but a string is refused as the text a user might have typed is. */
export function checkSpecText(text: unknown, what: string): asserts text is string {
  if (typeof text !== 'string')
    throw new UsageError(`${/^[aeiou]/.test(what) ? 'an' : 'a'} ${what} spec must be a string, ID or ID:key=value,...; got ${describeValue(text)}`);
}

/** Splits `id:key=value,...`. Brackets may hold nested specs (`product[normal;exponential:rate=2]`). */
export function parseSpec(text: string, what: string): ParsedSpec {
  checkSpecText(text, what);
  const trimmed = text.trim();
  if (trimmed === '') throw new UsageError(`empty ${what}; expected ID or ID:key=value,...`);
  let depth = 0;
  let colon = -1;
  for (let i = 0; i < trimmed.length; i++) {
    const ch = trimmed[i];
    if (ch === '[') depth++;
    else if (ch === ']') depth--;
    else if (ch === ':' && depth === 0) {
      colon = i;
      break;
    }
  }
  if (depth < 0) throw new UsageError(`${what} "${text}" has an unmatched ']'`);
  const id = colon < 0 ? trimmed : trimmed.slice(0, colon);
  const values: Record<string, string> = {};
  if (colon >= 0) {
    const rest = trimmed.slice(colon + 1);
    if (rest.trim() === '') throw new UsageError(`${what} "${text}" has ':' but no key=value after it`);
    // A semicolon between pairs (as in some other syntaxes) would otherwise read as part of a value.
    if (/^[^[\]]*;\s*[A-Za-z_][\w-]*\s*=/.test(rest)) {
      const fixed = `${id}:${rest.split(/\s*;\s*/).join(',')}`;
      throw new UsageError(`${what} "${text}": separate its ${what === 'estimator' ? 'settings' : 'parameters'} with commas, not semicolons: ${fixed}`);
    }
    for (const part of rest.split(',')) {
      const eq = part.indexOf('=');
      if (eq <= 0) throw new UsageError(`${what} "${text}": "${part}" is not key=value`);
      const key = part.slice(0, eq).trim();
      const value = part.slice(eq + 1).trim();
      if (value === '') throw new UsageError(`${what} "${text}": ${key} has no value`);
      if (key in values) throw new UsageError(`${what} "${text}": ${key} is given twice`);
      values[key] = value;
    }
  }
  return { id, values };
}

/** Shortest text that reads back as the same double; the canonical form used in ids. */
export function formatNumber(x: number): string {
  if (Object.is(x, -0)) return '0';
  return String(x);
}

export function parseNumber(text: string): number | undefined {
  // A setting or parameter from code may be any value (true, null); it is then no number, as "abc" is not.
  if (typeof text !== 'string') return undefined;
  if (!/^[+-]?(\d+\.?\d*|\.\d+)([eE][+-]?\d+)?$/.test(text.trim())) return undefined;
  return Number(text);
}

function describeRange(spec: { min?: number; max?: number; minExclusive?: boolean; maxExclusive?: boolean; integer?: boolean }): string {
  const kind = spec.integer ? 'an integer' : 'a number';
  const parts: string[] = [];
  if (spec.min !== undefined) parts.push(`${spec.minExclusive ? '>' : '≥'} ${formatNumber(spec.min)}`);
  if (spec.max !== undefined) parts.push(`${spec.maxExclusive ? '<' : '≤'} ${formatNumber(spec.max)}`);
  return parts.length ? `${kind} ${parts.join(' and ')}` : kind;
}

function inRange(x: number, spec: { min?: number; max?: number; minExclusive?: boolean; maxExclusive?: boolean; integer?: boolean }): boolean {
  if (!Number.isFinite(x)) return false;
  if (spec.integer && !Number.isInteger(x)) return false;
  if (spec.min !== undefined && (spec.minExclusive ? x <= spec.min : x < spec.min)) return false;
  if (spec.max !== undefined && (spec.maxExclusive ? x >= spec.max : x > spec.max)) return false;
  return true;
}

/** Validates scenario parameters; unknown names and out-of-range values are usage errors naming the range. */
export function validateParams(owner: string, specs: readonly ParamSpec[], given: Record<string, number | string>): Record<string, number> {
  const known = new Set(specs.map((s) => s.name));
  for (const key of Object.keys(given)) {
    if (!known.has(key)) {
      const allowed = specs.length ? specs.map((s) => s.name).join(', ') : 'none';
      throw new UsageError(`${owner}: unknown parameter "${key}"; allowed: ${allowed}`);
    }
  }
  const out: Record<string, number> = {};
  for (const spec of specs) {
    const raw = given[spec.name];
    let value: number;
    if (raw === undefined) value = spec.default;
    else if (typeof raw === 'number') value = raw;
    else {
      const parsed = parseNumber(raw);
      if (parsed === undefined) throw new UsageError(`${owner}: ${spec.name}=${raw} is not a number; ${spec.name} must be ${describeRange(spec)}`);
      value = parsed;
    }
    if (!inRange(value, spec)) {
      throw new UsageError(
        `${owner}: ${spec.name}=${typeof raw === 'string' ? raw : formatNumber(value)} is not allowed; ${spec.name} must be ${describeRange(spec)}`,
      );
    }
    out[spec.name] = value;
  }
  return out;
}

export function describeSetting(spec: SettingSpec): string {
  const numeric = describeRange({ min: spec.min, max: spec.max, minExclusive: spec.minExclusive, integer: spec.kind.endsWith('integer') });
  const choices = spec.choices?.join(' | ') ?? '';
  switch (spec.kind) {
    case 'choice':
      return `one of ${choices}`;
    case 'choice-or-integer':
    case 'choice-or-number':
      return `one of ${choices}, or ${numeric}`;
    default:
      return numeric;
  }
}

/** Validates estimator settings given as text or values; fills defaults (keywords are resolved later, per sample). */
/**
 * The one setting every estimator has without declaring it: thin=t runs the estimator on rows 0, t, 2t, … (a
 * serially dependent sample thinned to fewer, less dependent rows). The registry applies it before `estimate`
 * (estimators/index.ts, runEstimator), and a spec names it only when t ≠ 1, so cell names without it are unchanged.
 */
export const THIN_SETTING = 'thin';

/** Reads thin=t: an integer ≥ 1 (absent: 1). */
export function parseThin(owner: string, raw: SettingValue | undefined): number {
  if (raw === undefined) return 1;
  const value = typeof raw === 'number' ? raw : parseNumber(raw);
  if (value === undefined || !Number.isInteger(value) || value < 1) {
    throw new UsageError(`${owner}: ${THIN_SETTING}=${raw} is not allowed; ${THIN_SETTING} must be an integer ≥ 1 (use every t-th row; 1 = all rows)`);
  }
  return value;
}

/**
 * The harness's other setting: dequantize=auto|STEP on the estimators that take logs of distances between points
 * (DEQUANTIZE_FAMILIES), which recorded data with repeated values break. It adds uniform noise within each
 * column's recording step (auto: the step src/math/lattice.ts detects; a number: that step for every column),
 * seeded by the data themselves (estimators/index.ts, runEstimator). A spec names it only when it is not none.
 */
export const DEQUANTIZE_SETTING = 'dequantize';
export const DEQUANTIZE_FAMILIES: readonly string[] = ['nearest-neighbour', 'kernel', 'spacing'];
export type Dequantize = 'none' | 'auto' | number;

/** Reads dequantize=none|auto|STEP (absent: none); `family` must be one that takes it. */
export function parseDequantize(owner: string, family: string, raw: SettingValue | undefined): Dequantize {
  if (raw === undefined || raw === 'none') return 'none';
  if (!DEQUANTIZE_FAMILIES.includes(family)) {
    throw new UsageError(
      `${owner}: ${DEQUANTIZE_SETTING} is not a setting of the ${family} family; it applies to ${DEQUANTIZE_FAMILIES.join(', ')} estimators (the ones that take logs of distances between points)`,
    );
  }
  if (raw === 'auto') return 'auto';
  const value = typeof raw === 'number' ? raw : parseNumber(raw);
  if (value === undefined || !(value > 0) || !Number.isFinite(value)) {
    throw new UsageError(
      `${owner}: ${DEQUANTIZE_SETTING}=${raw} is not allowed; give none, auto (the recording step of each column, detected) or a step > 0 in data units`,
    );
  }
  return value;
}

export function validateSettings(owner: string, specs: readonly SettingSpec[], given: Record<string, SettingValue>): Settings {
  const known = new Map(specs.map((s) => [s.name, s]));
  for (const key of Object.keys(given)) {
    if (!known.has(key)) {
      const allowed = specs.length ? specs.map((s) => s.name).join(', ') : 'none';
      throw new UsageError(`${owner}: unknown setting "${key}"${didYouMean(key, [...known.keys()])}; allowed: ${allowed}`);
    }
  }
  const out: Settings = {};
  for (const spec of specs) {
    const raw = given[spec.name];
    if (raw === undefined) {
      out[spec.name] = spec.default;
      continue;
    }
    out[spec.name] = checkSetting(owner, spec, raw);
  }
  return out;
}

export function checkSetting(owner: string, spec: SettingSpec, raw: SettingValue): SettingValue {
  const fail = (shown: string): never => {
    throw new UsageError(`${owner}: ${spec.name}=${shown} is not allowed; ${spec.name} must be ${describeSetting(spec)}`);
  };
  const allowsChoice = spec.kind === 'choice' || spec.kind.startsWith('choice-or');
  const allowsNumber = spec.kind !== 'choice';
  const integer = spec.kind.endsWith('integer');
  if (typeof raw === 'string' && allowsChoice && spec.choices?.includes(raw)) return raw;
  if (typeof raw === 'string' && spec.default === raw) return raw;
  if (!allowsNumber) return fail(String(raw));
  const value = typeof raw === 'number' ? raw : parseNumber(raw);
  if (value === undefined) return fail(String(raw));
  // As typed: 1e400 reads as Infinity, which the user never wrote.
  if (!inRange(value, { min: spec.min, max: spec.max, minExclusive: spec.minExclusive, integer }))
    return fail(typeof raw === 'string' ? raw : formatNumber(value));
  return value;
}

/** Canonical `id:key=value,...` text for an id and its values, in the given key order. */
export function formatSpec(id: string, values: Record<string, SettingValue>, order?: readonly string[]): string {
  const keys = order ?? Object.keys(values);
  const parts = keys
    .filter((k) => values[k] !== undefined)
    .map((k) => {
      const v = values[k];
      return `${k}=${typeof v === 'number' ? formatNumber(v) : v}`;
    });
  return parts.length ? `${id}:${parts.join(',')}` : id;
}

// ---------------------------------------------------------------------------------------------------------
// Estimator declarations: checked once, when the registry takes an estimator (built-in, registered by code, or
// loaded from a user's module), so settings, grids and default sets can be trusted everywhere after.

export const QUANTITIES = ['entropy', 'mutual-information', 'conditional-mutual-information', 'transfer-entropy', 'divergence'] as const;
const SETTING_KINDS = ['integer', 'number', 'choice', 'choice-or-integer', 'choice-or-number'] as const;
/** Ids and setting names end up inside `id:key=value,...` specs, so they must not contain `:`, `,`, `=` or brackets. */
/** An estimator's id (built-in, module or command): lowercase letters and digits in hyphenated words. */
export const ID_PATTERN = /^[a-z][a-z0-9]*(-[a-z0-9]+)*$/;
const SETTING_NAME_PATTERN = /^[a-z][a-z0-9_-]*$/i;
const CHOICE_PATTERN = /^[^\s,=:[\];]+$/;

/** A value as a one-line error message shows it. */
export function showValue(value: unknown): string {
  if (value === undefined) return 'nothing';
  if (typeof value === 'function') return 'a function';
  if (typeof value === 'string') return JSON.stringify(value);
  if (typeof value === 'number') return String(value);
  if (Array.isArray(value)) return `[${value.map(showValue).join(', ')}]`;
  if (value === null) return 'null';
  if (typeof value === 'object') return 'an object';
  // eslint-disable-next-line @typescript-eslint/no-base-to-string -- objects returned above; a boolean, bigint or symbol is left
  return String(value);
}
const show = showValue;

function isRecord(value: unknown): value is Record<string, unknown> {
  return value !== null && typeof value === 'object' && !Array.isArray(value);
}

function checkSettingSpec(where: string, raw: unknown, index: number): SettingSpec {
  const at = `${where}: settings[${index}]`;
  if (!isRecord(raw)) throw new UsageError(`${at} is ${show(raw)}; each setting is an object with name, meaning, default and kind`);
  const spec = raw as Partial<SettingSpec> & Record<string, unknown>;
  if (typeof spec.name !== 'string' || !SETTING_NAME_PATTERN.test(spec.name)) {
    throw new UsageError(`${at}: name ${show(spec.name)} is not allowed; a setting name is letters, digits, '-' or '_', starting with a letter`);
  }
  const named = `${at} ("${spec.name}")`;
  if (typeof spec.meaning !== 'string' || spec.meaning.trim() === '')
    throw new UsageError(`${named}: meaning is missing; give one line saying what the setting does`);
  if (typeof spec.kind !== 'string' || !(SETTING_KINDS as readonly string[]).includes(spec.kind)) {
    throw new UsageError(`${named}: kind ${show(spec.kind)} is not allowed; it must be one of ${SETTING_KINDS.join(', ')}`);
  }
  if (spec.kind.startsWith('choice')) {
    if (!Array.isArray(spec.choices) || !spec.choices.length || !spec.choices.every((c) => typeof c === 'string' && CHOICE_PATTERN.test(c))) {
      throw new UsageError(
        `${named}: kind "${spec.kind}" needs choices, a non-empty array of words without spaces, ',', '=', ':' or brackets; got ${show(spec.choices)}`,
      );
    }
  }
  for (const bound of ['min', 'max'] as const) {
    const value = spec[bound];
    if (value !== undefined && (typeof value !== 'number' || Number.isNaN(value)))
      throw new UsageError(`${named}: ${bound} is ${show(value)}; it must be a number when given`);
  }
  if (spec.min !== undefined && spec.max !== undefined && spec.min > spec.max) throw new UsageError(`${named}: min ${spec.min} is above max ${spec.max}`);
  if (spec.minExclusive !== undefined && typeof spec.minExclusive !== 'boolean')
    throw new UsageError(`${named}: minExclusive is ${show(spec.minExclusive)}; it must be true or false`);
  const checked = spec as SettingSpec;
  if (!defaultAllowed(checked, spec.default)) {
    throw new UsageError(`${named}: default ${show(spec.default)} is not allowed; ${spec.name} must be ${describeSetting(checked)}`);
  }
  return checked;
}

/** checkSetting's rules, except that a default keyword need not be a choice (it is resolved per sample). */
function defaultAllowed(spec: SettingSpec, value: unknown): value is SettingValue {
  if (typeof value === 'string') return spec.kind !== 'integer' && spec.kind !== 'number' && CHOICE_PATTERN.test(value);
  if (typeof value !== 'number') return false;
  try {
    checkSetting('', spec, value);
    return true;
  } catch {
    return false;
  }
}

function isDims(dims: unknown): dims is readonly [number, number] {
  return (
    Array.isArray(dims) &&
    dims.length === 2 &&
    Number.isInteger(dims[0]) &&
    (dims[0] as number) >= 1 &&
    (Number.isInteger(dims[1]) || dims[1] === Infinity) &&
    (dims[1] as number) >= (dims[0] as number)
  );
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
    throw new UsageError(
      `${where}: lacks.${name} is ${show(reason)}; give the reason as a non-empty string, or a function (settings, dim) returning it (undefined where the invariance holds)`,
    );
  }
}

function checkDims(where: string, dims: unknown): void {
  if (!isDims(dims)) throw new UsageError(`${where}: dims must be [min, max], whole numbers with 1 ≤ min ≤ max (max may be Infinity); got ${show(dims)}`);
}

/** `defaultFor`: which default sets list the estimator; each entry's settings are validated like a user's. */
function checkDefaultSets(at: string, value: unknown, estimator: Estimator): void {
  if (value === undefined) return;
  const shape = 'defaultFor is an object { estimate?, bench? }, each true or an array of entries { order?, settings? } (estimate entries also dims?)';
  if (!isRecord(value)) throw new UsageError(`${at}: defaultFor is ${show(value)}; ${shape}`);
  for (const key of Object.keys(value)) {
    if (key !== 'estimate' && key !== 'bench') throw new UsageError(`${at}: defaultFor.${key} is not a default set; ${shape}`);
    const entries = value[key];
    if (entries === true) continue;
    if (!Array.isArray(entries) || !entries.length) throw new UsageError(`${at}: defaultFor.${key} is ${show(entries)}; ${shape}`);
    entries.forEach((raw: unknown, i) => {
      const where = `${at}: defaultFor.${key}[${i}]`;
      if (!isRecord(raw)) throw new UsageError(`${where} is ${show(raw)}; ${shape}`);
      const entry = raw as EstimateDefaultEntry & Record<string, unknown>;
      for (const field of Object.keys(entry)) {
        if (field !== 'order' && field !== 'settings' && !(field === 'dims' && key === 'estimate'))
          throw new UsageError(`${where}: "${field}" is not allowed; ${shape}`);
      }
      if (entry.order !== undefined && !(typeof entry.order === 'number' && Number.isFinite(entry.order)))
        throw new UsageError(`${where}: order is ${show(entry.order)}; it must be a number (lower comes first)`);
      if (entry.dims !== undefined) {
        checkDims(where, entry.dims);
        const [low, high] = entry.dims;
        if (low < estimator.dims[0] || high > estimator.dims[1])
          throw new UsageError(`${where}: dims ${show(entry.dims)} reach beyond the estimator's own dims ${show(estimator.dims)}`);
      }
      if (entry.settings !== undefined) {
        if (!isRecord(entry.settings)) throw new UsageError(`${where}: settings is ${show(entry.settings)}; give an object { name: value }`);
        validateSettings(`${where}: ${estimator.id}`, estimator.settings, (entry as DefaultEntry).settings!);
      }
    });
  }
}

/**
 * Checks a value against the Estimator contract (src/contracts.ts) and returns it unchanged: every field, each
 * setting's declaration and default, the tuning grid's form and the default-set entries. `where` names the
 * estimator's origin (a module file and export, or the registry) for the one-line errors.
 */
export function checkEstimator(where: string, value: unknown): Estimator {
  if (!isRecord(value)) {
    throw new UsageError(`${where} is ${show(value)}; an estimator is an object with id, family, quantity, summary, settings, dims, reference and estimate`);
  }
  const e = value as Partial<Estimator> & Record<string, unknown>;
  if (e.id === undefined) throw new UsageError(`${where} has no id; give a lowercase hyphenated name such as "my-method"`);
  if (typeof e.id !== 'string' || !ID_PATTERN.test(e.id)) {
    throw new UsageError(`${where}: id ${show(e.id)} is not allowed; an id is lowercase letters and digits in hyphenated words, e.g. "my-method"`);
  }
  const at = `${where} ("${e.id}")`;
  if (typeof e.estimate !== 'function')
    throw new UsageError(`${at}: estimate is ${show(e.estimate)}, not a function; give estimate(sample, settings) returning nats`);
  if (e.resolve !== undefined && typeof e.resolve !== 'function')
    throw new UsageError(`${at}: resolve is ${show(e.resolve)}; when given it must be a function (sample, settings) => settings`);
  if (e.tuning !== undefined && typeof e.tuning !== 'function') {
    throw new UsageError(`${at}: tuning is ${show(e.tuning)}; when given it must be a function (settings, n) => [{ setting, values: [...] }, ...]`);
  }
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
    if (checked.name === THIN_SETTING || checked.name === DEQUANTIZE_SETTING)
      throw new UsageError(
        `${at}: settings[${i}]: "${checked.name}" is the harness's own setting (${checked.name === THIN_SETTING ? 'use every t-th row' : 'jitter within the recording step'}); choose another name`,
      );
    seen.add(checked.name);
  });
  checkDefaultSets(at, e.defaultFor, e as Estimator);
  if (e.lacks !== undefined) checkLacks(at, e.lacks);
  if (e.conformanceLaw !== undefined && (typeof e.conformanceLaw !== 'string' || e.conformanceLaw.trim() === ''))
    throw new UsageError(`${at}: conformanceLaw is ${show(e.conformanceLaw)}; when given it must be a scenario spec such as "recorded[step=0.1;normal]"`);
  return e as Estimator;
}
