/**
 * The pricing pass of the hindsight optimum (SPEC §4): under the restricted solves'
 * prices, the reduced cost `c − u_d − v_s` of every allowed pair that is not a
 * candidate yet; the most negative few of each row become candidates, and so does
 * each column's most negative pair where its row did not take it. An exhaustive pass
 * that finds none proves the prices feasible for the LP over all allowed pairs. Pure.
 *
 * Why columns too: while prices are far from the end, many rows price out against the
 * same few cheap columns and each adds those; a column just beyond them, which the
 * next prices will want, is in no row's few and waits a round. Its own most negative
 * pair brings it in at once (a column whose most negative pair its row took adds
 * nothing more: it is in already). Measured on a busy district's day (`gen --scale
 * 4`, 114 M allowed pairs, 8 first candidates and 4 a row, one thread, alternating
 * runs): 16 rounds by rows alone, 12 with one a column, 11 with two; pricing passes
 * and re-solves 9.9–10.0 s, 8.2–8.3 s and 8.6–8.8 s (at scale 8: 21 rounds by rows
 * alone, 15 with one a column). Which pairs are added changes the work, never the
 * optimum: only a pass that finds no violator ends the rounds.
 *
 * Incremental: a row whose last pricing found it clean (no violator left out) needs
 * no new pass while its price and the prices of all its columns stand still, as its
 * reduced costs are then the same numbers. Columns are in arrival order, so a row's
 * columns lie in a short index range, and "did a column in the range move?" is one
 * lookup in a prefix count of the columns that moved.
 *
 * Bounded: prices move every round, but a row priced clean knows how far its pairs
 * stood from pricing out (`floor`: the least `lo − v` over its pairs left out, lo
 * being a pair's cost code's lower end, or a closer lower bound of its cost where
 * the pass computed one). Its pairs' `lo − v` can fall only as far as
 * its columns' prices rose since, which the pass bounds by the largest rise over
 * blocks of columns covering the row's range (a sparse table over the blocks, one
 * lookup a row), summed over the passes since the row was priced. While the floor
 * less that sum stays at or above `u + slack`, no pair of the row can price out, and
 * the row is skipped. A pass that finds nothing after skipping so is not the proof:
 * the caller runs one `exhaustive` pass, which skips only rows whose numbers are
 * all the same as when they were last read.
 *
 * In turns (`turns` > 1): while prices are far off (the last pass found more than
 * {@link TURNS_ABOVE} violators a row, counting the rows it did not read as it read
 * the others, and on the first pass), a pass reads one in `turns` of the rows left
 * with violators, row r when r ≡ pass (mod turns), so the next solve moves the prices
 * before the rest are read again. Partial pricing, common practice in the simplex
 * method. Such rows are read again anyway: many violators, a few added a pass. Rows
 * priced clean are read as ever, and the exhaustive pass reads every row. Measured on
 * a day at scale 4 (`gen --scale 4`, its four districts one after the other on one
 * thread, alternating runs): pricing and re-solves by one row in 1, 3, 4 and 6 took
 * 29.5–30.8 s, 27.8–28.3 s, 27.5–28.3 s and 27.3–28.0 s in all, the busiest district
 * 12 rounds against 14, 16 and 16 (more rounds of fewer pairs each), and at scale 1
 * 2.64–2.65 s by all rows against 2.53–2.57 s by one in 3. Once the re-solves raised the columns
 * their rows left (matching/incremental.ts), the rounds cost less and one in 6 came
 * out ahead at every density (the busiest district alone, alternating runs, pricing
 * and re-solves): at scale 4 6.07–6.21 s against 6.43–6.83 s by one in 3 (16 rounds
 * against 15; one in 8: 5.67–5.80 s, 17 rounds), at scale 2 1.45–1.56 s against
 * 1.60–1.73 s, at scale 1 0.47–0.48 s against 0.52–0.55 s (one in 8: 0.49–0.50 s).
 * The same optimum: which pairs are added changes the work, never the result.
 *
 * On two threads: while a core is free, a pass's rows are read by this thread and a
 * helper thread together, chunk by chunk (pricing-split.ts); each row is read by one
 * of them, and their pairs and column picks are put together in row order, so the
 * pass finds what one thread would. The state kept per row and per column between
 * passes ({@link PricerTables}) is what the two share.
 */

import { pairflowError } from '../errors.js';
import { markCandidate } from './candidates.js';
import { CODE_TOP, MARK, QUICK_COST_SLACK, type CompactGraph, type PairCost } from './graph.js';
import { ScanKernel, type KernelColumns } from './wasm/pricing-scan.js';

