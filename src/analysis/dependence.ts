/**
 * Scores under serial dependence, from the cells of a run whose plan has autocorrelated[phi=φ;BASE] scenarios
 * (a plan's `phi` list) and thinned estimators (`thin=t`):
 *
 * Variance inflation: Var(Ĥ) at φ over Var(Ĥ) at φ = 0, for the same base, estimator and n. The two cells are
 * drawn from different seeds (a scenario's id enters its seed), so the sample variances are independent; the
 * standard error of log R is the delta method on each sample variance with a small-sample kurtosis estimate
 * (varianceWithItsLogVariance), SE(log R)² = Var(log s²_φ) + Var(log s²_0); the interval at the run's level L is
 * exp(log R ± q·SE), q the t quantile at (1 + L)/2, one interval per ratio (pointwise, not simultaneous), and the
 * SE of R itself is R·SE(log R). Under
 * independent rows R is 1; for the sample mean of the latent AR(1) series it tends to τ = (1 + φ)/(1 − φ).
 *
 * Thinning: for every cell of an estimator with thin = t and its all-rows counterpart (the same spec without
 * thin) on the same scenario and n, hence the same draws, the paired difference of squared errors
 * d_r = (Ĥ_thin − H)² − (Ĥ_all − H)², its mean ± SE, and a two-sided test on the mean of d (Diebold & Mariano,
 * J. Bus. Econ. Stat. 13, 1995) against Student's t with m − 1 degrees of freedom rather than the normal, as
 * Harvey, Leybourne & Newbold (Int. J. Forecasting 13, 1997; from memory) advise for few pairs (30–50 here). The run's comparisons are one family: their p-values are adjusted
 * by Holm's step-down (src/analysis/holm.ts), and a verdict is "thinning better" when the MSE drops, "all rows
 * better" when it grows, with an adjusted p at most 1 − L; "cannot tell" otherwise.
 */
import type { Cell, ScenarioInfo } from './cells.js';
import { holmAdjusted } from './holm.js';
import { pairedTTest, studentQuantile } from './t-tests.js';
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

/**
 * Sample variance and the variance of its log, Var(log s²) ≈ (γ₄ − (m − 3)/m)/(m − 1), with the kurtosis
 * γ₄ = m Σ(x − trimmed mean)⁴ / (Σ(x − mean)²)², the mean trimmed by 1/(2√(m − 4)) at each end (Bonett, Comput.
 * Stat. Data Anal. 50:775–782, 2006, from memory). The plain moment form, (μ₄ − σ⁴(m − 3)/(m − 1))/m, under-
 * estimates the kurtosis at small m, and its intervals covered 83–93% at m = 30–50 (varianceRatio).
 */
function varianceWithItsLogVariance(values: number[]): { s2: number; varLog: number } | null {
  const m = values.length;
  if (m < 5) return null;
  const mean = values.reduce((a, b) => a + b, 0) / m;
  const sorted = Float64Array.from(values).sort();
  const cut = Math.floor(m / (2 * Math.sqrt(m - 4)));
  let trimmed = 0;
  for (let i = cut; i < m - cut; i++) trimmed += sorted[i];
  trimmed /= m - 2 * cut;
  let m2 = 0;
  let m4 = 0;
  for (const v of values) {
    m2 += (v - mean) ** 2;
    m4 += (v - trimmed) ** 4;
  }
  const s2 = m2 / (m - 1);
  const kurtosis = m2 > 0 ? (m * m4) / (m2 * m2) : 0;
  return { s2, varLog: Math.max(0, kurtosis - (m - 3) / m) / (m - 1) };
}

/**
 * The variance ratio of two independent sets of replicate estimates, R = s²_a / s²_b, with SE and an interval at
 * `level`: exp(log R ± q·SE(log R)), q the t quantile with min(m_a, m_b) − 1 degrees of freedom. Simulated
 * coverage of the 95% interval (test/fixtures/variance_ratio_coverage.py: 20,000 pairs of independent samples with
 * equal variances; normal, Student t₅, lognormal(0, 0.5) and exponential estimates): 90.5–94.6% at m = 30,
 * 91.6–94.6% at m = 50; the moment form with the normal quantile covered 83.3–90.9% and 87.3–92.5%.
 */
export function varianceRatio(a: number[], b: number[], level = 0.95): (ValueWithSe & { lower: number; upper: number }) | null {
  const va = varianceWithItsLogVariance(a);
  const vb = varianceWithItsLogVariance(b);
  if (!va || !vb || !(va.s2 > 0) || !(vb.s2 > 0)) return null;
  const ratio = va.s2 / vb.s2;
  const seLog = Math.sqrt(va.varLog + vb.varLog);
  const q = studentQuantile((1 + level) / 2, Math.min(a.length, b.length) - 1);
  return { value: ratio, se: ratio * seLog, lower: ratio * Math.exp(-q * seLog), upper: ratio * Math.exp(q * seLog) };
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
    // The paired t test of compare: equal estimates on every draw (se 0, mean 0) give p = 1, no evidence either way.
    const test = pairedTTest(differences);
    if (!test) continue;
    thinning.push({
      scenario: cell.scenario,
      n: cell.n,
      estimator: cell.estimator,
      allRows: parts.allRows,
      thin: parts.thin,
      rmseThinned: cell.scores.rmse.value,
      rmseAllRows: reference.scores.rmse.value,
      mseDifference: { value: test.difference, se: test.se },
      pairs: differences.length,
      adjustedP: NaN,
      verdict: 'cannot tell',
    });
    rawP.push(test.p);
  }
  const adjusted = holmAdjusted(rawP);
  thinning.forEach((t, i) => {
    t.adjustedP = adjusted[i];
    if (adjusted[i] <= 1 - level) t.verdict = t.mseDifference.value < 0 ? 'thinning better' : 'all rows better';
  });
  return varianceInflation.length || thinning.length ? { varianceInflation, thinning } : null;
}
