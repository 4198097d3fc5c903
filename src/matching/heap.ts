/*
 * The indexed binary min-heap of the shortest-path searches, on caller-owned typed
 * arrays so a search allocates nothing: slot s holds key[s] and item[s], and pos[item]
 * is the item's slot. Keys sit beside their items so a sift touches one cache line
 * per level.
 */

/** Places `id` with key `k` at slot `p` (a new last slot, or its current one after a decrease) and sifts it up. */
export function heapUp(key: Float64Array, item: Int32Array, pos: Int32Array, p: number, k: number, id: number): void {
  while (p > 0) {
    const parent = (p - 1) >> 1;
    const pk = key[parent]!;
    if (pk <= k) break;
    const pi = item[parent]!;
    key[p] = pk;
    item[p] = pi;
    pos[pi] = p;
    p = parent;
  }
  key[p] = k;
  item[p] = id;
  pos[id] = p;
}

/** Removes the root of a heap that holds `size` items (the caller has read it): the last item moves down from slot 0. */
export function heapPopRoot(key: Float64Array, item: Int32Array, pos: Int32Array, size: number): void {
  const n = size - 1;
  if (n <= 0) return;
  const lk = key[n]!;
  const li = item[n]!;
  let p = 0;
  for (;;) {
    let c = 2 * p + 1;
    if (c >= n) break;
    let ck = key[c]!;
    if (c + 1 < n && key[c + 1]! < ck) {
      c++;
      ck = key[c]!;
    }
    if (ck >= lk) break;
    const ci = item[c]!;
    key[p] = ck;
    item[p] = ci;
    pos[ci] = p;
    p = c;
  }
  key[p] = lk;
  item[p] = li;
  pos[li] = p;
}
