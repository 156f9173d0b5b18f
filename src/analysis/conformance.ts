/**
 * The estimator conformance suite: named checks that every estimator, built-in or a user's, must pass, each
 * returning pass, fail or not applicable with its evidence (the numbers compared and the tolerance, the
 * error thrown, or why the check does not apply).
 *
 *   const report = runConformance(getEstimator('kozachenko-leonenko'));
 *   report.checks.filter((c) => c.status === 'fail');     // [] for every built-in
 *
 * The checks follow the estimator's quantity. Every estimator: deterministic, leaves the sample unchanged,
 * row order, configured vs resolved settings, a known value, and typed errors (an EstimateError) on
 * non-finite values, too few points and a dimension outside `dims`. Entropy: the exact shift d·log|c| under
 * x → c·x and translation. Mutual information: rescaling X and Y by factors of their own, translation,
 * symmetry. Divergence: a common rescaling, translation, an affine map, and D(P ‖ P) near 0. An estimator
 * declares the invariances its method lacks in `lacks` (src/contracts.ts): those checks are then not
 * applicable, and their evidence gives the reason beside the difference measured anyway.
 *
 * Samples are seeded draws from the project's scenarios (src/conformance-samples.ts), so a report is the same
 * on every run. The suite runs in the calling thread and has no time limit: an estimator that hangs hangs it, so
 * `hhat check` runs a module's estimators check by check on a supervised thread (conformance-job.ts).
 */
import type { Estimator, InvarianceName, Quantity, Sample, Scenario, Settings, SettingValue } from '../core/contracts.js';
import { CommandError, UsageError, isEstimateError } from '../core/errors.js';
import { formatSpec, validateSettings } from '../core/spec.js';
import { checkDimension } from '../../estimators/index.js';
import { parseScenario } from '../../scenarios/index.js';
import { atHistories } from '../../scenarios/transfer-entropy.js';
import {
  affineLaw,
  affineMap,
  applyAffine,
  cloneSample,
  draw,
  firstDifference,
  firstRows,
  lawFor,
  mapColumns,
  permuteRows,
  shuffleLeadingColumns,
  sameLawPair,
  swapParts,
  withDimension,
  withValue,
} from './conformance-samples.js';

export const CHECKS = [
  'deterministic',
  'leaves-sample-unchanged',
  'row-order',
  'configured-resolved',
  'tuning-responds',
  'scale',
  'translation',
  'symmetry',
  'affine',
  'self-divergence',
  'known-value',
  'independence',
  'rejects-non-finite',
  'rejects-too-few',
  'rejects-wrong-dimension',
] as const;
export type CheckName = (typeof CHECKS)[number];

const QUANTITY_CHECKS: Record<Quantity, ReadonlySet<CheckName>> = {
  entropy: new Set(CHECKS.filter((c) => c !== 'symmetry' && c !== 'affine' && c !== 'self-divergence' && c !== 'independence')),
  'mutual-information': new Set(CHECKS.filter((c) => c !== 'affine' && c !== 'self-divergence')),
  'conditional-mutual-information': new Set(CHECKS.filter((c) => c !== 'affine' && c !== 'self-divergence')),
  // TE(X → Y) ≠ TE(Y → X) by design: no symmetry check.
  'transfer-entropy': new Set(CHECKS.filter((c) => c !== 'symmetry' && c !== 'affine' && c !== 'self-divergence')),
  divergence: new Set(CHECKS.filter((c) => c !== 'symmetry' && c !== 'independence')),
};

/** The checks that apply to a quantity, in suite order. */
export function checksFor(quantity: Quantity): CheckName[] {
  return CHECKS.filter((c) => QUANTITY_CHECKS[quantity].has(c));
}

export type CheckStatus = 'pass' | 'fail' | 'not-applicable';

export interface Comparison {
  /** What the estimate should be (the first estimate, shifted where the check says so, or the truth). */
  expected: number;
  got: number;
  /** |got − expected| of the worst case the check tried. */
  difference: number;
  /** The largest difference allowed for that case. */
  tolerance: number;
}

/** An invariance the estimator declares it lacks (Estimator.lacks), with what the suite measured anyway. */
export interface DeclaredException {
  invariance: InvarianceName;
  reason: string;
  /** The comparison the check would have made; absent when the estimator could not give the values. */
  compared?: Comparison;
}

export interface CheckResult {
  check: CheckName;
  status: CheckStatus;
  /** One line: the numbers compared with the tolerance, the error thrown, or why the check does not apply. */
  evidence: string;
  /** The worst comparison, when the check compared numbers. */
  compared?: Comparison;
  /** The declared exception that made the check not applicable (or, for mutual information, narrowed it to one scale factor). */
  declared?: DeclaredException;
}

