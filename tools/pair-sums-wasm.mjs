/**
 * Writes src/math/pair-sums.wat and src/math/pair-sums-wasm.ts (the assembled module, base64): the kernel
 * estimator's pair loops for d = 2..5 in WebAssembly with two-lane SIMD, four rows at a time, and its pass over
 * sorted values in one dimension (src/math/pair-sums.ts says what they compute and why). Both files are generated and committed; test/pair-sums.test.ts generates them again and fails
 * if they differ, and checks the module bit for bit against plain loops.
 *
 *   node tools/pair-sums-wasm.mjs          # after editing this generator
 *
 * Every operation mirrors src/math/exp.ts (expNonPositive) and a two-row pair loop in the same order, so that
 * the results are the same doubles: WebAssembly rounds every operation to double as JavaScript does and has no
 * fused multiply-add. Two liberties, both exact here: the clamp uses pmax (x < −800 ? −800 : x; x is never NaN,
 * and −800 is not a zero), and k is read from the low 32 bits of x·64/ln2 + 1.5·2^52, which hold it in two's
 * complement (the same integer as (that − 1.5·2^52) | 0).
 */
import { writeFileSync } from 'node:fs';
import { dirname, join } from 'node:path';
import { fileURLToPath } from 'node:url';
import { assemble as assembleNamed } from './wasm-assemble.mjs';

export const DIMS = [2, 3, 4, 5];
/** Byte offsets of the tables in the module's memory (written into the generated module for src/math/pair-sums.ts). */
export const TABLE_OFFSET = 0;
export const POWERS_OFFSET = 64 * 8;

const C = {
  ROUND: 6755399441055744,
  SIXTY_FOUR_OVER_LN2: 64 / Math.LN2,
  LN2_64_HIGH: 6.9314718036912381649e-1 / 64,
  LN2_64_LOW: 1.90821492927058770002e-10 / 64,
};
/** A double as WAT reads it back exactly (shortest round-trip decimal, as JavaScript prints it). */
const f64 = (x) => {
  const s = String(x);
  return /[.e]/.test(s) ? s : `${s}.0`;
};
const splat = (x) => `(f64x2.splat (f64.const ${f64(x)}))`;
const polynomial = (r, op, one) =>
  `(${op}.add ${one(1)} (${op}.mul ${r} (${op}.add ${one(1)} (${op}.mul ${r} (${op}.add ${one(0.5)} (${op}.mul ${r} (${op}.add ${one(1 / 6)} (${op}.mul ${r} (${op}.add ${one(1 / 24)} (${op}.mul ${r} ${one(1 / 120)}))))))))))`;
const scalar = (x) => `(f64.const ${f64(x)})`;
const tableLoad = (k) => `(f64.load offset=${TABLE_OFFSET} (i32.shl (i32.and ${k} (i32.const 63)) (i32.const 3)))`;
const powerLoad = (k) => `(f64.load offset=${POWERS_OFFSET} (i32.shl (i32.add (i32.shr_s ${k} (i32.const 6)) (i32.const 1200)) (i32.const 3)))`;

/** expNonPositive for one double. */
const scalarExp = `
  (func $exp (param $x f64) (result f64) (local $y f64) (local $kf f64) (local $r f64) (local $k i32)
    (local.set $y (f64.max (local.get $x) (f64.const -800.0)))
    (local.set $kf (f64.sub (f64.add (f64.mul (local.get $y) ${scalar(C.SIXTY_FOUR_OVER_LN2)}) ${scalar(C.ROUND)}) ${scalar(C.ROUND)}))
    (local.set $r (f64.sub (f64.sub (local.get $y) (f64.mul (local.get $kf) ${scalar(C.LN2_64_HIGH)})) (f64.mul (local.get $kf) ${scalar(C.LN2_64_LOW)})))
    (local.set $k (i32.trunc_sat_f64_s (local.get $kf)))
    (f64.mul (f64.mul ${tableLoad('(local.get $k)')} ${powerLoad('(local.get $k)')}) ${polynomial('(local.get $r)', 'f64', scalar)}))`;

/**
 * expNonPositive in both lanes of $arg, into $out (inline: a call per pair costs a quarter of the loop); `tag`
 * names this copy's temporaries, so that two copies in one loop body are independent chains.
 */
