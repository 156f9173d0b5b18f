/**
 * Scores under serial dependence, from the cells of a run whose plan has autocorrelated[phi=φ;BASE] scenarios
 * (a plan's `phi` list) and thinned estimators (`thin=t`):
 *
 * Variance inflation: Var(Ĥ) at φ over Var(Ĥ) at φ = 0, for the same base, estimator and n. The two cells are
 * drawn from different seeds (a scenario's id enters its seed), so the sample variances are independent; the
 * standard error of log R is the delta method on each sample variance,
 *   Var(log s²) ≈ Var(s²)/σ⁴,  Var(s²) ≈ (μ₄ − σ⁴(m−3)/(m−1))/m   (kurtosis-aware, as in score.ts),
 * so SE(log R)² = Var(s²_φ)/s⁴_φ + Var(s²_0)/s⁴_0 (delta method: Casella & Berger, Statistical Inference, 2nd ed.,
 * §5.5.4); the interval at the run's level L is exp(log R ± z·SE), z the normal quantile at (1 + L)/2 (1.96 at
 * 95%), one interval per ratio (pointwise, not simultaneous), and the SE of R itself is R·SE(log R). Under
 * independent rows R is 1; for the sample mean of the latent AR(1) series it tends to τ = (1 + φ)/(1 − φ).
 *
 * Thinning: for every cell of an estimator with thin = t and its all-rows counterpart (the same spec without
 * thin) on the same scenario and n, hence the same draws, the paired difference of squared errors
 * d_r = (Ĥ_thin − H)² − (Ĥ_all − H)², its mean ± SE, and a two-sided normal test on the mean of d (Diebold &
 * Mariano, J. Bus. Econ. Stat. 13, 1995). The run's comparisons are one family: their p-values are adjusted
 * by Holm's step-down (src/analysis/holm.ts), and a verdict is "thinning better" when the MSE drops, "all rows
 * better" when it grows, with an adjusted p at most 1 − L; "cannot tell" otherwise.
 */
import { normalQuantile, normalSurvival } from '../math/special.js';
import type { Cell, ScenarioInfo } from './cells.js';
import { holmAdjusted } from './holm.js';
import type { ValueWithSe } from './score.js';

export interface VarianceInflation {
  /** The autocorrelated scenario and its base (the φ = 0 scenario of the same plan). */
  scenario: string;
  base: string;
  phi: number;
  estimator: string;
  n: number;
  /** Var(Ĥ) at φ over Var(Ĥ) at φ = 0, with the delta-method SE and an interval at the run's level (see the file comment). */
  ratio: ValueWithSe & { lower: number; upper: number };
  /** (1 + φ)/(1 − φ): the inflation of the variance of the latent series' mean, for scale. */
  latentTau: number;
}

export interface ThinningComparison {
  scenario: string;
  n: number;
  /** The thinned spec and its all-rows counterpart. */
  estimator: string;
  allRows: string;
  thin: number;
  rmseThinned: number;
  rmseAllRows: number;
  /** Mean paired difference of squared errors (thinned − all rows), with its SE; replicates where both ran. */
  mseDifference: ValueWithSe;
  pairs: number;
  /** Two-sided p of the normal test on the mean of d, Holm-adjusted over the run's thinning comparisons. */
  adjustedP: number;
  verdict: 'thinning better' | 'all rows better' | 'cannot tell';
}

export interface DependenceSection {
  varianceInflation: VarianceInflation[];
  thinning: ThinningComparison[];
}

/** autocorrelated[phi=0.9;BASE] → { phi: 0.9, base: BASE }; null for any other id. */
export function autocorrelatedParts(id: string): { phi: number; base: string } | null {
  const match = /^autocorrelated\[phi=([^;]+);(.*)\]$/s.exec(id);
  return match ? { phi: Number(match[1]), base: match[2] } : null;
}

/** `kozachenko-leonenko:k=3,thin=10` → { allRows: 'kozachenko-leonenko:k=3', thin: 10 }; null without thin. */
export function thinnedParts(spec: string): { allRows: string; thin: number } | null {
  const match = /^(.*)[:,]thin=(\d+)$/.exec(spec);
  return match ? { allRows: match[1], thin: Number(match[2]) } : null;
}

function finite(cell: Cell): number[] {
  return cell.estimates.filter((v): v is number => v !== null && Number.isFinite(v));
}

