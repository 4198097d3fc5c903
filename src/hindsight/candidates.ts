/**
 * The first candidate pairs of a segment, picked while the graph is built (a
 * {@link RowVisitor}: each row is seen once, in cache, instead of in passes of their
 * own over every pair). Pure.
 *
 * In the graph a candidate is marked by the sign of its float32 cost (costs are ≥ 0,
 * and a candidate's float32 cost is not read again): a byte per pair saved, and one
 * array fewer for the pricing passes to stream through.
 */

import type { RowVisitor } from './graph.js';

// The least float32 above 0: a candidate of cost 0 is marked by its negative.
const F32_TINY = 2 ** -149;

/** Marks pair `e` a candidate: its float32 cost (≥ 0) turns negative. */
export function markCandidate(cost32: Float32Array, e: number): void {
  const c = cost32[e]!;
  if (c < 0) return;
  cost32[e] = c > 0 ? -c : -F32_TINY;
}

/** Undoes {@link markCandidate}: the pair's float32 cost is ≥ 0 again. */
export function unmarkCandidate(cost32: Float32Array, e: number): void {
  const c = cost32[e]!;
  if (c >= 0) return;
  cost32[e] = c === -F32_TINY ? 0 : -c;
}

/**
 * Picks, row by row as the graph is built, the k cheapest pairs of every row and of
 * every column (cost below `limit`): a supply that is nobody's favourite still gets
 * its best demands, so the first prices are not blind to it. Also notes each row's
 * column range.
 */
export class FirstCandidates implements RowVisitor {
  /** Per row: the lowest and highest column among its pairs (lo > hi when none). */
  readonly colLo: Int32Array;
  readonly colHi: Int32Array;
  private readonly colCost: Float64Array;
  private readonly colEdge: Int32Array;
  /** Per column, its k-th cheapest so far (colCost's last slot) in a small array of its own: most pairs stop at this test. */
  private readonly colBar: Float32Array;
  private readonly bestCost: Float64Array;
  private readonly bestEdge: Int32Array;

  /**
   * @param k candidates per row and per column
   * @param limit pairs at or above it are never candidates (P, widened for float32 rounding)
   */
  constructor(
    nRows: number,
    private readonly nCols: number,
    private readonly k: number,
    private readonly limit: number,
  ) {
    this.colLo = new Int32Array(nRows);
    this.colHi = new Int32Array(nRows);
    this.colCost = new Float64Array(nCols * k).fill(Infinity);
    this.colEdge = new Int32Array(nCols * k).fill(-1);
    this.colBar = new Float32Array(nCols).fill(Infinity);
    this.bestCost = new Float64Array(k);
    this.bestEdge = new Int32Array(k);
  }

  row(r: number, _demand: number, start: number, end: number, colIdx: Int32Array, cost32: Float32Array): void {
    const { k, limit, colCost, colEdge, colBar, bestCost, bestEdge } = this;
    let lo = this.nCols;
    let hi = -1;
    let n = 0;
    for (let e = start; e < end; e++) {
      const j = colIdx[e]!;
      if (j < lo) lo = j;
      if (j > hi) hi = j;
      const c = cost32[e]!;
      if (!(c < limit)) continue;
      // The row's k cheapest, by insertion into a small sorted buffer.
      if (n < k || c < bestCost[k - 1]!) {
        let p = n < k ? n++ : k - 1;
        while (p > 0 && bestCost[p - 1]! > c) {
          bestCost[p] = bestCost[p - 1]!;
          bestEdge[p] = bestEdge[p - 1]!;
          p--;
        }
        bestCost[p] = c;
        bestEdge[p] = e;
      }
      // The column's k cheapest so far: a max-heap of k slots (+Infinity while not
      // full), whose top — the k-th cheapest — also sits in colBar, where most pairs
      // stop (costs are float32 already, so the copy is exact).
      if (c < colBar[j]!) {
        const base = j * k;
        let p = 0;
        for (;;) {
          let ch = 2 * p + 1;
          if (ch >= k) break;
          if (ch + 1 < k && colCost[base + ch + 1]! > colCost[base + ch]!) ch++;
          if (!(colCost[base + ch]! > c)) break;
          colCost[base + p] = colCost[base + ch]!;
          colEdge[base + p] = colEdge[base + ch]!;
          p = ch;
        }
        colCost[base + p] = c;
        colEdge[base + p] = e;
        colBar[j] = colCost[base]!;
      }
    }
    this.colLo[r] = lo;
    this.colHi[r] = hi;
    // Marked now that the row's costs have been read (the column lists keep edges only).
    for (let q = 0; q < n; q++) markCandidate(cost32, bestEdge[q]!);
  }

  /** Once the graph is built: marks the columns' picks as candidates too. */
  markColumns(cost32: Float32Array): void {
    const colEdge = this.colEdge;
    for (let q = 0; q < colEdge.length; q++) if (colEdge[q]! >= 0) markCandidate(cost32, colEdge[q]!);
  }
}
