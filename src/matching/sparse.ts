import { pairflowError } from '../errors.js';
import type { SolveOptions, SolveResult, SparseInstance, WarmStart } from './types.js';
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
  validateSparse(inst);
  validateWarm(opts.warm, inst.nRows, inst.nCols);
  if (opts.presolve === 'auction') {
    // Prices from the auction, then the exact solver warm from them (auction.ts).
    const a = auctionPrices(inst, opts.warm?.colPrices !== undefined ? { colPrices: opts.warm.colPrices } : {});
    return solveSparseFull(inst, { ...opts, warm: { rowToCol: a.rowToCol, colPrices: a.colPrices } }, now, t0);
  }
  if (opts.warm !== undefined && opts.warmWhen !== 'always' && !warmPays(inst, opts.warm)) {
    const { warm: _ignored, ...cold } = opts;
    return solveSparseFull(inst, cold, now, t0);
  }
  return solveSparseFull(inst, opts, now, t0);
}

/**
 * Below this many pairs a warm hint is ignored: a cold solve of such a pool takes a
 * few microseconds, and the warm start's own fixed work (its passes over the kept
 * rows, the reverse searches' arrays and pairs by column) costs as much as it saves.
 * Measured on the engine's `commit: "due"` solves of a small generated market (scale
 * 0.03), each instance solved warm and cold in one process after JIT warm-up: warm
 * took 1.2–2× the cold time below 128 pairs, 0.87× at 128–255, 0.3–0.5× above.
 */
const WARM_MIN_PAIRS = 128;
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
  return solveSparseFull(inst, opts, now, t0);
}

function solveSparseFull(inst: SparseInstance, opts: SolveOptions, now: () => number, t0: number): SolveResult {
  const warm = opts.warm;

  const { nRows, nCols, rowPtr, colIdx, cost } = inst;
  const delta = inst.unmatchedCost ?? null;

  const v = new Float64Array(nCols);
  const u = new Float64Array(nRows);
  const rowToCol = new Int32Array(nRows).fill(NONE);
  const colToRow = new Int32Array(nCols).fill(NONE);
  let scannedPairs = 0;
  let augmentations = 0;
  let usedWarm = false;

  let e = 0;
  let end = 0;
  let j = 0;
  let r = 0;
  let x = 0;

  // ---- warm start (warm.ts): kept pairs, repriced free columns, reverse searches
  let warmPairsKept = 0;
  let reverseSearches = 0;
  if (warm !== undefined && warm.rowToCol !== undefined) {
    const w = applyWarmStart(inst, delta, warm, u, v, rowToCol, colToRow);
    usedWarm = w.used;
    warmPairsKept = w.pairsKept;
    scannedPairs += w.scanned;
  }

  // ---- a perfect assignment (square, every row must be matched) ends with every
  // column matched, so its prices need not stay ≤ 0 on the way: they are shifted at
  // the end. That admits the Jonker–Volgenant start: column reduction (each column
  // priced at its cheapest pair, given to that row if still free), then reduction
  // transfer (a row holding one column moves its slack onto that column's price).
  const perfect = nRows === nCols && nRows > 0 && !usedWarm && mustMatchAll(delta);
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
  // After a warm start one pass suffices, and it takes only what is free (measured:
  // displacing near the previous optimum costs more than the searches it saves).
  const reduced = reduceRows(freeAtStart, nFreeAtStart, u, v, rowToCol, colToRow, {
    passes: usedWarm ? 1 : 2,
    noDisplace: usedWarm,
    cheapestTwo: (row, two) => cheapestTwoSparse(rowsOf(inst), delta, v, row, two),
    infeasible: infeasibleRow,
  });
  scannedPairs += reduced.scanned;
  const { freeRows, nFree } = reduced;

  // ---- shortest augmenting paths (Dijkstra on reduced costs, indexed binary heap,
  // lazy reset of only what each search touched).
  const searchedRows = nFree;

  if (nFree > 0) {
    const search = new SparseSearch(rowsOf(inst), nCols, delta, u, v, rowToCol, colToRow);
    try {
      for (let f = 0; f < nFree; f++) {
        augmentations++;
        scannedPairs += search.run(freeRows[f]!);
      }
    } finally {
      search.flush();
    }
  }

  // ---- warm only: free columns left below 0 (warm.ts, step 3)
  if (usedWarm) {
    const rev = releaseFreeColumns(inst, u, v, rowToCol, colToRow);
    reverseSearches += rev.searches;
    augmentations += rev.searches;
    scannedPairs += rev.scanned;
  }
  if (perfect) shiftToNonPositive(v);
  // exact row duals from the final prices: matched pairs tight, unmatched rows at δ
  const primal = new Sum();
  for (r = 0; r < nRows; r++) {
    j = rowToCol[r]!;
    if (j === NONE) {
      u[r] = delta![r]!;
      primal.add(u[r]!);
      continue;
    }
    end = rowPtr[r + 1]!;
    for (e = rowPtr[r]!; e < end; e++) {
      if (colIdx[e] === j) {
        u[r] = cost[e]! - v[j]!;
        primal.add(cost[e]!);
        break;
      }
    }
  }
  return finishResult(primal.value, rowToCol, colToRow, u, v, {
    augmentations,
    scannedPairs,
    ms: now() - t0,
    warm: usedWarm,
    warmPairsKept,
    reverseSearches,
    searchedRows,
  });
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

/**
 * One shortest-augmenting-path search at a time, reusing its arrays: every search
 * resets only the columns it touched, so its cost follows what it reaches, not nCols.
 * Memory traffic is what limits a search on a large sparse instance, so each
 * column's price and tentative distance sit side by side (`pd[2j]`, `pd[2j + 1]`;
 * the distance is +Infinity until reached and -Infinity once settled), and the heap
 * keeps each key beside its column.
 */
export class SparseSearch {
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

