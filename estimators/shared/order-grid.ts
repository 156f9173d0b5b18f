/**
 * The tuning grid of a neighbour order k, shared by every nearest-neighbour estimator (entropy, KSG mutual
 * information, k-NN divergence): the given orders below n, from the least-biased, noisiest to a smooth one.
 */
import type { TuningAxis } from '../../src/core/contracts.js';

/** k = 1..10. */
export const NEIGHBOUR_ORDERS: readonly number[] = [1, 2, 3, 4, 5, 6, 7, 8, 9, 10];

/** A `tuning` function varying k over `orders` (those below n). */
export function orderGrid(orders: readonly number[] = NEIGHBOUR_ORDERS): (base: { k: number }, n: number) => TuningAxis<{ k: number }>[] {
  return (_base, n) => [{ setting: 'k', values: orders.filter((k) => k < n) }];
}
