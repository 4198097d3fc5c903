import { pairflowError } from '../errors.js';
import { defaultNow, finishResult, Sum } from './result.js';
import { NONE, reduceRows } from './reduction.js';
import { cheapestTwoSparse, infeasibleRow, SparseSearch, type RowsView } from './sparse.js';
import type { SolveResult, SolveStats, SparseInstance } from './types.js';
import { releaseFreeColumns, type ColumnsView } from './warm.js';
import { KernelSearch } from './wasm/sparse-search.js';
import { KernelArena } from './wasm/shared-memory.js';

/*
 * An assignment that grows: pairs are added between solves, and each solve starts
 * from the previous optimum, its prices and pairs kept in place. This is what column
 * generation needs (the hindsight optimum adds the pairs a pricing pass found and
 * solves again, a dozen times): a warm start through `solveSparse` rebuilds the
 * instance, re-reads every pair to re-derive its state, and builds the pairs by
 * column again on every round, which on a large restricted instance costs more than
 * the few searches the new pairs call for.
 *
 * Invariants between solves are sparse.ts's: every pair has reduced cost
 * c − u − v ≥ 0, a matched pair is tight, v ≤ 0, a free column has v = 0, and an
 * unmatched row has u = δ. Added pairs may break the first: a row with an added pair
 * of negative reduced cost (its only way to become infeasible) loses its pair and is
 * searched again; its column's price is first raised as far as the other rows allow
 * ({@link GrowingAssignment.raiseFreedColumns}), and if it is still free and below 0
 * after the searches, the reverse search of warm.ts brings it back (step 3 there).
 * Every other row and price stays as it was, so a solve costs what the new pairs
 * disturb, not what the instance holds.
 */

/** Room for pending pairs kept after a merge (more is let go: a later round grows it again). */
const PENDING_KEPT = 1 << 16;
/** The most pairs a kernel memory reserves room for (12 bytes each, within its 4 GiB). */
const MAX_KERNEL_PAIRS = 1 << 27;

/**
 * Pair storage by rows (or by columns): each line a slice of one pool, lines back to
 * back in line order. Pairs added are held aside and merged in one pass when the
 * lines are next read (a round of column generation adds a few pairs to most rows
 * at once), in place, from the last line to the first: every line moves up by the
 * pairs added to the lines before it, so nothing is overwritten before it is moved.
 * The pool is reallocated only when the pairs outgrow it, a quarter larger. Growing
 * each line in place by doubling, as a first version did, left the pools 2.4–2.7
 * times the pairs they held (a busy district's day: 17 M slots of 12 bytes for
 * 3.3 M pairs, by rows and again by columns); a new exact pool per merge left the
 * old ones to the garbage collector, and the peak did not fall.
 */
class Lines {
  /** Line l's pairs are `index`/`cost` over `[start[l], end[l])`. */
  readonly start: Int32Array;
  readonly end: Int32Array;
  index: Int32Array = new Int32Array(0);
  cost: Float64Array = new Float64Array(0);
  private used = 0;
  private pendLine = new Int32Array(1024);
  private pendIndex = new Int32Array(1024);
  private pendCost = new Float64Array(1024);
  private pending = 0;
  /** Per line, where its pending pairs start in the sorted pending arrays (length lines + 1). */
  private readonly first: Int32Array;

  /**
   * @param arena where the lines live when a kernel reads them (then with `room` pairs
   *   reserved from the start: pages never written cost nothing, and the pool grows
   *   in place up to `room`, never copied)
   */
  constructor(n: number, private readonly arena: KernelArena | null = null, room = 0) {
    this.start = arena === null ? new Int32Array(n) : arena.i32(n);
    this.end = arena === null ? new Int32Array(n) : arena.i32(n);
    this.first = new Int32Array(n + 1);
    if (arena !== null && room > 0) {
      this.index = arena.i32(room);
      this.cost = arena.f64(room);
    }
  }

