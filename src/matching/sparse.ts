import { pairflowError } from '../errors.js';
import type { SolveOptions, SolveResult, SolveStats, SparseInstance, WarmStart } from './types.js';
import { validateSparse, validateWarm } from './validate.js';
import { defaultNow, finishResult, Sum } from './result.js';
import { applyWarmStart, releaseFreeColumns } from './warm.js';
import { auctionPrices } from './auction.js';
import { heapPopRoot, heapUp } from './heap.js';
import { NONE, PRIVATE, reduceRows, shiftAlongPath } from './reduction.js';

/*
 * Shortest augmenting paths with dual prices (the Jonker–Volgenant family) on a CSR
 * instance. Invariants between augmentations, which together make the final state an
 * optimality certificate for SPEC §5:
 *   - every allowed pair has reduced cost c − u − v ≥ 0 for matched rows;
 *   - a matched pair is tight;
 *   - v ≤ 0 everywhere, and a column that is still free has v = 0 (free columns are
 *     only ever popped as the sink, so they never move);
 *   - each row's "unmatched" option is a private column of price 0 and cost δ; it is
 *     never materialised: Dijkstra keeps the best one reached as a candidate sink.
 * A row that ends on its private column can never be reached again (only that row is
 * adjacent to it), so it is settled for good.
 */



export function solveSparseCore(inst: SparseInstance, opts: SolveOptions): SolveResult {
  const now = opts.now ?? defaultNow;
  const t0 = now();
  if (opts.check !== false) validateSparse(inst);
  validateWarm(opts.warm, inst.nRows, inst.nCols);
  if (opts.presolve === 'auction') {
    // Prices from the auction, then the exact solver warm from them (auction.ts).
    const a = auctionPrices(inst, opts.warm?.colPrices !== undefined ? { colPrices: opts.warm.colPrices } : {});
    return solveChecked(inst, { rowToCol: a.rowToCol, colPrices: a.colPrices }, now, t0);
  }
  const warm = opts.warm;
  const useWarm = warm !== undefined && (opts.warmWhen === 'always' || warmPays(inst, warm));
  return solveChecked(inst, useWarm ? warm : undefined, now, t0);
}

/**
 * Below this many pairs a warm hint is ignored. After JIT warm-up a warm start pays on
 * almost any pool (measured on the engine's `commit: "due"` solves of generated
 * markets at scale 0.03–0.1: warm/cold 0.85 below 32 pairs, 0.55–0.65 at 64–256,
 * 0.45–0.25 above), but below 512 pairs it saves at most ~40 µs a solve, while the
 * first warm starts of a process cost a fixed ~15 ms of CPU (V8 compiling and
 * optimising the warm-only code, applyWarmStart and the pairs by column; one warm
 * solve of a small-markets run took 12.6 ms where its cold twin takes 0.03 ms): a
 * process that meets a few pools of that size never earns it back. A day of small
 * markets (a few units per pool) took ~100 hinted solves of 128–272 pairs at a bound
 * of 128 and ran 1.2× slower warm than cold; at 256 it still took three (of 1,171),
 * and its warm and cold runs were even within the run-to-run noise of its 30 ms of
 * solves (medians of six alternating runs, 17–42 ms each); at 512 it takes none. On
 * the demo day under `"due"` (pools of hundreds of units) the warm starts taken go
 * from 17,275 to 17,204 of 18,022 and the solve total stays 11.5–12 s. From 512
 * pairs a warm solve saves 90 µs and more, so a process with such pools recovers the
 * fixed cost within a couple of hundred solves.
 */
const WARM_MIN_PAIRS = 512;
/** A hint that offers a previous pair to fewer rows than this share is ignored too: too little survives to pay. */
const WARM_MIN_HINTED = 0.25;

/** Whether a warm start is worth its fixed cost on this instance (the solver may ignore a hint). */
function warmPays(inst: SparseInstance, warm: WarmStart): boolean {
  if (warm.rowToCol === undefined) return false;
  if (inst.rowPtr[inst.nRows]! < WARM_MIN_PAIRS) return false;
  let hinted = 0;
  for (let r = 0; r < inst.nRows; r++) if (warm.rowToCol[r]! >= 0) hinted++;
  return hinted >= WARM_MIN_HINTED * inst.nRows;
}

/** The sparse solve of an instance known to be well formed (dense.ts converts its own). */
export function solveSparseChecked(inst: SparseInstance, opts: SolveOptions, now: () => number, t0: number): SolveResult {
  return solveChecked(inst, opts.warm, now, t0);
}