export interface ConformanceReport {
  estimator: string;
  quantity: Quantity;
  /** The settings checked (validated, keywords unresolved) and their spec. */
  settings: Settings;
  spec: string;
  /** The scenario whose draws the checks use (a divergence's pair and affine checks have their own). */
  law: string;
  checks: CheckResult[];
  /** True when no check failed. */
  passed: boolean;
  milliseconds: number;
}

/** Points in the samples of the invariance and bad-input checks: invariances are exact, so they need no large n. */
export const INVARIANCE_N = 200;
/** Points in the samples of the known-value and self-divergence checks (and in Q's). */
export const KNOWN_VALUE_N = 4000;

/**
 * Relative tolerance where only the order of floating-point operations changes (rows permuted, the same
 * arithmetic on other arrays, columns swapped, data rescaled by exact powers of two): the same sums taken in
 * another order differ in their last bits, about n·eps ≈ 1e-13 relative at n = 200, so bit-identity would fail
 * correct estimators (a kd-tree visits points in another order, a sum of logs adds them in another order),
 * while any real dependence on the order (a subsample of the first rows, a trend in the row index) moves the
 * estimate by far more than 1e-9. Relative to max(1, |values|), so values near 0 get an absolute 1e-9.
 */
export const ROUNDING_TOLERANCE = 1e-9;
/**
 * Relative tolerance where the data themselves are rounded (x + b, Ax + b): each value moves by up to half an
 * ulp of the result, which moves a nearest-neighbour distance or a spacing between close points by up to
 * eps·|b|/gap in relative terms; averaged over the sample this stays below 1e-10 here, and 1e-8 leaves room.
 */
export const MAPPED_DATA_TOLERANCE = 1e-8;
/**
 * Known-value tolerances in nats per dimension, at KNOWN_VALUE_N points of the suite's laws (lawFor; entropy and
 * divergence: per coordinate; mutual information: per X/Y coordinate pair; conditional: per X/Y/Z triple).
 * Measured over 20 seeds at n = 4000 in the smallest dimension, the largest |error| of any built-in with its
 * default settings was 0.080 nats for entropy (normal, truth 1.419; van-es, whose bias is −0.05 there), 0.054
 * for mutual information (ρ = 0.9, truth 0.830; ksg2; with copula=rank 0.153, mi-histogram, and 0.085 or less
 * for the others), 0.036 for conditional mutual information (truth 0.695; cmi-ksg), 0.027 for transfer entropy
 * (k = l = 1, truth 0.383; te-ksg, 10 seeds) and 0.062 for divergence (N(0, 1) against N(2, 9), truth 0.876; knn-divergence with
 * k = 3). The tolerances are about twice those or more (for mutual information, 1.3 times the copula=rank
 * histogram's), while a broken estimator misses by more than its tolerance: a constant off by ½ nat, a missing
 * Jacobian, D(Q ‖ P) for D(P ‖ Q), no conditioning, or an answer in bits (1.443 times the nats: 0.63 nats off
 * for entropy, 0.17 for transfer entropy at k = l = 1 and 0.31 to 0.39 for the others; for mutual information that exceeds 0.2 for an estimator within
 * 0.07 nats of the truth).
 */
export const KNOWN_VALUE_TOLERANCE: Record<Quantity, number> = {
  entropy: 0.15,
  'mutual-information': 0.2,
  'conditional-mutual-information': 0.1,
  // Per three columns of the embedding (1 + k + l), as for conditional MI; the reverse direction's TE (0) or the
  // lagged MI without conditioning miss by far more.
  'transfer-entropy': 0.08,
  divergence: 0.15,
};
/** |D̂(P ‖ P)| allowed per dimension, at KNOWN_VALUE_N points each: the built-ins measured at most 0.049 over 20 seeds (knn-divergence). */
export const SELF_DIVERGENCE_TOLERANCE = 0.1;
/** Powers of two, so the rescaled data are exact and only the estimator's own rounding remains; one negative (a reflection). */
export const CHECKED_RESCALINGS = [8, -1 / 16] as const;
/** Shifts of the translation check, by column: several SDs of the suite's laws, alternating in sign. */
const SHIFTS = [5, -3.25] as const;

interface Context {
  estimator: Estimator;
  settings: Settings;
  /** The scenario the base and known-value samples are drawn from, and its dimension. */
  law: string;
  lawDim: number;
  /** The sample of the invariance and bad-input checks: INVARIANCE_N points at the smallest dimension supported. */
  base: Sample;
}

/** The estimator could not give a value a check needs (it threw, or returned something other than a finite number). */
class CheckFailed extends Error {}

type Body = (context: Context) => Omit<CheckResult, 'check'>;

/** A number for evidence: enough digits to see a last-bit difference, none beyond. */
function show(x: number): string {
  return Number.isInteger(x) ? String(x) : String(Number(x.toPrecision(12)));
}

/** A number for evidence where only its size matters (an error against a tolerance of 0.1 nats). */
function showRough(x: number): string {
  return String(Number(x.toPrecision(4)));
}

