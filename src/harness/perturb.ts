/**
 * Perturbations: changes applied to a sample before estimation, each knowing how the true value moves.
 *
 *   rescale:c=1000              x → c·x (a unit change): the truth shifts by d·log|c|
 *   monotone:map=asinh          x_j → g(x_j) for every coordinate: shifts by Σ_j E[log|g′(X_j)|] (quadrature)
 *   affine:condition=10,scale=1 x → A·x + b, A = R·diag(s) with R a fixed random rotation and singular values
 *                               s log-spaced with the given condition number and geometric mean `scale`:
 *                               shifts by log|det A| = d·log(scale)
 *   quantize:step=0.1           x_j → δ_j·round(x_j/δ_j), δ_j = step·σ_j (data recorded to finite precision):
 *                               the truth stays; a discretised variable has H ≈ h − Σ log δ_j
 *   contaminate:fraction=0.01   a fraction of points replaced by far outliers (25–50 σ out): the truth stays
 *
 * σ_j is the coordinate's standard deviation when finite, else its interquartile range / 1.349.
 * Randomness (the rotation, the outliers) comes from hashes of the plan's own values, so a perturbed sample
 * is as reproducible as the sample itself.
 */
import { normalRandom } from '../math/random.js';
import { createHash } from 'node:crypto';
import type { Sample, Scenario, UnivariateDensity } from '../core/contracts.js';
import { withRows } from '../core/sample.js';
import { UsageError } from '../core/errors.js';
import { didYouMean } from '../core/suggest.js';
import { rngFromSeed } from '../core/rng.js';
import { formatSpec, parseNumber, parseSpec } from '../core/spec.js';
import { expectation } from '../../scenarios/build.js';
import { monotoneMaps } from '../../scenarios/mixtures-and-transforms.js';

export type PerturbationKind = 'rescale' | 'monotone' | 'affine' | 'quantize' | 'contaminate';
export const PERTURBATION_KINDS: readonly PerturbationKind[] = ['rescale', 'monotone', 'affine', 'quantize', 'contaminate'];

/** Maps usable coordinate-wise (affine is its own perturbation). */
export const MONOTONE_MAP_IDS = monotoneMaps.filter((m) => m.id !== 'affine').map((m) => m.id);

export interface PreparedPerturbation {
  /** Exact change of the true value in nats; null when the truth does not move. */
  shift: number | null;
  shiftSource: string;
  /** For quantize: Σ_j log δ_j, so H_disc ≈ h − this. */
  logCellVolume?: number;
  /** Perturbs a copy of the sample in place. */
  apply(sample: Sample, replicate: number, seed: number): void;
}

export interface Perturbation {
  spec: string;
  kind: PerturbationKind;
  /** quantize: step; contaminate: fraction; otherwise null. */
  level: number | null;
  /** The perturbation for one scenario, or why it cannot apply there. */
  prepare(scenario: Scenario, options?: { shiftNeeded?: boolean }): PreparedPerturbation | { skip: string };
}

function numberParam(spec: string, values: Record<string, string>, name: string, fallback: number, check: (x: number) => boolean, allowed: string): number {
  const text = values[name];
  const value = text === undefined ? fallback : parseNumber(text);
  if (value === undefined || !Number.isFinite(value) || !check(value)) {
    throw new UsageError(`perturbation ${spec}: ${name}=${text} is not allowed; ${name} must be ${allowed}`);
  }
  return value;
}

function onlyKeys(spec: string, values: Record<string, string>, allowed: string[]): void {
  for (const key of Object.keys(values)) {
    if (!allowed.includes(key)) throw new UsageError(`perturbation ${spec}: unknown parameter "${key}"; allowed: ${allowed.join(', ') || 'none'}`);
  }
}