/** Warm from `warm` when it holds pairs and any of them can be kept, else cold. */
function solveChecked(inst: SparseInstance, warm: WarmStart | undefined, now: () => number, t0: number): SolveResult {
  if (warm?.rowToCol !== undefined) {
    const res = solveWarm(inst, warm, now, t0);
    if (res !== null) return res;
  }
  return solveCold(inst, now, t0);
}

/*
 * The cold and the warm solve are separate functions that share the shortest-path
 * searches and the last step (searchFreeRows, finishSolve) rather than one function
 * with warm branches: V8 optimises a function once its loops are hot, and a function
 * holding both paths is compiled again, larger, when the warm branches first run. In a
 * short run (a day of small markets: ~100 warm solves among ~1,000) that compiling
 * cost more than the warm starts saved; split, the warm solve reuses kernels the
 * cold solves have already made hot.
 */

/** A cold solve: Jonker–Volgenant start where every row must be matched, greedy passes, searches. */
function solveCold(inst: SparseInstance, now: () => number, t0: number): SolveResult {
  const { nRows, nCols, rowPtr, colIdx, cost } = inst;
  const delta = inst.unmatchedCost ?? null;

  const v = new Float64Array(nCols);
  const u = new Float64Array(nRows);
  const rowToCol = new Int32Array(nRows).fill(NONE);
  const colToRow = new Int32Array(nCols).fill(NONE);
  let scannedPairs = 0;

  let e = 0;
  let end = 0;
  let j = 0;
  let r = 0;
  let x = 0;

  // ---- a perfect assignment (square, every row must be matched) ends with every
  // column matched, so its prices need not stay ≤ 0 on the way: they are shifted at
  // the end. That admits the Jonker–Volgenant start: column reduction (each column
  // priced at its cheapest pair, given to that row if still free), then reduction
  // transfer (a row holding one column moves its slack onto that column's price).
  const perfect = nRows === nCols && nRows > 0 && mustMatchAll(delta);
  if (perfect) {
    const colArg = new Int32Array(nCols).fill(NONE);
    v.fill(Infinity);
    for (r = 0; r < nRows; r++) {
      end = rowPtr[r + 1]!;
      for (e = rowPtr[r]!; e < end; e++) {
        j = colIdx[e]!;
        if (cost[e]! < v[j]!) {
          v[j] = cost[e]!;
          colArg[j] = r;
        }
      }
    }
    scannedPairs += rowPtr[nRows]!;
    const hits = new Int32Array(nRows);
    for (j = nCols - 1; j >= 0; j--) {
      const i = colArg[j]!;
      if (i === NONE) throw unreachableColumn(j);
      if (hits[i]!++ === 0) {
        rowToCol[i] = j;
        colToRow[j] = i;
      } else if (v[j]! < v[rowToCol[i]!]!) {
        colToRow[rowToCol[i]!] = NONE;
        rowToCol[i] = j;
        colToRow[j] = i;
      }
    }
    for (r = 0; r < nRows; r++) {
      const j1 = rowToCol[r]!;
      u[r] = 0;
      if (j1 === NONE) continue;
      if (hits[r] !== 1) continue;
      let m = Infinity;
      end = rowPtr[r + 1]!;
      for (e = rowPtr[r]!; e < end; e++) {
        j = colIdx[e]!;
        if (j === j1) continue;
        x = cost[e]! - v[j]!;
        if (x < m) m = x;
      }
      scannedPairs += end - rowPtr[r]!;
      if (m < Infinity) {
        v[j1] = v[j1]! - m;
        u[r] = m;
      }
    }
  }

  // ---- augmenting row reduction: cheap greedy passes that settle most rows before
  // any shortest-path search. Each step lowers only the price of the column the row
  // takes, so the invariants hold throughout.
  const freeAtStart = new Int32Array(nRows);
  let nFreeAtStart = 0;
  for (r = 0; r < nRows; r++) if (rowToCol[r] === NONE) freeAtStart[nFreeAtStart++] = r;
  // One view for every row the reduction scans (a view a call was a subarray each).
  const rowsView = rowsOf(inst);
  const reduced = reduceRows(freeAtStart, nFreeAtStart, u, v, rowToCol, colToRow, {
    passes: 2,
    noDisplace: false,
    cheapestTwo: (row, two) => cheapestTwoSparse(rowsView, delta, v, row, two),
    infeasible: infeasibleRow,
  });
  scannedPairs += reduced.scanned;

  // ---- shortest augmenting paths
  const searched = searchFreeRows(inst, delta, u, v, rowToCol, colToRow, reduced.freeRows, reduced.nFree);
  scannedPairs += searched.scanned;
  if (perfect) shiftToNonPositive(v);
  return finishSolve(inst, delta, u, v, rowToCol, colToRow, {
    augmentations: reduced.nFree,
    scannedPairs,
    ms: 0,
    warm: false,
    warmPairsKept: 0,
    reverseSearches: 0,
    searchedRows: reduced.nFree,
  }, now, t0);
}