function showSmall(x: number): string {
  return x === 0 ? '0' : x.toExponential(1);
}

function firstLine(text: string): string {
  return text.split('\n')[0].trim();
}

/** What an estimator threw, as evidence. */
export function describeThrown(error: unknown): string {
  if (isEstimateError(error)) return `EstimateError(${error.code}): ${firstLine(error.message)}`;
  if (error instanceof Error) return `${error.name}: ${firstLine(error.message)}`;
  return `threw ${typeof error === 'string' ? JSON.stringify(error) : String(error)}`;
}

function describeReturned(value: unknown): string {
  if (typeof value === 'number') return `returned ${value}`;
  return `returned ${value === undefined ? 'nothing' : typeof value === 'string' ? JSON.stringify(value) : typeof value}`;
}

type Outcome = { kind: 'value'; value: number } | { kind: 'thrown'; error: unknown } | { kind: 'returned'; value: unknown };

function attempt(context: Context, sample: Sample, settings: Settings = context.settings): Outcome {
  let result: unknown;
  try {
    result = context.estimator.estimate(sample, settings);
  } catch (error) {
    return { kind: 'thrown', error };
  }
  return typeof result === 'number' && Number.isFinite(result) ? { kind: 'value', value: result } : { kind: 'returned', value: result };
}

/** The estimate on a sample a check needs, or a CheckFailed naming the sample and what happened instead. */
function estimateOn(context: Context, sample: Sample, what: string, settings?: Settings): number {
  const outcome = attempt(context, sample, settings);
  if (outcome.kind === 'value') return outcome.value;
  throw new CheckFailed(
    `${what}: ${outcome.kind === 'thrown' ? describeThrown(outcome.error) : `${describeReturned(outcome.value)} instead of a finite number`}`,
  );
}

/** The reason the estimator declares for lacking an invariance with these settings in dimension `dim`, if any. */
/**
 * Invariances a whole quantity lacks by definition, declared here once for every estimator of it (built-in or a
 * user's); measured anyway like an estimator's own declaration.
 */
const QUANTITY_LACKS: Partial<Record<Quantity, Partial<Record<InvarianceName, string>>>> = {
  'transfer-entropy': {
    rowOrder:
      'transfer entropy is defined by the time order of the rows (the past of one series predicting the next value of the other); permuting rows destroys it',
  },
};

function declaredException(context: Context, name: InvarianceName, dim: number): string | undefined {
  const entry = context.estimator.lacks?.[name] ?? QUANTITY_LACKS[context.estimator.quantity]?.[name];
  if (entry === undefined) return undefined;
  return typeof entry === 'string' ? entry : entry(context.settings, dim);
}

interface Case {
  /** How the sample was changed, e.g. "x → 8x". */
  label: string;
  sample: Sample;
  /** How the estimate should move: d·log|c| for a rescaled entropy, else 0. */
  shift: number;
}

interface Measured {
  compared: Comparison;
  ok: boolean;
  line: string;
}

/**
 * Estimates the base sample and every case, compares each with the base estimate plus its shift within
 * `relative`·max(1, |values|, |shift|), and returns the worst comparison with a line listing every case.
 */
function measure(context: Context, base: Sample, cases: Case[], relative: number, reference = 'the sample as drawn'): Measured {
  const first = estimateOn(context, cloneSample(base), reference);
  let worst: Comparison | undefined;
  let worstExcess = -Infinity;
  let ok = true;
  const parts = cases.map(({ label, sample, shift }) => {
    const got = estimateOn(context, sample, label);
    const expected = first + shift;
    const difference = Math.abs(got - expected);
    const tolerance = relative * Math.max(1, Math.abs(first), Math.abs(got), Math.abs(shift));
    if (!(difference <= tolerance)) ok = false;
    if (difference / tolerance > worstExcess || worst === undefined) {
      worstExcess = difference / tolerance;
      worst = { expected, got, difference, tolerance };
    }
    const target = shift === 0 ? show(first) : `${show(first)} ${shift > 0 ? '+' : '−'} ${show(Math.abs(shift))}`;
    return `${label}: ${show(got)} vs ${target} (|Δ| ${showSmall(difference)})`;
  });
  return { compared: worst!, ok, line: `${parts.join('; ')}; allowed ${showSmall(worst!.tolerance)} (${relative} relative)` };
}

/** An invariance check: not applicable (measured anyway) where the estimator declares it lacks the property. */
function invariance(context: Context, name: InvarianceName, dim: number, run: () => Measured): Omit<CheckResult, 'check'> {
  const reason = declaredException(context, name, dim);
  if (reason !== undefined) {
    let measured: string;
    let compared: Comparison | undefined;
    try {
      const result = run();
      compared = result.compared;
      measured = `; measured anyway: ${result.line}`;
    } catch (error) {
      if (!(error instanceof CheckFailed)) throw error;
      measured = `; measured anyway: ${error.message}`;
    }
    return {
      status: 'not-applicable',
      evidence: `declared lacking (lacks.${name}): ${reason}${measured}`,
      declared: { invariance: name, reason, ...(compared ? { compared } : {}) },
    };
  }
  const result = run();
  return { status: result.ok ? 'pass' : 'fail', evidence: result.line, compared: result.compared };
}