// A non-candidate pair prices out below this (relative to its cost): well under the
// certificate's 1e-9 yet above the rounding of duals built from sums of costs.
const PRICE_TOL = 1e-11;
/**
 * Relative head-room over a code's cost interval: the interval's ends are computed
 * in floating point from the code, and a code from a cost within 2^-24 + 1e-12 of
 * the exact one (the graph's fast distance, rounded).
 */
const BOUND_SLACK = 2 ** -22;

/**
 * The pairs one pass adds: each row's, rows ascending (each row's in the order found),
 * then each column's most negative where its row did not take it, columns ascending.
 */
export interface PricedOut {
  /** Pairs that price out, added or not. */
  readonly violators: number;
  readonly n: number;
  readonly rows: Int32Array;
  readonly cols: Int32Array;
  readonly costs: Float64Array;
}

/**
 * The state a pricer keeps between passes, per row and per column: what a split pass's
 * two threads both read and write (in SharedArrayBuffers then, see PricingSplit).
 */
export interface PricerTables {
  /** Per row: 1 when its last pricing left no violator out. */
  readonly rowClean: Uint8Array;
  /** Per row: its price when last priced. */
  readonly pricedU: Float64Array;
  /** Per row: the least `lo − v` over its pairs left out when last priced (+Infinity when none; lo the closest known lower bound of the cost). */
  readonly floor: Float64Array;
  /** Per row: how far its columns' prices may have risen since it was last priced. */
  readonly risen: Float64Array;
  /** Per row: 1 when skipped by its bound since it was last priced (its numbers are not the priced ones). */
  readonly stale: Uint8Array;
  /** Per column: its price at the last pass. */
  readonly pricedV: Float64Array;
  /** Length nCols + 1: how many columns before each moved at the last pass. */
  readonly movedBefore: Int32Array;
  /** Blocks of {@link BLOCK} columns; level k of the table holds the largest rise over 2^k blocks from each. */
  readonly rise: Float64Array;
}

/** Per column, its most negative violators of one pass and one thread, `addPerColumn` slots each, ascending. */
export interface ColumnPicks {
  /** Reduced cost of each pick. */
  readonly red: Float64Array;
  /** Its pair. */
  readonly edge: Int32Array;
  /** Its row. */
  readonly row: Int32Array;
  /** Its exact cost (NaN: not computed). */
  readonly cost: Float64Array;
  /** Picks per column. */
  readonly count: Int32Array;
}

/** Row-scan counters of one pass and one thread. */
export interface ScanCounts {
  violators: number;
  rechecks: number;
  exactRechecks: number;
  rowsPriced: number;
  /** Of those, rows read by the WebAssembly kernel. */
  kernelRows: number;
  /** Pairs its rows add (the first of the scanner's `rows` / `cols` / `costs`). */
  n: number;
}

/** What the rows of one pass are read with (the same for both threads of a split pass). */
export interface ScanParams {
  readonly exhaustive: boolean;
  readonly maxAbsV: number;
  readonly inTurns: boolean;
  readonly turn: number;
}

/**
 * A second thread for the row scan of a pass (pricing-split.ts): the two take chunks
 * of {@link SCAN_CHUNK} rows as they go, over the same graph and tables.
 */
export interface PricingSplit {
  /** Whether the other thread has started on this pass (false: this thread reads every row). */
  start(u: Float64Array, v: Float64Array, params: ScanParams): boolean;
  /** The next chunk for this thread (a number past the last chunk once all are taken). */
  claim(): number;
  /** Waits for the other thread: its counts, its rows' pairs (rows ascending) and its column picks. */
  finish(): { counts: ScanCounts; rows: Int32Array; cols: Int32Array; costs: Float64Array; picks: ColumnPicks };
}

const f64Of = (n: number, shared: boolean): Float64Array => (shared ? new Float64Array(new SharedArrayBuffer(8 * n)) : new Float64Array(n));
const i32Of = (n: number, shared: boolean): Int32Array => (shared ? new Int32Array(new SharedArrayBuffer(4 * n)) : new Int32Array(n));
const u8Of = (n: number, shared: boolean): Uint8Array => (shared ? new Uint8Array(new SharedArrayBuffer(n)) : new Uint8Array(n));