const vectorExp = (arg, out = '$term', tag = '') => `
        (local.set $ey${tag} (f64x2.pmax ${arg} ${splat(-800)}))
        (local.set $ek${tag} (f64x2.add (f64x2.mul (local.get $ey${tag}) ${splat(C.SIXTY_FOUR_OVER_LN2)}) ${splat(C.ROUND)}))
        (local.set $ekf${tag} (f64x2.sub (local.get $ek${tag}) ${splat(C.ROUND)}))
        (local.set $er${tag} (f64x2.sub (f64x2.sub (local.get $ey${tag}) (f64x2.mul (local.get $ekf${tag}) ${splat(C.LN2_64_HIGH)})) (f64x2.mul (local.get $ekf${tag}) ${splat(C.LN2_64_LOW)})))
        (local.set $ek0${tag} (i32x4.extract_lane 0 (local.get $ek${tag})))
        (local.set $ek1${tag} (i32x4.extract_lane 2 (local.get $ek${tag})))
        (local.set ${out} (f64x2.mul (f64x2.mul
          (f64x2.replace_lane 1 (f64x2.splat ${tableLoad(`(local.get $ek0${tag})`)}) ${tableLoad(`(local.get $ek1${tag})`)})
          (f64x2.replace_lane 1 (f64x2.splat ${powerLoad(`(local.get $ek0${tag})`)}) ${powerLoad(`(local.get $ek1${tag})`)}))
          ${polynomial(`(local.get $er${tag})`, 'f64x2', splat)}))`;

const expLocals = (tag) =>
  `(local $ey${tag} v128) (local $ek${tag} v128) (local $ekf${tag} v128) (local $er${tag} v128) (local $ek0${tag} i32) (local $ek1${tag} i32)`;

/** Squared distance summed in axis order: a0·a0 + a1·a1 + … */
const squaredSum = (axes, op, term) =>
  axes.slice(1).reduce((acc, a) => `(${op}.add ${acc} (${op}.mul ${term(a)} ${term(a)}))`, `(${op}.mul ${term(0)} ${term(0)})`);

/** Value i (+ offset) of the sorted array at $z, and an addition to sums[index] at $sums (one dimension). */
const at1 = (i, offset = 0) => `(f64.load offset=${8 * offset} (i32.add (local.get $z) (i32.shl (local.get ${i}) (i32.const 3))))`;
const sumAt1 = (index) => `(i32.add (local.get $sums) (i32.shl ${index} (i32.const 3)))`;
const addTo1 = (index, value) => `(f64.store ${sumAt1(index)} (f64.add (f64.load ${sumAt1(index)}) ${value}))`;

