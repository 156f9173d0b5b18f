/**
 * Writes src/math/knn-search.wat and src/math/knn-search-wasm.ts (the assembled module, base64): the kd-tree's
 * all-points k-nearest-others search for the Euclidean and the max norm (src/math/knn.ts, NeighbourSearch and
 * nearestOthers), in WebAssembly. Both files are generated and committed; test/knn-search.test.ts generates them
 * again and fails if they differ, and checks the module against the JavaScript search, distance for distance and
 * index for index.
 *
 *   node tools/knn-search-wasm.mjs          # after editing this generator
 *
 * The module walks the tree exactly as the JavaScript does: the query's own leaf, then up through its ancestors,
 * each sibling subtree nearer child first, with the same cell bounds and the same prunes, and inserts candidates
 * into the same sorted list of the k best. Squared distances are summed in axis order from the first axis, as
 * the JavaScript sums them; WebAssembly rounds every operation to double and has no fused multiply-add, so the
 * distances are the same doubles and ties are kept in the same order. The max norm has its own functions, as the
 * JavaScript has (largest |difference|, cells bounded by the largest side gap). Loops for d = 2..8 are unrolled;
 * any other dimension takes the generic loop.
 */
import { writeFileSync } from 'node:fs';
import { dirname, join } from 'node:path';
import { fileURLToPath } from 'node:url';
import { assemble } from './wasm-assemble.mjs';

/**
 * Dimensions with an unrolled search (export nearestOthers<d>, and nearestOthersMax<d> for the max norm);
 * nearestOthers and nearestOthersMax (d as a parameter) serve the rest.
 */
export const UNROLLED_DIMS = [2, 3, 4, 5, 6, 7, 8];

const i32At = (base, index) => `(i32.load (i32.add (global.get ${base}) (i32.shl ${index} (i32.const 2))))`;
const f64At = (base, index) => `(f64.load (i32.add (global.get ${base}) (i32.shl ${index} (i32.const 3))))`;
/** The query's coordinate on a run-time axis. */
const queryAt = (axis) => `(f64.load (i32.add (global.get $query) (i32.shl ${axis} (i32.const 3))))`;

/** The layout of the tree in memory, set once per call: byte offsets of its arrays. */
const layoutGlobals = [
  '$coords',
  '$split',
  '$left',
  '$right',
  '$parent',
  '$axisOf',
  '$start',
  '$end',
  '$side',
  '$best',
  '$bestPos',
  '$k',
  '$dim',
  '$query',
  '$self',
]
  .map((g) => `(global ${g} (mut i32) (i32.const 0))`)
  .join('\n  ');

/**
 * Inserts a squared distance below the k-th into the sorted k best (NeighbourSearch.insert). While fewer than k
 * are held, the shift starts at the first empty slot instead of the last: moving empty slots (∞, −1) onto empty
 * slots changes nothing, so the list ends the same, without the k²/2 moves of filling it.
 */
const insert = `
  (func $insert (param $distance f64) (param $pos i32) (local $slot i32) (local $previous f64)
    (local.set $slot (i32.sub (global.get $k) (i32.const 1)))
    (if (i32.lt_s (global.get $held) (global.get $k)) (then
      (local.set $slot (global.get $held))
      (global.set $held (i32.add (global.get $held) (i32.const 1)))))
    (block $placed (loop $shift
      (br_if $placed (i32.le_s (local.get $slot) (i32.const 0)))
      (local.set $previous ${f64At('$best', '(i32.sub (local.get $slot) (i32.const 1))')})
      (br_if $placed (i32.eqz (f64.gt (local.get $previous) (local.get $distance))))
      (f64.store (i32.add (global.get $best) (i32.shl (local.get $slot) (i32.const 3))) (local.get $previous))
      (i32.store (i32.add (global.get $bestPos) (i32.shl (local.get $slot) (i32.const 2))) ${i32At('$bestPos', '(i32.sub (local.get $slot) (i32.const 1))')})
      (local.set $slot (i32.sub (local.get $slot) (i32.const 1)))
      (br $shift)))
    (f64.store (i32.add (global.get $best) (i32.shl (local.get $slot) (i32.const 3))) (local.get $distance))
    (i32.store (i32.add (global.get $bestPos) (i32.shl (local.get $slot) (i32.const 2))) (local.get $pos))
    (global.set $worst ${f64At('$best', '(i32.sub (global.get $k) (i32.const 1))')}))`;

/**
 * The functions of one dimension d (a number: unrolled; null: d read from $dim, in loops) and norm (max: the
 * largest coordinate difference, as NeighbourSearch's scanLeafMax and visitMax). Suffix names them.
 */