/** Fresh {@link PricerTables} for a graph of nRows × nCols, in SharedArrayBuffers when `shared`. */
export function pricerTables(nRows: number, nCols: number, shared = false): PricerTables {
  const nBlocks = Math.ceil(nCols / BLOCK);
  return {
    rowClean: u8Of(nRows, shared),
    pricedU: f64Of(nRows, shared),
    floor: f64Of(nRows, shared).fill(Infinity),
    risen: f64Of(nRows, shared),
    stale: u8Of(nRows, shared),
    pricedV: f64Of(nCols, shared),
    movedBefore: i32Of(nCols + 1, shared),
    rise: f64Of(nBlocks * levels(nBlocks), shared),
  };
}

/** Fresh {@link ColumnPicks} for nCols columns, `perCol` slots each. */
export function columnPicks(nCols: number, perCol: number, shared = false): ColumnPicks {
  const slots = nCols * perCol;
  return {
    red: f64Of(slots, shared),
    edge: i32Of(slots, shared),
    row: i32Of(slots, shared),
    cost: f64Of(slots, shared),
    count: i32Of(perCol > 0 ? nCols : 0, shared),
  };
}

/**
 * {@link ColumnPicks} whose counts and reduced costs are a kernel slot's (graph.ts
 * GraphStore.columns), where the pricing kernel reads them; the rest in
 * SharedArrayBuffers when `shared`.
 */
export function kernelPicks(slot: KernelColumns, nCols: number, perCol: number, shared = false): ColumnPicks {
  const slots = nCols * perCol;
  return { red: slot.red, edge: i32Of(slots, shared), row: i32Of(slots, shared), cost: f64Of(slots, shared), count: slot.count };
}

/** Where a pricer's rows put the pairs they add: growable, or fixed (a helper thread's, shared). */
export interface RowAdds {
  rows: Int32Array;
  cols: Int32Array;
  costs: Float64Array;
  /** Whether the arrays may be replaced by larger ones (not when another thread reads them). */
  readonly growable: boolean;
}

/** Fresh {@link RowAdds}: `capacity` pairs, growable unless shared. */
export function rowAdds(capacity: number, shared = false): RowAdds {
  return { rows: i32Of(capacity, shared), cols: i32Of(capacity, shared), costs: f64Of(capacity, shared), growable: !shared };
}

export class Pricer {
  private readonly addRed: Float64Array;
  private readonly addEdge: Int32Array;
  private readonly addCol: Int32Array;
  private readonly addCost: Float64Array;
  private readonly nBlocks: number;
  private passes = 0;
  /** Violators the last pass found, scaled to all rows when it read them in turns (before any pass: as many as can be). */
  private lastViolators = Infinity;
  /** A second thread for the row scans, when one is attached. */
  private split: PricingSplit | null = null;
  /** Row pricings over all passes (a clean row whose prices stood still is skipped). */
  rowsPriced = 0;
  /** Decisions too close to call on a pair's code, settled on the build's cost. */
  rechecks = 0;
  /** Of those, decisions too close to call on the build's cost too, settled on the exact cost. */
  exactRechecks = 0;
  /** Passes whose rows were read on two threads. */
  splitPasses = 0;
  /** Row pricings read by the WebAssembly kernel (on either thread). */
  kernelRows = 0;
  /** The tight loop in WebAssembly (null: in JavaScript). */
  private readonly kernel: ScanKernel | null;
  /** Byte offsets of the graph's codes and columns in the kernel's memory. */
  private readonly codesAt: number;
  private readonly colsAt: number;