function pairLoop(d) {
  const axes = [...Array(d).keys()];
  const at = (point, axis) =>
    `(f64.load (i32.add (local.get $z) (i32.shl (i32.add (i32.mul (local.get ${point}) (i32.const ${d})) (i32.const ${axis})) (i32.const 3))))`;
  const sumsAt = (point, offset = 0) => `(i32.add (local.get $sums) (i32.shl (i32.add (local.get ${point}) (i32.const ${offset})) (i32.const 3)))`;
  const addTo = (point, value, offset = 0) => `(f64.store ${sumsAt(point, offset)} (f64.add (f64.load ${sumsAt(point, offset)}) ${value}))`;
  // exp(scale·|z_{p+row} − z_{p+row+1}|²), the pair of two neighbouring rows, splatted into both lanes of `into`.
  const selfPair = (row, into) =>
    `${axes.map((a) => `(local.set $x${a} (f64.sub ${at('$p', a + row * d)} ${at('$p', a + (row + 1) * d)}))`).join(' ')}
        (local.set ${into} (f64x2.splat (call $exp (f64.mul (local.get $scale) ${squaredSum(axes, 'f64', (a) => `(local.get $x${a})`)}))))`;
  // Rows p, p + 1 (lanes of $v) against q: the term to $acc and both terms together to sums[q].
  const twoRowStep = `${axes.map((a) => `(local.set $w${a} (f64x2.sub (local.get $v${a}) (f64x2.splat ${at('$q', a)})))`).join('\n          ')}
          ${vectorExp(`(f64x2.mul (local.get $scales) ${squaredSum(axes, 'f64x2', (a) => `(local.get $w${a})`)})`)}
          (local.set $acc (f64x2.add (local.get $acc) (local.get $term)))
          ${addTo('$q', '(f64.add (f64x2.extract_lane 0 (local.get $term)) (f64x2.extract_lane 1 (local.get $term)))')}
          (local.set $q (i32.add (local.get $q) (i32.const 1)))`;
  return `
  ;; pairs${d}(z, fromA, toA, fromB, toB, scale, sums): every pair of [fromA, toA) × [fromB, toB) (q > p when the
  ;; ranges are the same), exp(scale·|z_p − z_q|²) added to sums[p] and sums[q]; rows p and p + 1 in the two lanes.
  (func (export "pairs${d}") (param $z i32) (param $fromA i32) (param $toA i32) (param $fromB i32) (param $toB i32) (param $scale f64) (param $sums i32)
    (local $same i32) (local $p i32) (local $q i32) (local $acc v128) (local $term v128) (local $scales v128)
    ${expLocals('')} ${expLocals('B')} (local $accB v128) (local $termB v128)
    (local $t f64) (local $s f64) (local $sumX f64)
    ${axes.map((a) => `(local $v${a} v128) (local $w${a} v128) (local $x${a} f64) (local $u${a} v128) (local $y${a} v128) (local $c${a} v128)`).join(' ')}
    (local.set $same (i32.eq (local.get $fromA) (local.get $fromB)))
    (local.set $scales (f64x2.splat (local.get $scale)))
    (local.set $p (local.get $fromA))
    ;; Four rows at a time: rows p, p + 1 in $acc and rows p + 2, p + 3 in $accB, against each q. Every sum gets the
    ;; same terms in the same order as two row pairs one after the other would give it: sums[q] gets rows p, p + 1's
    ;; two terms added together, then rows p + 2, p + 3's, and nothing else touches it in between.
    (block $blocksDone (loop $blocks
      (br_if $blocksDone (i32.ge_s (i32.add (local.get $p) (i32.const 3)) (local.get $toA)))
      ${axes.map((a) => `(local.set $v${a} (f64x2.replace_lane 1 (f64x2.splat ${at('$p', a)}) ${at('$p', a + d)}))`).join('\n      ')}
      ${axes.map((a) => `(local.set $u${a} (f64x2.replace_lane 1 (f64x2.splat ${at('$p', a + 2 * d)}) ${at('$p', a + 3 * d)}))`).join('\n      ')}
      (local.set $acc (f64x2.splat (f64.const 0.0)))
      (local.set $accB (f64x2.splat (f64.const 0.0)))
      (local.set $q (local.get $fromB))
      (if (local.get $same) (then
        ;; the pair (p, p + 1) itself, to both rows; then rows p, p + 1 against p + 2 and p + 3, as the two-row loop
        ${selfPair(0, '$acc')}
        (local.set $q (i32.add (local.get $p) (i32.const 2)))
        (block $headDone (loop $head
          (br_if $headDone (i32.ge_s (local.get $q) (i32.add (local.get $p) (i32.const 4))))
          ${twoRowStep}
          (br $head)))
        ;; the pair (p + 2, p + 3) itself, to both of those rows
        ${selfPair(2, '$accB')}))
      (block $pairsDone (loop $pairs
        (br_if $pairsDone (i32.ge_s (local.get $q) (local.get $toB)))
        ${axes.map((a) => `(local.set $c${a} (f64x2.splat ${at('$q', a)}))`).join('\n        ')}
        ${axes.map((a) => `(local.set $w${a} (f64x2.sub (local.get $v${a}) (local.get $c${a})))`).join('\n        ')}
        ${axes.map((a) => `(local.set $y${a} (f64x2.sub (local.get $u${a}) (local.get $c${a})))`).join('\n        ')}
        ${vectorExp(`(f64x2.mul (local.get $scales) ${squaredSum(axes, 'f64x2', (a) => `(local.get $w${a})`)})`)}
        ${vectorExp(`(f64x2.mul (local.get $scales) ${squaredSum(axes, 'f64x2', (a) => `(local.get $y${a})`)})`, '$termB', 'B')}
        (local.set $acc (f64x2.add (local.get $acc) (local.get $term)))
        (local.set $accB (f64x2.add (local.get $accB) (local.get $termB)))
        (f64.store ${sumsAt('$q')} (f64.add (f64.add (f64.load ${sumsAt('$q')})
          (f64.add (f64x2.extract_lane 0 (local.get $term)) (f64x2.extract_lane 1 (local.get $term))))
          (f64.add (f64x2.extract_lane 0 (local.get $termB)) (f64x2.extract_lane 1 (local.get $termB)))))
        (local.set $q (i32.add (local.get $q) (i32.const 1)))
        (br $pairs)))
      ${addTo('$p', '(f64x2.extract_lane 0 (local.get $acc))')}
      ${addTo('$p', '(f64x2.extract_lane 1 (local.get $acc))', 1)}
      ${addTo('$p', '(f64x2.extract_lane 0 (local.get $accB))', 2)}
      ${addTo('$p', '(f64x2.extract_lane 1 (local.get $accB))', 3)}
      (local.set $p (i32.add (local.get $p) (i32.const 4)))
      (br $blocks)))
    ;; at most one row pair left, then at most one row
    (block $rowsDone (loop $rows
      (br_if $rowsDone (i32.ge_s (i32.add (local.get $p) (i32.const 1)) (local.get $toA)))
      ${axes.map((a) => `(local.set $v${a} (f64x2.replace_lane 1 (f64x2.splat ${at('$p', a)}) ${at('$p', a + d)}))`).join('\n      ')}
      (local.set $acc (f64x2.splat (f64.const 0.0)))
      (local.set $q (local.get $fromB))
      (if (local.get $same) (then
        ;; the pair (p, p + 1) itself, to both rows
        ${selfPair(0, '$acc')}
        (local.set $q (i32.add (local.get $p) (i32.const 2)))))
      (block $columnsDone (loop $columns
        (br_if $columnsDone (i32.ge_s (local.get $q) (local.get $toB)))
        ${twoRowStep}
        (br $columns)))
      ${addTo('$p', '(f64x2.extract_lane 0 (local.get $acc))')}
      ${addTo('$p', '(f64x2.extract_lane 1 (local.get $acc))', 1)}
      (local.set $p (i32.add (local.get $p) (i32.const 2)))
      (br $rows)))
    ;; the last row of an odd range, alone
    (if (i32.lt_s (local.get $p) (local.get $toA)) (then
      ${axes.map((a) => `(local.set $x${a} ${at('$p', a)})`).join(' ')}
      (local.set $sumX (f64.const 0.0))
      (local.set $q (if (result i32) (local.get $same) (then (i32.add (local.get $p) (i32.const 1))) (else (local.get $fromB))))
      (block $tailDone (loop $tail
        (br_if $tailDone (i32.ge_s (local.get $q) (local.get $toB)))
        (local.set $t (call $exp (f64.mul (local.get $scale) ${squaredSum(axes, 'f64', (a) => `(f64.sub (local.get $x${a}) ${at('$q', a)})`)})))
        (local.set $sumX (f64.add (local.get $sumX) (local.get $t)))
        ${addTo('$q', '(local.get $t)')}
        (local.set $q (i32.add (local.get $q) (i32.const 1)))
        (br $tail)))
      ${addTo('$p', '(local.get $sumX)')})))`;
}

