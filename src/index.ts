/**
 * hhat as a library: the same pieces the command line uses, checked as it checks its flags and plan files (a
 * mistake is a UsageError with the command line's one-line message). README, "hhat as a library", documents the
 * main functions; test/library.test.ts runs its examples.
 *
 *   import { resolvePlan, runPlan, assembleRun, parseScenario, replicateRng } from 'hhat';
 *   const { plan } = resolvePlan({ scenarios: ['gamma:shape=2'], estimators: ['kozachenko-leonenko'], sampleSizes: [1000] });
 *   const run = assembleRun(await runPlan(plan), null);   // cells with per-replicate estimates and scores
 */
export type {
  DefaultEntry,
  DefaultSets,
  EstimateDefaultEntry,
  Estimator,
  EstimatorDefinition,
  EstimatorFile,
  ParamSpec,
  Quantity,
  Rng,
  Sample,
  Scenario,
  ScenarioFamily,
  SettingKind,
  SettingSpec,
  SettingsOf,
  SettingValue,
  SettingValueOf,
  Settings,
  Support,
  Tails,
  TuningAxis,
  UnivariateDensity,
} from './core/contracts.js';
export { EnvironmentError, EstimateError, UsageError, isEstimateError } from './core/errors.js';
export { drawReplicate, replicateRng, replicateSeed, rngFromSeed } from './core/rng.js';
export { catalog, getFamily, listFamilies, parseScenario } from '../scenarios/index.js';
export {
  checkDimension,
  configureEstimator,
  defaultSet,
  getEstimator,
  listEstimators,
  parseEstimatorSpec,
  registerEstimator,
  runEstimator,
  type ConfiguredEstimator,
} from '../estimators/index.js';
export { drawsFingerprint, planFingerprint, readPlanFile, resolvePlan, type Plan, type PlanInput } from './harness/plan.js';
export { defaultPlan } from './harness/default-plan.js';
export { runPlan, type RunOptions, type RunOutcome, type Shard } from './harness/runner.js';
export { assembleRun, readRunFile, writeRunFile, type Cell, type RunFile } from './analysis/results.js';
export { mergeShards } from './analysis/merge.js';
export { scoreCell, type CellScores } from './analysis/score.js';
export { compareRuns, parseTolerance, type Comparison, type CompareOptions } from './analysis/compare.js';
export { parsePerturbation, type Perturbation } from './harness/perturb.js';
export { meanLogReference, parseReference, type Reference } from './analysis/reference.js';
export { convertEntropy, unitFactor } from './core/units.js';
export { readSample, findRepeats } from './data/index.js';
export { KnnIndex } from './math/knn.js';
export { loadEstimatorModules, registerUserEstimators } from './harness/modules.js';
export { runConformance, checksFor, type CheckResult, type ConformanceReport } from './analysis/conformance.js';
export { renderReport, writeReport } from './views/report/report.js';
export { adviseFile } from './analysis/advise/file.js';
export { adviseSituation } from './analysis/advise/situation.js';
