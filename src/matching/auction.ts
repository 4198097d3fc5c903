import type { SparseInstance } from './types.js';

/*
 * Forward–reverse auction with ε-scaling (Bertsekas' auction algorithm for the
 * asymmetric assignment problem, in its min-cost form): a fast way to near-optimal
 * prices, which the exact shortest-augmenting-path solver then finishes from (a warm
 * start). The auction itself proves nothing; the solver that follows does.
 *
 * Why: on costs with many near-ties (geometric costs, scarce supply where every row's
 * price sits near its unmatched cost) each shortest-path search settles a wide
 * plateau of columns, and a cold solve spends most of its time there. The auction
 * moves prices in steps of ε instead, so a plateau costs a few bids, and ε-scaling
 * (ε shrinking by θ per phase, every row re-bidding at the new ε) keeps price wars
 * short. From its ε-optimal prices the exact solver re-searches only the rows the
 * auction left within ε of their best option, along paths of length about ε.
 *
 * In the min-cost form a column j has price p_j ≥ 0 (the solver's v_j = −p_j).
 * A free row i bids for the column j1 minimising c_ij + p_j, raising p_j1 by the gap
 * to its second-best option plus ε (its own unmatched option δ_i is an option that
 * nobody else can take, so its price never moves). A column left free with p_j > 0
 * breaks complementary slackness (a free column must end at v = 0): it bids in
 * reverse for the row that values it most, lowering its price to the second-best
 * row's level less ε (never below 0). Both kinds of bids keep every pair within ε of
 * dual feasibility for the row levels they use.
 */

/** What {@link auctionPrices} returns: an assignment and prices for a warm start. */
export interface AuctionResult {
  /** Column per row, -1 when the row took its unmatched option (or was left free). */
  readonly rowToCol: Int32Array;
  /** Column prices in the solver's sign (v = −p ≤ 0). */
  readonly colPrices: Float64Array;
  readonly bids: number;
  readonly reverseBids: number;
  /** Pairs read by the bids. */
  readonly scanned: number;
  /** False when the scan budget ran out (the prices are then only a rougher start). */
  readonly finished: boolean;
}

export interface AuctionOptions {
  /**
   * Prices to start from, solver sign (≤ 0; NaN where unknown). With them the first
   * phase's ε can be small: the prices are already close.
   */
  readonly colPrices?: Float64Array;
  /** ε of the first phase, in cost units. @default max |cost| / 8 */
  readonly eps0?: number;
  /** ε of the last phase. @default max |cost| · 1e-7 */
  readonly epsFinal?: number;
  /** ε shrinks by this factor per phase. @default 16 */
  readonly theta?: number;
  /** Stop (unfinished) after this many pair reads. @default 60 · (pairs + rows) · phases */
  readonly maxScans?: number;
}

const FREE = -1;
const PRIVATE = -2;

/**
 * Near-optimal prices and an assignment for `inst` by the forward–reverse auction.
 * Pure; the instance must be well formed (the caller validated it). Rows with no
 * unmatched cost must be matched; when that is impossible the auction cannot settle
 * them and stops at its budget, leaving the exact solver to report the infeasibility.
 */
