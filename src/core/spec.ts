import type { ParamSpec, SettingSpec, SettingValue, Settings } from './contracts.js';
import { UsageError } from './errors.js';

/** A parsed `id:key=value,key=value` string; values are kept as text until validated. */
export interface ParsedSpec {
  id: string;
  values: Record<string, string>;
}

/** Splits `id:key=value,...`. Brackets may hold nested specs (`product[normal;exponential:rate=2]`). */
export function parseSpec(text: string, what: string): ParsedSpec {
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
export function validateParams(
  owner: string,
  specs: readonly ParamSpec[],
  given: Record<string, number | string>,
): Record<string, number> {
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
      throw new UsageError(`${owner}: ${spec.name}=${formatNumber(value)} is not allowed; ${spec.name} must be ${describeRange(spec)}`);
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
export function validateSettings(
  owner: string,
  specs: readonly SettingSpec[],
  given: Record<string, SettingValue>,
): Settings {
  const known = new Map(specs.map((s) => [s.name, s]));
  for (const key of Object.keys(given)) {
    if (!known.has(key)) {
      const allowed = specs.length ? specs.map((s) => s.name).join(', ') : 'none';
      throw new UsageError(`${owner}: unknown setting "${key}"; allowed: ${allowed}`);
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
  if (!inRange(value, { min: spec.min, max: spec.max, minExclusive: spec.minExclusive, integer })) return fail(formatNumber(value));
  return value;
}

/** Canonical `id:key=value,...` text for an id and its values, in the given key order. */
export function formatSpec(id: string, values: Record<string, SettingValue>, order?: readonly string[]): string {
  const keys = order ?? Object.keys(values);
  const parts = keys.filter((k) => values[k] !== undefined).map((k) => {
    const v = values[k];
    return `${k}=${typeof v === 'number' ? formatNumber(v) : v}`;
  });
  return parts.length ? `${id}:${parts.join(',')}` : id;
}