/** Sample variance and the delta-method variance of it (kurtosis-aware). */
function varianceWithItsVariance(values: number[]): { s2: number; varS2: number } | null {
  const m = values.length;
  if (m < 4) return null;
  const mean = values.reduce((a, b) => a + b, 0) / m;
  let m2 = 0;
  let m4 = 0;
  for (const v of values) {
    const c = v - mean;
    m2 += c * c;
    m4 += c * c * c * c;
  }
  const s2 = m2 / (m - 1);
  const mu4 = m4 / m;
  return { s2, varS2: Math.max(0, (mu4 - (s2 * s2 * (m - 3)) / (m - 1)) / m) };
}

/** The variance ratio of two independent sets of replicate estimates, R = s²_a / s²_b, with SE and an interval at `level`. */
export function varianceRatio(a: number[], b: number[], level = 0.95): (ValueWithSe & { lower: number; upper: number }) | null {
  const va = varianceWithItsVariance(a);
  const vb = varianceWithItsVariance(b);
  if (!va || !vb || !(va.s2 > 0) || !(vb.s2 > 0)) return null;
  const ratio = va.s2 / vb.s2;
  const seLog = Math.sqrt(va.varS2 / (va.s2 * va.s2) + vb.varS2 / (vb.s2 * vb.s2));
  const z = normalQuantile((1 + level) / 2);
  return { value: ratio, se: ratio * seLog, lower: ratio * Math.exp(-z * seLog), upper: ratio * Math.exp(z * seLog) };
}

export function dependenceSection(cells: readonly Cell[], scenarios: readonly ScenarioInfo[], level = 0.95): DependenceSection | null {
  const main = cells.filter((c) => c.role === 'main');
  const byKey = new Map(main.map((c) => [`${c.scenario}|${c.estimator}|${c.n}`, c]));
  const planned = new Set(scenarios.map((s) => s.id));
  const varianceInflation: VarianceInflation[] = [];
  for (const cell of main) {
    const parts = autocorrelatedParts(cell.scenario);
    if (!parts || !planned.has(parts.base)) continue;
    const reference = byKey.get(`${parts.base}|${cell.estimator}|${cell.n}`);
    if (!reference) continue;
    const ratio = varianceRatio(finite(cell), finite(reference), level);
    if (!ratio) continue;
    varianceInflation.push({
      scenario: cell.scenario,
      base: parts.base,
      phi: parts.phi,
      estimator: cell.estimator,
      n: cell.n,
      ratio,
      latentTau: (1 + parts.phi) / (1 - parts.phi),
    });
  }
  const truth = new Map(scenarios.map((s) => [s.id, s.truth]));
  const thinning: ThinningComparison[] = [];
  const rawP: number[] = [];
  for (const cell of main) {
    const parts = thinnedParts(cell.estimator);
    if (!parts) continue;
    const reference = byKey.get(`${cell.scenario}|${parts.allRows}|${cell.n}`);
    const h = truth.get(cell.scenario);
    if (!reference || h === undefined) continue;
    const differences: number[] = [];
    cell.estimates.forEach((v, r) => {
      const w = reference.estimates[r];
      if (v !== null && w !== null && Number.isFinite(v) && Number.isFinite(w)) differences.push((v - h) ** 2 - (w - h) ** 2);
    });
    const m = differences.length;
    if (m < 2) continue;
    const mean = differences.reduce((a, b) => a + b, 0) / m;
    const se = Math.sqrt(differences.reduce((a, d) => a + (d - mean) ** 2, 0) / (m - 1) / m);
    thinning.push({
      scenario: cell.scenario,
      n: cell.n,
      estimator: cell.estimator,
      allRows: parts.allRows,
      thin: parts.thin,
      rmseThinned: cell.scores.rmse.value,
      rmseAllRows: reference.scores.rmse.value,
      mseDifference: { value: mean, se },
      pairs: m,
      adjustedP: NaN,
      verdict: 'cannot tell',
    });
    // Identical estimates on every draw (se = 0, mean 0) are no evidence either way.
    rawP.push(se > 0 ? 2 * normalSurvival(Math.abs(mean) / se) : mean === 0 ? 1 : 0);
  }
  const adjusted = holmAdjusted(rawP);
  thinning.forEach((t, i) => {
    t.adjustedP = adjusted[i];
    if (adjusted[i] <= 1 - level) t.verdict = t.mseDifference.value < 0 ? 'thinning better' : 'all rows better';
  });
  return varianceInflation.length || thinning.length ? { varianceInflation, thinning } : null;
}
