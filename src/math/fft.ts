/**
 * Radix-2 fast Fourier transform on split real/imaginary Float64Arrays, and circular convolution of two
 * real sequences.
 *
 * Twiddle factors are computed directly with Math.cos / Math.sin for every index (not by a recurrence), so
 * the rounding error of a transform grows like ε·log2(N) rather than ε·N.
 */

/** Smallest power of two ≥ n (n ≥ 1). */
export function nextPowerOfTwo(n: number): number {
  if (!(n >= 1)) throw new RangeError(`nextPowerOfTwo needs n ≥ 1, got ${n}`);
  let size = 1;
  while (size < n) size *= 2;
  return size;
}

interface Twiddles {
  /**
   * Twiddles of every stage, contiguous per stage: entry span + k (0 ≤ k < span) is the twiddle of butterfly
   * k in the stage that pairs entries span apart, i.e. entry k·N/(2·span) of the size-N table, copied (the
   * same double). Contiguous reads let two stages share one pass over the data.
   */
  cos: Float64Array;
  sin: Float64Array;
  /** −sin, for the inverse: the same double as (−1)·sin, signed zeros included. */
  negatedSin: Float64Array;
  /** Bit-reversal permutation of 0..N-1. */
  reversed: Uint32Array;
}

const twiddleCache = new Map<number, Twiddles>();

function twiddlesFor(size: number): Twiddles {
  const cached = twiddleCache.get(size);
  if (cached) return cached;
  const half = size >>> 1;
  const tableCos = new Float64Array(half);
  const tableSin = new Float64Array(half);
  for (let k = 0; k < half; k++) {
    const angle = (-2 * Math.PI * k) / size;
    tableCos[k] = Math.cos(angle);
    tableSin[k] = Math.sin(angle);
  }
  const cos = new Float64Array(size);
  const sin = new Float64Array(size);
  const negatedSin = new Float64Array(size);
  for (let span = 1; span < size; span *= 2) {
    const step = size / (2 * span);
    for (let k = 0; k < span; k++) {
      cos[span + k] = tableCos[k * step];
      sin[span + k] = tableSin[k * step];
      negatedSin[span + k] = -tableSin[k * step];
    }
  }
  const reversed = new Uint32Array(size);
  let bits = 0;
  while (1 << bits < size) bits++;
  for (let i = 0; i < size; i++) {
    let r = 0;
    for (let b = 0, v = i; b < bits; b++, v >>>= 1) r = (r << 1) | (v & 1);
    reversed[i] = r;
  }
  const made = { cos, sin, negatedSin, reversed };
  // A handful of sizes is used per run; keep the cache small so long runs do not accumulate tables.
  if (twiddleCache.size > 16) twiddleCache.clear();
  twiddleCache.set(size, made);
  return made;
}

/**
 * Up to this span the stage pair loops over k outside, so its three twiddles are read once per k; beyond it
 * over blocks outside, so the accesses stay contiguous (strided k-outer passes over 2^14 entries ran slower
 * than the plain loop).
 */
const TWIDDLE_OUTER_MAX_SPAN = 64;

/**
 * In-place discrete Fourier transform X_k = Σ_j x_j exp(∓2πi jk/N) (minus sign forward). The inverse is
 * scaled by 1/N so that inverse(forward(x)) = x. The length must be a power of two.
 *
 * Radix-2 decimation in time. Stages are done two per pass over the data (stagePair), which halves the
 * loads and stores; each butterfly is still the radix-2 one, with the same operands and operations in the
 * same order as one stage at a time, so the result is the same to the bit.
 */
