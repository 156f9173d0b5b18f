/**
 * Adaptive Gauss–Legendre quadrature with a global error budget.
 *
 * Each panel is integrated by the 15-point rule on the whole panel and on its two halves; the difference is
 * the panel's error estimate (conservative: the halves are far more accurate than the difference says). The
 * panel with the largest estimate is split until the summed estimate meets the tolerance. Half-lines are
 * integrated in the logarithm of the distance from their end (see halfLine), the line as two half-lines,
 * and the 15-point rule never evaluates an endpoint, so integrable endpoint poles are handled by splitting.
 */

export interface QuadratureOptions {
  absTol?: number;
  relTol?: number;
  maxPanels?: number;
  /** Interior points where the integrand has kinks or peaks; panels start split there. */
  breakpoints?: readonly number[];
  /** For a finite range: the integrand as a function of the distance u = b − x from the upper end. */
  upperDistance?: (u: number) => number;
}

export interface QuadratureResult {
  value: number;
  /** Summed per-panel error estimates: an estimated bound on |value - exact|. */
  errorEstimate: number;
  panels: number;
}

const ORDER = 15;
const { nodes: GL_NODES, weights: GL_WEIGHTS } = gaussLegendre(ORDER);

/** Nodes and weights of the n-point Gauss–Legendre rule on [-1, 1], by Newton's method on P_n. */
export function gaussLegendre(n: number): { nodes: Float64Array; weights: Float64Array } {
  const nodes = new Float64Array(n);
  const weights = new Float64Array(n);
  for (let i = 0; i < n; i++) {
    let x = Math.cos((Math.PI * (i + 0.75)) / (n + 0.5));
    let derivative = 0;
    for (let iter = 0; iter < 100; iter++) {
      let p0 = 1;
      let p1 = x;
      for (let k = 2; k <= n; k++) {
        const p2 = ((2 * k - 1) * x * p1 - (k - 1) * p0) / k;
        p0 = p1;
        p1 = p2;
      }
      derivative = (n * (x * p1 - p0)) / (x * x - 1);
      const step = p1 / derivative;
      x -= step;
      if (Math.abs(step) < 1e-16) break;
    }
    nodes[i] = x;
    weights[i] = 2 / ((1 - x * x) * derivative * derivative);
  }
  return { nodes, weights };
}

function rule(f: (x: number) => number, a: number, b: number): number {
  const half = (b - a) / 2;
  const mid = (a + b) / 2;
  let sum = 0;
  for (let i = 0; i < ORDER; i++) sum += GL_WEIGHTS[i] * f(mid + half * GL_NODES[i]);
  return sum * half;
}

interface Panel {
  a: number;
  b: number;
  value: number;
  error: number;
}

function makePanel(f: (x: number) => number, a: number, b: number): Panel {
  const mid = (a + b) / 2;
  const whole = rule(f, a, b);
  const halves = rule(f, a, mid) + rule(f, mid, b);
  const error = Math.abs(halves - whole);
  return { a, b, value: halves, error: Number.isFinite(error) ? error : Infinity };
}

/** Integrates f over a finite panel list; used after the map to a finite range. */
function adaptive(f: (x: number) => number, cuts: number[], options: QuadratureOptions): QuadratureResult {
  const absTol = options.absTol ?? 1e-12;
  const relTol = options.relTol ?? 1e-12;
  const maxPanels = options.maxPanels ?? 20000;
  const panels: Panel[] = [];
  for (let i = 0; i + 1 < cuts.length; i++) if (cuts[i + 1] > cuts[i]) panels.push(makePanel(f, cuts[i], cuts[i + 1]));
  // A binary max-heap on error keeps each split O(log panels).
  const heap = panels;
  const swap = (i: number, j: number) => {
    const t = heap[i];
    heap[i] = heap[j];
    heap[j] = t;
  };
  const siftUp = (i: number) => {
    while (i > 0) {
      const p = (i - 1) >> 1;
      if (heap[p].error >= heap[i].error) break;
      swap(p, i);
      i = p;
    }
  };
  const siftDown = (i: number) => {
    for (;;) {
      const l = 2 * i + 1;
      const r = l + 1;
      let m = i;
      if (l < heap.length && heap[l].error > heap[m].error) m = l;
      if (r < heap.length && heap[r].error > heap[m].error) m = r;
      if (m === i) break;
      swap(m, i);
      i = m;
    }
  };
  for (let i = (heap.length >> 1) - 1; i >= 0; i--) siftDown(i);
  let total = 0;
  let totalError = 0;
  const recount = () => {
    total = 0;
    totalError = 0;
    for (const p of heap) {
      total += p.value;
      totalError += p.error;
    }
  };
  recount();
  let splits = 0;
  while (totalError > Math.max(absTol, relTol * Math.abs(total)) && heap.length < maxPanels) {
    const worst = heap[0];
    const mid = (worst.a + worst.b) / 2;
    if (!(mid > worst.a && mid < worst.b)) break; // panel too narrow to split in double precision
    const left = makePanel(f, worst.a, mid);
    const right = makePanel(f, mid, worst.b);
    heap[0] = left;
    siftDown(0);
    heap.push(right);
    siftUp(heap.length - 1);
    total += left.value + right.value - worst.value;
    totalError += left.error + right.error - worst.error;
    // Re-sum now and then so running-sum rounding never dominates a tiny error budget.
    if (++splits % 256 === 0) recount();
  }
  recount();
  return { value: total, errorEstimate: totalError, panels: heap.length };
}

