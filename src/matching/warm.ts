import { heapPopRoot, heapUp } from './heap.js';
import type { SparseInstance, WarmStart } from './types.js';

/*
 * Warm start for the shortest-augmenting-path solver of sparse.ts: take a previous
 * solution (pairs and prices, already mapped onto this instance) and keep what still
 * fits, so that only the rows and columns that changed need searching.
 *
 * 1. Previous pairs that are still allowed start matched at their previous column
 *    price (clamped to ≤ 0; 0 when unknown); the row price makes the pair tight. A row
 *    that now prefers another matched column, or its unmatched cost, loses its pair and
 *    is searched like a new row. (Row prices are not needed: they follow.)
 * 2. Every free column (new, freed, or never matched) is priced by column reduction
 *    against the kept rows: v = min(0, min over kept rows of c − u), the highest price
 *    dual feasibility allows. From here the forward searches of sparse.ts run as after
 *    a cold start: every reduced cost ≥ 0, kept pairs tight, v ≤ 0. A free column
 *    below 0 is a terminal like any other; it just looks dearer.
 * 3. After the forward searches, a free column still below 0 breaks complementary
 *    slackness (a free column must be at 0). A reverse shortest-path search from it
 *    finds the cheapest way out: a chain of rows each moving one column over, ending
 *    at a column that may go free at price 0 (possibly the start column itself: its
 *    price is raised to 0) or at an unmatched row, which joins. Distances are reduced
 *    costs, so Dijkstra applies; the dual update mirrors the forward one (columns
 *    settled at distance d rise by D − d, their rows fall by as much), which keeps
 *    every reduced cost ≥ 0, u ≤ δ, v ≤ 0 and the chain tight.
 *
 * Step 3 is the re-optimisation step of successive shortest paths for min-cost flow
 * (common practice): a unit of flow leaves the over-priced column towards the sink
 * along the cheapest residual path. Running it before the forward searches was
 * measured: it searched about four times as often, since new rows absorb most such
 * columns on their own (docs/benchmarks.md has the figures of the order kept).
 */

const NONE = -1;
/** Relative gap below which two reduced costs are taken as tied: ulp noise of sums. */
export const TIE_TOL = 1e-12;

export interface WarmOutcome {
  /** Whether any previous pair could be kept (otherwise nothing was changed). */
  used: boolean;
  /** Pairs kept after step 1. */
  pairsKept: number;
  /** Pairs whose reduced cost was looked at. */
  scanned: number;
}

/**
 * Steps 1 and 2: applies `warm` to the solver state (u, v, rowToCol, colToRow: all
 * fresh, unmatched, v = 0). Leaves rows without a pair for the caller's searches.
 */
export function applyWarmStart(
  inst: SparseInstance,
  delta: Float64Array | null,
  warm: WarmStart,
  u: Float64Array,
  v: Float64Array,
  rowToCol: Int32Array,
  colToRow: Int32Array,
): WarmOutcome {
  const { nRows, nCols, rowPtr, colIdx, cost } = inst;
  const wPair = warm.rowToCol!;
  const wCol = warm.colPrices;
  let scanned = 0;
  let kept = 0;
  let e = 0;
  let end = 0;

  // 1. previous pairs claim their columns (first come), at previous prices clamped to ≤ 0
  for (let r = 0; r < nRows; r++) {
    const j = wPair[r]!;
    if (j < 0 || j >= nCols || colToRow[j] !== NONE) continue;
    colToRow[j] = r;
    rowToCol[r] = j;
  }
  if (wCol !== undefined) {
    for (let j = 0; j < nCols; j++) {
      const p = wCol[j]!;
      if (colToRow[j] !== NONE && p < 0 && p > -Infinity) v[j] = p;
    }
  }

  // 2. one scan of each claiming row: find its pair (dropped when no longer allowed),
  // price the row to make the pair tight, drop it when the row now prefers another
  // matched column or its unmatched cost, and price every free column it reaches by
  // column reduction (v = min(0, c − u) over kept rows). A column freed by a later drop
  // keeps its previous price, which every row scanned before found no better than its
  // own pair, so dual feasibility holds for every kept row whatever the order. Rows
  // dropped after they priced a column only left that price lower than needed.
  let keptEdges = 0;
  for (let r = 0; r < nRows; r++) {
    const j = rowToCol[r]!;
    if (j === NONE) continue;
    const start = rowPtr[r]!;
    end = rowPtr[r + 1]!;
    let found = NONE;
    for (e = start; e < end; e++) {
      if (colIdx[e] === j) {
        found = e;
        break;
      }
    }
    scanned += end - start;
    if (found === NONE) {
      // the column keeps its price: rows scanned before saw it as matched at that price
      rowToCol[r] = NONE;
      colToRow[j] = NONE;
      continue;
    }
    const ur = cost[found]! - v[j]!;
    let drop = delta !== null && ur > delta[r]! && ur - delta[r]! > TIE_TOL * (Math.abs(ur) + Math.abs(delta[r]!));
    if (!drop) {
      for (e = start; e < end; e++) {
        const k = colIdx[e]!;
        if (e === found || colToRow[k] === NONE) continue;
        const x = cost[e]! - v[k]!;
        if (x < ur && ur - x > TIE_TOL * (Math.abs(x) + Math.abs(ur))) {
          drop = true;
          break;
        }
      }
    }
    if (drop) {
      rowToCol[r] = NONE;
      colToRow[j] = NONE;
      continue;
    }
    u[r] = ur;
    kept++;
    keptEdges += end - start;
    for (e = start; e < end; e++) {
      const k = colIdx[e]!;
      if (colToRow[k] !== NONE) continue;
      const x = cost[e]! - ur;
      // gaps within the tie tolerance are rounding of a tight pair, not a violation
      if (x < v[k]! && v[k]! - x > TIE_TOL * (Math.abs(cost[e]!) + Math.abs(ur))) v[k] = x;
    }
  }
  scanned += keptEdges;
  if (kept === 0) {
    v.fill(0);
    rowToCol.fill(NONE);
    colToRow.fill(NONE);
    return { used: false, pairsKept: 0, scanned };
  }
  return { used: true, pairsKept: kept, scanned };
}