export function fftInPlace(re: Float64Array, im: Float64Array, inverse = false): void {
  const size = re.length;
  if (im.length !== size) throw new RangeError('fftInPlace: re and im must have the same length');
  if (size <= 1) return;
  if ((size & (size - 1)) !== 0) throw new RangeError(`fftInPlace: length ${size} is not a power of two`);
  const { cos, sin, negatedSin, reversed } = twiddlesFor(size);
  permuteBitReversed(re, im, reversed);
  const wis = inverse ? negatedSin : sin;
  let span = 1;
  for (; 4 * span <= size; span *= 4) {
    if (span <= TWIDDLE_OUTER_MAX_SPAN) stagePairTwiddleOuter(re, im, cos, wis, span);
    else stagePairBlockOuter(re, im, cos, wis, span);
  }
  if (span < size) lastStage(re, im, cos, wis, span);
  if (inverse) {
    const scale = 1 / size;
    for (let i = 0; i < size; i++) {
      re[i] *= scale;
      im[i] *= scale;
    }
  }
}

function permuteBitReversed(re: Float64Array, im: Float64Array, reversed: Uint32Array): void {
  for (let i = 0; i < re.length; i++) {
    const j = reversed[i];
    if (j > i) {
      let t = re[i];
      re[i] = re[j];
      re[j] = t;
      t = im[i];
      im[i] = im[j];
      im[j] = t;
    }
  }
}

/*
 * The stages of span s and 2s on the four entries i0 + {0, s, 2s, 3s} (i0 = block start + k, k < s):
 * stage s pairs (i0, i1) and (i2, i3) with twiddle k of span s; stage 2s pairs (i0, i2) with twiddle k and
 * (i1, i3) with twiddle k + s of span 2s. Each pair is the butterfly
 *   br = re[b]·wr − im[b]·wi; bi = re[b]·wi + im[b]·wr; re[b] = re[a] − br; re[a] = re[a] + br (same for im),
 * with the intermediate entries held in locals instead of written back and read again. The two loop orders
 * below differ only in which butterflies come first, and butterflies of one stage touch disjoint entries.
 */

function stagePairTwiddleOuter(re: Float64Array, im: Float64Array, wrs: Float64Array, wis: Float64Array, span: number): void {
  const size = re.length;
  const block = 4 * span;
  const outer = 2 * span;
  for (let k = 0; k < span; k++) {
    const wr = wrs[span + k];
    const wi = wis[span + k];
    const wr0 = wrs[outer + k];
    const wi0 = wis[outer + k];
    const wr1 = wrs[outer + span + k];
    const wi1 = wis[outer + span + k];
    for (let i0 = k; i0 < size; i0 += block) stagePairAt(re, im, i0, span, wr, wi, wr0, wi0, wr1, wi1);
  }
}

function stagePairBlockOuter(re: Float64Array, im: Float64Array, wrs: Float64Array, wis: Float64Array, span: number): void {
  const size = re.length;
  const block = 4 * span;
  const outer = 2 * span;
  for (let start = 0; start < size; start += block) {
    for (let k = 0; k < span; k++) {
      stagePairAt(re, im, start + k, span, wrs[span + k], wis[span + k], wrs[outer + k], wis[outer + k], wrs[outer + span + k], wis[outer + span + k]);
    }
  }
}

/**
 * (wr, wi): twiddle of stage span; (wr0, wi0), (wr1, wi1): those of stage 2·span for (i0, i2) and (i1, i3). The
 * four butterflies are written out, not called, so that the first stage's results stay in locals for the second
 * (a butterfly helper would have to return two numbers, or write them back to the arrays).
 */