  /** Appends (index, cost) to line l, once the lines are next {@link merge}d. */
  push(l: number, index: number, cost: number): void {
    if (this.pending === this.pendLine.length) {
      const size = 2 * this.pending;
      const line = new Int32Array(size);
      line.set(this.pendLine);
      const idx = new Int32Array(size);
      idx.set(this.pendIndex);
      const c = new Float64Array(size);
      c.set(this.pendCost);
      this.pendLine = line;
      this.pendIndex = idx;
      this.pendCost = c;
    }
    this.pendLine[this.pending] = l;
    this.pendIndex[this.pending] = index;
    this.pendCost[this.pending++] = cost;
  }

  /** Merges the pairs pushed since the last merge: each line's old pairs, then its new ones. */
  merge(): void {
    const n = this.pending;
    if (n === 0) return;
    const { start, end, first, pendLine, pendIndex, pendCost } = this;
    const lines = start.length;
    // The pending pairs sorted by line (counting sort; within a line in push order).
    first.fill(0);
    for (let q = 0; q < n; q++) first[pendLine[q]! + 1]!++;
    for (let l = 0; l < lines; l++) first[l + 1]! += first[l]!;
    const sortedIndex = new Int32Array(n);
    const sortedCost = new Float64Array(n);
    for (let q = 0; q < n; q++) {
      const at = first[pendLine[q]!]!++;
      sortedIndex[at] = pendIndex[q]!;
      sortedCost[at] = pendCost[q]!;
    }
    // (first[l] now marks where line l's pending pairs end.)
    const total = this.used + n;
    if (total > this.index.length) {
      const size = total + (total >> 2);
      const index = this.arena === null ? new Int32Array(size) : this.arena.i32(size);
      index.set(this.index.subarray(0, this.used));
      const cost = this.arena === null ? new Float64Array(size) : this.arena.f64(size);
      cost.set(this.cost.subarray(0, this.used));
      this.index = index;
      this.cost = cost;
    }
    const { index, cost } = this;
    let shift = n;
    for (let l = lines - 1; l >= 0; l--) {
      const addEnd = first[l]!;
      const addStart = l === 0 ? 0 : first[l - 1]!;
      const add = addEnd - addStart;
      const from = start[l]!;
      const len = end[l]! - from;
      shift -= add;
      const to = from + shift;
      // Backwards: the line's new place may overlap its old one.
      if (shift > 0) {
        for (let k = len - 1; k >= 0; k--) {
          index[to + k] = index[from + k]!;
          cost[to + k] = cost[from + k]!;
        }
      }
      for (let k = 0; k < add; k++) {
        index[to + len + k] = sortedIndex[addStart + k]!;
        cost[to + len + k] = sortedCost[addStart + k]!;
      }
      start[l] = to;
      end[l] = to + len + add;
    }
    this.used = total;
    this.pending = 0;
    // A round that added millions of pairs would otherwise keep 16 bytes of room for
    // each of them, idle, for the rest of the solve.
    if (this.pendLine.length > PENDING_KEPT) {
      this.pendLine = new Int32Array(PENDING_KEPT);
      this.pendIndex = new Int32Array(PENDING_KEPT);
      this.pendCost = new Float64Array(PENDING_KEPT);
    }
  }

  /** Pairs held in all lines (merged or not). */
  size(): number {
    return this.used + this.pending;
  }
}

/**
 * A min-cost assignment (the contract of types.ts, every row with a finite unmatched
 * cost δ) to which pairs are added between solves. Each pair must be added once.
 *
 * @example
 * const a = new GrowingAssignment(2, 2, Float64Array.of(10, 10));
 * a.add(0, 0, 4); a.add(1, 0, 1);
 * a.solve();           // row 1 → column 0, row 0 unmatched: cost 11
 * a.add(0, 1, 2);
 * a.solve();           // only row 0 is searched again: cost 3
 */
