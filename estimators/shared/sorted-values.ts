/**
 * One sorted copy of a draw's values, shared by every estimator that sorts them: the four spacing estimators
 * and the kernel estimator in one dimension each sorted their own copy of the same sample. Kept while the
 * sample's buffer lives and reused only for identical values (sample-memo.ts). The array is shared, so no
 * caller may write to it.
 */
import { sortAscending } from '../../src/math/sort.js';
import { SampleMemo } from './sample-memo.js';

const kept = new SampleMemo<Float64Array>();

/** `values` sorted ascending (as Float64Array.prototype.sort orders them), computed once per draw; read-only. */
export function sharedSortedValues(values: Float64Array): Float64Array {
  return kept.get(values, `sorted|${values.byteOffset}|${values.length}`, () => sortAscending(values.slice()));
}
