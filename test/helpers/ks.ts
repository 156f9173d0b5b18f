/**
 * One-sample Kolmogorov–Smirnov test against an exact CDF.
 * p-value: the asymptotic Kolmogorov distribution Q(λ) = 2 Σ_{k≥1} (−1)^{k−1} e^{−2k²λ²} with Stephens'
 * small-sample correction λ = (√n + 0.12 + 0.11/√n)·D (M. A. Stephens, J. R. Statist. Soc. B 32, 1970;
 * as given in Numerical Recipes, 3rd ed., §14.3.3). At n = 20000 the correction is negligible.
 */
export function ksStatistic(values: Float64Array, cdf: (x: number) => number): number {
  const sorted = Float64Array.from(values).sort();
  const n = sorted.length;
  let d = 0;
  for (let i = 0; i < n; i++) {
    const f = cdf(sorted[i]);
    d = Math.max(d, f - i / n, (i + 1) / n - f);
  }
  return d;
}

export function kolmogorovQ(lambda: number): number {
  if (lambda < 0.2) return 1;
  let sum = 0;
  for (let k = 1; k <= 100; k++) {
    const term = Math.exp(-2 * k * k * lambda * lambda);
    sum += (k % 2 === 1 ? 1 : -1) * term;
    if (term < 1e-17) break;
  }
  return Math.min(1, Math.max(0, 2 * sum));
}

export function ksPValue(values: Float64Array, cdf: (x: number) => number): { statistic: number; pValue: number } {
  const n = values.length;
  const statistic = ksStatistic(values, cdf);
  const sqrtN = Math.sqrt(n);
  return { statistic, pValue: kolmogorovQ((sqrtN + 0.12 + 0.11 / sqrtN) * statistic) };
}