/** The pairs of an instance by column, as ranges (see RowsView in sparse.ts). */
export interface ColumnsView {
  readonly colStart: Int32Array;
  readonly colEnd: Int32Array;
  /** Row of each entry. */
  readonly colRow: Int32Array;
  readonly colCost: Float64Array;
}

/** The pairs of a CSR instance by column (CSC). */
export function columnsOf(inst: SparseInstance): ColumnsView {
  const { nRows, nCols, rowPtr, colIdx, cost } = inst;
  const colPtr = new Int32Array(nCols + 1);
  const nEdges = rowPtr[nRows]!;
  for (let e = 0; e < nEdges; e++) colPtr[colIdx[e]! + 1]!++;
  for (let j = 0; j < nCols; j++) colPtr[j + 1]! += colPtr[j]!;
  const colRow = new Int32Array(nEdges);
  const colCost = new Float64Array(nEdges);
  const fill = colPtr.slice(0, nCols);
  for (let r = 0; r < nRows; r++) {
    const end = rowPtr[r + 1]!;
    for (let e = rowPtr[r]!; e < end; e++) {
      const at = fill[colIdx[e]!]!++;
      colRow[at] = r;
      colCost[at] = cost[e]!;
    }
  }
  return { colStart: colPtr, colEnd: colPtr.subarray(1), colRow, colCost };
}

/**
 * Step 3, once every row is matched or settled unmatched (u = δ): a reverse search
 * from every free column priced below 0. `cols` (the pairs by column) is built only
 * when such a column exists. Returns the searches run and pairs scanned.
 */
export function releaseFreeColumns(
  inst: SparseInstance | { nRows: number; nCols: number; columns: () => ColumnsView },
  u: Float64Array,
  v: Float64Array,
  rowToCol: Int32Array,
  colToRow: Int32Array,
): { searches: number; scanned: number } {
  const nCols = inst.nCols;
  let first = NONE;
  for (let j = 0; j < nCols && first === NONE; j++) if (colToRow[j] === NONE && v[j]! < 0) first = j;
  if (first === NONE) return { searches: 0, scanned: 0 };
  const cols = 'columns' in inst ? inst.columns() : columnsOf(inst);
  const search = new ReverseSearch(cols, inst.nRows, u, v, rowToCol, colToRow);
  let scanned = 'rowPtr' in inst ? inst.rowPtr[inst.nRows]! : 0;
  let searches = 0;
  for (let j = first; j < nCols; j++) {
    if (colToRow[j] !== NONE || !(v[j]! < 0)) continue;
    searches++;
    scanned += search.run(j);
  }
  return { searches, scanned };
}

/**
 * Dijkstra from one free column backwards over kept rows: a row is reached from a
 * column it could move into, at the reduced cost of that pair; a row's own column is
 * reached at the row's distance (the pair is tight). Terminal options: a reached
 * column goes free at price 0, costing its distance − v.
 */