  /**
   * @param colLo per row, its lowest column (see FirstCandidates)
   * @param colHi per row, its highest column
   * @param addPerRow pairs added per row and pass: its most negative reduced costs
   * @param P the unmatched cost: a violator costs less (its c < u + v ≤ P)
   * @param addPerColumn the most negative reduced costs kept per column and pass;
   *   those their rows did not take are added besides
   * @param quick a pair's cost as the graph build computed it (graph.ts
   *   quickPairCostOf), for decisions its code cannot make
   * @param turns read the rows left with violators in this many turns while they
   *   are many (see the module comment); 1 reads them all in every pass
   * @param tables the state kept between passes (shared with a helper thread's pricer)
   * @param picks this pricer's column picks (a helper thread's, shared)
   * @param adds where this pricer's rows put their pairs (a helper thread's, shared)
   * @param columns a kernel slot over the memory that holds the graph's pairs (graph.ts
   *   GraphStore.columns; `picks` then from {@link kernelPicks} over it): the rows'
   *   tight loop runs in WebAssembly, with the same results (null: in JavaScript)
   */
  constructor(
    private readonly g: CompactGraph,
    private readonly exact: PairCost,
    private readonly colLo: Int32Array,
    private readonly colHi: Int32Array,
    private readonly addPerRow: number,
    private readonly P: number,
    private readonly addPerColumn = 0,
    private readonly quick: PairCost = exact,
    private readonly turns = 1,
    readonly tables: PricerTables = pricerTables(g.nRows, g.nCols),
    readonly picks: ColumnPicks = columnPicks(g.nCols, addPerColumn),
    readonly adds: RowAdds = rowAdds(1024),
    columns: KernelColumns | null = null,
  ) {
    if (!(Number.isInteger(turns) && turns >= 1)) throw pairflowError('PAIRFLOW_ERR_INTERNAL_BUG', { detail: `pricing turns must be a whole number ≥ 1, got ${turns}` });
    if (columns !== null && (picks.count !== columns.count || picks.red !== columns.red || columns.duals.length !== g.nCols)) {
      throw pairflowError('PAIRFLOW_ERR_INTERNAL_BUG', { detail: 'pricing: a kernel slot must hold the pricer\'s column picks and one price a column' });
    }
    this.kernel = columns === null ? null : ScanKernel.over(columns);
    this.codesAt = g.codes.byteOffset;
    this.colsAt = g.cols.byteOffset;
    this.addRed = new Float64Array(addPerRow);
    this.addEdge = new Int32Array(addPerRow);
    this.addCol = new Int32Array(addPerRow);
    this.addCost = new Float64Array(addPerRow);
    this.nBlocks = Math.ceil(g.nCols / BLOCK);
  }

  /**
   * Reads the rows of later passes on two threads where `split` says so (null: on
   * this one alone). Either way a pass finds the same pairs in the same order.
   */
  attach(split: PricingSplit | null): void {
    this.split = split;
  }

  /** Whether the rows' tight loop runs in WebAssembly. */
  get inKernel(): boolean {
    return this.kernel !== null;
  }

  /**
   * Readies this thread's reading of a pass's rows under column prices `colDuals`
   * (the kernel reads a copy of them): {@link pass} does it, and so must a helper
   * thread before its {@link scanChunks}.
   */
  beginScan(colDuals: Float64Array): void {
    this.kernel?.loadDuals(colDuals);
  }

  /**
   * One pass under prices (u per graph row, v per column); the pairs it returns are
   * marked candidates in the graph. The arrays returned are reused by the next pass.
   * Only an `exhaustive` pass that finds no violator proves the prices feasible for
   * every pair (see the module comment).
   */
  pass(rowDuals: Float64Array, colDuals: Float64Array, exhaustive = false): PricedOut {
    const { g, exact, P, addPerColumn: perCol, picks } = this;
    const { nRows, nCols, rowDemand, codes } = g;
    const first = this.passes++ === 0;
    const maxAbsV = this.prepareColumns(colDuals, first);
    const { turns } = this;
    const inTurns = turns > 1 && !exhaustive && this.lastViolators > TURNS_ABOVE * nRows;
    const params: ScanParams = { exhaustive, maxAbsV, inTurns, turn: (this.passes - 1) % turns };
    picks.count.fill(0);
    this.beginScan(colDuals);
    const split = this.split !== null && this.split.start(rowDuals, colDuals, params);
    const counts = split ? this.scanChunks(() => this.split!.claim(), rowDuals, colDuals, params) : this.scan(0, nRows, rowDuals, colDuals, params);
    let nNew = counts.n;
    if (split) {
      // Put together as one thread reading every row in order would have: the pairs
      // by row, and each column's most negative picks of both, the earlier row's
      // first on a tie (a column has one pair a row).
      const other = this.split!.finish();
      this.splitPasses++;
      counts.violators += other.counts.violators;
      counts.rechecks += other.counts.rechecks;
      counts.exactRechecks += other.counts.exactRechecks;
      counts.rowsPriced += other.counts.rowsPriced;
      counts.kernelRows += other.counts.kernelRows;
      nNew = this.mergeAdds(nNew, other.rows, other.cols, other.costs, other.counts.n);
      if (perCol > 0) mergePicks(picks, other.picks, nCols, perCol);
    }
    // Then each column's own, where its row did not take it (a pair its row added is
    // marked by now). Such a row was not clean: it left out a violator.
    const { edge: colEdge, row: colRow, cost: colCost, count: colCount } = picks;
    for (let col = 0; perCol > 0 && col < nCols; col++) {
      const n = colCount[col]!;
      for (let q = col * perCol; q < col * perCol + n; q++) {
        const e = colEdge[q]!;
        if (codes[e]! === MARK) continue;
        const r = colRow[q]!;
        const c = Number.isNaN(colCost[q]!) ? exact(rowDemand[r]!, col) : colCost[q]!;
        if (!(c < P)) throw pairflowError('PAIRFLOW_ERR_INTERNAL_BUG', { detail: `hindsight: pair of cost ${c} ≥ P priced out` });
        markCandidate(codes, e);
        if (nNew + 1 > this.adds.rows.length) this.grow(nNew + 1);
        this.adds.rows[nNew] = r;
        this.adds.cols[nNew] = col;
        this.adds.costs[nNew] = c;
        nNew++;
      }
    }
    this.rechecks += counts.rechecks;
    this.exactRechecks += counts.exactRechecks;
    this.rowsPriced += counts.rowsPriced;
    this.kernelRows += counts.kernelRows;
    this.lastViolators = inTurns ? turns * counts.violators : counts.violators;
    return { violators: counts.violators, n: nNew, rows: this.adds.rows, cols: this.adds.cols, costs: this.adds.costs };
  }

