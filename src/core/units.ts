/**
 * Units of measurement. Differential entropy is relative to the unit of the data: with y = c·x in every one
 * of d coordinates, h(Y) = h(X) + d·log|c|. Converting a value from one unit to another is that rule with
 * c = (size of the old unit)/(size of the new unit).
 */
import { UsageError } from './errors.js';
import { didYouMean } from './suggest.js';

/** Unit sizes in the SI base unit of their kind. */
const UNITS: Record<string, { kind: string; size: number }> = {
  km: { kind: 'length', size: 1e3 },
  m: { kind: 'length', size: 1 },
  cm: { kind: 'length', size: 1e-2 },
  mm: { kind: 'length', size: 1e-3 },
  um: { kind: 'length', size: 1e-6 },
  'µm': { kind: 'length', size: 1e-6 },
  nm: { kind: 'length', size: 1e-9 },
  angstrom: { kind: 'length', size: 1e-10 },
  in: { kind: 'length', size: 0.0254 },
  ft: { kind: 'length', size: 0.3048 },
  h: { kind: 'time', size: 3600 },
  min: { kind: 'time', size: 60 },
  s: { kind: 'time', size: 1 },
  ms: { kind: 'time', size: 1e-3 },
  us: { kind: 'time', size: 1e-6 },
  'µs': { kind: 'time', size: 1e-6 },
  ns: { kind: 'time', size: 1e-9 },
  kV: { kind: 'voltage', size: 1e3 },
  V: { kind: 'voltage', size: 1 },
  mV: { kind: 'voltage', size: 1e-3 },
  uV: { kind: 'voltage', size: 1e-6 },
  'µV': { kind: 'voltage', size: 1e-6 },
  kg: { kind: 'mass', size: 1 },
  g: { kind: 'mass', size: 1e-3 },
  mg: { kind: 'mass', size: 1e-6 },
  K: { kind: 'temperature difference', size: 1 },
  mK: { kind: 'temperature difference', size: 1e-3 },
  Hz: { kind: 'frequency', size: 1 },
  kHz: { kind: 'frequency', size: 1e3 },
  MHz: { kind: 'frequency', size: 1e6 },
};

export const KNOWN_UNITS = Object.keys(UNITS);

/** The factor c with value_in_to = c · value_in_from for the data (not the entropy). */
export function unitFactor(from: string, to: string): number {
  const a = UNITS[from];
  const b = UNITS[to];
  for (const [name, unit] of [
    [from, a],
    [to, b],
  ] as const) {
    if (!unit) throw new UsageError(`unknown unit "${name}"${didYouMean(name, KNOWN_UNITS)}; known: ${KNOWN_UNITS.join(', ')} (or give --factor c)`);
  }
  if (a.kind !== b.kind) throw new UsageError(`cannot convert ${from} (${a.kind}) to ${to} (${b.kind}); both units must measure the same kind of quantity`);
  return a.size / b.size;
}

/** The entropy of the same data after every one of d coordinates is multiplied by c: h + d·log|c|. */
export function convertEntropy(nats: number, dim: number, factor: number): number {
  if (!(factor !== 0 && Number.isFinite(factor))) throw new UsageError(`the factor ${factor} is not allowed; it must be a finite nonzero number`);
  return nats + dim * Math.log(Math.abs(factor));
}

/** "nats relative to 1 mm³" style labels. */
export function unitLabel(base: 'nats' | 'bits', unit: string | undefined, dim: number): string {
  if (!unit) return base;
  const power = dim === 1 ? '' : dim === 2 ? '²' : dim === 3 ? '³' : `^${dim}`;
  return `${base} relative to 1 ${unit}${power}`;
}