/**
 * A warm solve (warm.ts): kept pairs and repriced free columns, a search from every
 * row left free, then reverse searches from free columns left below price 0. Null
 * when no previous pair could be kept (the caller solves cold).
 *
 * No greedy pass runs between the warm start and the searches: the rows left free
 * are few and their best columns mostly held, so a pass that takes only free columns
 * settled little; measured on the engine's "due" solves of the demo day, the searches
 * alone took the same time, and skipping it leaves one less code path to compile.
 */
function solveWarm(inst: SparseInstance, warm: WarmStart, now: () => number, t0: number): SolveResult | null {
  const { nRows, nCols } = inst;
  const delta = inst.unmatchedCost ?? null;
  const v = new Float64Array(nCols);
  const u = new Float64Array(nRows);
  const rowToCol = new Int32Array(nRows).fill(NONE);
  const colToRow = new Int32Array(nCols).fill(NONE);
  const w = applyWarmStart(inst, delta, warm, u, v, rowToCol, colToRow);
  if (!w.used) return null;
  // A row whose own unmatched option is its best is settled there (u = δ) without a
  // search: a warm start from an optimum then searches nothing.
  const free = new Int32Array(nRows - w.pairsKept);
  let nFree = 0;
  const rows = rowsOf(inst);
  const two = new Float64Array(4);
  let scanned = w.scanned;
  for (let r = 0; r < nRows; r++) {
    if (rowToCol[r] !== NONE) continue;
    scanned += cheapestTwoSparse(rows, delta, v, r, two);
    if (two[2] === PRIVATE) u[r] = two[0]!;
    else free[nFree++] = r;
  }
  const searched = searchFreeRows(inst, delta, u, v, rowToCol, colToRow, free, nFree);
  const rev = releaseFreeColumns(inst, u, v, rowToCol, colToRow);
  return finishSolve(inst, delta, u, v, rowToCol, colToRow, {
    augmentations: nFree + rev.searches,
    scannedPairs: scanned + searched.scanned + rev.scanned,
    ms: 0,
    warm: true,
    warmPairsKept: w.pairsKept,
    reverseSearches: rev.searches,
    searchedRows: nFree,
  }, now, t0);
}

/**
 * Shortest augmenting paths (Dijkstra on reduced costs, indexed binary heap, lazy
 * reset of only what each search touched) from each of `freeRows[0 .. nFree)`.
 */
function searchFreeRows(
  inst: SparseInstance, delta: Float64Array | null, u: Float64Array, v: Float64Array,
  rowToCol: Int32Array, colToRow: Int32Array, freeRows: Int32Array, nFree: number,
): { scanned: number } {
  let scanned = 0;
  if (nFree === 0) return { scanned };
  const search = new SparseSearch(rowsOf(inst), inst.nCols, delta, u, v, rowToCol, colToRow);
  try {
    for (let f = 0; f < nFree; f++) scanned += search.run(freeRows[f]!);
  } finally {
    search.flush();
  }
  return { scanned };
}

/** Exact row duals from the final prices (matched pairs tight, unmatched rows at δ), the cost, the result. */
function finishSolve(
  inst: SparseInstance, delta: Float64Array | null, u: Float64Array, v: Float64Array,
  rowToCol: Int32Array, colToRow: Int32Array, stats: SolveStats, now: () => number, t0: number,
): SolveResult {
  const { nRows, rowPtr, colIdx, cost } = inst;
  const primal = new Sum();
  for (let r = 0; r < nRows; r++) {
    const j = rowToCol[r]!;
    if (j === NONE) {
      u[r] = delta![r]!;
      primal.add(u[r]!);
      continue;
    }
    const end = rowPtr[r + 1]!;
    for (let e = rowPtr[r]!; e < end; e++) {
      if (colIdx[e] === j) {
        u[r] = cost[e]! - v[j]!;
        primal.add(cost[e]!);
        break;
      }
    }
  }
  stats.ms = now() - t0;
  return finishResult(primal.value, rowToCol, colToRow, u, v, stats);
}