/** Standard deviation of coordinate j, or IQR/1.349 when the variance is infinite; undefined when unknown. */
export function coordinateScale(scenario: Scenario, j: number): number | undefined {
  const variance = scenario.moments?.covariance[j]?.[j];
  if (variance !== undefined && Number.isFinite(variance) && variance > 0) return Math.sqrt(variance);
  const marginal = scenario.marginals?.[j];
  if (!marginal) return undefined;
  return (quantile(marginal, 0.75) - quantile(marginal, 0.25)) / 1.349;
}

function coordinateCentre(scenario: Scenario, j: number): number | undefined {
  const marginal = scenario.marginals?.[j];
  if (marginal) return quantile(marginal, 0.5);
  return scenario.moments?.mean[j];
}

/** Quantile by bisection on the CDF (monotone, so 200 halvings reach double precision from any bracket). */
function quantile(density: UnivariateDensity, p: number): number {
  let lo = Number.isFinite(density.lower) ? density.lower : -1;
  let hi = Number.isFinite(density.upper) ? density.upper : 1;
  while (!Number.isFinite(density.lower) && density.cdf(lo) > p) lo *= 2;
  while (!Number.isFinite(density.upper) && density.cdf(hi) < p) hi *= 2;
  for (let i = 0; i < 200 && hi - lo > 0; i++) {
    const mid = lo + (hi - lo) / 2;
    if (mid === lo || mid === hi) break;
    if (density.cdf(mid) < p) lo = mid;
    else hi = mid;
  }
  return (lo + hi) / 2;
}

function hashSeed(...parts: (string | number)[]): string {
  return createHash('sha256')
    .update(`hhat-perturb-v1\n${parts.join('\n')}`)
    .digest('hex');
}

/** x → c·x: the truth moves by exactly d·log|c|. */
function rescalePerturbation(text: string, values: Record<string, string>): Perturbation {
  onlyKeys(text, values, ['c']);
  const c = numberParam(text, values, 'c', 1000, (x) => x !== 0, 'a nonzero number');
  return {
    spec: formatSpec('rescale', { c }),
    kind: 'rescale',
    level: null,
    prepare: (scenario) => ({
      shift: scenario.dim * Math.log(Math.abs(c)),
      shiftSource: 'exact: d·log|c|',
      apply: (sample) => {
        for (let i = 0; i < sample.data.length; i++) sample.data[i] *= c;
      },
    }),
  };
}

/** Each coordinate through a smooth increasing map; the truth moves by Σ_j E[log|g′(X_j)|] (quadrature on the marginal laws). */
function monotonePerturbation(text: string, values: Record<string, string>): Perturbation {
  onlyKeys(text, values, ['map']);
  const mapId = values.map ?? 'asinh';
  const map = monotoneMaps.find((m) => m.id === mapId && m.id !== 'affine');
  if (!map) throw new UsageError(`perturbation ${text}: map=${mapId} is not allowed; map must be one of ${MONOTONE_MAP_IDS.join(', ')}`);
  return {
    spec: formatSpec('monotone', { map: mapId }),
    kind: 'monotone',
    level: null,
    prepare: (scenario, options = {}) => {
      const needShift = options.shiftNeeded !== false;
      if (!scenario.marginals && needShift)
        return { skip: `monotone:map=${mapId} needs the coordinates' marginal laws, which ${scenario.family} does not state` };
      let shift = 0;
      let error = 0;
      const appliers: ((x: number) => number)[] = [];
      const marginals = scenario.marginals ?? Array.from({ length: scenario.dim }, () => undefined);
      for (const marginal of marginals) {
        const base = { id: scenario.id, tails: scenario.tails, support: scenario.support, univariate: marginal } as Scenario;
        let built;
        try {
          built = map.build({}, base);
        } catch (e) {
          if (e instanceof UsageError) return { skip: e.message.replace(/^transformed\[[^\]]*\]: /, `monotone:map=${mapId}: `) };
          throw e;
        }
        if (needShift && marginal) {
          const part = expectation(marginal, (x) => built.logAbsDerivative(x));
          shift += part.value;
          error += part.error;
        }
        appliers.push(built.apply);
      }
      return {
        shift,
        shiftSource: `quadrature: Σ_j E[log|g′(X_j)|], error estimate ${error.toExponential(1)}`,
        apply: (sample) => {
          const { dim, data } = sample;
          for (let i = 0; i < data.length; i++) data[i] = appliers[i % dim](data[i]);
        },
      };
    },
  };
}