function searchFunctions(d, max = false) {
  const suffix = `${max ? 'Max' : ''}${d === null ? '' : String(d)}`;
  const axes = d === null ? [] : [...Array(d).keys()];
  // Squared distance from the query (coordinates in $q<a>) to the row at byte offset $row, summed in axis order.
  const unrolledDistance = () =>
    axes
      .map((a) => {
        const diff = `(f64.sub (local.get $q${a}) (f64.load offset=${8 * a} (local.get $row)))`;
        return a === 0
          ? `(local.set $t ${diff}) (local.set $distance (f64.add (f64.const 0) (f64.mul (local.get $t) (local.get $t))))`
          : `(local.set $t ${diff}) (local.set $distance (f64.add (local.get $distance) (f64.mul (local.get $t) (local.get $t))))`;
      })
      .join('\n          ');
  // The generic loop sums four axes at a time and stops a point as soon as its partial sum reaches the k-th
  // distance (sums of non-negative terms only grow, even rounded), as the JavaScript does: such a point is
  // never inserted. The sum is still taken axis by axis from the first, so it is the same double.
  const axisTerm = (offset) =>
    `(local.set $t (f64.sub (f64.load offset=${8 * offset} (local.get $q)) (f64.load offset=${8 * offset} (local.get $p))))
            (local.set $distance (f64.add (local.get $distance) (f64.mul (local.get $t) (local.get $t))))`;
  const loopDistance = `
          (local.set $distance (f64.const 0))
          (local.set $a (i32.const 0))
          (local.set $q (global.get $query))
          (local.set $p (local.get $row))
          (block $blocksDone (loop $blocks
            (br_if $blocksDone (i32.gt_s (i32.add (local.get $a) (i32.const 4)) (global.get $dim)))
            (br_if $blocksDone (i32.eqz (f64.lt (local.get $distance) (global.get $worst))))
            ${[0, 1, 2, 3].map(axisTerm).join('\n            ')}
            (local.set $a (i32.add (local.get $a) (i32.const 4)))
            (local.set $q (i32.add (local.get $q) (i32.const 32)))
            (local.set $p (i32.add (local.get $p) (i32.const 32)))
            (br $blocks)))
          (if (f64.lt (local.get $distance) (global.get $worst)) (then
            (block $summed (loop $axes
              (br_if $summed (i32.ge_s (local.get $a) (global.get $dim)))
              ${axisTerm(0)}
              (local.set $a (i32.add (local.get $a) (i32.const 1)))
              (local.set $q (i32.add (local.get $q) (i32.const 8)))
              (local.set $p (i32.add (local.get $p) (i32.const 8)))
              (br $axes)))))`;
  // The largest |difference| (exact whatever the order), stopped as soon as it reaches the k-th distance, as
  // scanLeafMax stops: such a point is never inserted.
  const unrolledMax = () =>
    `(block $stopped
          ${axes
            .map(
              (a) =>
                `(local.set $t (f64.abs (f64.sub (local.get $q${a}) (f64.load offset=${8 * a} (local.get $row)))))
            (if (f64.gt (local.get $t) (local.get $distance)) (then (local.set $distance (local.get $t))))
            (br_if $stopped (i32.eqz (f64.lt (local.get $distance) (global.get $worst))))`,
            )
            .join('\n            ')})`;
  const loopMax = `
          (local.set $a (i32.const 0))
          (local.set $q (global.get $query))
          (local.set $p (local.get $row))
          (block $summed (loop $axes
            (br_if $summed (i32.ge_s (local.get $a) (global.get $dim)))
            (br_if $summed (i32.eqz (f64.lt (local.get $distance) (global.get $worst))))
            (local.set $t (f64.abs (f64.sub (f64.load (local.get $q)) (f64.load (local.get $p)))))
            (if (f64.gt (local.get $t) (local.get $distance)) (then (local.set $distance (local.get $t))))
            (local.set $a (i32.add (local.get $a) (i32.const 1)))
            (local.set $q (i32.add (local.get $q) (i32.const 8)))
            (local.set $p (i32.add (local.get $p) (i32.const 8)))
            (br $axes)))`;
  const distanceCode = max
    ? `(local.set $distance (f64.const 0))\n          ${d === null ? loopMax : unrolledMax()}`
    : d === null
      ? loopDistance
      : unrolledDistance();
  const queryLocals = axes.map((a) => `(local $q${a} f64)`).join(' ');
  const loadQuery = axes.map((a) => `(local.set $q${a} (f64.load offset=${8 * a} (global.get $query)))`).join(' ');
  const rowBytes = d === null ? '(i32.shl (global.get $dim) (i32.const 3))' : `(i32.const ${8 * d})`;
  // The bound of a cell from the side gaps, summed in axis order from 0 (visitEuclidean's farBound).
  const sideSum =
    d === null
      ? `(local.set $far (f64.const 0))
        (local.set $a (i32.const 0))
        (block $summed (loop $axes
          (br_if $summed (i32.ge_s (local.get $a) (global.get $dim)))
          (local.set $far (f64.add (local.get $far) ${f64At('$side', '(local.get $a)')}))
          (local.set $a (i32.add (local.get $a) (i32.const 1)))
          (br $axes)))`
      : `(local.set $far ${axes.reduce((acc, a) => `(f64.add ${acc} (f64.load offset=${8 * a} (global.get $side)))`, '(f64.const 0)')})`;

  // A sibling's cell is away from the query on the split axis only (the query lies in every ancestor's cell).
  const climbEuclidean = `(local.set $bound (f64.mul (local.get $gap) (local.get $gap)))
      (if (f64.lt (local.get $bound) (global.get $worst)) (then
        (f64.store (i32.add (global.get $side) (i32.shl (local.get $axis) (i32.const 3))) (local.get $bound))
        (call $visit${suffix} (local.get $sibling) (local.get $bound))
        (f64.store (i32.add (global.get $side) (i32.shl (local.get $axis) (i32.const 3))) (f64.const 0))))`;
  const climbMax = `(local.set $bound (f64.abs (local.get $gap)))
      (if (f64.lt (local.get $bound) (global.get $worst)) (then (call $visit${suffix} (local.get $sibling) (local.get $bound))))`;
  const visitEuclidean = `  ;; visit${suffix}(node, bound): a subtree whose cell is bound (< worst) away, as $side describes; nearer child first.
  (func $visit${suffix} (param $node i32) (param $bound f64) (local $left i32) (local $right i32) (local $axis i32) (local $gap f64) (local $gapSquared f64) (local $previous f64) (local $far f64) (local $sideAt i32) (local $a i32)
    (local.set $left ${i32At('$left', '(local.get $node)')})
    (if (i32.lt_s (local.get $left) (i32.const 0)) (then (call $scan${suffix} (local.get $node)) (return)))
    (local.set $axis ${i32At('$axisOf', '(local.get $node)')})
    (local.set $gap (f64.sub ${queryAt('(local.get $axis)')} ${f64At('$split', '(local.get $node)')}))
    (local.set $right ${i32At('$right', '(local.get $node)')})
    (call $visit${suffix} (select (local.get $left) (local.get $right) (f64.lt (local.get $gap) (f64.const 0))) (local.get $bound))
    (local.set $gapSquared (f64.mul (local.get $gap) (local.get $gap)))
    (if (i32.or (f64.ge (local.get $gapSquared) (global.get $worst)) (f64.ge (local.get $bound) (global.get $worst))) (then (return)))
    (local.set $sideAt (i32.add (global.get $side) (i32.shl (local.get $axis) (i32.const 3))))
    (local.set $previous (f64.load (local.get $sideAt)))
    (f64.store (local.get $sideAt) (local.get $gapSquared))
    ${sideSum}
    (if (f64.lt (local.get $far) (global.get $worst)) (then
      (call $visit${suffix} (select (local.get $right) (local.get $left) (f64.lt (local.get $gap) (f64.const 0))) (local.get $far))))
    (f64.store (local.get $sideAt) (local.get $previous)))`;
  const visitMax = `
  ;; visit${suffix}(node, bound): a subtree whose cell is bound (< worst) away in the max norm; nearer child first.
  (func $visit${suffix} (param $node i32) (param $bound f64) (local $left i32) (local $right i32) (local $gap f64) (local $far f64)
    (local.set $left ${i32At('$left', '(local.get $node)')})
    (if (i32.lt_s (local.get $left) (i32.const 0)) (then (call $scan${suffix} (local.get $node)) (return)))
    (local.set $gap (f64.sub ${queryAt(i32At('$axisOf', '(local.get $node)'))} ${f64At('$split', '(local.get $node)')}))
    (local.set $right ${i32At('$right', '(local.get $node)')})
    (call $visit${suffix} (select (local.get $left) (local.get $right) (f64.lt (local.get $gap) (f64.const 0))) (local.get $bound))
    ;; The farther child's cell: the split plane's gap on this axis, or the bound already reached.
    (local.set $far (f64.abs (local.get $gap)))
    (if (i32.eqz (f64.gt (local.get $far) (local.get $bound))) (then (local.set $far (local.get $bound))))
    (if (f64.lt (local.get $far) (global.get $worst)) (then
      (call $visit${suffix} (select (local.get $right) (local.get $left) (f64.lt (local.get $gap) (f64.const 0))) (local.get $far)))))`;

  return `
  ;; scan${suffix}(leaf): every point of the leaf but the query itself, inserted when nearer than the k-th.
  (func $scan${suffix} (param $node i32) (local $pos i32) (local $stop i32) (local $row i32) (local $distance f64) (local $t f64) (local $a i32) (local $q i32) (local $p i32) ${queryLocals}
    ${loadQuery}
    (local.set $pos ${i32At('$start', '(local.get $node)')})
    (local.set $stop ${i32At('$end', '(local.get $node)')})
    (local.set $row (i32.add (global.get $coords) (i32.mul (local.get $pos) ${rowBytes})))
    (block $done (loop $points
      (br_if $done (i32.ge_s (local.get $pos) (local.get $stop)))
      (if (i32.ne (local.get $pos) (global.get $self)) (then
          ${distanceCode}
          (if (f64.lt (local.get $distance) (global.get $worst)) (then (call $insert (local.get $distance) (local.get $pos))))))
      (local.set $pos (i32.add (local.get $pos) (i32.const 1)))
      (local.set $row (i32.add (local.get $row) ${rowBytes}))
      (br $points))))

${max ? visitMax : visitEuclidean}
  ;; run${suffix}(leaf): the k nearest others of the query, from its own leaf upwards (NeighbourSearch.run).
  (func $run${suffix} (param $leaf i32) (local $node i32) (local $up i32) (local $sibling i32) (local $axis i32) (local $gap f64) (local $bound f64) (local $j i32)
    (local.set $j (i32.const 0))
    (block $filled (loop $fill
      (br_if $filled (i32.ge_s (local.get $j) (global.get $k)))
      (f64.store (i32.add (global.get $best) (i32.shl (local.get $j) (i32.const 3))) (f64.const inf))
      (i32.store (i32.add (global.get $bestPos) (i32.shl (local.get $j) (i32.const 2))) (i32.const -1))
      (local.set $j (i32.add (local.get $j) (i32.const 1)))
      (br $fill)))
    (global.set $worst (f64.const inf))
    (global.set $held (i32.const 0))
    (call $scan${suffix} (local.get $leaf))
    (local.set $node (local.get $leaf))
    (local.set $up ${i32At('$parent', '(local.get $node)')})
    (block $top (loop $climb
      (br_if $top (i32.lt_s (local.get $up) (i32.const 0)))
      (local.set $sibling
        (if (result i32) (i32.eq ${i32At('$left', '(local.get $up)')} (local.get $node))
          (then ${i32At('$right', '(local.get $up)')})
          (else ${i32At('$left', '(local.get $up)')})))
      (local.set $axis ${i32At('$axisOf', '(local.get $up)')})
      (local.set $gap (f64.sub ${queryAt('(local.get $axis)')} ${f64At('$split', '(local.get $up)')}))
      ${max ? climbMax : climbEuclidean}
      (local.set $node (local.get $up))
      (local.set $up ${i32At('$parent', '(local.get $node)')})
      (br $climb))))

  ;; nearestOthers${suffix}(leaves, leafCount, order, distances, indices): every point's k nearest others, rows in the
  ;; original order (order[pos]); distances (square roots of the squared sums for the Euclidean norm); indices (0: none)
  ;; original indices.
  (func (export "nearestOthers${suffix}") (param $leaves i32) (param $leafCount i32) (param $order i32) (param $out i32) (param $indices i32)
    (local $l i32) (local $leaf i32) (local $pos i32) (local $stop i32) (local $row i32) (local $j i32) (local $a i32)
    (local.set $a (i32.const 0))
    (block $cleared (loop $clear
      (br_if $cleared (i32.ge_s (local.get $a) (global.get $dim)))
      (f64.store (i32.add (global.get $side) (i32.shl (local.get $a) (i32.const 3))) (f64.const 0))
      (local.set $a (i32.add (local.get $a) (i32.const 1)))
      (br $clear)))
    (local.set $l (i32.const 0))
    (block $leavesDone (loop $leavesLoop
      (br_if $leavesDone (i32.ge_s (local.get $l) (local.get $leafCount)))
      (local.set $leaf (i32.load (i32.add (local.get $leaves) (i32.shl (local.get $l) (i32.const 2)))))
      (local.set $pos ${i32At('$start', '(local.get $leaf)')})
      (local.set $stop ${i32At('$end', '(local.get $leaf)')})
      (block $pointsDone (loop $points
        (br_if $pointsDone (i32.ge_s (local.get $pos) (local.get $stop)))
        (global.set $query (i32.add (global.get $coords) (i32.mul (local.get $pos) ${rowBytes})))
        (global.set $self (local.get $pos))
        (call $run${suffix} (local.get $leaf))
        (local.set $row (i32.mul (i32.load (i32.add (local.get $order) (i32.shl (local.get $pos) (i32.const 2)))) (global.get $k)))
        (local.set $j (i32.const 0))
        (block $written (loop $write
          (br_if $written (i32.ge_s (local.get $j) (global.get $k)))
          (f64.store (i32.add (local.get $out) (i32.shl (i32.add (local.get $row) (local.get $j)) (i32.const 3))) ${max ? f64At('$best', '(local.get $j)') : `(f64.sqrt ${f64At('$best', '(local.get $j)')})`})
          (if (local.get $indices) (then
            (i32.store (i32.add (local.get $indices) (i32.shl (i32.add (local.get $row) (local.get $j)) (i32.const 2)))
              (i32.load (i32.add (local.get $order) (i32.shl ${i32At('$bestPos', '(local.get $j)')} (i32.const 2)))))))
          (local.set $j (i32.add (local.get $j) (i32.const 1)))
          (br $write)))
        (local.set $pos (i32.add (local.get $pos) (i32.const 1)))
        (br $points)))
      (local.set $l (i32.add (local.get $l) (i32.const 1)))
      (br $leavesLoop))))`;
}