/** Whether every row must be matched (no δ, or δ = +Infinity throughout). */
export function mustMatchAll(delta: Float64Array | null): boolean {
  if (delta === null) return true;
  for (let r = 0; r < delta.length; r++) if (delta[r]! < Infinity) return false;
  return true;
}

/**
 * With every column matched, adding a constant to all column prices and removing it
 * from all row prices changes neither feasibility nor the objective; this brings the
 * prices to the sign SPEC §5 asks for (max v = 0).
 */
export function shiftToNonPositive(v: Float64Array): void {
  let top = -Infinity;
  for (let j = 0; j < v.length; j++) if (v[j]! > top) top = v[j]!;
  if (top === -Infinity) return;
  for (let j = 0; j < v.length; j++) v[j] = v[j]! - top;
}

export function unreachableColumn(j: number): Error {
  return pairflowError('PAIRFLOW_ERR_SOLVER_INFEASIBLE', {
    detail: `column ${j} has no allowed pair, so not every row of this square instance can be matched, and rows have no unmatched cost`,
  });
}

function infeasibleRow(r: number): Error {
  return pairflowError('PAIRFLOW_ERR_SOLVER_INFEASIBLE', {
    detail: `row ${r} cannot be matched: every column it may take is needed by other rows (or it has no allowed pair), and it has no unmatched cost`,
  });
}

export { infeasibleRow };

/**
 * The pairs of an instance by row, as ranges that need not be contiguous from one row
 * to the next: a CSR instance (`rowEnd` = `rowPtr` shifted by one) or a store whose
 * rows grow in place (incremental.ts).
 */
export interface RowsView {
  readonly rowStart: Int32Array;
  readonly rowEnd: Int32Array;
  readonly colIdx: Int32Array;
  readonly cost: Float64Array;
}

/** The rows view of a CSR instance. */
export function rowsOf(inst: SparseInstance): RowsView {
  return { rowStart: inst.rowPtr, rowEnd: inst.rowPtr.subarray(1), colIdx: inst.colIdx, cost: inst.cost };
}

/** Row r's two cheapest options at prices v, for {@link reduceRows}. */
export function cheapestTwoSparse(rows: RowsView, delta: Float64Array | null, v: Float64Array, r: number, two: Float64Array): number {
  const { rowStart, rowEnd, colIdx, cost } = rows;
  let u1 = Infinity;
  let j1 = NONE;
  if (delta !== null && delta[r]! < Infinity) {
    u1 = delta[r]!;
    j1 = PRIVATE;
  }
  let u2 = Infinity;
  let j2 = NONE;
  const start = rowStart[r]!;
  const end = rowEnd[r]!;
  for (let e = start; e < end; e++) {
    const j = colIdx[e]!;
    const x = cost[e]! - v[j]!;
    if (x < u2) {
      if (x < u1) {
        u2 = u1;
        j2 = j1;
        u1 = x;
        j1 = j;
      } else {
        u2 = x;
        j2 = j;
      }
    }
  }
  two[0] = u1;
  two[1] = u2;
  two[2] = j1;
  two[3] = j2;
  return end - start;
}

/** One search at a time from a free row over fixed arrays: {@link SparseSearch}, or its kernel (wasm/sparse-search.ts). */
export interface RowSearch {
  /** Augments from free row r0 (or settles it unmatched); returns the pairs scanned. */
  run(r0: number): number;
  /** Writes the column prices back. */
  flush(): void;
}

/**
 * One shortest-augmenting-path search at a time, reusing its arrays: every search
 * resets only the columns it touched, so its cost follows what it reaches, not nCols.
 * Memory traffic is what limits a search on a large sparse instance, so each
 * column's price and tentative distance sit side by side (`pd[2j]`, `pd[2j + 1]`;
 * the distance is +Infinity until reached and -Infinity once settled), and the heap
 * keeps each key beside its column.
 */
export class SparseSearch implements RowSearch {
  private readonly pd: Float64Array;
  private readonly pred: Int32Array;
  private readonly hpos: Int32Array;
  private readonly hcol: Int32Array;
  private readonly hkey: Float64Array;
  private readonly touched: Int32Array;
  private readonly settled: Int32Array;
  private readonly settledDist: Float64Array;