/** x → A·x + b with A = R·diag(s) of the stated condition number: the truth moves by log|det A|. */
function affinePerturbation(text: string, values: Record<string, string>): Perturbation {
  onlyKeys(text, values, ['condition', 'scale']);
  const condition = numberParam(text, values, 'condition', 10, (x) => x >= 1, 'a number ≥ 1');
  const scale = numberParam(text, values, 'scale', 1, (x) => x > 0, 'a number > 0');
  const spec = formatSpec('affine', { condition, scale });
  return {
    spec,
    kind: 'affine',
    level: null,
    prepare: (scenario) => {
      const d = scenario.dim;
      const singular = Array.from({ length: d }, (_, i) => scale * (d === 1 ? 1 : Math.pow(condition, i / (d - 1) - 0.5)));
      const rotation = randomRotation(d, hashSeed(spec, d));
      // A = R·diag(s): columns of R scaled.
      const a = new Float64Array(d * d);
      for (let r = 0; r < d; r++) for (let c = 0; c < d; c++) a[r * d + c] = rotation[r * d + c] * singular[c];
      const offset = Array.from({ length: d }, (_, j) => (j + 1) * 0.5);
      const logDet = singular.reduce((s, v) => s + Math.log(v), 0);
      const point = new Float64Array(d);
      return {
        shift: logDet,
        shiftSource: 'exact: log|det A| = Σ log sᵢ (a rotation has |det| = 1)',
        apply: (sample) => {
          const { n, data } = sample;
          for (let i = 0; i < n; i++) {
            for (let j = 0; j < d; j++) point[j] = data[i * d + j];
            for (let r = 0; r < d; r++) {
              let sum = offset[r];
              for (let c = 0; c < d; c++) sum += a[r * d + c] * point[c];
              data[i * d + r] = sum;
            }
          }
        },
      };
    },
  };
}

/** Rounding each coordinate to a grid of step·σ_j: the truth does not move; ties appear. */
function quantizePerturbation(text: string, values: Record<string, string>): Perturbation {
  onlyKeys(text, values, ['step']);
  const step = numberParam(text, values, 'step', 0.1, (x) => x > 0, "a number > 0 (the resolution in units of each coordinate's SD)");
  return {
    spec: formatSpec('quantize', { step }),
    kind: 'quantize',
    level: step,
    prepare: (scenario) => {
      const deltas: number[] = [];
      for (let j = 0; j < scenario.dim; j++) {
        const sigma = coordinateScale(scenario, j);
        if (sigma === undefined) return { skip: `quantize needs each coordinate's scale, which ${scenario.family} does not state` };
        deltas.push(step * sigma);
      }
      return {
        shift: null,
        // The rounded sample stands for a recording of the continuous one: its target stays the continuous value,
        // which is not the entropy of the rounded values themselves.
        shiftSource: 'the target stays the continuous truth h, which the rounded values are a recording of (the rounded variable itself has H ≈ h − Σ log δ_j)',
        logCellVolume: deltas.reduce((s, v) => s + Math.log(v), 0),
        apply: (sample) => {
          const { dim, data } = sample;
          for (let i = 0; i < data.length; i++) {
            const delta = deltas[i % dim];
            // + 0: a value rounded to zero from below is +0, not −0, as recorded data would write it.
            data[i] = delta * Math.round(data[i] / delta) + 0;
          }
        },
      };
    },
  };
}

