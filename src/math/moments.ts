/** Descriptive statistics of a column of values, shared by the estimators' bin and bandwidth rules. */

/** The mean and the sum of squared deviations about it, in two passes (more accurate than Σx² − n·mean²). */
export function squaredDeviations(values: Float64Array): { mean: number; sumOfSquares: number } {
  const n = values.length;
  let sum = 0;
  for (let i = 0; i < n; i++) sum += values[i];
  const mean = sum / n;
  let sumOfSquares = 0;
  for (let i = 0; i < n; i++) {
    const deviation = values[i] - mean;
    sumOfSquares += deviation * deviation;
  }
  return { mean, sumOfSquares };
}

/**
 * Quantile p of sorted values by linear interpolation between order statistics at position p·(n − 1)
 * (Hyndman & Fan 1996, type 7; numpy's and R's default).
 */
export function quantileOfSorted(sorted: Float64Array, p: number): number {
  const position = p * (sorted.length - 1);
  const below = Math.floor(position);
  const fraction = position - below;
  if (fraction === 0) return sorted[below];
  return sorted[below] + (sorted[below + 1] - sorted[below]) * fraction;
}
