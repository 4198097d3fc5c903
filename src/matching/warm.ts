import { SparseSearch, type RowSearch, type RowsView } from './sparse.js';
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
  /** Whether any previous pair could be kept (otherwise the state is to be discarded). */
  used: boolean;
  /** Pairs kept after step 1. */
  pairsKept: number;
  /** Pairs whose reduced cost was looked at. */
  scanned: number;
}

/**
 * Steps 1 and 2: applies `warm` to the solver state (u, v, rowToCol, colToRow: all
 * fresh, unmatched, v = 0). Leaves rows without a pair for the caller's searches;
 * when no pair could be kept (`used` false) the caller discards the state.
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
  // With no pair kept the state is left as it is: the caller then solves cold on
  // arrays of its own (resetting these here was a branch V8 had never run, and
  // meeting it cost a recompile of this function).
  return { used: kept > 0, pairsKept: kept, scanned };
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
 *
 * The reverse search is the forward search of sparse.ts ({@link SparseSearch}) run on
 * the transposed instance: columns as rows, rows as columns, prices swapped (a
 * column's price v is the transposed row's price, a row's price u the transposed
 * column's), and every column free to go unmatched at cost 0 (its "private" option:
 * the column goes free at price 0). A search from free column j0 then reaches a row
 * i at c − u_i − v_c along a tight chain, ends at an unmatched row (a transposed free
 * column, which joins) or at a column whose price may rise to 0 (a transposed
 * private option), and its dual update raises the settled columns and lowers their
 * rows by as much: exactly the re-optimisation step described above. Sharing the
 * search's code, rather than a reverse Dijkstra of its own, matters in short runs:
 * the forward search is already compiled and optimised by the time a warm start
 * needs it (a day of small markets: ~100 warm solves, too few to pay for compiling a
 * search of their own). `searchOf` makes the search another way (incremental.ts: in
 * WebAssembly), the same one over the transposed pairs.
 */
export function releaseFreeColumns(
  inst: SparseInstance | { nRows: number; nCols: number; columns: () => ColumnsView },
  u: Float64Array,
  v: Float64Array,
  rowToCol: Int32Array,
  colToRow: Int32Array,
  searchOf: ((transposed: RowsView) => RowSearch) | null = null,
): { searches: number; scanned: number } {
  const nCols = inst.nCols;
  let first = NONE;
  for (let j = 0; j < nCols && first === NONE; j++) if (colToRow[j] === NONE && v[j]! < 0) first = j;
  if (first === NONE) return { searches: 0, scanned: 0 };
  const cols = 'columns' in inst ? inst.columns() : columnsOf(inst);
  const transposed: RowsView = { rowStart: cols.colStart, rowEnd: cols.colEnd, colIdx: cols.colRow, cost: cols.colCost };
  // transposed: u and v swap, so do rowToCol and colToRow; each column may go free at 0
  const search = searchOf !== null ? searchOf(transposed) : new SparseSearch(transposed, inst.nRows, new Float64Array(nCols), v, u, colToRow, rowToCol);
  let scanned = 'rowPtr' in inst ? inst.rowPtr[inst.nRows]! : 0;
  let searches = 0;
  try {
    for (let j = first; j < nCols; j++) {
      if (colToRow[j] !== NONE || !(v[j]! < 0)) continue;
      searches++;
      scanned += search.run(j);
    }
  } finally {
    search.flush();
  }
  return { searches, scanned };
}