/** A fraction of the points replaced by far outliers: the truth does not move. */
function contaminatePerturbation(text: string, values: Record<string, string>): Perturbation {
  onlyKeys(text, values, ['fraction']);
  const fraction = numberParam(text, values, 'fraction', 0.01, (x) => x > 0 && x < 0.5, 'a number in (0, 0.5)');
  const spec = formatSpec('contaminate', { fraction });
  return {
    spec,
    kind: 'contaminate',
    level: fraction,
    prepare: (scenario) => {
      const centres: number[] = [];
      const scales: number[] = [];
      for (let j = 0; j < scenario.dim; j++) {
        const sigma = coordinateScale(scenario, j);
        const centre = coordinateCentre(scenario, j);
        if (sigma === undefined || centre === undefined)
          return { skip: `contaminate needs each coordinate's centre and scale, which ${scenario.family} does not state` };
        centres.push(centre);
        scales.push(sigma);
      }
      return {
        shift: null,
        shiftSource: 'the truth does not move; the change of the estimate is the contamination effect',
        apply: (sample, replicate, seed) => {
          const { n, dim, data } = sample;
          const count = Math.max(1, Math.round(fraction * n));
          const rng = rngFromSeed(hashSeed(spec, seed, scenario.id, n, replicate));
          // With independent rows, replacing the first points is replacing a random subset; with autocorrelated rows
          // (autocorrelated[...], rows in time order) it is a burst of outliers at the start of the series.
          for (let i = 0; i < count; i++) {
            for (let j = 0; j < dim; j++) {
              const distance = scales[j] * (25 + 25 * rng());
              data[i * dim + j] = centres[j] + (rng() < 0.5 ? -distance : distance);
            }
          }
        },
      };
    },
  };
}

const ENTROPY_PERTURBATIONS: Record<string, (text: string, values: Record<string, string>) => Perturbation> = {
  rescale: rescalePerturbation,
  monotone: monotonePerturbation,
  affine: affinePerturbation,
  quantize: quantizePerturbation,
  contaminate: contaminatePerturbation,
};

/** A Haar-random rotation from a fixed seed: Gram–Schmidt on a Gaussian matrix, signs fixed by the diagonal. */
function randomRotation(dim: number, seed: string): Float64Array {
  const draw = normalRandom.factory(0, 1, { prng: rngFromSeed(seed) });
  const q = new Float64Array(dim * dim);
  for (let i = 0; i < dim * dim; i++) q[i] = draw();
  for (let c = 0; c < dim; c++) {
    for (let prev = 0; prev < c; prev++) {
      let dot = 0;
      for (let r = 0; r < dim; r++) dot += q[r * dim + c] * q[r * dim + prev];
      for (let r = 0; r < dim; r++) q[r * dim + c] -= dot * q[r * dim + prev];
    }
    let norm = 0;
    for (let r = 0; r < dim; r++) norm += q[r * dim + c] ** 2;
    norm = Math.sqrt(norm);
    for (let r = 0; r < dim; r++) q[r * dim + c] /= norm;
  }
  return q;
}

function parseEntropyPerturbation(text: string, id: string, values: Record<string, string>): Perturbation {
  const build = Object.hasOwn(ENTROPY_PERTURBATIONS, id) ? ENTROPY_PERTURBATIONS[id] : undefined;
  if (!build)
    throw new UsageError(
      `unknown perturbation "${id}"${didYouMean(id, PERTURBATION_KINDS)}; known: ${PERTURBATION_KINDS.join(', ')} (e.g. rescale:c=1000, monotone:map=asinh, affine:condition=10, quantize:step=0.1, contaminate:fraction=0.01)`,
    );
  return build(text, values);
}

/** Which columns a perturbation touches in a mutual-information sample (z: conditional MI only). */
export type Part = 'x' | 'y' | 'z' | 'all';

/**
 * Perturbations of mutual-information and divergence samples. MI is unchanged by an invertible map of X alone
 * or of Y alone, and a divergence by one invertible map applied to both samples, so for these quantities the
 * true value does not move (shift 0) under rescale and monotone maps (and affine maps for divergences);
 * `part=x` / `part=y` picks the variable an MI perturbation touches (monotone maps default to X).
 * Conditional MI I(X; Y | Z) is likewise unchanged by an invertible map of X, of Y or of Z alone (the chain
 * rule writes it as I(X; (Y, Z)) − I(X; Z)), so rescale and coordinate-wise monotone maps keep it, on any part
 * (`part=z` too); affine maps mix the variables and are skipped, quantize and contaminate leave it unknown.
 * Transfer entropy (column 0 the source series, column 1 the target) is handled like MI with X the source and Y
 * the target: one invertible map of a whole series (the same at every time) leaves it unchanged, so rescale and
 * monotone maps keep the truth on either part; affine maps mix the two series and are skipped; quantize and
 * contaminate (outliers at random times) leave it unknown.
 */