  /**
   * Columns whose price moved since the previous pass (every one, the first time),
   * and the largest rise per block of columns; returns the largest |v|, for a slack
   * per row that holds for every pair of it.
   */
  private prepareColumns(colDuals: Float64Array, first: boolean): number {
    const { pricedV, movedBefore, rise } = this.tables;
    const { nBlocks } = this;
    const nCols = this.g.nCols;
    rise.fill(0, 0, nBlocks);
    for (let c = 0; c < nCols; c++) {
      const v = colDuals[c]!;
      const moved = first || v !== pricedV[c] ? 1 : 0;
      movedBefore[c + 1] = movedBefore[c]! + moved;
      const up = v - pricedV[c]!;
      if (!first && up > rise[c >>> BLOCK_BITS]!) rise[c >>> BLOCK_BITS] = up;
      pricedV[c] = v;
    }
    buildLevels(rise, nBlocks);
    let maxAbsV = 0;
    for (let c = 0; c < nCols; c++) maxAbsV = Math.max(maxAbsV, Math.abs(colDuals[c]!));
    return maxAbsV;
  }

  /**
   * Reads rows [r0, r1) of a pass whose columns are prepared: each row's pairs that
   * price out, its most negative added (to this pricer's `adds`, from the first) and
   * marked, and each column's most negative in this pricer's `picks` (cleared by the
   * caller). What the pass of one thread over every row does, for a share of them.
   */
  scan(r0: number, r1: number, rowDuals: Float64Array, colDuals: Float64Array, params: ScanParams, added = 0): ScanCounts {
    const { g, exact, quick, colLo, colHi, addPerRow, P, addRed, addEdge, addCol, addCost, nBlocks } = this;
    const { rowClean, pricedU, movedBefore, floor, risen, stale, rise } = this.tables;
    const { addPerColumn: perCol } = this;
    const { red: colRed, edge: colEdge, row: colRow, cost: colCost, count: colCount } = this.picks;
    const { rowPtr, rowBase, cols, codes, wide, step, rowDemand } = g;
    const { exhaustive, maxAbsV, inTurns, turn } = params;
    const { turns, kernel, codesAt, colsAt } = this;
    let violators = 0;
    let nNew = added;
    let rechecks = 0;
    let exactRechecks = 0;
    let rowsPriced = 0;
    let kernelRows = 0;
    for (let r = r0; r < r1; r++) {
      const u = rowDuals[r]!;
      const lo0 = colLo[r]!;
      const hi0 = colHi[r]!;
      // (A row left with violators is never skipped by its bounds, so one skipped here
      // needs no stale mark: it is read in full at its turn, or by the exhaustive pass.)
      if (inTurns && rowClean[r] === 0 && r % turns !== turn) continue;
      if (rowClean[r] === 1) {
        if (hi0 >= lo0) risen[r] = risen[r]! + maxOver(rise, nBlocks, lo0 >>> BLOCK_BITS, hi0 >>> BLOCK_BITS);
        // (Prices unchanged since the previous pass mean unchanged since the row was
        // priced only if the row was not skipped by its bound in between.)
        if (stale[r] === 0 && u === pricedU[r] && (hi0 < lo0 || movedBefore[hi0 + 1] === movedBefore[lo0])) continue;
        if (!exhaustive && floor[r]! - risen[r]! >= u + BOUND_SLACK * (P + step + Math.abs(u) + maxAbsV)) {
          stale[r] = 1;
          continue;
        }
      }
      pricedU[r] = u;
      risen[r] = 0;
      stale[r] = 0;
      rowsPriced++;
      const d = rowDemand[r]!;
      const base = rowBase[r]!;
      const wideCols = wide.size === 0 ? undefined : wide.get(r);
      if (kernel !== null && wideCols === undefined) kernelRows++;
      const start = rowPtr[r]!;
      const end = rowPtr[r + 1]!;
      // The code says the pair's cost lies in [lo, lo + step), lo = code · step: it
      // cannot price out when lo − v reaches u plus a slack for the rounding of lo
      // and of the reduced cost (a bound for every pair of the row: lo ≤ P).
      const slack = BOUND_SLACK * (P + step + Math.abs(u) + maxAbsV);
      const bar = u + slack;
      // Below this a violator's reduced cost is not near zero (the full handling's
      // test, for the largest lo a code below the top one has, with room for rounding).
      const deep = -(step + slack + 2 * PRICE_TOL * (1 + P + step)) * (1 + 1e-6);
      let nb = 0;
      let rowViolators = 0;
      // The least lo − v of the pairs left out (violators are all added when the row ends clean).
      let least = Infinity;
      let e = start;
      for (;;) {
        if (wideCols === undefined && kernel !== null) {
          // The loop below, in WebAssembly (wasm/pricing-scan.wat): the same tests in
          // the same order, so the same pairs stop it and the same floor comes out.
          e = kernel.clear(codesAt, colsAt, perCol, e, end, base, CODE_TOP, step, u, bar, deep, nb < addPerRow ? Infinity : addRed[addPerRow - 1]!, least);
          least = kernel.least();
          const counted = kernel.violators();
          violators += counted;
          rowViolators += counted;
        } else if (wideCols === undefined) {
          // Most pairs stand clear of pricing out (or are candidates, code ≥
          // CODE_TOP) and only lower the row's floor: a tight loop for them, without
          // the wide-row lookup; a pair that does not goes through the full handling
          // below, alone, and the tight loop resumes after it (measured on a busy
          // district's exhaustive pass, 114 M pairs: 2.3–2.6 ns a pair against
          // 3.0–3.4 with the full handling for every pair).
          for (; e < end; e++) {
            const code = codes[e]!;
            if (code >= CODE_TOP) continue;
            const col = base + cols[e]!;
            const lo = code * step;
            const v = colDuals[col]!;
            const t = lo - v;
            if (t >= bar) {
              if (t < least) least = t;
              continue;
            }
            // A violator. Only one the full handling must see leaves the loop: one
            // that may be near zero, or that enters its column's or its row's few
            // (the same numbers as there, so the same decisions); the rest, most of
            // the early passes' tens of millions, are only counted.
            const red = lo - u - v;
            if (red >= deep) break;
            if (perCol > 0 && (colCount[col]! < perCol || red < colRed[col * perCol + perCol - 1]!)) break;
            if (nb < addPerRow || red < addRed[addPerRow - 1]!) break;
            violators++;
            rowViolators++;
          }
        }
        if (e === end) break;
        // One pair (a wide row: all its pairs) through the full handling.
        const stop = wideCols === undefined ? e + 1 : end;
        for (; e < stop; e++) {
          // Candidates (MARK, above every code) and pairs of P or more (the top
          // code) never price out.
          const code = codes[e]!;
          if (code >= CODE_TOP) continue;
          const col = wideCols === undefined ? base + cols[e]! : wideCols[e - start]!;
          const v = colDuals[col]!;
          const lo = code * step;
          if (lo - v >= bar) {
            if (lo - v < least) least = lo - v;
            continue;
          }
          // Within a step of zero the build's cost decides, and the exact cost where
          // that is within its own error of the line; the reduced cost kept for
          // ranking may be the interval's lower end or the build's: any choice among
          // true violators is sound (an added pair's exact cost is found below).
          let red = lo - u - v;
          let c = NaN;
          if (red + step >= -slack - 2 * PRICE_TOL * (1 + lo + step)) {
            rechecks++;
            const cq = quick(d, col);
            const rq = cq - u - v;
            const line = -PRICE_TOL * (1 + Math.abs(cq));
            const err = QUICK_COST_SLACK * (1 + cq + Math.abs(u) + Math.abs(v));
            if (rq >= line + err) {
              // Its cost is known closer than its code says: the row's floor keeps
              // the closer bound (these pairs are the nearest to pricing out, so
              // they set the floor most often).
              const near = Math.max(lo, cq - err) - v;
              if (near < least) least = near;
              continue;
            }
            red = rq;
            if (rq >= line - err) {
              exactRechecks++;
              c = exact(d, col);
              red = c - u - v;
              if (red >= -PRICE_TOL * (1 + Math.abs(c))) {
                if (c - v < least) least = c - v;
                continue;
              }
            }
          }
          violators++;
          rowViolators++;
          if (perCol > 0) {
            // The column's most negative so far (a few slots, kept sorted).
            const at = col * perCol;
            const k = colCount[col]!;
            if (k < perCol || red < colRed[at + perCol - 1]!) {
              let p = k < perCol ? k : perCol - 1;
              if (k < perCol) colCount[col] = k + 1;
              while (p > 0 && colRed[at + p - 1]! > red) {
                colRed[at + p] = colRed[at + p - 1]!;
                colEdge[at + p] = colEdge[at + p - 1]!;
                colRow[at + p] = colRow[at + p - 1]!;
                colCost[at + p] = colCost[at + p - 1]!;
                p--;
              }
              colRed[at + p] = red;
              colEdge[at + p] = e;
              colRow[at + p] = r;
              colCost[at + p] = c;
            }
          }
          // Keep the addPerRow most negative: adding every violator at once floods
          // the restricted solve with pairs that the next prices no longer want.
          if (nb === addPerRow && red >= addRed[nb - 1]!) continue;
          let p = nb < addPerRow ? nb++ : addPerRow - 1;
          while (p > 0 && addRed[p - 1]! > red) {
            addRed[p] = addRed[p - 1]!;
            addEdge[p] = addEdge[p - 1]!;
            addCol[p] = addCol[p - 1]!;
            addCost[p] = addCost[p - 1]!;
            p--;
          }
          addRed[p] = red;
          addEdge[p] = e;
          addCol[p] = col;
          addCost[p] = c;
        }
      }
      // Clean when every violator found is added now.
      rowClean[r] = rowViolators > nb ? 0 : 1;
      floor[r] = least;
      if (nb === 0) continue;
      if (nNew + nb > this.adds.rows.length) this.grow(nNew + nb);
      for (let q = 0; q < nb; q++) {
        const col = addCol[q]!;
        const c = Number.isNaN(addCost[q]!) ? exact(d, col) : addCost[q]!;
        // A violator has c < u + v ≤ P; anything else is a bug in the prices.
        if (!(c < P)) throw pairflowError('PAIRFLOW_ERR_INTERNAL_BUG', { detail: `hindsight: pair of cost ${c} ≥ P priced out` });
        markCandidate(codes, addEdge[q]!);
        this.adds.rows[nNew] = r;
        this.adds.cols[nNew] = col;
        this.adds.costs[nNew] = c;
        nNew++;
      }
    }
    return { violators, rechecks, exactRechecks, rowsPriced, kernelRows, n: nNew };
  }

