/*
 * The forward auction (Bertsekas' auction algorithm, min-cost form; ε-scaling as in
 * dense-auction.ts) on a dense matrix, each bid made from a short list of candidate
 * columns of its row instead of a read of the whole row: partial pricing of the
 * auction (common practice).
 *
 * Prices only rise in the forward auction, across ε phases too. So when a row's list
 * was made, every column left out of it offered at least the row's `bound`, and it
 * offers at least that ever after. A bid then needs the whole row only when the
 * list's best offer is above the bound: at or below it, the list's best column is the
 * row's best column. The second best offer, which sets the bid's step, is taken as
 * min(list's second best, bound): never above the true second best, so the step is
 * at most the exact one and each bid keeps ε-complementary slackness (the row's
 * column is within ε of its best); the step still exceeds ε, so the auction ends as
 * the full one does. A row whose list fails reads its whole row once, which gives its
 * exact best two, and takes its cheapest offers at the current prices as its new list.
 *
 * dense.ts runs one coarse phase of it on distances where a crowded cluster holds
 * more rows than columns: the prices of the crowded columns rise until rows leave,
 * and the lists of those rows, renewed on the way, hold the pairs that lead out of
 * the cluster (the ones an optimum uses), which the sparse solve then gets as
 * candidates. That is what the lists are for there: in that phase most bids come
 * from crowded rows, whose lists soon fail (clustered n = 400–600: 70–80 % of the
 * bids read their row; 13–22 % fewer cells read than bidding over whole rows), but
 * every list ends holding its row's cheapest offers at the final prices.
 */

import { placeBid } from './dense-auction.js';

/**
 * Row r's candidates are `col`/`val`[r * stride, r * stride + len[r]): columns and
 * their costs. `bound[r]` is a lower bound on cost + price of every column left out of
 * the list (+Infinity when the list holds every allowed column of the row).
 */
export interface AuctionLists {
  readonly k: number;
  readonly stride: number;
  readonly col: Int32Array;
  readonly val: Float64Array;
  readonly len: Int32Array;
  readonly bound: Float64Array;
}

export interface ListAuctionOutcome {
  readonly bids: number;
  /** Bids that read their whole row (and renewed the row's list). */
  readonly rowReads: number;
  /** Cells read: list entries and whole rows. */
  readonly scanned: number;
  /** False when the scan budget ran out first (or some row has no allowed column). */
  readonly finished: boolean;
}

/**
 * The auction on the nRows × nCols matrix `cost` (nRows ≤ nCols) from prices `price`
 * (min-cost sign: a row pays c + price; prices only rise), ε from `eps0` down to
 * `epsFinal` by factors of `theta`; writes the last phase's assignment to `rowToCol`.
 * Cells of +Infinity are never bid for. Gives up (finished false) once more than
 * `maxScans` list entries and cells have been read, or when a row has no allowed
 * column: a row that cannot be matched makes the others bid for ever.
 */
export function listAuction(
  cost: Float64Array,
  nRows: number,
  nCols: number,
  lists: AuctionLists,
  price: Float64Array,
  rowToCol: Int32Array,
  eps0: number,
  epsFinal: number,
  theta: number,
  maxScans: number,
): ListAuctionOutcome {
  const { k, stride, col, val, len, bound } = lists;
  const n = nRows;
  const colToRow = new Int32Array(nCols);
  const queue = new Int32Array(n + 1);
  const best = new Float64Array(3);
  const key = new Float64Array(4 * k);
  const keyCol = new Int32Array(4 * k);
  let eps = Math.max(eps0, epsFinal);
  let bids = 0;
  let rowReads = 0;
  let scanned = 0;
  for (;;) {
    rowToCol.fill(-1);
    colToRow.fill(-1);
    let head = 0;
    let tail = 0;
    let pending = n;
    for (let r = 0; r < n; r++) queue[tail++] = r;
    if (tail > n) tail = 0;
    while (pending > 0) {
      if (scanned > maxScans) return { bids, rowReads, scanned, finished: false };
      const i = queue[head]!;
      head = head === n ? 0 : head + 1;
      pending--;
      bids++;
      const at = i * stride;
      listBestTwo(col, val, at, len[i]!, price, best);
      scanned += len[i]!;
      let w1 = best[0]!;
      let w2 = best[1]!;
      let j1 = best[2]!;
      const b = bound[i]!;
      if (!(w1 <= b)) {
        // the list cannot vouch for its best: read the row, renew the list
        len[i] = renewList(cost, i * nCols, nCols, price, k, key, keyCol, col, val, at, len[i]!, bound, i, best);
        scanned += nCols;
        rowReads++;
        w1 = best[0]!;
        w2 = best[1]!;
        j1 = best[2]!;
      } else if (w2 > b) {
        w2 = b;
      }
      if (j1 < 0) return { bids, rowReads, scanned, finished: false };
      const old = placeBid(price, colToRow, rowToCol, i, j1, w1, w2, eps);
      if (old >= 0) {
        queue[tail] = old;
        tail = tail === n ? 0 : tail + 1;
        pending++;
      }
    }
    if (eps <= epsFinal) break;
    eps = Math.max(epsFinal, eps / theta);
  }
  return { bids, rowReads, scanned, finished: true };
}