export function parsePerturbation(text: string): Perturbation {
  const { id, values } = parseSpec(text, 'perturbation');
  const { part: partText, ...rest } = values;
  if (partText !== undefined && !['x', 'y', 'z', 'all'].includes(partText)) {
    throw new UsageError(
      `perturbation ${text}: part=${partText} is not allowed; part must be x, y or all (mutual-information samples), or z (conditional mutual information)`,
    );
  }
  const inner = parseEntropyPerturbation(text, id, rest);
  const part = partText as Part | undefined;
  const spec = part ? `${inner.spec}${inner.spec.includes(':') ? ',' : ':'}part=${part}` : inner.spec;
  return {
    spec,
    kind: inner.kind,
    level: inner.level,
    prepare: (scenario, options) => {
      if (scenario.quantity === 'entropy') {
        if (part && part !== 'all') return { skip: `${spec}: part=${part} applies to mutual-information samples` };
        return inner.prepare(scenario, options);
      }
      const invariant = inner.kind === 'rescale' || inner.kind === 'monotone' || inner.kind === 'affine';
      if (scenario.quantity === 'conditional-mutual-information') return prepareConditional(scenario, spec, inner, part);
      if (part === 'z') return { skip: `${spec}: part=z applies to conditional mutual-information samples` };
      if (scenario.quantity === 'mutual-information' || scenario.quantity === 'transfer-entropy') {
        const transfer = scenario.quantity === 'transfer-entropy';
        if (inner.kind === 'affine') {
          return {
            skip: transfer
              ? `${spec}: an affine map mixes the source and target series, and transfer entropy is invariant only under maps of each series`
              : `${spec}: an affine map mixes X and Y, and MI is invariant only under maps of each variable`,
          };
        }
        const { xDim } = scenario;
        if (xDim === undefined) return { skip: `${spec}: the scenario does not say which columns are X` };
        const chosen: Part = part ?? (inner.kind === 'monotone' ? 'x' : 'all');
        const columns = Array.from({ length: scenario.dim }, (_, j) => j).filter((j) => chosen === 'all' || (chosen === 'x' ? j < xDim : j >= xDim));
        const prepared = inner.prepare(subScenario(scenario, columns), { shiftNeeded: false });
        if ('skip' in prepared) return prepared;
        return {
          shift: invariant ? 0 : null,
          shiftSource: invariant
            ? transfer
              ? `exact: TE(X → Y) = I(Y_{t+1}; X_t | Y_t) is invariant under one invertible map of ${chosen === 'all' ? 'each series' : `the ${chosen === 'x' ? 'source' : 'target'} series`} at every time (Schreiber 2000; the Jacobians cancel as for MI)`
              : `exact: MI is invariant under invertible maps of ${chosen === 'all' ? 'each variable' : chosen.toUpperCase()}`
            : dependentShiftSource(inner, prepared),
          apply: (sample, replicate, seed) => applyToColumns(prepared, sample, columns, replicate, seed),
        };
      }
      // Divergence: the same map on the P and the Q sample (contamination: P only).
      const prepared = inner.prepare({ ...scenario, quantity: 'entropy' }, { shiftNeeded: false });
      if ('skip' in prepared) return prepared;
      return {
        shift: invariant ? 0 : null,
        shiftSource: invariant ? 'exact: a divergence is invariant under one invertible map of both samples' : dependentShiftSource(inner, prepared),
        apply: (sample, replicate, seed) => {
          prepared.apply(sample, replicate, seed);
          if (sample.q && inner.kind !== 'contaminate') prepared.apply(sample.q, replicate, seed);
        },
      };
    },
  };
}