class ReverseSearch {
  private readonly dist: Float64Array;
  private readonly predCol: Int32Array;
  private readonly hpos: Int32Array;
  private readonly hrow: Int32Array;
  private readonly hkey: Float64Array;
  private readonly touched: Int32Array;
  private readonly settledRow: Int32Array;
  private readonly settledRowDist: Float64Array;

  constructor(
    private readonly cols: ColumnsView,
    nRows: number,
    private readonly u: Float64Array,
    private readonly v: Float64Array,
    private readonly rowToCol: Int32Array,
    private readonly colToRow: Int32Array,
  ) {
    this.dist = new Float64Array(nRows).fill(Infinity);
    this.predCol = new Int32Array(nRows);
    this.hpos = new Int32Array(nRows);
    this.hrow = new Int32Array(nRows);
    this.hkey = new Float64Array(nRows);
    this.touched = new Int32Array(nRows);
    this.settledRow = new Int32Array(nRows);
    this.settledRowDist = new Float64Array(nRows);
  }

  /** Fixes free column j0 (price < 0): matches it or raises it to 0. Returns pairs scanned. */
  run(j0: number): number {
    const { dist, predCol, hpos, hrow, hkey, touched, settledRow, settledRowDist, u, v, rowToCol, colToRow } = this;
    const { colStart, colEnd, colRow, colCost } = this.cols;
    let best = -v[j0]!;
    let bestCol = j0;
    let bestRow = NONE;
    let nTouched = 0;
    let nSettled = 0;
    let hsize = 0;
    let scanned = 0;
    let c = j0;
    let dc = 0;
    let p = 0;
    for (;;) {
      // expand column c, reached at distance dc
      const off = dc - v[c]!;
      const stop = colEnd[c]!;
      for (let t = colStart[c]!; t < stop; t++) {
        const i = colRow[t]!;
        const di = dist[i]!;
        const x = off + colCost[t]! - u[i]!;
        if (!(x < di) || x >= best) continue; // also skips settled rows (di = -Infinity)
        if (di === Infinity) touched[nTouched++] = i;
        dist[i] = x;
        predCol[i] = c;
        // Terminals count as soon as they are reached, so `best` falls early and
        // prunes the heap (the rows settled stay the same: the search still stops
        // once no heap entry is below best). An unmatched row is only ever a
        // terminal; a matched row's column could go free at x − v.
        const k = rowToCol[i]!;
        if (k === NONE) {
          best = x;
          bestCol = NONE;
          bestRow = i;
          continue;
        }
        p = di === Infinity ? hsize++ : hpos[i]!;
        heapUp(hkey, hrow, hpos, p, x, i);
        const term = x - v[k]!;
        if (term < best) {
          best = term;
          bestCol = k;
        }
      }
      scanned += stop - colStart[c]!;
      if (hsize === 0 || hkey[0]! >= best) break;
      // pop the nearest row
      const i = hrow[0]!;
      const d = hkey[0]!;
      heapPopRoot(hkey, hrow, hpos, hsize--);
      dist[i] = -Infinity;
      // (only matched rows enter the heap; their terminal was counted when reached)
      c = rowToCol[i]!;
      settledRow[nSettled] = i;
      settledRowDist[nSettled++] = d;
      dc = d;
    }

    // dual update: settled columns (j0 and the settled rows' columns) rise, their rows fall
    v[j0] = v[j0]! + best;
    for (let t = 0; t < nSettled; t++) {
      const i = settledRow[t]!;
      const g = best - settledRowDist[t]!;
      const k = rowToCol[i]!;
      v[k] = v[k]! + g;
      u[i] = u[i]! - g;
    }
    if (bestCol !== NONE) v[bestCol] = 0; // exactly: distance − v was the terminal cost

    // shift the chain: the terminal column's row (or the unmatched row) moves to the
    // column it was reached from, and so on back to j0
    if (bestCol !== j0) {
      let i = bestRow;
      if (bestCol !== NONE) {
        i = colToRow[bestCol]!;
        colToRow[bestCol] = NONE;
      }
      for (;;) {
        const to = predCol[i]!;
        const next = colToRow[to]!;
        colToRow[to] = i;
        rowToCol[i] = to;
        if (to === j0) break;
        i = next;
      }
    }
    for (let t = 0; t < nTouched; t++) dist[touched[t]!] = Infinity;
    return scanned;
  }
}