/**
 * sorted1(z, n, reach, scale, sums): for sorted values z, every pair i < j with z_j − z_i ≤ reach, the term
 * exp((scale·gap)·gap) added to sums[i] and sums[j], as the kernel estimator's one-dimensional pair pass adds them
 * (estimators/kernel/univariate.ts, exactLogKernelSums): row i walks j = i + 1, … until the gap passes reach,
 * keeping its own sum apart and adding it to sums[i] at the end. Rows i and i + 1 run in the two lanes while both
 * are within reach (row i always stops first), then row i + 1 alone; sums[j] gets row i's term, then row i + 1's,
 * the order of the rows one after the other.
 */
const sortedLoop = `
  (func (export "sorted1") (param $z i32) (param $n i32) (param $reach f64) (param $scale f64) (param $sums i32)
    (local $i i32) (local $j i32) (local $xi f64) (local $xi1 f64) (local $gap f64) (local $t f64) (local $sumI f64) (local $sumI1 f64)
    (local $pair v128) (local $gaps v128) (local $acc v128) (local $term v128) (local $scales v128) ${expLocals('')}
    (local.set $scales (f64x2.splat (local.get $scale)))
    (local.set $i (i32.const 0))
    (block $rowsDone (loop $rows
      (br_if $rowsDone (i32.ge_s (i32.add (local.get $i) (i32.const 1)) (local.get $n)))
      (local.set $xi ${at1('$i')})
      (local.set $xi1 ${at1('$i', 1)})
      (local.set $pair (f64x2.replace_lane 1 (f64x2.splat (local.get $xi)) (local.get $xi1)))
      (local.set $acc (f64x2.splat (f64.const 0.0)))
      (local.set $j (i32.add (local.get $i) (i32.const 1)))
      ;; row i against i + 1
      (local.set $gap (f64.sub (local.get $xi1) (local.get $xi)))
      (if (i32.eqz (f64.gt (local.get $gap) (local.get $reach))) (then
        (local.set $t (call $exp (f64.mul (f64.mul (local.get $scale) (local.get $gap)) (local.get $gap))))
        (local.set $acc (f64x2.replace_lane 0 (local.get $acc) (f64.add (f64.const 0.0) (local.get $t))))
        ${addTo1('(local.get $j)', '(local.get $t)')}
        (local.set $j (i32.add (local.get $j) (i32.const 1)))
        ;; both rows, while row i is within reach
        (block $bothDone (loop $both
          (br_if $bothDone (i32.ge_s (local.get $j) (local.get $n)))
          (br_if $bothDone (f64.gt (f64.sub ${at1('$j')} (local.get $xi)) (local.get $reach)))
          (local.set $gaps (f64x2.sub (f64x2.splat ${at1('$j')}) (local.get $pair)))
          ${vectorExp('(f64x2.mul (f64x2.mul (local.get $scales) (local.get $gaps)) (local.get $gaps))')}
          (local.set $acc (f64x2.add (local.get $acc) (local.get $term)))
          ${addTo1('(local.get $j)', '(f64x2.extract_lane 0 (local.get $term))')}
          ${addTo1('(local.get $j)', '(f64x2.extract_lane 1 (local.get $term))')}
          (local.set $j (i32.add (local.get $j) (i32.const 1)))
          (br $both)))))
      ;; row i + 1 alone, from where row i stopped
      (if (i32.eq (local.get $j) (i32.add (local.get $i) (i32.const 1))) (then (local.set $j (i32.add (local.get $i) (i32.const 2)))))
      (local.set $sumI1 (f64x2.extract_lane 1 (local.get $acc)))
      (block $aloneDone (loop $alone
        (br_if $aloneDone (i32.ge_s (local.get $j) (local.get $n)))
        (local.set $gap (f64.sub ${at1('$j')} (local.get $xi1)))
        (br_if $aloneDone (f64.gt (local.get $gap) (local.get $reach)))
        (local.set $t (call $exp (f64.mul (f64.mul (local.get $scale) (local.get $gap)) (local.get $gap))))
        (local.set $sumI1 (f64.add (local.get $sumI1) (local.get $t)))
        ${addTo1('(local.get $j)', '(local.get $t)')}
        (local.set $j (i32.add (local.get $j) (i32.const 1)))
        (br $alone)))
      ${addTo1('(local.get $i)', '(f64x2.extract_lane 0 (local.get $acc))')}
      ${addTo1('(i32.add (local.get $i) (i32.const 1))', '(local.get $sumI1)')}
      (local.set $i (i32.add (local.get $i) (i32.const 2)))
      (br $rows))))`;