  private mergeRows = new Int32Array(0);
  private mergeCols = new Int32Array(0);
  private mergeCosts = new Float64Array(0);

  /** Merges another thread's `m` added pairs (rows ascending) with this pricer's first `n` by row; returns the count. */
  private mergeAdds(n: number, rows: Int32Array, cols: Int32Array, costs: Float64Array, m: number): number {
    if (m === 0) return n;
    if (this.mergeRows.length < n) {
      const size = Math.max(n, 2 * this.mergeRows.length);
      this.mergeRows = new Int32Array(size);
      this.mergeCols = new Int32Array(size);
      this.mergeCosts = new Float64Array(size);
    }
    const { mergeRows: aRows, mergeCols: aCols, mergeCosts: aCosts } = this;
    aRows.set(this.adds.rows.subarray(0, n));
    aCols.set(this.adds.cols.subarray(0, n));
    aCosts.set(this.adds.costs.subarray(0, n));
    if (n + m > this.adds.rows.length) this.grow(n + m);
    const { rows: out, cols: outCols, costs: outCosts } = this.adds;
    let i = 0;
    let j = 0;
    for (let k = 0; k < n + m; k++) {
      if (j >= m || (i < n && aRows[i]! < rows[j]!)) {
        out[k] = aRows[i]!;
        outCols[k] = aCols[i]!;
        outCosts[k] = aCosts[i++]!;
      } else {
        out[k] = rows[j]!;
        outCols[k] = cols[j]!;
        outCosts[k] = costs[j++]!;
      }
    }
    return n + m;
  }

