/**
 * Brent's minimiser on a bounded interval: golden-section steps, with parabolic interpolation when it is
 * safe (Brent 1973, Algorithms for Minimization without Derivatives, ch. 5; the same algorithm as Forsythe,
 * Malcolm & Moler 1977, "fmin"). Finds a local minimum to within about `tolerance` in x; the endpoints
 * themselves are never evaluated.
 */
export interface Minimum {
  x: number;
  value: number;
  evaluations: number;
}

const GOLDEN_FRACTION = (3 - Math.sqrt(5)) / 2;
const SQRT_EPSILON = Math.sqrt(Number.EPSILON);

export function minimizeBounded(f: (x: number) => number, lower: number, upper: number, tolerance: number, maxEvaluations = 100): Minimum {
  let a = lower;
  let b = upper;
  let x = a + GOLDEN_FRACTION * (b - a);
  let w = x;
  let v = x;
  let fx = f(x);
  let fw = fx;
  let fv = fx;
  let evaluations = 1;
  let step = 0; // d: the last step taken
  let previousStep = 0; // e: the step before it
  while (evaluations < maxEvaluations) {
    const middle = (a + b) / 2;
    const tol1 = SQRT_EPSILON * Math.abs(x) + tolerance / 3;
    const tol2 = 2 * tol1;
    if (Math.abs(x - middle) <= tol2 - (b - a) / 2) break;
    let golden = true;
    if (Math.abs(previousStep) > tol1) {
      let r = (x - w) * (fx - fv);
      let q = (x - v) * (fx - fw);
      let p = (x - v) * q - (x - w) * r;
      q = 2 * (q - r);
      if (q > 0) p = -p;
      q = Math.abs(q);
      r = previousStep;
      previousStep = step;
      // Accept the parabola's minimum only if it lies inside (a, b) and the step shrinks fast enough.
      if (Math.abs(p) < Math.abs(0.5 * q * r) && p > q * (a - x) && p < q * (b - x)) {
        step = p / q;
        const u = x + step;
        if (u - a < tol2 || b - u < tol2) step = middle >= x ? tol1 : -tol1;
        golden = false;
      }
    }
    if (golden) {
      previousStep = x >= middle ? a - x : b - x;
      step = GOLDEN_FRACTION * previousStep;
    }
    const u = Math.abs(step) >= tol1 ? x + step : x + (step > 0 ? tol1 : -tol1);
    const fu = f(u);
    evaluations++;
    if (fu <= fx) {
      if (u >= x) a = x;
      else b = x;
      v = w;
      fv = fw;
      w = x;
      fw = fx;
      x = u;
      fx = fu;
    } else {
      if (u < x) a = u;
      else b = u;
      if (fu <= fw || w === x) {
        v = w;
        fv = fw;
        w = u;
        fw = fu;
      } else if (fu <= fv || v === x || v === w) {
        v = u;
        fv = fu;
      }
    }
  }
  return { x, value: fx, evaluations };
}
