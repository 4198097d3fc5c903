/**
 * The first candidate pairs of a segment and its components, gathered while the
 * graph is built (a {@link RowVisitor}: each row is seen once, in cache, instead of
 * in passes of their own over every pair), and the candidate store the restricted
 * solves read. Pure.
 *
 * In the graph a candidate is marked by the sign of its float32 cost (costs are ≥ 0,
 * and a candidate's float32 cost is not read again): a byte per pair saved, and one
 * array fewer for the pricing passes to stream through.
 */

import type { CompactGraph, PairCost, RowVisitor } from './graph.js';

// The least float32 above 0: a candidate of cost 0 is marked by its negative.
const F32_TINY = 2 ** -149;

/** Marks pair `e` a candidate: its float32 cost (≥ 0) turns negative. */
export function markCandidate(cost32: Float32Array, e: number): void {
  const c = cost32[e]!;
  if (c < 0) return;
  cost32[e] = c > 0 ? -c : -F32_TINY;
}

/**
 * Picks, row by row as the graph is built, the k cheapest pairs of every row and of
 * every column (cost below `limit`): a supply that is nobody's favourite still gets
 * its best demands, so the first prices are not blind to it. Also joins rows and
 * columns linked by such a pair into components, and notes each row's column range.
 */
export class FirstCandidates implements RowVisitor {
  /** Union–find over rows (0 .. nRows) and columns (nRows + c). */
  private readonly parent: Int32Array;
  /** Per row: whether it has a pair below the limit. */
  readonly useful: Uint8Array;
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
    private readonly nRows: number,
    private readonly nCols: number,
    private readonly k: number,
    private readonly limit: number,
  ) {
    this.parent = new Int32Array(nRows + nCols);
    for (let i = 0; i < this.parent.length; i++) this.parent[i] = i;
    this.useful = new Uint8Array(nRows);
    this.colLo = new Int32Array(nRows);
    this.colHi = new Int32Array(nRows);
    this.colCost = new Float64Array(nCols * k).fill(Infinity);
    this.colEdge = new Int32Array(nCols * k).fill(-1);
    this.colBar = new Float32Array(nCols).fill(Infinity);
    this.bestCost = new Float64Array(k);
    this.bestEdge = new Int32Array(k);
  }

  row(r: number, _demand: number, start: number, end: number, colIdx: Int32Array, cost32: Float32Array): void {
    const { k, limit, parent, colCost, colEdge, colBar, bestCost, bestEdge, nRows } = this;
    let lo = this.nCols;
    let hi = -1;
    let n = 0;
    let useful = 0;
    let root = find(parent, r);
    for (let e = start; e < end; e++) {
      const j = colIdx[e]!;
      if (j < lo) lo = j;
      if (j > hi) hi = j;
      const c = cost32[e]!;
      if (!(c < limit)) continue;
      useful = 1;
      // Components: this row with the column.
      const b = find(parent, nRows + j);
      if (b !== root) {
        if (b < root) {
          parent[root] = b;
          root = b;
        } else {
          parent[b] = root;
        }
      }
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
    this.useful[r] = useful;
    // Marked now that the row's costs have been read (the column lists keep edges only).
    for (let q = 0; q < n; q++) markCandidate(cost32, bestEdge[q]!);
  }

  /** Once the graph is built: marks the columns' picks as candidates too. */
  markColumns(cost32: Float32Array): void {
    const colEdge = this.colEdge;
    for (let q = 0; q < colEdge.length; q++) if (colEdge[q]! >= 0) markCandidate(cost32, colEdge[q]!);
  }

  /**
   * Components holding at least one useful pair, ids dense in order of their first
   * row; rows and columns keep graph order inside one (rows are in time order, so
   * augmenting paths stay local).
   */
  components(): Components {
    const { nRows, nCols, parent, useful } = this;
    const compOfRoot = new Int32Array(nRows + nCols).fill(-1);
    const rowComp = new Int32Array(nRows).fill(-1);
    const colComp = new Int32Array(nCols).fill(-1);
    let count = 0;
    for (let r = 0; r < nRows; r++) {
      if (useful[r] === 0) continue;
      const root = find(parent, r);
      if (compOfRoot[root] === -1) compOfRoot[root] = count++;
      rowComp[r] = compOfRoot[root]!;
    }
    for (let c = 0; c < nCols; c++) colComp[c] = compOfRoot[find(parent, nRows + c)]!;
    const rowLocal = new Int32Array(nRows);
    const colLocal = new Int32Array(nCols);
    const rowCount = new Int32Array(count + 1);
    const colCount = new Int32Array(count + 1);
    for (let r = 0; r < nRows; r++) if (rowComp[r]! >= 0) rowLocal[r] = rowCount[rowComp[r]! + 1]!++;
    for (let c = 0; c < nCols; c++) if (colComp[c]! >= 0) colLocal[c] = colCount[colComp[c]! + 1]!++;
    const rowStart = new Int32Array(count + 1);
    const colStart = new Int32Array(count + 1);
    for (let q = 0; q < count; q++) {
      rowStart[q + 1] = rowStart[q]! + rowCount[q + 1]!;
      colStart[q + 1] = colStart[q]! + colCount[q + 1]!;
    }
    const rows = new Int32Array(rowStart[count]!);
    const cols = new Int32Array(colStart[count]!);
    for (let r = 0; r < nRows; r++) if (rowComp[r]! >= 0) rows[rowStart[rowComp[r]!]! + rowLocal[r]!] = r;
    for (let c = 0; c < nCols; c++) if (colComp[c]! >= 0) cols[colStart[colComp[c]!]! + colLocal[c]!] = c;
    return { count, rowComp, colLocal, rowStart, rows, colStart, cols };
  }
}