/** ∫_a^b f(x) dx; a and b may be infinite. */
export function integrate(f: (x: number) => number, a: number, b: number, options: QuadratureOptions = {}): QuadratureResult {
  if (!(a < b)) {
    if (a === b) return { value: 0, errorEstimate: 0, panels: 0 };
    const r = integrate(f, b, a, options);
    return { ...r, value: -r.value };
  }
  const inside = (options.breakpoints ?? []).filter((x) => x > a && x < b).sort((x, y) => x - y);
  if (Number.isFinite(a) && Number.isFinite(b)) {
    if (!options.upperDistance) return adaptive(f, refine([a, ...inside, b], 4), options);
    // Near a finite upper end, x = b − u rounds away the distance u; the caller's function of u keeps it,
    // which matters for integrable poles at b (a beta law with β < 1).
    const mid = a + (b - a) / 2;
    const upper = options.upperDistance;
    const lowerPart = adaptive(f, refine([a, ...inside.filter((x) => x < mid), mid], 4), options);
    const upperCuts = [
      0,
      ...inside
        .filter((x) => x > mid)
        .map((x) => b - x)
        .reverse(),
      b - mid,
    ];
    const upperPart = adaptive(upper, refine(upperCuts, 4), options);
    return combine(lowerPart, upperPart);
  }
  if (Number.isFinite(a))
    return halfLine(
      f,
      a,
      1,
      inside.map((x) => x - a),
      options,
    );
  if (Number.isFinite(b)) return halfLine(f, b, -1, inside.map((x) => b - x).reverse(), options);
  const centre = inside.length ? inside[Math.floor(inside.length / 2)] : 0;
  const right = halfLine(
    f,
    centre,
    1,
    inside.filter((x) => x > centre).map((x) => x - centre),
    options,
  );
  const left = halfLine(
    f,
    centre,
    -1,
    inside
      .filter((x) => x < centre)
      .map((x) => centre - x)
      .reverse(),
    options,
  );
  return combine(left, right);
}

function combine(p: QuadratureResult, q: QuadratureResult): QuadratureResult {
  return { value: p.value + q.value, errorEstimate: p.errorEstimate + q.errorEstimate, panels: p.panels + q.panels };
}

/**
 * ∫ over the half-line from `origin` in direction `sign`, in the variable y = log(distance): x = origin ± e^y.
 * Power-law tails become exponentially decaying in y and integrable poles at the origin become smooth, so
 * the Gauss–Legendre error estimates stay honest for heavy tails (a Lévy law) and poles alike. The infinite
 * y-range is then mapped to (−1, 1) by y = c + s·t/(1 − t²).
 */
function halfLine(f: (x: number) => number, origin: number, sign: 1 | -1, distances: number[], options: QuadratureOptions): QuadratureResult {
  const logDistances = distances.filter((d) => d > 0).map(Math.log);
  const c = logDistances.length ? (logDistances[0] + logDistances[logDistances.length - 1]) / 2 : 0;
  const s = Math.max(1, logDistances.length > 1 ? (logDistances[logDistances.length - 1] - logDistances[0]) / 2 : 1);
  const g = (t: number) => {
    const u = 1 - t * t;
    const y = c + (s * t) / u;
    const distance = Math.exp(y);
    if (distance === 0 || distance === Infinity) return 0;
    const x = origin + sign * distance;
    // Below the resolution of the origin the point is the origin itself; that sliver carries no mass
    // unless the density has a pole at a nonzero origin, which no scenario here has.
    if (x === origin) return 0;
    const v = f(x);
    return v === 0 ? 0 : (v * distance * s * (1 + t * t)) / (u * u);
  };
  const toT = (y: number) => {
    const z = (y - c) / s;
    if (z === 0) return 0;
    return (-1 + Math.sqrt(1 + 4 * z * z)) / (2 * z);
  };
  const tCuts = [-1, ...logDistances.map(toT), 1];
  return adaptive(g, refine(tCuts, 8), options);
}

/** Splits every interval into `parts` equal pieces so narrow features are seen by the first pass. */
function refine(cuts: number[], parts: number): number[] {
  const out: number[] = [];
  for (let i = 0; i + 1 < cuts.length; i++) {
    const a = cuts[i];
    const b = cuts[i + 1];
    for (let j = 0; j < parts; j++) out.push(a + ((b - a) * j) / parts);
  }
  out.push(cuts[cuts.length - 1]);
  return out;
}