function columnsOf(sample: Sample): { xDim: number; yDim: number; dim: number } {
  const xDim = sample.xDim ?? sample.dim;
  return { xDim, yDim: sample.yDim ?? sample.dim - xDim, dim: sample.dim };
}

/** The mutual-information quantities, whose variables (X, Y and for conditional MI Z) each keep their own scale. */
function isInformation(quantity: Quantity): boolean {
  return quantity === 'mutual-information' || quantity === 'conditional-mutual-information' || quantity === 'transfer-entropy';
}

/** The smallest dimension the suite draws for a quantity: X and Y (and Z) need a column each. */
function baseDimension(quantity: Quantity, minDim: number): number {
  return quantity === 'mutual-information' || quantity === 'transfer-entropy'
    ? Math.max(2, minDim)
    : quantity === 'conditional-mutual-information'
      ? Math.max(3, minDim)
      : minDim;
}

/**
 * The law the checks draw from: the estimator's own `conformanceLaw` when it declares one (a method for data of a
 * kind, such as labels or values on a lattice), else the suite's law for the quantity at the smallest dimension.
 * A declared law that is no scenario, or one of another quantity or a dimension outside `dims`, is a UsageError.
 */
function lawOf(estimator: Estimator): { law: string; dim: number } {
  if (estimator.conformanceLaw === undefined) {
    const dim = baseDimension(estimator.quantity, estimator.dims[0]);
    return { law: lawFor(estimator.quantity, dim), dim };
  }
  const at = `${estimator.id}: conformanceLaw "${estimator.conformanceLaw}"`;
  let scenario: Scenario;
  try {
    scenario = parseScenario(estimator.conformanceLaw);
  } catch (error) {
    throw new UsageError(`${at} is no scenario: ${error instanceof Error ? firstLine(error.message) : String(error)}`);
  }
  if (scenario.quantity !== estimator.quantity)
    throw new UsageError(`${at} is a ${scenario.quantity} scenario; the estimator's quantity is ${estimator.quantity}`);
  const [minDim, maxDim] = estimator.dims;
  if (scenario.dim < minDim || scenario.dim > maxDim)
    throw new UsageError(`${at} has d = ${scenario.dim}, outside the estimator's dims [${minDim}, ${maxDim === Infinity ? '∞' : maxDim}]`);
  return { law: estimator.conformanceLaw, dim: scenario.dim };
}

const deterministic: Body = (context) => {
  const sample = cloneSample(context.base);
  const first = estimateOn(context, sample, 'first estimate');
  const again = estimateOn(context, sample, 'second estimate on the same array');
  const copy = estimateOn(context, cloneSample(context.base), 'estimate on a copy of the values');
  const same = Object.is(first, again) && Object.is(first, copy);
  const values = `${first}, ${again} (same array again), ${copy} (a copy)`;
  return {
    status: same ? 'pass' : 'fail',
    evidence: same
      ? `three estimates of the same values are bit-identical: ${first}`
      : `the same values gave ${values}; an estimate must depend on the values alone`,
    compared: {
      expected: first,
      got: Object.is(first, again) ? copy : again,
      difference: Math.max(Math.abs(first - again), Math.abs(first - copy)),
      tolerance: 0,
    },
  };
};

const leavesSampleUnchanged: Body = (context) => {
  const before = cloneSample(context.base);
  const given = cloneSample(context.base);
  estimateOn(context, given, 'estimate');
  const change = firstDifference(before, given);
  return change === null
    ? { status: 'pass', evidence: `every value${given.q ? ' of P and Q' : ''} is bit-identical after the estimate` }
    : { status: 'fail', evidence: `the estimate changed its input: ${change}; the harness gives every estimator the same sample, so copy before changing it` };
};

const rowOrder: Body = (context) =>
  invariance(context, 'rowOrder', context.base.dim, () =>
    measure(
      context,
      context.base,
      [{ label: context.base.q ? 'rows of P and Q permuted' : 'rows permuted', sample: permuteRows(context.base), shift: 0 }],
      ROUNDING_TOLERANCE,
    ),
  );

