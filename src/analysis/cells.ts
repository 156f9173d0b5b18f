/**
 * The cells of a run file (schemas/run.schema.json): one estimator on one scenario at one n, in one role, with
 * its estimates and scores. Kept apart from results.ts, which assembles run files, so the analyses that read
 * cells (robustness, advice) need not import the assembly that calls them.
 */
import type { RecordedFacts } from '../core/contracts.js';
import type { CellScores } from './score.js';

export interface ScenarioInfo {
  id: string;
  family: string;
  dim: number;
  truth: number;
  truthSource: string;
  support: string;
  tails: string;
  logDensityVariance: number | null;
  /** recorded[...] scenarios: the lattice and the recorded values' own entropy (absent on other scenarios and in older run files). */
  recorded?: RecordedFacts;
}

export interface CellFailure {
  replicate: number;
  message: string;
}

export interface Cell {
  scenario: string;
  estimator: string;
  estimatorId: string;
  family: string;
  n: number;
  /** main: a plan estimator on the sample as drawn; tuning: a grid point of a plan estimator; perturbed: a plan estimator on a perturbed copy. */
  role: 'main' | 'tuning' | 'perturbed';
  perturbation: string | null;
  /** For perturbed cells: the exact change of the true value (null: the truth does not move). */
  shift: number | null;
  /** For tuning cells: the plan estimator varied, the setting and its value here. */
  tuning: { base: string; setting: string; value: number | string } | null;
  /** One entry per replicate: the estimate in nats, or null (failed, or not run in this shard). */
  estimates: (number | null)[];
  failures: CellFailure[];
  scores: CellScores;
  timing: { totalMs: number; meanMs: number };
}
