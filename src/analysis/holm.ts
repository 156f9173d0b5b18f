/**
 * Holm's step-down adjustment (Holm, Scand. J. Statist. 6:65–70, 1979): with p-values sorted p_(1) ≤ … ≤ p_(m),
 * the adjusted p_(j) is max over i ≤ j of min(1, (m − i + 1)·p_(i)). A hypothesis is rejected at family-wise
 * level α exactly when its adjusted p is at most α, which is the step-down rule "hold p_(j) to α/(m − j + 1)
 * until the first that fails".
 */
export function holmAdjusted(ps: readonly number[]): number[] {
  const m = ps.length;
  const order = ps.map((_, i) => i).sort((a, b) => ps[a] - ps[b]);
  const adjusted = new Array<number>(m);
  let running = 0;
  order.forEach((index, j) => {
    running = Math.max(running, Math.min(1, (m - j) * ps[index]));
    adjusted[index] = running;
  });
  return adjusted;
}