  constructor(
    private readonly rows: RowsView,
    nCols: number,
    private readonly delta: Float64Array | null,
    private readonly u: Float64Array,
    private readonly v: Float64Array,
    private readonly rowToCol: Int32Array,
    private readonly colToRow: Int32Array,
  ) {
    const n = nCols;
    this.pd = new Float64Array(2 * n);
    for (let j = 0; j < n; j++) {
      this.pd[2 * j] = v[j]!;
      this.pd[2 * j + 1] = Infinity;
    }
    this.pred = new Int32Array(n);
    this.hpos = new Int32Array(n);
    this.hcol = new Int32Array(n);
    this.hkey = new Float64Array(n);
    this.touched = new Int32Array(n);
    this.settled = new Int32Array(n);
    this.settledDist = new Float64Array(n);
  }

  /** Writes the column prices back to `v`. */
  flush(): void {
    const { pd, v } = this;
    for (let j = 0; j < v.length; j++) v[j] = pd[2 * j]!;
  }

  /**
   * Augments from free row r0 (or settles it unmatched); returns the pairs scanned.
   * A free column has nowhere to go on, so it is never a heap entry: it is a terminal
   * candidate as soon as it is reached, and the search stops once no heap entry can
   * beat the best terminal (a free column or a private one).
   */
  run(r0: number): number {
    const { rowStart, rowEnd, colIdx, cost } = this.rows;
    const { delta, u, rowToCol, colToRow, pd, pred, hpos, hcol, hkey, touched, settled, settledDist } = this;
    let nTouched = 0;
    let nSettled = 0;
    let hsize = 0;
    let scanned = 0;
    let bestPriv = Infinity;
    let privRow = NONE;
    let bestSink = Infinity;
    let sink = NONE;
    let i = r0;
    let base = 0;
    let ui = 0;
    let j = 0;
    let x = 0;
    let p = 0;
    // no column reached at or beyond this can still lead to a better terminal
    let bound = Infinity;
    for (;;) {
      if (delta !== null) {
        x = base + delta[i]! - ui;
        if (x < bestPriv) {
          bestPriv = x;
          privRow = i;
          if (x < bound) bound = x;
        }
      }
      const start = rowStart[i]!;
      const end = rowEnd[i]!;
      const off = base - ui;
      for (let e = start; e < end; e++) {
        j = colIdx[e]!;
        const dj = pd[2 * j + 1]!;
        x = off + cost[e]! - pd[2 * j]!;
        if (!(x < dj) || x >= bound) continue; // also skips settled columns (dj = -Infinity)
        if (dj === Infinity) touched[nTouched++] = j;
        pd[2 * j + 1] = x;
        pred[j] = i;
        if (colToRow[j] === NONE) {
          if (x < bestSink) {
            bestSink = x;
            sink = j;
            if (x < bound) bound = x;
          }
          continue;
        }
        p = dj === Infinity ? hsize++ : hpos[j]!;
        heapUp(hkey, hcol, hpos, p, x, j);
      }
      scanned += end - start;
      if (hsize === 0 || hkey[0]! >= bound) break;
      j = hcol[0]!;
      const dmin = hkey[0]!;
      heapPopRoot(hkey, hcol, hpos, hsize--);
      pd[2 * j + 1] = -Infinity;
      settledDist[nSettled] = dmin;
      settled[nSettled++] = j;
      i = colToRow[j]!;
      base = dmin;
      ui = u[i]!;
    }
    const toColumn = sink !== NONE && bestSink <= bestPriv;
    const minVal = toColumn ? bestSink : bestPriv;
    if (minVal === Infinity) {
      this.reset(nTouched);
      throw infeasibleRow(r0);
    }

    // dual update on everything settled closer than the terminal
    for (let t = 0; t < nSettled; t++) {
      const d = minVal - settledDist[t]!;
      if (!(d > 0)) continue;
      j = settled[t]!;
      pd[2 * j] = pd[2 * j]! - d;
      const ri = colToRow[j]!;
      u[ri] = u[ri]! + d;
    }
    u[r0] = minVal;

    shiftAlongPath(r0, toColumn ? sink : NONE, privRow, pred, delta, u, rowToCol, colToRow);
    this.reset(nTouched);
    return scanned;
  }

  private reset(nTouched: number): void {
    const { pd, touched } = this;
    for (let t = 0; t < nTouched; t++) pd[2 * touched[t]! + 1] = Infinity;
  }
}

