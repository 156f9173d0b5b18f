/**
 * Recorded data: `recorded[step=Δ;SPEC]` draws from SPEC and rounds every value to the lattice of step Δ (one step
 * for every coordinate, or one per coordinate as `step=0.01/0.5`, 0 leaving a coordinate as drawn): x → kΔ with
 * k = round(x/Δ), cells centred on the multiples of Δ. Where 1/Δ is a whole number m the value is written k/m,
 * which is the double that reading the decimal text (to so many places) gives, so a drawn sample and the same
 * numbers read back from a file are bit-identical.
 *
 * The truth is the base's: the target is the underlying continuous variable. For a one-dimensional entropy base,
 * the scenario also states the target of the lattice estimator: the exact Shannon entropy of the recorded values
 * H_Δ = −Σ_k p_k log p_k, p_k = F((k+½)Δ) − F((k−½)Δ) from the base CDF, and H_Δ + log Δ, which tends to h as
 * Δ → 0 (Cover & Thomas, Elements of Information Theory, 2nd ed., Theorem 8.3.1; from memory). The recorded law
 * has no density, so the base's density fields are not passed on.
 */
import type { NormalRepresentation, RecordedFacts, Rng, Sample, Scenario } from '../src/core/contracts.js';
import { UsageError } from '../src/core/errors.js';
import { formatNumber, parseNumber } from '../src/core/spec.js';
import { normalRepresentation, quantileOf } from './build.js';

export const RECORDED_FAMILY = 'recorded';
export const RECORDED_USAGE = 'recorded[step=Δ;SPEC] or recorded[step=Δ1/Δ2/…;SPEC], Δ > 0 (0: a coordinate left as drawn)';
export const RECORDED_SUMMARY = 'SPEC rounded to a lattice of step Δ when recorded; truth is SPEC’s (the underlying variable); 1-D: exact discrete entropy too';

/** Neglected tail mass on either side of the cell sum, and the most cells it may take. */
const TAIL = 1e-17;
const MAX_CELLS = 1e7;

/** Reads `step=0.01` or `step=0.01/0/0.5` (the first argument of recorded[...]). */
export function parseRecordedArgument(args: string[], text: string): { steps: number[]; base: string } {
  if (args.length !== 2) throw new UsageError(`recorded[...] takes a step and a base: ${RECORDED_USAGE}; got "${text}"`);
  const match = /^step\s*=\s*(.+)$/.exec(args[0]);
  const steps = match ? match[1].split('/').map((t) => parseNumber(t.trim())) : [];
  if (!steps.length || steps.some((s) => s === undefined || !(s >= 0) || !Number.isFinite(s)) || steps.every((s) => s === 0)) {
    throw new UsageError(
      `recorded[...]: "${args[0]}" is not allowed; the first argument must be step=Δ with Δ > 0, or one step ≥ 0 per coordinate separated by / (e.g. step=0.01)`,
    );
  }
  return { steps: steps as number[], base: args[1] };
}

/** Rounds every value of a sample in place to its coordinate's lattice. */
function roundTo(sample: Sample, steps: readonly number[]): void {
  const { dim, data } = sample;
  const inverse = steps.map((s) => {
    const m = Math.round(1 / s);
    return s > 0 && Math.abs(1 / s - m) <= 1e-9 * m ? m : 0;
  });
  for (let i = 0; i < data.length; i++) {
    const j = i % dim;
    const step = steps[j];
    if (step === 0) continue;
    const m = inverse[j];
    // + 0: a value rounded to zero from below is +0, not −0, as a recorded file would hold it.
    data[i] = (m ? Math.round(data[i] * m) / m : step * Math.round(data[i] / step)) + 0;
  }
}