const configuredResolved: Body = (context) => {
  const { estimator, settings } = context;
  if (!estimator.resolve) return { status: 'not-applicable', evidence: 'no resolve: estimate uses the settings as configured' };
  let resolved: Settings;
  try {
    const given = estimator.resolve(cloneSample(context.base), { ...settings });
    if (given === null || typeof given !== 'object') throw new CheckFailed(`resolve ${describeReturned(given)}, not settings`);
    resolved = validateSettings(estimator.id, estimator.settings, given);
  } catch (error) {
    if (error instanceof CheckFailed) throw error;
    throw new CheckFailed(`resolve on the sample: ${describeThrown(error)} (resolved settings must be settings the estimator accepts)`);
  }
  const changes = Object.keys(resolved)
    .filter((k) => !Object.is(resolved[k], settings[k]))
    .map((k) => `${k}: ${String(settings[k])} → ${String(resolved[k])}`);
  const configured = estimateOn(context, cloneSample(context.base), 'with the configured settings');
  const used = estimateOn(context, cloneSample(context.base), 'with the resolved settings', resolved);
  const difference = Math.abs(configured - used);
  const tolerance = ROUNDING_TOLERANCE * Math.max(1, Math.abs(configured), Math.abs(used));
  const ok = difference <= tolerance;
  return {
    status: ok ? 'pass' : 'fail',
    evidence: `${changes.length ? changes.join(', ') : 'resolve changed nothing'}: ${show(used)} resolved vs ${show(configured)} configured (|Δ| ${showSmall(difference)}; allowed ${showSmall(tolerance)})`,
    compared: { expected: configured, got: used, difference, tolerance },
  };
};

/** A grid's values for evidence: all of them when few, else the first and last. */
function gridLabel(values: readonly SettingValue[]): string {
  return values.length <= 4 ? values.map(String).join(', ') : `${String(values[0])}, …, ${String(values[values.length - 1])}`;
}

/**
 * Along each axis of its tuning grid (at the suite's n), the estimate must move. A robustness run reports the
 * spread of the estimates over the grid as the estimator's sensitivity to its tuning; an estimator that ignores
 * the setting (a misspelt name read, a value fixed in its code) shows a spread of 0 there and would be called
 * perfectly robust. Grid values whose estimate fails here are left out; with fewer than two estimates an axis says
 * nothing, and the check fails only on an axis whose estimates are all bit-identical.
 */
const tuningResponds: Body = (context) => {
  const { estimator, settings, base } = context;
  const axes = estimator.tuning?.(settings, base.n) ?? [];
  if (!axes.length) return { status: 'not-applicable', evidence: 'no tuning grid' };
  const parts: string[] = [];
  const ignored: string[] = [];
  for (const axis of axes) {
    const values = axis.values;
    const estimates: number[] = [];
    for (const value of values) {
      let given: Settings;
      try {
        given = validateSettings(estimator.id, estimator.settings, { ...settings, [axis.setting]: value });
      } catch {
        continue;
      }
      const outcome = attempt(context, cloneSample(base), given);
      if (outcome.kind === 'value') estimates.push(outcome.value);
    }
    const grid = `${axis.setting} = ${gridLabel(values)}`;
    if (estimates.length < 2) {
      parts.push(`${grid}: ${estimates.length} of ${values.length} values gave an estimate at n = ${base.n}, too few to compare`);
      continue;
    }
    const distinct = new Set(estimates).size;
    const low = Math.min(...estimates);
    const high = Math.max(...estimates);
    if (distinct === 1) {
      ignored.push(axis.setting);
      parts.push(`${grid}: all ${estimates.length} estimates are ${show(low)}, bit for bit`);
    } else {
      parts.push(`${grid}: ${distinct} distinct estimates of ${estimates.length}, ${show(low)} to ${show(high)}`);
    }
  }
  const evidence = parts.join('; ');
  if (ignored.length) {
    const names = ignored.join(' and ');
    return {
      status: 'fail',
      evidence: `${evidence}: the estimate does not depend on ${names}, so a robustness run would report no tuning spread for ${ignored.length === 1 ? 'it' : 'them'}`,
    };
  }
  return { status: 'pass', evidence };
};

function factorLabel(c: number): string {
  if (Number.isInteger(c)) return `${c}`;
  return `${c < 0 ? '−' : ''}1/${Math.round(1 / Math.abs(c))}`;
}

