/**
 * A binary min-heap of (key, id) pairs on typed arrays, ordered by key and then by id,
 * so that equal keys pop in a deterministic order. Used for the engine's timed
 * triggers (joins, expiries, last chances). Pure.
 */
export class KeyedHeap {
  private keys: Float64Array = new Float64Array(64);
  private ids: Int32Array = new Int32Array(64);
  private n = 0;

  /** Number of entries. */
  get size(): number {
    return this.n;
  }

  /** Smallest key, or +Infinity when empty. */
  peekKey(): number {
    return this.n > 0 ? this.keys[0]! : Infinity;
  }

  /** Id of the smallest entry; only meaningful when not empty. */
  peekId(): number {
    return this.ids[0]!;
  }

  push(key: number, id: number): void {
    if (this.n === this.keys.length) {
      const k = new Float64Array(this.n * 2);
      k.set(this.keys);
      this.keys = k;
      const d = new Int32Array(this.n * 2);
      d.set(this.ids);
      this.ids = d;
    }
    const keys = this.keys, ids = this.ids;
    let i = this.n++;
    while (i > 0) {
      const p = (i - 1) >> 1;
      const pk = keys[p]!;
      if (pk < key || (pk === key && ids[p]! <= id)) break;
      keys[i] = pk;
      ids[i] = ids[p]!;
      i = p;
    }
    keys[i] = key;
    ids[i] = id;
  }

  /** Removes the smallest entry and returns its id; -1 when empty. */
  pop(): number {
    if (this.n === 0) return -1;
    const keys = this.keys, ids = this.ids;
    const top = ids[0]!;
    const n = --this.n;
    if (n === 0) return top;
    const key = keys[n]!;
    const id = ids[n]!;
    let i = 0;
    for (;;) {
      let c = 2 * i + 1;
      if (c >= n) break;
      const r = c + 1;
      if (r < n && (keys[r]! < keys[c]! || (keys[r] === keys[c] && ids[r]! < ids[c]!))) c = r;
      const ck = keys[c]!;
      if (key < ck || (key === ck && id <= ids[c]!)) break;
      keys[i] = ck;
      ids[i] = ids[c]!;
      i = c;
    }
    keys[i] = key;
    ids[i] = id;
    return top;
  }

  /** Every entry as [key, id] pairs, in no particular order (for snapshots). */
  entries(): Array<[number, number]> {
    const out: Array<[number, number]> = [];
    for (let i = 0; i < this.n; i++) out.push([this.keys[i]!, this.ids[i]!]);
    return out;
  }
}