/**
 * Where a perturbation does not keep an information measure exactly, the source of its (unmoved) target as the
 * dependent quantities read it: the entropy wording of quantize would speak of H and h.
 */
function dependentShiftSource(inner: Perturbation, prepared: PreparedPerturbation): string {
  return inner.kind === 'quantize'
    ? "the target stays the continuous truth, which the rounded values are a recording of (the rounded variables' own information is another value)"
    : prepared.shiftSource;
}

/** A perturbation of a conditional-MI sample (X, then yDim columns of Y, then Z): see parsePerturbation. */
function prepareConditional(scenario: Scenario, spec: string, inner: Perturbation, part: Part | undefined): PreparedPerturbation | { skip: string } {
  if (inner.kind === 'affine') return { skip: `${spec}: an affine map mixes X, Y and Z, and conditional MI is invariant only under maps of each variable` };
  const { xDim, yDim } = scenario;
  if (xDim === undefined || yDim === undefined) return { skip: `${spec}: the scenario does not say which columns are X, Y and Z` };
  const chosen: Part = part ?? (inner.kind === 'monotone' ? 'x' : 'all');
  const partOf = (j: number): Part => (j < xDim ? 'x' : j < xDim + yDim ? 'y' : 'z');
  const columns = Array.from({ length: scenario.dim }, (_, j) => j).filter((j) => chosen === 'all' || partOf(j) === chosen);
  const prepared = inner.prepare(subScenario(scenario, columns), { shiftNeeded: false });
  if ('skip' in prepared) return prepared;
  const invariant = inner.kind === 'rescale' || inner.kind === 'monotone';
  return {
    shift: invariant ? 0 : null,
    shiftSource: invariant
      ? `exact: I(X; Y | Z) = I(X; (Y, Z)) − I(X; Z) is invariant under invertible maps of ${chosen === 'all' ? 'each variable' : chosen.toUpperCase()}`
      : dependentShiftSource(inner, prepared),
    apply: (sample, replicate, seed) => applyToColumns(prepared, sample, columns, replicate, seed),
  };
}

function subScenario(scenario: Scenario, columns: number[]): Scenario {
  return {
    ...scenario,
    quantity: 'entropy',
    dim: columns.length,
    xDim: undefined,
    yDim: undefined,
    marginals: scenario.marginals && columns.map((j) => scenario.marginals![j]),
    moments: scenario.moments && {
      mean: columns.map((j) => scenario.moments!.mean[j]),
      covariance: columns.map((i) => columns.map((j) => scenario.moments!.covariance[i][j])),
    },
  };
}

/** Applies a prepared perturbation to some columns of a sample, in place. */
function applyToColumns(prepared: PreparedPerturbation, sample: Sample, columns: number[], replicate: number, seed: number): void {
  const { n, dim, data } = sample;
  const width = columns.length;
  const part = new Float64Array(n * width);
  for (let i = 0; i < n; i++) for (let k = 0; k < width; k++) part[i * width + k] = data[i * dim + columns[k]];
  prepared.apply({ n, dim: width, data: part }, replicate, seed);
  for (let i = 0; i < n; i++) for (let k = 0; k < width; k++) data[i * dim + columns[k]] = part[i * width + k];
}

/**
 * The perturbed sample of a replicate: a deep copy, since the Q sample of a divergence is perturbed too and the
 * drawn sample must stay intact for the other series of the same replicate. The runner and `hhat draw` both
 * perturb through here, so a written perturbed draw is the one the estimators saw.
 */
export function perturbedCopy(original: Sample, prepared: PreparedPerturbation, replicate: number, seed: number): Sample {
  const q = original.q ? withRows(original.q, original.q.n, original.q.data.slice()) : undefined;
  const sample = withRows(original, original.n, original.data.slice(), q);
  prepared.apply(sample, replicate, seed);
  return sample;
}