/** The exact discrete entropy of a 1-D law rounded to step Δ, and how far it can be off. */
export function discreteEntropy(base: Scenario, step: number): number {
  const density = base.univariate!;
  const quantile = quantileOf(density);
  const lo = Math.max(density.lower, quantile(TAIL));
  const hi = Math.min(density.upper, quantile(1 - TAIL));
  const first = Math.floor(lo / step + 0.5);
  const last = Math.ceil(hi / step - 0.5);
  if (last - first + 1 > MAX_CELLS) {
    throw new UsageError(
      `recorded[step=${formatNumber(step)};${base.id}]: the lattice would need ${last - first + 1} cells to hold the law; the step must be at least ${formatNumber(((hi - lo) / MAX_CELLS) * 1.01)} (${MAX_CELLS} cells)`,
    );
  }
  let h = 0;
  // The first and last cells take the tails beyond them, so the cell masses add to 1.
  let below = 0;
  for (let k = first; k <= last; k++) {
    const above = k === last ? 1 : density.cdf((k + 0.5) * step);
    const p = above - below;
    if (p > 0) h -= p * Math.log(p);
    below = above;
  }
  return h;
}

export function recordedScenario(steps: number[], base: Scenario): Scenario {
  if (base.quantity === 'divergence' || base.quantity === 'transfer-entropy') {
    throw new UsageError(`recorded[...] cannot wrap ${base.id}: it rounds the rows of an entropy, mutual-information or conditional-MI scenario`);
  }
  const perCoordinate = steps.length === 1 ? Array.from({ length: base.dim }, () => steps[0]) : steps;
  if (perCoordinate.length !== base.dim) {
    throw new UsageError(`recorded[...]: ${steps.length} steps given for ${base.id}, which has ${base.dim} coordinates; give one step, or one per coordinate`);
  }
  const sample = (rng: Rng, n: number): Sample => {
    const drawn = base.sample(rng, n);
    roundTo(drawn, perCoordinate);
    return drawn;
  };
  const stepText = steps.map(formatNumber).join('/');
  const scenario: Scenario = {
    id: `${RECORDED_FAMILY}[step=${stepText};${base.id}]`,
    family: RECORDED_FAMILY,
    quantity: base.quantity,
    dim: base.dim,
    params: Object.fromEntries(perCoordinate.map((s, j) => [base.dim === 1 ? 'step' : `step${j + 1}`, s])),
    sample,
    truth: base.truth,
    truthSource: `the underlying continuous law's (${base.id}): ${base.truthSource}`,
    support: base.support,
    tails: base.tails,
  };
  const representation: NormalRepresentation | undefined = normalRepresentation(base);
  if (representation) {
    scenario.fromNormals = {
      width: representation.width,
      map: (normals, n) => {
        const drawn = representation.map(normals, n);
        roundTo(drawn, perCoordinate);
        return drawn;
      },
    };
  }
  // The scale of each coordinate (for the quantize perturbation) is the base's.
  if (base.moments) scenario.moments = base.moments;
  if (base.xDim !== undefined) scenario.xDim = base.xDim;
  if (base.yDim !== undefined) scenario.yDim = base.yDim;
  if (base.dim === 1 && base.quantity === 'entropy' && base.univariate) {
    const step = perCoordinate[0];
    let cached: number | undefined;
    const h = () => (cached ??= discreteEntropy(base, step));
    const facts = {
      steps: perCoordinate,
      base: base.id,
      source: `sum over the lattice cells of −p log p with p from ${base.id}'s CDF, tails beyond its ${TAIL} and 1 − ${TAIL} quantiles merged into the end cells (error below 1e-15 nats from the tails; CDF rounding adds up to about 1e-16 per cell)`,
    };
    Object.defineProperty(facts, 'discreteEntropy', { enumerable: true, get: h });
    Object.defineProperty(facts, 'latticeEntropy', { enumerable: true, get: () => h() + Math.log(step) });
    scenario.recorded = facts as RecordedFacts;
  } else {
    scenario.recorded = {
      steps: perCoordinate,
      base: base.id,
      discreteEntropy: null,
      latticeEntropy: null,
      source: 'stated for one-dimensional entropy laws only',
    };
  }
  return scenario;
}
