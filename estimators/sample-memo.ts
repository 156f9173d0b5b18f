/**
 * Work done on one sample, kept while the sample's buffer lives and reused only for the same values: the
 * harness and `hhat estimate` hand several estimates (a tuning grid, a value and then the settings it used)
 * the same draw, each through a new view of it, and a caller may refill its array between calls.
 */

export function sameValues(a: Float64Array, b: Float64Array): boolean {
  if (a.length !== b.length) return false;
  for (let i = 0; i < a.length; i++) if (!Object.is(a[i], b[i])) return false;
  return true;
}

export class SampleMemo<T> {
  private readonly kept = new WeakMap<ArrayBufferLike, Map<string, { values: Float64Array; result: T }>>();

  /** The result for these values and key, computed once. */
  get(data: Float64Array, key: string, compute: () => T): T {
    let byKey = this.kept.get(data.buffer);
    const hit = byKey?.get(key);
    if (hit && sameValues(hit.values, data)) return hit.result;
    const result = compute();
    if (!byKey) this.kept.set(data.buffer, (byKey = new Map()));
    byKey.set(key, { values: Float64Array.from(data), result });
    return result;
  }
}