export function pairSumsWat() {
  return `;; Generated by tools/pair-sums-wasm.mjs; do not edit.
(module
  (memory (export "memory") 1)
  ${scalarExp}
  ${DIMS.map(pairLoop).join('\n')}
  ${sortedLoop}
)
`;
}

export function assemble(text) {
  return assembleNamed('pair-sums.wat', text);
}

/** The TypeScript module src/math/pair-sums.ts loads: the bytes, and the layout and dimensions they were made for. */
export function moduleSource(bytes) {
  return `// Generated by tools/pair-sums-wasm.mjs from src/math/pair-sums.wat; do not edit.
/** Dimensions with a loop (export pairs<d>). */
export const PAIR_SUMS_DIMS: readonly number[] = [${DIMS.join(', ')}];
/** Byte offsets in the module's memory of the 2^(j/64) table and the powers of two (src/math/exp.ts, TABLE and POWERS). */
export const TABLE_OFFSET = ${TABLE_OFFSET};
export const POWERS_OFFSET = ${POWERS_OFFSET};
export const PAIR_SUMS_WASM = '${bytes.toString('base64')}';
`;
}

if (process.argv[1] === fileURLToPath(import.meta.url)) {
  const folder = join(dirname(fileURLToPath(import.meta.url)), '..', 'src', 'math');
  const text = pairSumsWat();
  const bytes = await assemble(text);
  writeFileSync(join(folder, 'pair-sums.wat'), text);
  writeFileSync(join(folder, 'pair-sums-wasm.ts'), moduleSource(bytes));
  console.log(`pair-sums: ${bytes.length} bytes of WebAssembly for d = ${DIMS.join(', ')}`);
}
