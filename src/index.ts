/**
 * hhat as a library: the same pieces the command line uses.
 *
 *   import { resolvePlan, runPlan, assembleRun, parseScenario, replicateRng } from 'hhat';
 *   const { plan } = resolvePlan({ scenarios: ['gamma:shape=2'], estimators: ['kozachenko-leonenko'], sampleSizes: [1000] });
 *   const run = assembleRun(await runPlan(plan), null);   // cells with per-replicate estimates and scores
 */
export type {
  Estimator,
  ParamSpec,
  Quantity,
  Rng,
  Sample,
  Scenario,
  ScenarioFamily,
  SettingSpec,
  SettingValue,
  Settings,
  Support,
  Tails,
  UnivariateDensity,
} from './contracts.js';
export { EstimateError, UsageError, isEstimateError } from './errors.js';
export { replicateRng, replicateSeed, rngFromSeed } from './rng.js';
export { catalog, getFamily, listFamilies, parseScenario } from '../scenarios/index.js';
export {
  configureEstimator,
  getEstimator,
  listEstimators,
  parseEstimatorSpec,
  registerEstimator,
  runEstimator,
  type ConfiguredEstimator,
} from '../estimators/index.js';
export { drawsFingerprint, planFingerprint, readPlanFile, resolvePlan, type Plan, type PlanInput } from './plan.js';
export { defaultPlan } from './default-plan.js';
export { runPlan, type RunOptions, type RunOutcome, type Shard } from './runner.js';
export { assembleRun, readRunFile, writeRunFile, type Cell, type RunFile } from './results.js';
export { mergeShards } from './merge.js';
export { scoreCell, type CellScores } from './score.js';
export { compareRuns, type Comparison } from './compare.js';
export { parsePerturbation, type Perturbation } from './perturb.js';
export { meanLogReference, parseReference, type Reference } from './reference.js';
export { convertEntropy, unitFactor } from './units.js';
export { readSample, findRepeats } from './data.js';
export { KnnIndex } from './knn.js';
export { loadEstimatorModules, registerUserEstimators } from './modules.js';
export { runConformance, checksFor, type CheckResult, type ConformanceReport } from './conformance.js';
export { renderReport, writeReport } from './report/report.js';
export { adviseFile } from './advise/file.js';
export { adviseSetting } from './advise/setting.js';