  /**
   * Reads the rows of a pass chunk by chunk, {@link SCAN_CHUNK} rows a chunk, taking
   * chunk numbers from `claim` until it gives one past the last row: the share of a
   * pass that one of two threads reads (their chunks interleave, each thread's in
   * ascending order). The pairs added follow the first `added` of `adds`.
   */
  scanChunks(claim: () => number, rowDuals: Float64Array, colDuals: Float64Array, params: ScanParams, added = 0): ScanCounts {
    const { nRows } = this.g;
    const total: ScanCounts = { violators: 0, rechecks: 0, exactRechecks: 0, rowsPriced: 0, kernelRows: 0, n: added };
    for (;;) {
      const r0 = claim() * SCAN_CHUNK;
      if (r0 >= nRows) return total;
      const c = this.scan(r0, Math.min(nRows, r0 + SCAN_CHUNK), rowDuals, colDuals, params, total.n);
      total.violators += c.violators;
      total.rechecks += c.rechecks;
      total.exactRechecks += c.exactRechecks;
      total.rowsPriced += c.rowsPriced;
      total.kernelRows += c.kernelRows;
      total.n = c.n;
    }
  }

  private grow(need: number): void {
    if (!this.adds.growable) throw pairflowError('PAIRFLOW_ERR_INTERNAL_BUG', { detail: `pricing: ${need} pairs added, room for ${this.adds.rows.length}` });
    const size = Math.max(2 * this.adds.rows.length, need);
    const rows = new Int32Array(size);
    rows.set(this.adds.rows);
    const cols = new Int32Array(size);
    cols.set(this.adds.cols);
    const costs = new Float64Array(size);
    costs.set(this.adds.costs);
    this.adds.rows = rows;
    this.adds.cols = cols;
    this.adds.costs = costs;
  }
}

