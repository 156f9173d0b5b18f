/**
 * Recorded data: `recorded[step=Δ;SPEC]` draws from SPEC and rounds every value to the lattice of step Δ (one step
 * for every coordinate, or one per coordinate as `step=0.01/0.5`, 0 leaving a coordinate as drawn): x → kΔ with
 * k = round(x/Δ), cells [(k−½)Δ, (k+½)Δ) centred on the multiples of Δ (a value exactly on a cell edge goes up,
 * as Math.round does). Where 1/Δ is a whole number m (to 1e-9 relative) the value is computed as k/m, not k·Δ:
 * k/m is one correctly rounded division of two exact integers, so it is the double nearest the decimal k/m, the
 * one that reading the text "0.3" gives, while k·Δ multiplies by a Δ that is itself rounded (3 × 0.1 is
 * 0.30000000000000004). A drawn sample and the same numbers written to 6 places and read back are bit-identical.
 *
 * The truth is the base's: the target is the underlying continuous variable. For a one-dimensional entropy base
 * with a CDF, the scenario also states the target of the lattice estimator: the exact Shannon entropy of the
 * recorded values H_Δ = −Σ_k p_k log p_k, p_k = F((k+½)Δ) − F((k−½)Δ) (from the CDF below the median and from
 * the survival function above it), and H_Δ + log Δ, which tends to h as Δ → 0 (Cover & Thomas, Elements of
 * Information Theory, 2nd ed., Theorem 8.3.1; from memory). The sum runs between the law's 1e-17 tail quantiles,
 * with a stated bound for the tails beyond (tailBound), and is not computed past 1e7 cells. The recorded law has
 * no density, so the base's density fields (univariate, logDensity, marginals) are not passed on; its moments
 * are, as the coordinate scales of the quantize perturbation.
 */
import type { NormalRepresentation, RecordedFacts, Rng, Sample, Scenario, UnivariateDensity } from '../src/core/contracts.js';
import { UsageError } from '../src/core/errors.js';
import { formatNumber, parseNumber } from '../src/core/spec.js';
import { normalRepresentation, quantileOf, survivalOf, upperQuantileOf } from './build.js';

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

/**
 * The cells k = first..last that carry the law between its TAIL and 1 − TAIL quantiles (the lower one from the
 * CDF, the upper one from the survival function: F⁻¹(1 − 1e-17) cannot be asked, 1 − 1e-17 rounds to 1).
 */
interface Lattice {
  step: number;
  first: number;
  last: number;
  /** Mass below the first cell and above the last, merged into them. */
  lowerTail: number;
  upperTail: number;
  /** Whether the law states a survival function (otherwise 1 − F, good to about 1e-16 absolute). */
  stableSurvival: boolean;
}

function latticeOf(density: UnivariateDensity, step: number): Lattice {
  const { survival, stable } = survivalOf(density);
  const lo = Math.max(density.lower, quantileOf(density)(TAIL));
  const hi = Math.min(density.upper, upperQuantileOf(density)(TAIL));
  const first = Math.floor(lo / step + 0.5);
  const last = Math.ceil(hi / step - 0.5);
  return {
    step,
    first,
    last,
    lowerTail: density.cdf((first - 0.5) * step),
    // Without a stable survival function the cut is where 1 − F rounds to 0: take the tail as up to 2⁻⁵³.
    upperTail: stable ? survival((last + 0.5) * step) : 2 ** -53,
    stableSurvival: stable,
  };
}

function cellCount(lattice: Lattice): number {
  return lattice.last - lattice.first + 1;
}

/** Why a lattice is refused, in one line (without the scenario's id). */
function tooManyCells(lattice: Lattice): string {
  const cells = cellCount(lattice);
  const least = (lattice.step * cells) / MAX_CELLS;
  return `the lattice would need ${Number.isFinite(cells) ? cells : 'infinitely many'} cells to hold the law between its ${TAIL} and 1 − ${TAIL} quantiles, more than ${MAX_CELLS}; the discrete entropy needs a step of at least ${formatNumber(Number(least.toPrecision(2)))}`;
}

/**
 * The neglected tails, on each side: the mass T beyond the cut c (the end cell's outer edge) is merged into the end
 * cell (mass p). With φ(t) = −t log t, concave with φ(0) = 0 and so subadditive, the merge changes φ(p) by
 * φ(p + T) − φ(p) ∈ [−T, φ(T)] (the slope −log t − 1 is above −1 once t ≤ 1), and it drops the cells beyond,
 * Σ φ(q_j) = φ(T) + T·H(Q), Q the conditional law of the cell index j = 1, 2, … counted outward from c. The
 * error is therefore between −(T + φ(T) + T·H(Q)) and 0. On {1, 2, …} with mean μ the geometric law has the
 * largest entropy, below 1 + log μ, and j ≤ 1 + |X − c|/Δ gives μ ≤ 1 + E[|X − c|; tail]/(TΔ) ≤
 * 1 + (E|X| + |c|)/(TΔ). So each side is off by at most T(log(1/T) + 2 + log(1 + (E|X| + |c|)/(TΔ))), which
 * increases with T (so the computed T, itself at most about 1e-17, may stand for the true one); E|X| ≤ √(E X²).
 * Undefined when the law has no finite variance.
 */
