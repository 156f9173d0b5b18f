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
    const hit = this.peek(data, key);
    if (hit !== undefined) return hit;
    const result = compute();
    this.set(data, key, result);
    return result;
  }

  /** What is kept for these values and key, if anything. */
  peek(data: Float64Array, key: string): T | undefined {
    const hit = this.kept.get(data.buffer)?.get(key);
    return hit && sameValues(hit.values, data) ? hit.result : undefined;
  }

  /** Keeps `result` for these values and key, replacing what was kept. */
  set(data: Float64Array, key: string, result: T): void {
    let byKey = this.kept.get(data.buffer);
    if (!byKey) this.kept.set(data.buffer, (byKey = new Map<string, { values: Float64Array; result: T }>()));
    const kept = byKey.get(key);
    // A replacement for the same values reuses their copy.
    byKey.set(key, { values: kept && sameValues(kept.values, data) ? kept.values : data.slice(), result });
  }
}