/**
 * Merges column picks `b` into `a` (each of their own rows, in row order): per column
 * the `perCol` most negative of both, ascending, the earlier row first on a tie.
 */
export function mergePicks(a: ColumnPicks, b: ColumnPicks, nCols: number, perCol: number): void {
  const red = new Float64Array(perCol);
  const edge = new Int32Array(perCol);
  const row = new Int32Array(perCol);
  const cost = new Float64Array(perCol);
  for (let col = 0; col < nCols; col++) {
    const nb = b.count[col]!;
    if (nb === 0) continue;
    const na = a.count[col]!;
    const at = col * perCol;
    let i = 0;
    let j = 0;
    let n = 0;
    while (n < perCol && (i < na || j < nb)) {
      const takeA = j >= nb || (i < na && (a.red[at + i]! < b.red[at + j]! || (a.red[at + i] === b.red[at + j] && a.row[at + i]! < b.row[at + j]!)));
      const src = takeA ? a : b;
      const k = at + (takeA ? i++ : j++);
      red[n] = src.red[k]!;
      edge[n] = src.edge[k]!;
      row[n] = src.row[k]!;
      cost[n] = src.cost[k]!;
      n++;
    }
    a.red.set(red.subarray(0, n), at);
    a.edge.set(edge.subarray(0, n), at);
    a.row.set(row.subarray(0, n), at);
    a.cost.set(cost.subarray(0, n), at);
    a.count[col] = n;
  }
}

/** Rows per chunk of a split pass (a chunk of a busy district's day reads about half a million pairs). */
export const SCAN_CHUNK = 256;

/** Violators a row in the last pass above which a pass reads the rows left with violators in turns. */
const TURNS_ABOVE = 100;

/** Columns per block of the rise table. */
const BLOCK_BITS = 5;
const BLOCK = 1 << BLOCK_BITS;

/** Levels of a sparse table over n entries. */
function levels(n: number): number {
  return n <= 1 ? 1 : 32 - Math.clz32(n);
}

/** Fills levels 1.. of the sparse table whose level 0 is `t[0 .. n)` (level k at k·n). */
function buildLevels(t: Float64Array, n: number): void {
  for (let k = 1, half = 1; 2 * half <= n; k++, half *= 2) {
    const at = k * n;
    const prev = (k - 1) * n;
    for (let b = 0; b + 2 * half <= n; b++) {
      const x = t[prev + b]!;
      const y = t[prev + b + half]!;
      t[at + b] = x > y ? x : y;
    }
  }
}

/** The largest entry of blocks a..b (inclusive) of a sparse table over n blocks. */
function maxOver(t: Float64Array, n: number, a: number, b: number): number {
  const k = 31 - Math.clz32(b - a + 1);
  const x = t[k * n + a]!;
  const y = t[k * n + b - (1 << k) + 1]!;
  return x > y ? x : y;
}