export class GrowingAssignment {
  private readonly rows: Lines;
  private readonly cols: Lines;
  /** u per row, v per column (SPEC §5), the assignment, as of the last solve. */
  readonly u: Float64Array;
  readonly v: Float64Array;
  readonly rowToCol: Int32Array;
  readonly colToRow: Int32Array;
  /** Rows with an added pair of negative reduced cost since the last solve. */
  private readonly dirty: Uint8Array;
  private dirtyList: number[] = [];
  private solved = false;
  /** The searches in WebAssembly (null: in JavaScript, sparse.ts), and the reverse ones. */
  private readonly kernel: KernelSearch | null = null;
  private readonly reverse: KernelSearch | null = null;

  /**
   * @param kernelPairs with a number, the searches run in WebAssembly
   *   (wasm/sparse-search.ts) over arrays in a kernel memory of their own, with room
   *   for this many pairs reserved (more are copied to a larger pool); the same
   *   results. Where no kernel memory can be had, in JavaScript.
   */
  constructor(
    readonly nRows: number,
    readonly nCols: number,
    private readonly delta: Float64Array,
    private readonly now: () => number = defaultNow,
    kernelPairs = 0,
  ) {
    for (let r = 0; r < nRows; r++) {
      if (!(delta[r]! < Infinity) || Number.isNaN(delta[r]!)) {
        throw pairflowError('PAIRFLOW_ERR_SOLVER_INPUT', { detail: `unmatchedCost[${r}]: got ${delta[r]}, expected a finite number (a growing assignment lets every row go unmatched)` });
      }
    }
    const room = Math.min(Math.max(kernelPairs, 1024), MAX_KERNEL_PAIRS);
    const arena = kernelPairs > 0 ? KernelArena.create(24 * room + 96 * (nRows + nCols) + 65536) : null;
    this.rows = new Lines(nRows, arena, room);
    this.cols = new Lines(nCols, arena, room);
    this.dirty = new Uint8Array(nRows);
    if (arena === null) {
      this.u = Float64Array.from(delta);
      this.v = new Float64Array(nCols);
      this.rowToCol = new Int32Array(nRows).fill(NONE);
      this.colToRow = new Int32Array(nCols).fill(NONE);
      return;
    }
    this.u = arena.f64(nRows);
    this.u.set(delta);
    this.v = arena.f64(nCols);
    this.rowToCol = arena.i32(nRows).fill(NONE);
    this.colToRow = arena.i32(nCols).fill(NONE);
    const kernelDelta = arena.f64(nRows);
    kernelDelta.set(delta);
    this.kernel = KernelSearch.over(arena, nCols, { delta: kernelDelta, u: this.u, rowToCol: this.rowToCol, colToRow: this.colToRow });
    // The reverse searches (warm.ts releaseFreeColumns) are forward searches of the
    // transposed instance: u and v swap, so do rowToCol and colToRow, and each column
    // may go free at 0.
    this.reverse = KernelSearch.over(arena, nRows, { delta: arena.f64(nCols), u: this.v, rowToCol: this.colToRow, colToRow: this.rowToCol });
  }

  /** Whether the searches run in WebAssembly. */
  get inKernel(): boolean {
    return this.kernel !== null;
  }

  /** Adds pair (row r, column j) at cost c (finite). */
  add(r: number, j: number, c: number): void {
    if (!(r >= 0 && r < this.nRows && j >= 0 && j < this.nCols) || !Number.isFinite(c)) {
      throw pairflowError('PAIRFLOW_ERR_SOLVER_INPUT', { detail: `pair (${r}, ${j}) at cost ${c}: expected 0 ≤ row < ${this.nRows}, 0 ≤ column < ${this.nCols} and a finite cost` });
    }
    this.rows.push(r, j, c);
    this.cols.push(j, r, c);
    // The only way an added pair breaks the optimum: it prices out under the prices held.
    if (this.solved && this.dirty[r] === 0 && c - this.u[r]! - this.v[j]! < 0) {
      this.dirty[r] = 1;
      this.dirtyList.push(r);
    }
  }

  /** Merges the pairs added since the lines were last read. */
  private merged(): void {
    this.rows.merge();
    this.cols.merge();
  }