const scale: Body = (context) => {
  const { base } = context;
  const { dim, xDim, yDim } = columnsOf(base);
  const common = (): Measured =>
    measure(
      context,
      base,
      CHECKED_RESCALINGS.map((c) => ({
        label: `×${factorLabel(c)}`,
        sample: mapColumns(base, new Array<number>(dim).fill(c), new Array<number>(dim).fill(0)),
        // Entropy moves by exactly d·log|c|; mutual information and divergence do not move.
        shift: context.estimator.quantity === 'entropy' ? dim * Math.log(Math.abs(c)) : 0,
      })),
      ROUNDING_TOLERANCE,
    );
  if (!isInformation(context.estimator.quantity)) return invariance(context, 'scale', dim, common);
  const [a, b] = CHECKED_RESCALINGS;
  // Conditional MI: Z gets a factor of its own too, unlike X in one case and unlike Y in the other.
  const conditional = context.estimator.quantity === 'conditional-mutual-information';
  const separate = (): Measured =>
    measure(
      context,
      base,
      (conditional
        ? [
            [a, b, a],
            [a, a, b],
          ]
        : [
            [a, b],
            [b, a],
          ]
      ).map(([fx, fy, fz]) => ({
        label: `X ×${factorLabel(fx)}, Y ×${factorLabel(fy)}${conditional ? `, Z ×${factorLabel(fz)}` : ''}`,
        sample: mapColumns(
          base,
          Array.from({ length: dim }, (_, j) => (j < xDim ? fx : j < xDim + yDim ? fy : fz)),
          new Array<number>(dim).fill(0),
        ),
        shift: 0,
      })),
      ROUNDING_TOLERANCE,
    );
  const commonDeclared = declaredException(context, 'scale', dim);
  if (commonDeclared !== undefined) return invariance(context, 'scale', dim, common);
  const separateDeclared = invariance(context, 'separateScale', dim, separate);
  if (separateDeclared.status !== 'not-applicable') return separateDeclared;
  // X and Y by factors of their own is declared not to hold: one factor for both must still leave I unchanged.
  const result = invariance(context, 'scale', dim, common);
  return { ...result, evidence: `one factor for X and Y: ${result.evidence} (${separateDeclared.evidence})`, declared: separateDeclared.declared };
};

const translation: Body = (context) => {
  const { base } = context;
  const shifts = Array.from({ length: base.dim }, (_, j) => SHIFTS[j % SHIFTS.length]);
  const label = `x + (${shifts.map(show).join(', ')})${base.q ? ' in P and Q' : ''}`;
  return invariance(context, 'translation', base.dim, () =>
    measure(context, base, [{ label, sample: mapColumns(base, new Array<number>(base.dim).fill(1), shifts), shift: 0 }], MAPPED_DATA_TOLERANCE),
  );
};

const symmetry: Body = (context) =>
  invariance(context, 'symmetry', context.base.dim, () =>
    context.base.yDim !== undefined
      ? measure(context, context.base, [{ label: 'Î(Y; X | Z)', sample: swapParts(context.base), shift: 0 }], ROUNDING_TOLERANCE, 'Î(X; Y | Z)')
      : measure(context, context.base, [{ label: 'Î(Y; X)', sample: swapParts(context.base), shift: 0 }], ROUNDING_TOLERANCE, 'Î(X; Y)'),
  );

const affine: Body = (context) => {
  const [minDim, maxDim] = context.estimator.dims;
  const dim = Math.max(2, minDim);
  if (dim > maxDim)
    return { status: 'not-applicable', evidence: 'd = 1 only: there an affine map is a rescaling and a shift, checked by scale and translation' };
  const { sample } = draw(affineLaw(dim), INVARIANCE_N);
  const { matrix, shift } = affineMap(dim);
  return invariance(context, 'affine', dim, () =>
    measure(
      context,
      sample,
      [
        {
          label: `P and Q through x → Ax + b (d = ${dim}, det A = ${show(diagonalProduct(matrix, dim))})`,
          sample: applyAffine(sample, matrix, shift),
          shift: 0,
        },
      ],
      MAPPED_DATA_TOLERANCE,
    ),
  );
};

function diagonalProduct(matrix: Float64Array, dim: number): number {
  let product = 1;
  for (let j = 0; j < dim; j++) product *= matrix[j * dim + j];
  return product;
}

const selfDivergence: Body = (context) => {
  const dim = context.estimator.dims[0];
  const { sample, id } = sameLawPair(dim, KNOWN_VALUE_N);
  const got = estimateOn(context, sample, `P and Q both ${id}`);
  const tolerance = SELF_DIVERGENCE_TOLERANCE * dim;
  const ok = Math.abs(got) <= tolerance;
  return {
    status: ok ? 'pass' : 'fail',
    evidence: `D(P ‖ P) on two independent samples of ${id} (n = ${KNOWN_VALUE_N} each): ${showRough(got)} vs 0 (allowed ±${show(tolerance)})`,
    compared: { expected: 0, got, difference: Math.abs(got), tolerance },
  };
};

/**
 * The tolerance of the known-value check for a quantity in dimension d (see KNOWN_VALUE_TOLERANCE). Transfer
 * entropy is estimated as a conditional MI on the embedding's 1 + k + l columns, so, as for conditional MI, per
 * three of them: te-ksg's bias grows with the embedding (at n = 4000 on the suite's law, −0.018 nats at
 * k = l = 2, −0.058 at k = l = 3, −0.12 at k = l = 5, means of 10 seeds).
 */
