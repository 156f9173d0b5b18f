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
  cos: Float64Array;
  sin: Float64Array;
  /** Bit-reversal permutation of 0..N-1. */
  reversed: Uint32Array;
}

const twiddleCache = new Map<number, Twiddles>();

function twiddlesFor(size: number): Twiddles {
  const cached = twiddleCache.get(size);
  if (cached) return cached;
  const half = size >>> 1;
  const cos = new Float64Array(half);
  const sin = new Float64Array(half);
  for (let k = 0; k < half; k++) {
    const angle = (-2 * Math.PI * k) / size;
    cos[k] = Math.cos(angle);
    sin[k] = Math.sin(angle);
  }
  const reversed = new Uint32Array(size);
  let bits = 0;
  while (1 << bits < size) bits++;
  for (let i = 0; i < size; i++) {
    let r = 0;
    for (let b = 0, v = i; b < bits; b++, v >>>= 1) r = (r << 1) | (v & 1);
    reversed[i] = r;
  }
  const made = { cos, sin, reversed };
  // A handful of sizes is used per run; keep the cache small so long runs do not accumulate tables.
  if (twiddleCache.size > 16) twiddleCache.clear();
  twiddleCache.set(size, made);
  return made;
}

/**
 * In-place discrete Fourier transform X_k = Σ_j x_j exp(∓2πi jk/N) (minus sign forward). The inverse is
 * scaled by 1/N so that inverse(forward(x)) = x. The length must be a power of two.
 */
export function fftInPlace(re: Float64Array, im: Float64Array, inverse = false): void {
  const size = re.length;
  if (im.length !== size) throw new RangeError('fftInPlace: re and im must have the same length');
  if (size <= 1) return;
  if ((size & (size - 1)) !== 0) throw new RangeError(`fftInPlace: length ${size} is not a power of two`);
  const { cos, sin, reversed } = twiddlesFor(size);
  for (let i = 0; i < size; i++) {
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
  const sign = inverse ? -1 : 1;
  for (let span = 1; span < size; span *= 2) {
    const step = size / (2 * span);
    for (let start = 0; start < size; start += 2 * span) {
      for (let k = 0; k < span; k++) {
        const wr = cos[k * step];
        const wi = sign * sin[k * step];
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
  if (inverse) {
    const scale = 1 / size;
    for (let i = 0; i < size; i++) {
      re[i] *= scale;
      im[i] *= scale;
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
  const re = Float64Array.from(a);
  const im = Float64Array.from(b);
  fftInPlace(re, im);
  const productRe = new Float64Array(size);
  const productIm = new Float64Array(size);
  for (let k = 0; k < size; k++) {
    const m = (size - k) & (size - 1);
    const zr = re[k];
    const zi = im[k];
    const cr = re[m];
    const ci = -im[m];
    // A = (Z + conj Z_m)/2, B = (Z − conj Z_m)/(2i)
    const ar = (zr + cr) / 2;
    const ai = (zi + ci) / 2;
    const dr = zr - cr;
    const di = zi - ci;
    const brr = di / 2;
    const bii = -dr / 2;
    productRe[k] = ar * brr - ai * bii;
    productIm[k] = ar * bii + ai * brr;
  }
  fftInPlace(productRe, productIm, true);
  return productRe;
}