  /** The pairs by row, for the searches. */
  private view(): RowsView {
    this.merged();
    return { rowStart: this.rows.start, rowEnd: this.rows.end, colIdx: this.rows.index, cost: this.rows.cost };
  }

  private columns(): ColumnsView {
    this.merged();
    return { colStart: this.cols.start, colEnd: this.cols.end, colRow: this.cols.index, colCost: this.cols.cost };
  }

  /**
   * Solves to optimality: the first time from scratch (every row searched), then only
   * the rows that added pairs disturbed. Returns the work done.
   */
  solve(): SolveStats {
    const t0 = this.now();
    const { nRows, nCols, u, v, rowToCol, colToRow, delta } = this;
    let free: Int32Array;
    let nFree = 0;
    if (!this.solved) {
      free = new Int32Array(nRows);
      for (let r = 0; r < nRows; r++) free[nFree++] = r;
    } else {
      free = new Int32Array(this.dirtyList.length);
      const freed = new Int32Array(this.dirtyList.length);
      let nFreed = 0;
      for (const r of this.dirtyList) {
        free[nFree++] = r;
        const j = rowToCol[r]!;
        if (j !== NONE) {
          // The column keeps its price (every row but r already prices it feasibly)
          // until it is raised below, before the searches.
          rowToCol[r] = NONE;
          colToRow[j] = NONE;
          freed[nFreed++] = j;
        }
      }
      this.raiseFreedColumns(freed, nFreed);
      for (const r of this.dirtyList) this.dirty[r] = 0;
      this.dirtyList = [];
    }
    const rows = this.view();
    // Augmenting row reduction: two passes from scratch, one that takes only free
    // columns after (sparse.ts measured the same split for its warm starts).
    const reduced = reduceRows(free, nFree, u, v, rowToCol, colToRow, {
      passes: this.solved ? 1 : 2,
      noDisplace: this.solved,
      cheapestTwo: (row, two) => cheapestTwoSparse(rows, delta, v, row, two),
      infeasible: infeasibleRow,
    });
    let scanned = reduced.scanned;
    let augmentations = 0;
    if (reduced.nFree > 0) {
      // In WebAssembly over the arena's arrays where there is a kernel: the same searches.
      const search = this.kernel !== null ? this.kernel.bind(rows, v) : new SparseSearch(rows, nCols, delta, u, v, rowToCol, colToRow);
      try {
        for (let f = 0; f < reduced.nFree; f++) {
          augmentations++;
          scanned += search.run(reduced.freeRows[f]!);
        }
      } finally {
        search.flush();
      }
    }
    const reverse = this.reverse;
    const rev = releaseFreeColumns({ nRows, nCols, columns: () => this.columns() }, u, v, rowToCol, colToRow, reverse !== null ? (t) => reverse.bind(t, u) : null);
    scanned += rev.scanned;
    augmentations += rev.searches;
    this.settleRowPrices();
    const warm = this.solved;
    this.solved = true;
    return { augmentations, scannedPairs: scanned, ms: this.now() - t0, warm, reverseSearches: rev.searches, searchedRows: reduced.nFree };
  }

