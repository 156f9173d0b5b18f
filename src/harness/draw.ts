/**
 * The draws of a plan's cell, for `hhat draw`: the scenario, its truth and the sample of any replicate, drawn
 * through the same code as the runner (drawReplicate, perturbedCopy), so a written draw is the sample every
 * estimator of that cell received, byte for byte.
 *
 *   const draw = prepareDraw({ scenario: 'normal', n: 500, seed: DEFAULT_SEED, perturbation: 'rescale:c=1000' });
 *   const sample = draw.sample(3);   // replicate 3 (replicates count from 0, as in run files)
 */
import type { Sample, Scenario } from '../core/contracts.js';
import { UsageError } from '../core/errors.js';
import { drawReplicate } from '../core/rng.js';
import { parseScenario } from '../../scenarios/index.js';
import { parsePerturbation, perturbedCopy, type PreparedPerturbation } from './perturb.js';
import { perturbationRangeProblem, pilotRangeProblem, scenarioRangeProblem } from './draw-range.js';

export interface DrawRequest {
  /** A scenario spec as bench takes it (`hhat scenarios`). */
  scenario: string;
  n: number;
  seed: number;
  /** A perturbation spec as bench's --perturb takes it. */
  perturbation?: string;
  /** How many replicates will be drawn (default 1): the range check counts n × this many values of each coordinate. */
  replicates?: number;
  /** The replicate drawn in advance to see that the draws stay within the double range (default 0). */
  pilot?: number;
}

export interface DrawnPerturbation {
  spec: string;
  /** The exact change of the true value in nats (0 when it does not move). */
  shift: number;
  shiftSource: string;
  /** The scenario's truth before the perturbation. */
  truthBefore: number;
  /** quantize: Σ_j log δ_j, so the entropy of the discretised variable is ≈ truth − this. */
  logCellVolume?: number;
}

export interface Draw {
  scenario: Scenario;
  n: number;
  seed: number;
  /** The true value of what the sample is drawn from, in nats (shifted by the perturbation, if any). */
  truth: number;
  truthSource: string;
  perturbation: DrawnPerturbation | null;
  /** The sample replicate `replicate` sees (with `q` for a divergence), drawn afresh on each call. */
  sample(replicate: number): Sample;
}

export function prepareDraw(request: DrawRequest): Draw {
  const scenario = parseScenario(request.scenario);
  const { n, seed } = request;
  // Refused as bench refuses them (src/harness/draw-range.ts): values beyond the double range would be written as ±inf.
  const values = n * (request.replicates ?? 1);
  const problem = scenarioRangeProblem(scenario, values);
  if (problem) throw new UsageError(problem);
  const pilot = request.pilot ?? 0;
  const original = drawReplicate(scenario, seed, n, pilot);
  const pilotProblem = pilotRangeProblem(scenario, null, original, pilot);
  if (pilotProblem) throw new UsageError(pilotProblem);
  if (request.perturbation === undefined) {
    return {
      scenario,
      n,
      seed,
      truth: scenario.truth,
      truthSource: scenario.truthSource,
      perturbation: null,
      sample: (r) => drawReplicate(scenario, seed, n, r),
    };
  }
  const perturbation = parsePerturbation(request.perturbation);
  // Prepared as the runner's context prepares it (src/harness/context.ts), so the shift and the map are the same.
  const prepared = perturbation.prepare(scenario);
  if ('skip' in prepared) throw new UsageError(`--perturb ${request.perturbation} does not apply to ${scenario.id}: ${prepared.skip}`);
  const ready: PreparedPerturbation = prepared;
  const perturbationProblem =
    perturbationRangeProblem(scenario, perturbation.spec, ready, values) ??
    pilotRangeProblem(scenario, perturbation.spec, perturbedCopy(original, ready, pilot, seed), pilot);
  if (perturbationProblem) throw new UsageError(`--perturb ${request.perturbation}: ${perturbationProblem}`);
  const shift = ready.shift ?? 0;
  return {
    scenario,
    n,
    seed,
    truth: scenario.truth + shift,
    truthSource: `${scenario.truthSource}; ${perturbation.spec}: ${ready.shiftSource}`,
    perturbation: {
      spec: perturbation.spec,
      shift,
      shiftSource: ready.shiftSource,
      truthBefore: scenario.truth,
      ...(ready.logCellVolume !== undefined ? { logCellVolume: ready.logCellVolume } : {}),
    },
    sample: (r) => perturbedCopy(drawReplicate(scenario, seed, n, r), ready, r, seed),
  };
}