function tailBound(lattice: Lattice, moments: Scenario['moments']): number | undefined {
  const mean = moments?.mean[0];
  const variance = moments?.covariance[0][0];
  if (mean === undefined || variance === undefined || !Number.isFinite(variance)) return undefined;
  const absMean = Math.sqrt(mean * mean + variance);
  const side = (t: number, cut: number) => (t > 0 ? t * (Math.log(1 / t) + 2 + Math.log(1 + (absMean + Math.abs(cut)) / (t * lattice.step))) : 0);
  return side(lattice.lowerTail, (lattice.first - 0.5) * lattice.step) + side(lattice.upperTail, (lattice.last + 0.5) * lattice.step);
}

/**
 * −Σ p_k log p_k over the lattice. Cell masses are differences of the CDF at edges below the median and of the
 * survival function above it, so no mass is a difference of two numbers near 1 (that would leave an upper-tail
 * cell of mass 1e-17 with no correct digit). Each edge value is evaluated once and shared by its two cells, so an
 * error ε in it moves H by about ε·|log(p_k/p_k+1)|: rounding errors telescope instead of adding up per cell.
 */
function latticeSum(density: UnivariateDensity, lattice: Lattice): number {
  const { step, first, last } = lattice;
  const { survival } = survivalOf(density);
  const median = quantileOf(density)(0.5);
  let h = 0;
  let compensation = 0;
  // The current cell's lower edge: F there while at or below the median, else S there (F(−∞) = 0 starts it).
  let lowerIsCdf = true;
  let lowerValue = 0;
  for (let k = first; k <= last; k++) {
    const edge = (k + 0.5) * step;
    // The last cell's upper edge is +∞, where S = 0.
    const upperIsCdf = k < last && edge <= median;
    const upperValue = k === last ? 0 : upperIsCdf ? density.cdf(edge) : survival(edge);
    const p = lowerIsCdf ? (upperIsCdf ? upperValue - lowerValue : 1 - lowerValue - upperValue) : lowerValue - upperValue;
    if (p > 0) {
      // Neumaier's compensated sum: millions of terms added naively would lose about 1e-11.
      const term = -p * Math.log(p);
      const sum = h + term;
      compensation += Math.abs(h) >= Math.abs(term) ? h - sum + term : term - sum + h;
      h = sum;
    }
    lowerIsCdf = upperIsCdf;
    lowerValue = upperValue;
  }
  return h + compensation;
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
  scenario.recorded = recordedFacts(base, perCoordinate);
  return scenario;
}

/**
 * The lattice and, for a one-dimensional entropy law with a CDF, the entropy of the recorded values. The cell count
 * is checked now (two quantiles); the sum over up to 1e7 cells is left until it is first read.
 */
function recordedFacts(base: Scenario, steps: number[]): RecordedFacts {
  const unstated = (why: string): RecordedFacts => ({ steps, base: base.id, discreteEntropy: null, latticeEntropy: null, source: why });
  if (base.dim !== 1 || base.quantity !== 'entropy') return unstated('stated for one-dimensional entropy laws only');
  const density = base.univariate;
  if (!density) return unstated(`not stated: ${base.id} states no CDF`);
  const step = steps[0];
  const lattice = latticeOf(density, step);
  if (!(cellCount(lattice) <= MAX_CELLS)) return unstated(`not computed: ${tooManyCells(lattice)}`);
  const bound = tailBound(lattice, base.moments);
  const boundText =
    bound === undefined
      ? 'no bound on the error from the tails (the law has no finite variance)'
      : `error from the tails at most ${bound.toExponential(1)} nats`;
  const upper = lattice.stableSurvival
    ? 'survival function'
    : '1 − CDF (the law states no survival function: upper-tail masses are good to about 1e-16 absolute only)';
  let cached: number | undefined;
  const h = () => (cached ??= latticeSum(density, lattice));
  const facts = {
    steps,
    base: base.id,
    source:
      `−Σ p log p over ${cellCount(lattice)} cells, p from ${base.id}'s CDF below its median and its ${upper} above, ` +
      `the tails beyond its ${TAIL} quantiles (mass ${lattice.lowerTail.toExponential(1)} below, ${lattice.upperTail.toExponential(1)} above) merged into the end cells: ${boundText}`,
  };
  Object.defineProperty(facts, 'discreteEntropy', { enumerable: true, get: h });
  Object.defineProperty(facts, 'latticeEntropy', { enumerable: true, get: () => h() + Math.log(step) });
  return facts as RecordedFacts;
}
