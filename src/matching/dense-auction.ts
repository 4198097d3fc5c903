/*
 * The forward auction with ε-scaling on a dense square matrix where every row must be
 * matched (Bertsekas' auction algorithm, min-cost form): near-optimal column prices
 * for the dense solver to finish from. On a square instance every column ends
 * matched, so the forward auction alone suffices (no column is left free at a price,
 * unlike the asymmetric case of auction.ts).
 *
 * Why: on structured dense costs (products c = i·j, rank one plus noise, a few
 * distinct integers) most shortest-path searches of the Jonker–Volgenant family scan
 * a large share of the matrix each, and a solve grows like n³; the auction moves
 * prices in steps of ε and reaches ε-optimal prices in a few bids per row and phase.
 */

/** What {@link denseAuction} leaves: `rowToCol` filled and `price` updated in place. */
export interface DenseAuctionOutcome {
  readonly bids: number;
  readonly scanned: number;
  /** False when the scan budget ran out first (the prices are then a rougher start). */
  readonly finished: boolean;
}

/**
 * Runs the auction on the n × n matrix `cost` (every cell allowed: +Infinity cells
 * are never bid for, and a row whose cells are all +Infinity never settles), starting
 * from `price` (min-cost sign: a row pays c + price), ε from `eps0` down to
 * `epsFinal` by factors of `theta`. Writes the last phase's assignment to `rowToCol`.
 */
export function denseAuction(
  cost: Float64Array,
  n: number,
  price: Float64Array,
  rowToCol: Int32Array,
  eps0: number,
  epsFinal: number,
  theta: number,
  maxScans: number,
): DenseAuctionOutcome {
  const colToRow = new Int32Array(n);
  const queue = new Int32Array(n + 1);
  const best = new Float64Array(3);
  let eps = Math.max(eps0, epsFinal);
  let bids = 0;
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
      if (scanned > maxScans) return { bids, scanned, finished: false };
      const i = queue[head]!;
      head = head === n ? 0 : head + 1;
      pending--;
      bestTwo(cost, i * n, n, price, best);
      scanned += n;
      bids++;
      const j1 = best[2]!;
      if (j1 < 0) continue;
      const w1 = best[0]!;
      const w2 = best[1]!;
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
  return { bids, scanned, finished: true };
}

/**
 * Row i's bid for column j1, its best offer w1 (cost + price) ahead of its second w2:
 * j1's price rises by w2 − w1 + ε and j1 changes hands. Returns the row displaced
 * (now unassigned), or -1. Shared by the list auction (list-auction.ts).
 */
export function placeBid(price: Float64Array, colToRow: Int32Array, rowToCol: Int32Array, i: number, j1: number, w1: number, w2: number, eps: number): number {
  // A row with one allowed column still has to outbid later rows: a wide step.
  price[j1] = price[j1]! + (w2 < Infinity ? w2 - w1 : Math.abs(w1) + 1) + eps;
  const old = colToRow[j1]!;
  colToRow[j1] = i;
  rowToCol[i] = j1;
  if (old >= 0) rowToCol[old] = -1;
  return old;
}

/** The row's lowest and second-lowest c + price and the column of the lowest, into `out` as [w1, w2, j1]. */
function bestTwo(cost: Float64Array, base: number, n: number, price: Float64Array, out: Float64Array): void {
  let w1 = Infinity;
  let w2 = Infinity;
  let j1 = -1;
  for (let j = 0; j < n; j++) {
    const x = cost[base + j]! + price[j]!;
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