export function auctionPrices(inst: SparseInstance, opts: AuctionOptions = {}): AuctionResult {
  const { nRows, nCols, rowPtr, colIdx, cost } = inst;
  const delta = inst.unmatchedCost ?? null;
  const nnz = rowPtr[nRows]!;

  // Scale of the costs: ε runs from a share of it down to far below the solver's
  // tie tolerance of the certificate.
  let scale = 0;
  for (let e = 0; e < nnz; e++) {
    const a = Math.abs(cost[e]!);
    if (a > scale) scale = a;
  }
  if (delta !== null) {
    for (let r = 0; r < nRows; r++) {
      const a = Math.abs(delta[r]!);
      if (a < Infinity && a > scale) scale = a;
    }
  }
  if (!(scale > 0)) scale = 1;
  const theta = Math.max(2, opts.theta ?? 16);
  const epsFinal = Math.max(opts.epsFinal ?? scale * 1e-7, scale * 1e-13);
  let eps = Math.max(opts.eps0 ?? scale / 8, epsFinal);
  let phases = 1;
  for (let x = eps; x > epsFinal; x /= theta) phases++;
  const maxScans = opts.maxScans ?? 60 * (nnz + nRows + nCols) * phases;
  // A row with a single option still has to beat later bidders: its "second best"
  // is this far above its best.
  const wide = 2 * scale;

  // Rows by column, for the reverse bids: cEdge[t] is the CSR pair.
  const colPtr = new Int32Array(nCols + 1);
  for (let e = 0; e < nnz; e++) colPtr[colIdx[e]! + 1]!++;
  for (let j = 0; j < nCols; j++) colPtr[j + 1]! += colPtr[j]!;
  const cRow = new Int32Array(nnz);
  const cEdge = new Int32Array(nnz);
  {
    const fill = colPtr.slice(0, nCols);
    for (let r = 0; r < nRows; r++) {
      const end = rowPtr[r + 1]!;
      for (let e = rowPtr[r]!; e < end; e++) {
        const at = fill[colIdx[e]!]!++;
        cRow[at] = r;
        cEdge[at] = e;
      }
    }
  }

  const p = new Float64Array(nCols);
  if (opts.colPrices !== undefined) {
    for (let j = 0; j < nCols; j++) {
      const v = opts.colPrices[j]!;
      p[j] = v < 0 && v > -Infinity ? -v : 0;
    }
  }
  const rowTo = new Int32Array(nRows);
  const rowEdge = new Int32Array(nRows);
  const colTo = new Int32Array(nCols);
  // The cost level of each row's current option (c + p of its column, or δ).
  const level = new Float64Array(nRows);
  const rowQueue = new Int32Array(nRows + 1);
  const colQueue = new Int32Array(nCols + 1);
  const queued = new Uint8Array(nCols);
  let bids = 0;
  let reverseBids = 0;
  let scanned = 0;
  let finished = true;

  for (;;) {
    rowTo.fill(FREE);
    colTo.fill(FREE);
    queued.fill(0);
    let rh = 0;
    let rt = 0;
    let rn = 0;
    let ch = 0;
    let ct = 0;
    let cn = 0;
    for (let r = 0; r < nRows; r++) rowQueue[rt++] = r;
    rn = nRows;
    if (rt > nRows) rt = 0;
    while ((rn > 0 || cn > 0) && finished) {
      // Forward: free rows bid.
      while (rn > 0) {
        const i = rowQueue[rh]!;
        rh = rh === nRows ? 0 : rh + 1;
        rn--;
        const d = delta === null ? Infinity : delta[i]!;
        let w1 = d;
        let w2 = Infinity;
        let j1 = d < Infinity ? PRIVATE : FREE;
        let e1 = -1;
        const start = rowPtr[i]!;
        const end = rowPtr[i + 1]!;
        for (let e = start; e < end; e++) {
          const x = cost[e]! + p[colIdx[e]!]!;
          if (x < w2) {
            if (x < w1) {
              w2 = w1;
              w1 = x;
              j1 = colIdx[e]!;
              e1 = e;
            } else {
              w2 = x;
            }
          }
        }
        scanned += end - start;
        bids++;
        if (j1 === PRIVATE) {
          rowTo[i] = PRIVATE;
          level[i] = w1;
          continue;
        }
        if (j1 === FREE) {
          // No option at all: an infeasible row; leave it to the exact solver.
          rowTo[i] = FREE;
          level[i] = Infinity;
          continue;
        }
        const second = w2 < Infinity ? w2 : w1 + wide;
        p[j1] = p[j1]! + (second - w1) + eps;
        const old = colTo[j1]!;
        colTo[j1] = i;
        rowTo[i] = j1;
        rowEdge[i] = e1;
        level[i] = second + eps;
        if (old >= 0) {
          rowTo[old] = FREE;
          rowQueue[rt] = old;
          rt = rt === nRows ? 0 : rt + 1;
          rn++;
        }
      }
      if (scanned > maxScans) {
        finished = false;
        break;
      }
      // Reverse: free columns priced above 0 lower their price to win a row.
      if (cn === 0) {
        for (let j = 0; j < nCols; j++) {
          if (colTo[j] === FREE && p[j]! > 0) {
            queued[j] = 1;
            colQueue[ct] = j;
            ct = ct === nCols ? 0 : ct + 1;
            cn++;
          }
        }
      }
      while (cn > 0) {
        const j = colQueue[ch]!;
        ch = ch === nCols ? 0 : ch + 1;
        cn--;
        queued[j] = 0;
        if (colTo[j] !== FREE || !(p[j]! > 0)) continue;
        // Staying free at price 0 is the column's own fallback option.
        let b1 = 0;
        let b2 = 0;
        let i1 = FREE;
        let t1 = -1;
        const start = colPtr[j]!;
        const end = colPtr[j + 1]!;
        for (let t = start; t < end; t++) {
          const i = cRow[t]!;
          const b = level[i]! - cost[cEdge[t]!]!;
          if (b > b2) {
            if (b > b1) {
              b2 = b1;
              b1 = b;
              i1 = i;
              t1 = t;
            } else {
              b2 = b;
            }
          }
        }
        scanned += end - start;
        reverseBids++;
        if (i1 === FREE) {
          p[j] = 0;
          continue;
        }
        const price = Math.min(p[j]!, Math.max(0, b2 - eps));
        p[j] = price;
        const old = rowTo[i1]!;
        rowTo[i1] = j;
        rowEdge[i1] = cEdge[t1]!;
        colTo[j] = i1;
        level[i1] = cost[cEdge[t1]!]! + price;
        if (old >= 0) {
          colTo[old] = FREE;
          if (p[old]! > 0 && queued[old] === 0) {
            queued[old] = 1;
            colQueue[ct] = old;
            ct = ct === nCols ? 0 : ct + 1;
            cn++;
          }
        }
      }
    }
    if (!finished || eps <= epsFinal) break;
    eps = Math.max(epsFinal, eps / theta);
  }

  const rowToCol = new Int32Array(nRows);
  for (let r = 0; r < nRows; r++) rowToCol[r] = rowTo[r]! >= 0 ? rowTo[r]! : -1;
  const colPrices = new Float64Array(nCols);
  for (let j = 0; j < nCols; j++) colPrices[j] = p[j]! > 0 ? -p[j]! : 0;
  return { rowToCol, colPrices, bids, reverseBids, scanned, finished };
}