/** Connected components of the useful pairs (cost < P). */
export interface Components {
  readonly count: number;
  /** Component of each row, -1 for a row with no useful pair. */
  readonly rowComp: Int32Array;
  /** Index of each column inside its component. */
  readonly colLocal: Int32Array;
  /** Component q's rows are `rows[rowStart[q] .. rowStart[q + 1])`, ascending; its columns likewise. */
  readonly rowStart: Int32Array;
  readonly rows: Int32Array;
  readonly colStart: Int32Array;
  readonly cols: Int32Array;
}

function find(parent: Int32Array, x: number): number {
  let r = x;
  while (parent[r]! !== r) r = parent[r]!;
  while (parent[x]! !== r) {
    const next = parent[x]!;
    parent[x] = r;
    x = next;
  }
  return r;
}

/**
 * Candidate pairs per graph row: graph edge and exact cost, CSR. Room for every pair
 * of the graph is reserved up front; pages never written cost no memory, and the
 * rounds' additions are merged in place, with no second copy.
 */
export class CandidateRows {
  readonly ptr: Int32Array;
  readonly edge: Int32Array;
  readonly cost: Float64Array;

  constructor(nRows: number, capacity: number) {
    this.ptr = new Int32Array(nRows + 1);
    this.edge = new Int32Array(capacity);
    this.cost = new Float64Array(capacity);
  }

  /**
   * The marked pairs of `g` with their exact costs; a pair whose exact cost is not
   * below P after all is unmarked (its float32 cost could not tell).
   */
  static fromMarks(g: CompactGraph, exact: PairCost, P: number): CandidateRows {
    const { nRows, rowPtr, colIdx, cost32, rowDemand } = g;
    const cand = new CandidateRows(nRows, colIdx.length);
    let at = 0;
    for (let r = 0; r < nRows; r++) {
      const d = rowDemand[r]!;
      const end = rowPtr[r + 1]!;
      for (let e = rowPtr[r]!; e < end; e++) {
        const c32 = cost32[e]!;
        if (!(c32 < 0)) continue;
        const c = exact(d, colIdx[e]!);
        if (!(c < P)) {
          cost32[e] = c32 === -F32_TINY ? 0 : -c32;
          continue;
        }
        cand.edge[at] = e;
        cand.cost[at] = c;
        at++;
      }
      cand.ptr[r + 1] = at;
    }
    return cand;
  }

  /** Adds `n` pairs (rows ascending), each row's new pairs after its old ones. */
  merge(rows: Int32Array, edges: Int32Array, costs: Float64Array, n: number): void {
    const { ptr, edge, cost } = this;
    // From the last row down, each row's block moves right by the pairs added at or
    // after it, so nothing is overwritten before it has moved.
    let q = n - 1;
    let shift = n;
    let oldEnd = ptr[ptr.length - 1]!;
    for (let r = ptr.length - 2; r >= 0 && shift > 0; r--) {
      const a = ptr[r]!;
      let m = 0;
      while (q - m >= 0 && rows[q - m] === r) m++;
      const to = a + shift - m;
      if (to !== a) {
        edge.copyWithin(to, a, oldEnd);
        cost.copyWithin(to, a, oldEnd);
      }
      for (let t = 0; t < m; t++) {
        edge[oldEnd + shift - m + t] = edges[q - m + 1 + t]!;
        cost[oldEnd + shift - m + t] = costs[q - m + 1 + t]!;
      }
      ptr[r + 1] = oldEnd + shift;
      q -= m;
      shift -= m;
      oldEnd = a;
    }
  }
}