export function knownValueTolerance(quantity: Quantity, dim: number, settings: Settings = {}): number {
  if (quantity === 'transfer-entropy') {
    const k = typeof settings.history === 'number' ? settings.history : 1;
    const l = typeof settings.sourceHistory === 'number' ? settings.sourceHistory : 1;
    return Number((KNOWN_VALUE_TOLERANCE[quantity] * Math.max(1, (1 + k + l) / 3)).toPrecision(3));
  }
  return KNOWN_VALUE_TOLERANCE[quantity] * (quantity === 'mutual-information' ? dim / 2 : quantity === 'conditional-mutual-information' ? dim / 3 : dim);
}

/**
 * The known value's law: the suite's, except that a transfer-entropy law takes the estimator's history lengths,
 * since TE at k past values of the target is another number than at k = 1 (scenarios/transfer-entropy.ts).
 */
function knownValueLaw(context: Context): string {
  const { history, sourceHistory } = context.settings;
  if (context.estimator.quantity !== 'transfer-entropy' || typeof history !== 'number') return context.law;
  return atHistories(parseScenario(context.law), history, typeof sourceHistory === 'number' ? sourceHistory : 1) ?? context.law;
}

const knownValue: Body = (context) => {
  const { quantity } = context.estimator;
  const dim = context.lawDim;
  const { sample, truth, id } = draw(knownValueLaw(context), KNOWN_VALUE_N);
  const got = estimateOn(context, sample, id);
  const difference = Math.abs(got - truth);
  const tolerance = knownValueTolerance(quantity, dim, context.settings);
  return {
    status: difference <= tolerance ? 'pass' : 'fail',
    evidence: `${id}, n = ${KNOWN_VALUE_N}: ${showRough(got)} vs truth ${showRough(truth)} (|error| ${showRough(difference)}; allowed ${show(tolerance)})`,
    compared: { expected: truth, got, difference, tolerance },
  };
};

/**
 * The known value's sample with X's rows shuffled (a transfer-entropy sample: the source series): the true value
 * is then 0, and an estimate must come within the known-value tolerance of it. A constant answer, or one that
 * never looks at how X goes with the rest, passes the known value and fails here (found by a tester: an MI
 * "estimator" returning the suite's truth passed every other check).
 */
const independence: Body = (context) => {
  const { quantity } = context.estimator;
  const { sample, id } = draw(knownValueLaw(context), KNOWN_VALUE_N);
  const leading = quantity === 'transfer-entropy' ? 1 : (sample.xDim ?? 1);
  const got = estimateOn(context, shuffleLeadingColumns(sample, leading), `${id} with X's rows shuffled`);
  const tolerance = knownValueTolerance(quantity, context.lawDim, context.settings);
  return {
    status: Math.abs(got) <= tolerance ? 'pass' : 'fail',
    evidence: `${id}, n = ${KNOWN_VALUE_N}, ${quantity === 'transfer-entropy' ? "the source's" : "X's"} rows shuffled: ${showRough(got)} vs truth 0 (allowed ${show(tolerance)})`,
    compared: { expected: 0, got, difference: Math.abs(got), tolerance },
  };
};

/**
 * Each case must end in an EstimateError (or an error of its shape); a number, or any other error, fails. So must
 * the valid sample give a number: an estimator that refuses it too (a program that never starts, data it cannot
 * take) would pass any refusal check without ever looking at the bad value.
 */
function refusals(context: Context, cases: { label: string; sample: Sample }[]): Omit<CheckResult, 'check'> {
  const valid = attempt(context, context.base);
  if (valid.kind !== 'value') {
    const what = valid.kind === 'thrown' ? describeThrown(valid.error) : `${describeReturned(valid.value)} instead of a finite number`;
    return { status: 'fail', evidence: `the valid sample is refused too (${what}), so a refusal of the bad cases shows nothing` };
  }
  const parts: string[] = [];
  let ok = true;
  for (const { label, sample } of cases) {
    const outcome = attempt(context, sample);
    // A command that crashed, timed out or broke the protocol gave no answer; only its own {"error": ...} reply is a
    // refusal (found by a tester: a script that died on log(0) passed as refusing the bad data).
    if (outcome.kind === 'thrown' && outcome.error instanceof CommandError && !outcome.error.reported) {
      ok = false;
      parts.push(
        `${label}: the command gave no answer (${firstLine(outcome.error.message)}), which is not a refusal; a command refuses with {"request": n, "error": "why"}`,
      );
      continue;
    }
    if (outcome.kind === 'thrown' && isEstimateError(outcome.error)) {
      parts.push(`${label}: EstimateError(${outcome.error.code})`);
      continue;
    }
    ok = false;
    if (outcome.kind === 'thrown')
      parts.push(
        `${label}: ${describeThrown(outcome.error)}, which is not an EstimateError (an Error named 'EstimateError' with a code such as 'invalid-input')`,
      );
    else parts.push(`${label}: ${describeReturned(outcome.value)} instead of an EstimateError`);
  }
  return { status: ok ? 'pass' : 'fail', evidence: parts.join('; ') };
}