function stagePairAt(
  re: Float64Array,
  im: Float64Array,
  i0: number,
  span: number,
  wr: number,
  wi: number,
  wr0: number,
  wi0: number,
  wr1: number,
  wi1: number,
): void {
  const i1 = i0 + span;
  const i2 = i1 + span;
  const i3 = i2 + span;
  let xr = re[i1];
  let xi = im[i1];
  let br = xr * wr - xi * wi;
  let bi = xr * wi + xi * wr;
  const r0 = re[i0];
  const m0 = im[i0];
  const r1 = r0 - br;
  const m1 = m0 - bi;
  const s0 = r0 + br;
  const n0 = m0 + bi;
  xr = re[i3];
  xi = im[i3];
  br = xr * wr - xi * wi;
  bi = xr * wi + xi * wr;
  const r2 = re[i2];
  const m2 = im[i2];
  const r3 = r2 - br;
  const m3 = m2 - bi;
  const s2 = r2 + br;
  const n2 = m2 + bi;
  br = s2 * wr0 - n2 * wi0;
  bi = s2 * wi0 + n2 * wr0;
  re[i2] = s0 - br;
  im[i2] = n0 - bi;
  re[i0] = s0 + br;
  im[i0] = n0 + bi;
  br = r3 * wr1 - m3 * wi1;
  bi = r3 * wi1 + m3 * wr1;
  re[i3] = r1 - br;
  im[i3] = m1 - bi;
  re[i1] = r1 + br;
  im[i1] = m1 + bi;
}

/** The single stage left over when log2 N is odd (span = N/2). */
function lastStage(re: Float64Array, im: Float64Array, wrs: Float64Array, wis: Float64Array, span: number): void {
  const size = re.length;
  for (let start = 0; start < size; start += 2 * span) {
    for (let k = 0; k < span; k++) {
      const wr = wrs[span + k];
      const wi = wis[span + k];
      const a = start + k;
      const b = a + span;
      const br = re[b] * wr - im[b] * wi;
      const bi = re[b] * wi + im[b] * wr;
      re[b] = re[a] - br;
      im[b] = im[a] - bi;
      re[a] += br;
      im[a] += bi;
    }
  }
}

/**
 * Circular convolution out_k = Σ_j a_j b_{(k−j) mod N} of two real sequences of the same power-of-two
 * length N, with one complex transform each way: a and b are packed as the real and imaginary parts of one
 * sequence, and their spectra are separated by conjugate symmetry (A_k = (Z_k + conj Z_{N−k})/2,
 * B_k = (Z_k − conj Z_{N−k})/(2i)). Returns a new array; a and b are not modified.
 */
export function circularConvolveReal(a: Float64Array, b: Float64Array): Float64Array {
  const size = a.length;
  if (b.length !== size) throw new RangeError('circularConvolveReal: a and b must have the same length');
  const re = a.slice();
  const im = b.slice();
  fftInPlace(re, im);
  spectralProductInPlace(re, im);
  fftInPlace(re, im, true);
  return re;
}

/**
 * Overwrites the packed spectrum Z with A·B. Entries k and m = N − k each need the other's Z, so both
 * products are computed before either is written (spectralProductRe, spectralProductIm).
 */
function spectralProductInPlace(re: Float64Array, im: Float64Array): void {
  const size = re.length;
  const half = size >>> 1;
  for (let k = 0; k <= half; k++) {
    const m = (size - k) & (size - 1);
    const zkr = re[k];
    const zki = im[k];
    const zmr = re[m];
    const zmi = im[m];
    const pkr = spectralProductRe(zkr, zki, zmr, -zmi);
    const pki = spectralProductIm(zkr, zki, zmr, -zmi);
    const pmr = spectralProductRe(zmr, zmi, zkr, -zki);
    const pmi = spectralProductIm(zmr, zmi, zkr, -zki);
    re[k] = pkr;
    im[k] = pki;
    re[m] = pmr;
    im[m] = pmi;
  }
}

// A = (Z + C)/2, B = (Z − C)/(2i), with Z = Z_k and C = conj Z_{N−k}: the real and imaginary parts of A·B.

function spectralProductRe(zr: number, zi: number, cr: number, ci: number): number {
  const ar = (zr + cr) / 2;
  const ai = (zi + ci) / 2;
  const brr = (zi - ci) / 2;
  const bii = -(zr - cr) / 2;
  return ar * brr - ai * bii;
}

function spectralProductIm(zr: number, zi: number, cr: number, ci: number): number {
  const ar = (zr + cr) / 2;
  const ai = (zi + ci) / 2;
  const brr = (zi - ci) / 2;
  const bii = -(zr - cr) / 2;
  return ar * bii + ai * brr;
}