/** The lowest and second-lowest cost + price on a list and the column of the lowest, into `out` as [w1, w2, j1] (j1 = -1 when none). */
function listBestTwo(col: Int32Array, val: Float64Array, at: number, len: number, price: Float64Array, out: Float64Array): void {
  let w1 = Infinity;
  let w2 = Infinity;
  let j1 = -1;
  for (let t = at; t < at + len; t++) {
    const j = col[t]!;
    const x = val[t]! + price[j]!;
    if (x < w2) {
      if (x < w1) {
        w2 = w1;
        w1 = x;
        j1 = j;
      } else {
        w2 = x;
      }
    }
  }
  out[0] = w1;
  out[1] = w2;
  out[2] = j1;
}

/**
 * Reads row `base` whole: its cheapest offers (cost + price, at most k) become its
 * list at `at` (columns and costs), bound[r] a lower bound on every offer left out,
 * and its best two offers go to `out` as in {@link listBestTwo}, the second capped
 * at the bound. Returns the list's length. `key`/`keyCol` hold 4k.
 *
 * The old list's dearest offer at the current prices starts the threshold: its
 * columns are real ones, so at least as many offers lie at or below it, and in a
 * crowded part of the matrix, where the prices of a whole group of columns rise
 * together, few more do. Starting from +Infinity instead took four times as long
 * per cell (most early cells pass, and the branch is mispredicted).
 */
function renewList(
  cost: Float64Array,
  base: number,
  n: number,
  price: Float64Array,
  k: number,
  key: Float64Array,
  keyCol: Int32Array,
  col: Int32Array,
  val: Float64Array,
  at: number,
  len: number,
  bound: Float64Array,
  r: number,
  out: Float64Array,
): number {
  let start = -Infinity;
  for (let t = at; t < at + len; t++) {
    const x = val[t]! + price[col[t]!]!;
    if (x > start) start = x;
  }
  if (len < 2) start = Infinity;
  let g = gatherOffers(cost, base, n, price, k, key, keyCol, start, out);
  if (g < 2 && start < Infinity) g = gatherOffers(cost, base, n, price, k, key, keyCol, Infinity, out);
  // Every offer not gathered is at or above the threshold gatherOffers ended with; a
  // selection keeps the k cheapest, and the rest are at or above the dearest kept.
  let b = out[0]!;
  if (g > k) {
    b = keepCheapest(key, keyCol, g, k);
    g = k;
  }
  for (let t = 0; t < g; t++) {
    const j = keyCol[t]!;
    col[at + t] = j;
    val[at + t] = cost[base + j]!;
  }
  // The new list's best two (the same sums gatherOffers ranked), the second capped at the bound.
  listBestTwo(col, val, at, g, price, out);
  bound[r] = b;
  if (out[1]! > b) out[1] = b;
  return g;
}

/**
 * Gathers the row's offers below `threshold` into key/keyCol; whenever the buffer
 * fills, keeps the k cheapest and lowers the threshold to the dearest of them. Every
 * offer not gathered is at or above the final threshold, written to out[0]. Returns
 * how many were gathered.
 */
function gatherOffers(
  cost: Float64Array,
  base: number,
  n: number,
  price: Float64Array,
  k: number,
  key: Float64Array,
  keyCol: Int32Array,
  threshold: number,
  out: Float64Array,
): number {
  const size = key.length;
  let g = 0;
  for (let j = 0; j < n; j++) {
    const x = cost[base + j]! + price[j]!;
    if (x < threshold) {
      key[g] = x;
      keyCol[g++] = j;
      if (g === size) {
        threshold = keepCheapest(key, keyCol, g, k);
        g = k;
      }
    }
  }
  out[0] = threshold;
  return g;
}

/**
 * Selection (Hoare partition around a median of three) that leaves the k smallest of
 * key[0 .. n) in key[0 .. k), columns alongside; returns the largest of them.
 */
export function keepCheapest(key: Float64Array, col: Int32Array, n: number, k: number): number {
  const want = k - 1;
  let lo = 0;
  let hi = n - 1;
  while (lo < hi) {
    const a = key[lo]!;
    const b = key[(lo + hi) >> 1]!;
    const c = key[hi]!;
    const pivot = a < b ? (b < c ? b : a < c ? c : a) : a < c ? a : b < c ? c : b;
    let i = lo;
    let j = hi;
    while (i <= j) {
      while (key[i]! < pivot) i++;
      while (key[j]! > pivot) j--;
      if (i <= j) {
        const tk = key[i]!;
        key[i] = key[j]!;
        key[j] = tk;
        const tc = col[i]!;
        col[i] = col[j]!;
        col[j] = tc;
        i++;
        j--;
      }
    }
    if (want <= j) hi = j;
    else if (want >= i) lo = i;
    else break;
  }
  let top = -Infinity;
  for (let t = 0; t < k; t++) if (key[t]! > top) top = key[t]!;
  return top;
}