const rejectsNonFinite: Body = (context) => {
  const { base } = context;
  const nanRow = Math.floor(base.n / 3);
  const infinityRow = base.n - 2;
  const cases = [
    { label: `NaN at row ${nanRow + 1}, column 1`, sample: withValue(base, nanRow, 0, Number.NaN) },
    { label: `Infinity at row ${infinityRow + 1}, column ${base.dim}`, sample: withValue(base, infinityRow, base.dim - 1, Number.POSITIVE_INFINITY) },
  ];
  if (base.q) {
    const q = withValue(base.q, nanRow, 0, Number.NaN);
    cases.push({ label: `NaN in Q at row ${nanRow + 1}`, sample: { ...cloneSample(base), q } });
  }
  return refusals(context, cases);
};

const rejectsTooFew: Body = (context) => {
  const { base } = context;
  const cases = [0, 1].map((rows) => ({ label: `${base.q ? 'P with ' : ''}n = ${rows}`, sample: firstRows(base, rows) }));
  if (base.q) cases.push({ label: 'Q with n = 0', sample: { ...cloneSample(base), q: firstRows(base.q, 0) } });
  return refusals(context, cases);
};

/**
 * A dimension outside the declared `dims` never reaches `estimate`: hhat refuses it first, at the registry
 * (checkDimension, a UsageError naming the dims), for built-ins and modules alike, so that part is the
 * declaration's and is reported as such. What only the estimator can check is a divergence's Q sample in
 * another dimension than P's: that must end in an EstimateError.
 */
const rejectsWrongDimension: Body = (context) => {
  const { base, estimator } = context;
  const [minDim, maxDim] = estimator.dims;
  const outside: number[] = [];
  if (minDim > 1) outside.push(minDim - 1);
  if (maxDim !== Infinity) outside.push(maxDim + 1);
  const declared = outside.map((dim) => {
    try {
      checkDimension(estimator, dim);
      return `d = ${dim}: not refused at the registry although outside dims`;
    } catch (error) {
      return `d = ${dim}: refused before estimate runs (${describeThrown(error)})`;
    }
  });
  // Without a Q sample nothing here depends on the estimator: the registry's refusal is shown, not scored.
  if (!base.q) {
    if (!outside.length) return { status: 'not-applicable', evidence: `dims [${minDim}, ∞): every dimension is supported` };
    return { status: 'not-applicable', evidence: `hhat checks the dimension, not the estimator: ${declared.join('; ')}` };
  }
  const q = refusals(context, [
    { label: `P with d = ${base.dim}, Q with d = ${base.dim + 1}`, sample: { ...cloneSample(base), q: withDimension(base.q, base.dim + 1) } },
  ]);
  return { status: q.status, evidence: [...declared, q.evidence].join('; ') };
};

const BODIES: Record<CheckName, Body> = {
  deterministic,
  'leaves-sample-unchanged': leavesSampleUnchanged,
  'row-order': rowOrder,
  'configured-resolved': configuredResolved,
  'tuning-responds': tuningResponds,
  scale,
  translation,
  symmetry,
  affine,
  'self-divergence': selfDivergence,
  'known-value': knownValue,
  independence,
  'rejects-non-finite': rejectsNonFinite,
  'rejects-too-few': rejectsTooFew,
  'rejects-wrong-dimension': rejectsWrongDimension,
};

export interface ConformanceOptions {
  /** Settings to check with, as typed (validated here; defaults fill the rest). A bad one is a UsageError. */
  settings?: Record<string, SettingValue>;
  /** Run only these checks (those that apply to the quantity). */
  only?: readonly CheckName[];
}

/**
 * Runs the suite on one estimator with its default settings (or `options.settings`). Never throws for what
 * the estimator does: every failure is a failed check with its evidence. Throws a UsageError for settings
 * the estimator does not accept.
 */
export function runConformance(estimator: Estimator, options: ConformanceOptions = {}): ConformanceReport {
  const started = performance.now();
  const settings = validateSettings(estimator.id, estimator.settings, options.settings ?? {});
  const { law, dim: lawDim } = lawOf(estimator);
  const context: Context = { estimator, settings, law, lawDim, base: draw(law, INVARIANCE_N).sample };
  const checks = checksFor(estimator.quantity)
    .filter((check) => !options.only || options.only.includes(check))
    .map((check): CheckResult => {
      try {
        return { check, ...BODIES[check](context) };
      } catch (error) {
        const evidence = error instanceof CheckFailed ? error.message : `the check could not run: ${describeThrown(error)}`;
        return { check, status: 'fail', evidence };
      }
    });
  return {
    estimator: estimator.id,
    quantity: estimator.quantity,
    settings,
    spec: formatSpec(
      estimator.id,
      settings,
      estimator.settings.map((s) => s.name),
    ),
    law,
    checks,
    passed: checks.every((c) => c.status !== 'fail'),
    milliseconds: performance.now() - started,
  };
}