/** setLayout(...): the byte offsets of the tree's arrays and scratch, k and d, for the next searches. */
const setLayout = `
  (func (export "setLayout") (param $coordsAt i32) (param $splitAt i32) (param $leftAt i32) (param $rightAt i32) (param $parentAt i32)
    (param $axisAt i32) (param $startAt i32) (param $endAt i32) (param $sideAt i32) (param $bestAt i32) (param $bestPosAt i32) (param $kValue i32) (param $dimValue i32)
    (global.set $coords (local.get $coordsAt)) (global.set $split (local.get $splitAt)) (global.set $left (local.get $leftAt))
    (global.set $right (local.get $rightAt)) (global.set $parent (local.get $parentAt)) (global.set $axisOf (local.get $axisAt))
    (global.set $start (local.get $startAt)) (global.set $end (local.get $endAt)) (global.set $side (local.get $sideAt))
    (global.set $best (local.get $bestAt)) (global.set $bestPos (local.get $bestPosAt)) (global.set $k (local.get $kValue))
    (global.set $dim (local.get $dimValue)))`;

export function knnSearchWat() {
  return `;; Generated by tools/knn-search-wasm.mjs; do not edit.
(module
  (memory (export "memory") 1)
  ${layoutGlobals}
  (global $worst (mut f64) (f64.const 0))
  ;; How many of the k best slots hold a point.
  (global $held (mut i32) (i32.const 0))
  ${setLayout}
  ${insert}
  ${[false, true].flatMap((max) => [...UNROLLED_DIMS, null].map((d) => searchFunctions(d, max))).join('\n')}
)
`;
}

/** The TypeScript module src/math/knn.ts loads: the bytes, and the dimensions they unroll. */
export function moduleSource(bytes) {
  return `// Generated by tools/knn-search-wasm.mjs from src/math/knn-search.wat; do not edit.
/** Dimensions with an unrolled search (exports nearestOthers<d>, nearestOthersMax<d>); nearestOthers and nearestOthersMax serve any other. */
export const UNROLLED_DIMS: readonly number[] = [${UNROLLED_DIMS.join(', ')}];
export const KNN_SEARCH_WASM = '${bytes.toString('base64')}';
`;
}

if (process.argv[1] === fileURLToPath(import.meta.url)) {
  const folder = join(dirname(fileURLToPath(import.meta.url)), '..', 'src', 'math');
  const text = knnSearchWat();
  const bytes = await assemble('knn-search.wat', text);
  writeFileSync(join(folder, 'knn-search.wat'), text);
  writeFileSync(join(folder, 'knn-search-wasm.ts'), moduleSource(bytes));
  console.log(`knn-search: ${bytes.length} bytes of WebAssembly, unrolled for d = ${UNROLLED_DIMS.join(', ')}`);
}