  /**
   * Raises the price of each column its dirty row just left as far as the other rows
   * allow (to `min(0, min (c − u))` over its pairs with rows that are not dirty), before
   * the searches. A column that went free keeps the price its row paid, and below 0 it
   * must be brought back by a reverse search after the forward ones, which in a dense
   * market explores wide (its price was set by the many rows that want it); raised
   * first, it is a nearer end for the forward searches, and a reverse search that is
   * still needed starts closer to 0. Every pair stays feasible: the dirty rows are
   * free, and each gets a price of its own from its search (which reads its pairs at
   * the prices raised). Measured on a generated day's four districts one after the
   * other on one thread, alternating runs: at scale 4 (`gen --scale 4`) the re-solves
   * took 6.7–6.9 s against 8.4–8.6 s and the hindsight 25.9 s against 26.6–27.3 s (on
   * the busiest district 15 k reverse searches scanning 49 M pairs against 25 k and
   * 143 M); at scale 1, where reverse searches are short, 0.75–0.77 s against
   * 0.66–0.72 s (the forward searches scan about what the reverse ones save) and the
   * hindsight 2.6–2.7 s against 2.5–2.65 s. The same optimum: only the path to it
   * changes.
   */
  private raiseFreedColumns(freed: Int32Array, nFreed: number): void {
    if (nFreed === 0) return;
    const { u, v, dirty } = this;
    const { colStart, colEnd, colRow, colCost } = this.columns();
    for (let q = 0; q < nFreed; q++) {
      const j = freed[q]!;
      const vj = v[j]!;
      let room = -vj;
      for (let e = colStart[j]!; e < colEnd[j]! && room > 0; e++) {
        const i = colRow[e]!;
        if (dirty[i] === 1) continue;
        const slack = colCost[e]! - u[i]! - vj;
        if (slack < room) room = slack;
      }
      if (room > 0) v[j] = vj + room;
    }
  }

  /**
   * Takes over the prices and pairs of a solve of {@link instance} made elsewhere (a
   * cold solve, say), as if this assignment had found them; later solves start there.
   */
  adopt(res: SolveResult): void {
    this.u.set(res.rowDuals);
    this.v.set(res.colDuals);
    this.rowToCol.set(res.rowToCol);
    this.colToRow.set(res.colToRow);
    for (const r of this.dirtyList) this.dirty[r] = 0;
    this.dirtyList = [];
    this.solved = true;
  }

  /** Exact row prices from the column prices: matched pairs tight, unmatched rows at δ. */
  private settleRowPrices(): void {
    const { nRows, u, v, rowToCol, delta } = this;
    this.merged();
    const { start, end, index, cost } = this.rows;
    for (let r = 0; r < nRows; r++) {
      const j = rowToCol[r]!;
      if (j === NONE) {
        u[r] = delta[r]!;
        continue;
      }
      for (let e = start[r]!; e < end[r]!; e++) {
        if (index[e] === j) {
          u[r] = cost[e]! - v[j]!;
          break;
        }
      }
    }
  }

  /** Pairs added so far. */
  pairs(): number {
    return this.rows.size();
  }

  /** The instance as it stands (CSR, rows in order), e.g. for a certificate check. */
  instance(): SparseInstance {
    const { nRows, nCols, delta } = this;
    this.merged();
    const { start, end, index, cost } = this.rows;
    const rowPtr = new Int32Array(nRows + 1);
    for (let r = 0; r < nRows; r++) rowPtr[r + 1] = rowPtr[r]! + end[r]! - start[r]!;
    const colIdx = new Int32Array(rowPtr[nRows]!);
    const c = new Float64Array(rowPtr[nRows]!);
    for (let r = 0; r < nRows; r++) {
      let at = rowPtr[r]!;
      for (let e = start[r]!; e < end[r]!; e++) {
        colIdx[at] = index[e]!;
        c[at++] = cost[e]!;
      }
    }
    return { nRows, nCols, rowPtr, colIdx, cost: c, unmatchedCost: delta };
  }

  /** The last solve as a {@link SolveResult} (copies), for {@link checkCertificate}. */
  result(stats: SolveStats): SolveResult {
    const { nRows, rowToCol, delta, u, v } = this;
    this.merged();
    const { start, end, index, cost } = this.rows;
    const primal = new Sum();
    for (let r = 0; r < nRows; r++) {
      const j = rowToCol[r]!;
      if (j === NONE) {
        primal.add(delta[r]!);
        continue;
      }
      for (let e = start[r]!; e < end[r]!; e++) {
        if (index[e] === j) {
          primal.add(cost[e]!);
          break;
        }
      }
    }
    return finishResult(primal.value, rowToCol.slice(), this.colToRow.slice(), u.slice(), v.slice(), stats);
  }
}
