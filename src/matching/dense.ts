import type { DenseInstance, SolveOptions, SolveResult } from './types.js';
import { checkDenseCells, validateDenseShape, validateWarm } from './validate.js';
import { defaultNow, finishResult, Sum } from './result.js';
import { infeasibleRow, mustMatchAll, shiftToNonPositive, solveSparseChecked, solveSparseCore, unreachableColumn } from './sparse.js';
import { PairflowError } from '../errors.js';
import { NONE, PRIVATE, reduceRows, shiftAlongPath, type Reduced } from './reduction.js';
import { denseAuction } from './dense-auction.js';
import { keepCheapest, listAuction, type AuctionLists } from './list-auction.js';
import { maxCardinalityMatching } from './cardinality.js';
import type { SparseInstance, WarmStart } from './types.js';
import { kernelMatrix, spreadStart, WASM_BAD_CELL, WASM_NO_KERNEL, wasmDenseJv, wasmRowMinima } from './wasm/dense-jv.js';

/*
 * The dense twin of sparse.ts: the same invariants (see there), but each search
 * scans whole rows against a shrinking list of unsettled columns instead of a heap,
 * which is what pays off when every pair is allowed. A pair is allowed iff its cost
 * is < +Infinity (NaN compares false everywhere, so it is skipped the same way).
 *
 * Layout for the JIT: every loop over a row lives in a small kernel (foldColumnMins,
 * cheapestExcept, twoCheapest, relaxRow, gatherBelow, countPricedOut) called once per
 * row, so the engine optimises each kernel within the first solve and keeps it. One
 * large function holding every phase's loops was compiled loop by loop and thrown
 * away again as each later phase ran for the first time, which made the first few
 * solves in a process several times slower than the rest.
 *
 * The cells are read once before any result: every path's first pass (column
 * reduction, the first reduction pass over all rows, or the candidates scan) looks
 * at each cell, notices a -Infinity there and lets checkDenseCells name it; a warm
 * start runs on the CSR of the allowed cells, whose building pass checks them. An
 * infeasibility error is raised only after checking the cells, so a bad cell is
 * always reported as such.
 */


/** Below this many cells the full search is used (measured crossover). */
const CANDIDATE_MIN_CELLS = 250_000;

export function solveDenseCore(inst: DenseInstance, opts: SolveOptions): SolveResult {
  const now = opts.now ?? defaultNow;
  const t0 = now();
  validateDenseShape(inst);
  validateWarm(opts.warm, inst.nRows, inst.nCols);
  const k = candidateCount(inst.nCols);
  const strategy = opts.strategy ?? 'auto';
  if (strategy === 'candidates' || (strategy === 'auto' && preferCandidates(inst.nRows, inst.nCols, k))) {
    if (inst.nRows === inst.nCols && opts.warm === undefined && mustMatchAll(inst.unmatchedCost ?? null)) {
      const res = solveFromRowMinima(inst) ?? (strategy === 'auto' && kernelFirst(inst) ? solveByKernel(inst) : null);
      if (res !== null) {
        res.stats.ms = now() - t0;
        return res;
      }
    }
    const res = solveByCandidates(inst, opts, k);
    if (res !== null) {
      res.stats.ms = now() - t0;
      return res;
    }
  }
  return solveDenseFull(inst, opts, now, t0);
}

/**
 * Square matrices up to this size, where the row-minima start gives up, are solved by
 * the WebAssembly kernel (wasm/dense-jv.wat) before the candidates strategy is tried.
 * Measured on a process's first solve, fresh processes (bench/wasm/first-solve.ts,
 * medians of 5–7 alternated runs, load 1–4), the JS paths against the kernel:
 * geometric n = 600 71 / 15 ms, n = 1000 74–126 / 25–28 ms, n = 1250 100 / 41 ms,
 * n = 1500 105 / 56 ms, n = 2000 116 / 150 ms; clustered n = 600 80 / 10 ms, n = 1000
 * 103–180 / 27–31 ms, n = 1500 164 / 63 ms; uniform n = 1000 42–71 / 12–15 ms.
 */
const KERNEL_MAX_N = 1600;
/**
 * Between KERNEL_MAX_N and this size, the kernel is tried first on costs whose
 * columns' cheapest entries grow like distances in the plane (see
 * {@link growsLikePlaneDistances}), where the candidates strategy's pick, pricing
 * rounds and crowded clusters cost more than the kernel's full search on a first
 * solve. Measured at n = 2000 (first solves in fresh processes, medians of 8
 * alternated runs, load 1.7–2.3), candidates against kernel: geometric 200 / 143 ms,
 * clustered 226 / 192 ms (the candidates picked before the kernel took the crowded
 * clusters: 35 ms picking, 15 ms matching). Uniform costs stay with the candidates
 * there: about one matrix read once compiled (n = 2000: 15–21 ms a solve after the
 * first), where the kernel reads twelve (31–39 ms).
 */
const KERNEL_PLANAR_MAX_N = 2000;

/** Whether `auto` tries the kernel before the candidates strategy (the row-minima start having given up). */
function kernelFirst(inst: DenseInstance): boolean {
  const n = inst.nRows;
  if (n > KERNEL_PLANAR_MAX_N) return false;
  const sample = sampleColumns(inst, n > KERNEL_MAX_N);
  return sample.spread && (n <= KERNEL_MAX_N || sample.planar);
}

/**
 * Up to this size the kernel also takes over the candidates strategy's crowded
 * clusters, where the list auction and its pricing rounds cost most: costs that are
 * not sent to the kernel first (above KERNEL_MAX_N, those whose cheapest entries do
 * not grow like distances in the plane, e.g. squared distances). Measured before the
 * kernel was tried first on distances (first solves, medians of 5–8 alternated fresh
 * processes): clustered n = 2000 216 ms by the list auction against 120 ms.
 */
const KERNEL_CROWDED_MAX_N = 2000;

/** Below this a copy into the kernel costs too little to give a matrix a memory of its own (256: half a megabyte). */
const KERNEL_MATRIX_MIN_N = 256;

/**
 * A zeroed row-major cost array for a dense instance of nRows × nCols. A square one
 * of a size the WebAssembly kernel may take lives in the kernel's own memory
 * (kernelMatrix in wasm/dense-jv.ts), so a caller that fills it (the CLI's parser)
 * writes the matrix once and the kernel reads it in place; any other is a plain
 * array. Either solves the same.
 * @example
 * const cost = denseCosts(2, 2); cost.set([4, 1, 2, 0]);
 * solveDense({ nRows: 2, nCols: 2, cost });
 */
export function denseCosts(nRows: number, nCols: number): Float64Array {
  const inKernel = nRows === nCols && nRows >= KERNEL_MATRIX_MIN_N && nRows <= Math.max(KERNEL_MAX_N, KERNEL_PLANAR_MAX_N, KERNEL_CROWDED_MAX_N);
  return inKernel ? kernelMatrix(nRows) : new Float64Array(nRows * nCols);
}
/** Matrices' worth of pairs the kernel may read before it gives up (geometric and clustered n = 1000: 37–44). */
const KERNEL_BUDGET = 80;
/**
 * The kernel gives up when more than n / KERNEL_FREE_SHARE rows are left for its
 * searches after the reductions: each search then scans long (c_ij = i·j and rank-one
 * costs leave 96–98 % of the rows, the n³ behaviour the auction is there for; geometric
 * and clustered costs 16–21 %).
 */
const KERNEL_FREE_SHARE = 3;

/** Columns whose cheapest row {@link cheapestRowsSpread} looks up. */
const KERNEL_SAMPLE_COLS = 8;

/**
 * A look at KERNEL_SAMPLE_COLS columns spread over the matrix (KERNEL_SAMPLE_COLS · n
 * reads). `spread`: whether their cheapest rows are at least half of them distinct.
 * Where every column is cheapest in the same few rows (c_ij = i·j: all in row 0;
 * rank-one costs: the row of the smallest a_i), column reduction leaves nearly every
 * row free and the kernel would give up after copying and reducing the matrix (4–5 ms
 * at n = 1000). Distances, clusters and uniform costs have distinct cheapest rows.
 * `planar` (looked at when `growth` is set and the rows spread): see
 * {@link growsLikePlaneDistances}.
 */
function sampleColumns(inst: DenseInstance, growth: boolean): { spread: boolean; planar: boolean } {
  const { nRows: n, cost } = inst;
  const rows = new Int32Array(KERNEL_SAMPLE_COLS);
  let distinct = 0;
  for (let s = 0; s < KERNEL_SAMPLE_COLS; s++) {
    const j = sampledColumn(s, n);
    let best = Infinity;
    let arg = NONE;
    for (let r = 0, k = j; r < n; r++, k += n) {
      const c = cost[k]!;
      if (c < best) {
        best = c;
        arg = r;
      }
    }
    let seen = false;
    for (let t = 0; t < s; t++) if (rows[t] === arg) seen = true;
    rows[s] = arg;
    if (!seen) distinct++;
  }
  const spread = 2 * distinct >= KERNEL_SAMPLE_COLS;
  if (!spread || !growth) return { spread, planar: false };
  // the same columns again (another KERNEL_SAMPLE_COLS · n reads), for their growth
  const col = new Float64Array(n);
  const ratios = new Float64Array(KERNEL_SAMPLE_COLS);
  for (let s = 0; s < KERNEL_SAMPLE_COLS; s++) {
    for (let r = 0, k = sampledColumn(s, n); r < n; r++, k += n) col[r] = cost[k]!;
    ratios[s] = cheapestGrowth(col);
  }
  return { spread, planar: growsLikePlaneDistances(ratios) };
}

/** The s-th of the columns {@link sampleColumns} looks at. */
function sampledColumn(s: number, n: number): number {
  return Math.floor(((s + 0.5) * n) / KERNEL_SAMPLE_COLS);
}

/** Ranks of a column's cheapest entries compared by {@link cheapestGrowth}. */
const GROWTH_LOW = 16;
const GROWTH_HIGH = 64;
/** Growth ratios below this are taken as distances in the plane (2 there, 4 for uniform costs). */
const PLANAR_GROWTH_MAX = 3;

/**
 * (c_(64) − c_(0)) / (c_(16) − c_(0)) over the column's entries sorted (c_(k) the k-th
 * cheapest; sorts `col` in place): how fast its cheapest entries grow with their
 * rank. For distances to points spread in the plane the k-th nearest lies about √k
 * away, a ratio near √(64/16) = 2; for costs drawn uniformly the k-th cheapest grows
 * like k, a ratio near 4 (the growth of k-th nearest distances as k^(1/d) in d
 * dimensions: common practice in estimating a data set's dimension). NaN or +Infinity
 * where the ranks are tied or not allowed (or the column is too short).
 */
function cheapestGrowth(col: Float64Array): number {
  if (col.length <= GROWTH_HIGH) return NaN;
  col.sort();
  return (col[GROWTH_HIGH]! - col[0]!) / (col[GROWTH_LOW]! - col[0]!);
}

/**
 * Whether the sampled columns' cheapest entries grow like distances in the plane: at
 * least half the ratios below PLANAR_GROWTH_MAX. Measured on three seeds each at n =
 * 1700 and 2000, 8 columns: geometric and clustered costs 1.7–3.6 per column, 5–8 of
 * them below 3; uniform reals and integers 2.7–8.0, at most 1 below 3.
 */
function growsLikePlaneDistances(ratios: Float64Array): boolean {
  let below = 0;
  for (let s = 0; s < ratios.length; s++) if (ratios[s]! < PLANAR_GROWTH_MAX) below++;
  return 2 * below >= ratios.length;
}

/**
 * The full search of a square instance where every row is matched, in the wasm
 * kernel: column reduction, reduction transfer, two passes of augmenting row
 * reduction, then a shortest augmenting path per free row over whole rows. Returns
 * null where the kernel gives up (see KERNEL_BUDGET and KERNEL_FREE_SHARE, or
 * `maxScan` and `maxFree`), meets an infeasible instance (the JS paths report it) or
 * cannot run; a -Infinity cell is reported here.
 */
export function solveByKernel(inst: DenseInstance, maxScan?: number, maxFree?: number): SolveResult | null {
  const n = inst.nRows;
  const out = wasmDenseJv(inst.cost, n, maxScan ?? KERNEL_BUDGET * n * n, maxFree ?? Math.floor(n / KERNEL_FREE_SHARE));
  if (out.status === WASM_BAD_CELL) checkDenseCells(inst);
  if (out.status < 0) return null;
  return finishDense(inst, true, out.u, out.v, out.rowToCol, out.colToRow, {
    augmentations: out.status,
    scannedPairs: out.scanned,
    ms: 0,
    warm: false,
    warmPairsKept: 0,
    searchedRows: out.status,
    wasmKernel: true,
  });
}

/**
 * The candidates strategy pays off on large matrices that are square or nearly so.
 * Once columns outnumber rows by a tenth or more, the first reduction pass gives
 * most rows a column of their own and the full search ends after little more than
 * one read of the matrix (measured: 1000 × 1050 about even, 1000 × 1100 and wider
 * the full search 2–3× faster; 1000 × 1000 the candidates 3× faster).
 */
function preferCandidates(nRows: number, nCols: number, k: number): boolean {
  return nRows * nCols >= CANDIDATE_MIN_CELLS && 4 * k <= nCols && 100 * nCols < 108 * nRows;
}

/** The error for an infeasible row, raised only once the cells are known to be valid. */
function infeasible(inst: DenseInstance, r: number): Error {
  checkDenseCells(inst);
  return infeasibleRow(r);
}

function solveDenseFull(inst: DenseInstance, opts: SolveOptions, now: () => number, t0: number): SolveResult {
  // A warm start runs on the allowed cells as CSR: the warm start of warm.ts needs rows
  // by column, which the sparse core builds, and a warm re-solve searches little.
  if (opts.warm?.rowToCol !== undefined) return solveSparseChecked(denseToCsr(inst), opts, now, t0);

  const { nRows, nCols } = inst;
  const delta = inst.unmatchedCost ?? null;

  const v = new Float64Array(nCols);
  const u = new Float64Array(nRows);
  const rowToCol = new Int32Array(nRows).fill(NONE);
  const colToRow = new Int32Array(nCols).fill(NONE);
  let scannedPairs = 0;
  let augmentations = 0;

  // ---- a perfect assignment starts from column reduction and reduction transfer
  // (see sparse.ts for why that is allowed there).
  const perfect = nRows === nCols && nRows > 0 && mustMatchAll(delta);
  if (perfect) scannedPairs += columnStart(inst, u, v, rowToCol, colToRow);

  // ---- augmenting row reduction, then shortest augmenting paths for what is left
  const reduced = reduceDenseRows(inst, delta, u, v, rowToCol, colToRow);
  scannedPairs += reduced.scanned;
  const searchedRows = reduced.nFree;
  let auctionBids = 0;
  if (reduced.nFree > 0) {
    const search = new DenseSearch(inst, delta, u, v, rowToCol, colToRow);
    // A perfect assignment whose searches keep scanning most of the matrix each (the
    // n³ behaviour of structured costs) switches to the auction (dense-auction.ts)
    // once the searches have read SEARCH_BUDGET matrices; the rows it leaves short of
    // exact are searched after it.
    const budget = perfect && nRows >= AUCTION_MIN_N ? SEARCH_BUDGET * nRows * nCols : Infinity;
    let spent = 0;
    let f = 0;
    for (; f < reduced.nFree && spent <= budget; f++) {
      augmentations++;
      const n = search.run(reduced.freeRows[f]!);
      spent += n;
      scannedPairs += n;
    }
    if (f < reduced.nFree) {
      const out = finishByAuction(inst, u, v, rowToCol, colToRow, search);
      auctionBids = out.bids;
      augmentations += out.searches;
      scannedPairs += out.scanned;
    }
  }

  return finishDense(inst, perfect, u, v, rowToCol, colToRow, {
    augmentations,
    scannedPairs,
    ms: now() - t0,
    warm: false,
    warmPairsKept: 0,
    searchedRows,
    ...(auctionBids > 0 ? { auctionBids } : {}),
  });
}

/**
 * The result of a finished search: each matched row's price made tight on its pair
 * (u = c − v), an unmatched row's set to its δ, and in the perfect case the column
 * prices shifted to SPEC §5's sign (max v = 0).
 */
function finishDense(
  inst: DenseInstance,
  perfect: boolean,
  u: Float64Array,
  v: Float64Array,
  rowToCol: Int32Array,
  colToRow: Int32Array,
  stats: SolveResult['stats'],
): SolveResult {
  const { nRows, nCols, cost } = inst;
  const delta = inst.unmatchedCost ?? null;
  if (perfect) shiftToNonPositive(v);
  const primal = new Sum();
  for (let r = 0; r < nRows; r++) {
    const j = rowToCol[r]!;
    if (j === NONE) {
      u[r] = delta![r]!;
      primal.add(u[r]!);
    } else {
      const c = cost[r * nCols + j]!;
      u[r] = c - v[j]!;
      primal.add(c);
    }
  }
  return finishResult(primal.value, rowToCol, colToRow, u, v, stats);
}

/**
 * Row reduction and a greedy pass on the rows' cheapest pairs, then shortest
 * augmenting paths for the rows left over — the Hungarian method's own start — for a
 * square instance where every row must be matched. Each row's price starts at its
 * minimum cost and every column's at 0 (dual feasible: no pair costs less than its
 * row's minimum), and a row takes a free column at that minimum if it has one (a
 * tight pair). On costs with few distinct values (integers 0..9 leave a row about
 * n/10 ties at its minimum) nearly every row does, and the few left over find a free
 * column within a row or two, so the solve reads the matrix about once. Where the
 * rows' minima are unique or nearly so (distances, products, rank one, uniform
 * random costs) it gives up within the first rows — after TIES_SAMPLE rows holding
 * few ties at their minima, or once more than 1 in 64 rows fails the greedy pass —
 * and the caller goes on as before. Returns null when it gives up (also when more
 * than n/32 rows are left over, when the searches read more than SEARCH_BUDGET_MIN
 * matrices, or when a row has no allowed pair).
 */
function solveFromRowMinima(inst: DenseInstance): SolveResult | null {
  const { nRows: n, cost } = inst;
  // A first look at TIES_PEEK rows: costs with few ties at their rows' minima give up
  // here, before the greedy pass has read TIES_SAMPLE rows (in a process's first
  // solve, unoptimised: 2.7–4.4 ms at n = 1000, where this look costs about 0.2 ms).
  if (n >= TIES_SAMPLE && !tiesAtRowMinimaReach(cost, n, TIES_PEEK, TIES_PEEK_MIN * TIES_PEEK)) return null;
  const pass = greedyOnRowMinima(inst, true);
  if (pass === null) return null;
  const { u, rowToCol, colToRow, freeRows, nFree } = pass;
  const v = new Float64Array(n);
  let scanned = pass.scanned;
  let search: DenseSearch | null = null;
  const budget = scanned + SEARCH_BUDGET_MIN * n * n;
  for (let f = 0; f < nFree; f++) {
    search ??= new DenseSearch(inst, null, u, v, rowToCol, colToRow);
    scanned += search.run(freeRows[f]!);
    if (scanned > budget) return null;
  }
  const searched = nFree;
  return finishDense(inst, true, u, v, rowToCol, colToRow, {
    augmentations: searched,
    scannedPairs: scanned,
    ms: 0,
    warm: false,
    warmPairsKept: 0,
    searchedRows: searched,
  });
}

/** The row-minima start's pass: see {@link greedyOnRowMinima}. */
export interface RowMinimaPass {
  readonly u: Float64Array;
  readonly rowToCol: Int32Array;
  readonly colToRow: Int32Array;
  /** The rows left without a column, in order, in the first nFree entries. */
  readonly freeRows: Int32Array;
  readonly nFree: number;
  /** Pairs read. */
  readonly scanned: number;
}

/**
 * The row-minima start's pass, every column's price 0: u[r] = row r's minimum cost,
 * and row r takes the first column still free at that minimum, scanning from
 * spreadStart(r) round (a greedy pass on tight pairs). Then each row left over tries
 * a path of two tight pairs: it takes a column j at its minimum (in column order)
 * whose row moves to a free column at that row's minimum, found the same way; no
 * price changes. Gives up (null) once more than 2 + r/64 of the first r rows are left
 * free, after TIES_SAMPLE rows holding fewer than TIES_MIN ties on average at their
 * minima, when more than n/32 rows are left after the greedy pass, or at a row with
 * no allowed pair; a -Infinity cell is reported. Run in the wasm kernel where
 * `kernel` is set and it can run (wasmRowMinima: the same steps and result, a few
 * rows at a time; a process's first solve of few-ints n = 1000 spends about 1.5 ms
 * there, where the JS pass, not yet optimised, took 4–5 ms), else in JS. Exported
 * for the tests.
 */
export function greedyOnRowMinima(inst: DenseInstance, kernel: boolean): RowMinimaPass | null {
  const { nRows: n, cost } = inst;
  let tiesChecked = false;
  // `ties()`: the cells at their row's minimum over the first TIES_SAMPLE rows
  const stop = (rowsDone: number, nFree: number, ties: () => number): boolean => {
    if (nFree > 2 + ((rowsDone - 1) >> 6)) return true;
    if (tiesChecked || rowsDone < TIES_SAMPLE) return false;
    tiesChecked = true;
    return ties() < TIES_MIN * TIES_SAMPLE;
  };
  const maxLeft = n >> 5;
  if (kernel) {
    const w = wasmRowMinima(cost, n, TIES_SAMPLE, maxLeft, (rowsDone, nFree, ties) => stop(rowsDone, nFree, () => ties));
    if (w.status === WASM_BAD_CELL) checkDenseCells(inst);
    if (w.status >= 0) return { u: w.u, rowToCol: w.rowToCol, colToRow: w.colToRow, freeRows: w.freeRows, nFree: w.status, scanned: w.scanned };
    if (w.status !== WASM_NO_KERNEL) return null;
  }
  const u = new Float64Array(n);
  const rowToCol = new Int32Array(n).fill(NONE);
  const colToRow = new Int32Array(n).fill(NONE);
  const out = new Float64Array(2);
  const freeRows = new Int32Array(n);
  let nFree = 0;
  for (let r = 0; r < n; r++) {
    rowMinFree(cost, r * n, n, colToRow, spreadStart(r, n), out);
    const m = out[0]!;
    if (m === -Infinity) checkDenseCells(inst);
    if (!(m < Infinity)) return null;
    u[r] = m;
    const j = out[1]!;
    if (j === NONE) {
      freeRows[nFree++] = r;
    } else {
      rowToCol[r] = j;
      colToRow[j] = r;
    }
    if (stop(r + 1, nFree, () => tiesAtMinimum(cost, n, u, TIES_SAMPLE))) return null;
  }
  if (nFree > maxLeft) return null;
  let scanned = n * n;
  let left = 0;
  for (let f = 0; f < nFree; f++) {
    const r = freeRows[f]!;
    const base = r * n;
    const ur = u[r]!;
    scanned += n;
    let done = false;
    for (let j = 0; j < n && !done; j++) {
      if (cost[base + j] !== ur) continue;
      const i = colToRow[j]!;
      const to = freeAt(cost, i * n, n, colToRow, u[i]!, spreadStart(i, n));
      scanned += n;
      if (to === NONE) continue;
      rowToCol[i] = to;
      colToRow[to] = i;
      rowToCol[r] = j;
      colToRow[j] = r;
      done = true;
    }
    if (!done) freeRows[left++] = r;
  }
  return { u, rowToCol, colToRow, freeRows: freeRows.slice(0, left), nFree: left, scanned };
}

/**
 * The row-minima start needs many ties at the rows' minima: a row fails the greedy
 * pass when every column at its minimum is taken, so with d ties per row about
 * n/(d + 1) rows are left over, and the start takes at most n/32. Costs with a
 * unique or nearly unique minimum per row (distances; uniform integers 1..1000 on
 * 4000 columns: about 4 ties) would fail only late, after reading much of the
 * matrix; the first TIES_SAMPLE rows' ties decide at once.
 */
const TIES_SAMPLE = 32;
const TIES_MIN = 32;

/**
 * The first look: TIES_PEEK rows holding fewer than TIES_PEEK_MIN ties at their
 * minima on average, far below TIES_MIN, are taken as a sample the greedy pass would
 * give up on (integers 0..9 hold n/10 ties per row; distances and uniform costs one or two).
 */
const TIES_PEEK = 4;
const TIES_PEEK_MIN = 8;

/**
 * Whether the first `rows` rows hold `need` cells equal to their row's minimum, read
 * once. It stops as soon as they do (costs with many ties: within the first row), so
 * a row's count is of the cells at its lowest value so far: a lower value later in
 * the row can only have been missed when the answer is yes, which sends the matrix
 * on to the greedy pass and its own count.
 */
function tiesAtRowMinimaReach(cost: Float64Array, n: number, rows: number, need: number): boolean {
  let ties = 0;
  for (let r = 0; r < rows; r++) {
    let m = Infinity;
    let c = 0;
    for (let k = r * n; k < (r + 1) * n; k++) {
      const x = cost[k]!;
      if (x < m) {
        m = x;
        c = 1;
      } else if (x === m && ++c + ties >= need) {
        return true;
      }
    }
    ties += c;
  }
  return ties >= need;
}

/** Cells equal to their row's minimum u[r], over the first `rows` rows. */
function tiesAtMinimum(cost: Float64Array, n: number, u: Float64Array, rows: number): number {
  let ties = 0;
  for (let r = 0; r < rows; r++) {
    const m = u[r]!;
    const base = r * n;
    for (let j = 0; j < n; j++) if (cost[base + j] === m) ties++;
  }
  return ties;
}

/** Matrices' worth of cells the searches after the row-minima start may read before it gives up. */
const SEARCH_BUDGET_MIN = 1;

/**
 * One row of the row-minima start: writes the row's minimum cost to out[0] and to
 * out[1] the first column still free at that minimum, scanning from column `start`
 * round (NONE when there is none).
 */
function rowMinFree(cost: Float64Array, base: number, n: number, colToRow: Int32Array, start: number, out: Float64Array): void {
  let m = Infinity;
  for (let j = 0; j < n; j++) {
    const x = cost[base + j]!;
    if (x < m) m = x;
  }
  out[0] = m;
  out[1] = freeAt(cost, base, n, colToRow, m, start);
}

/** The first column still free where the row costs `m`, scanning from column `start` round; NONE when there is none. */
function freeAt(cost: Float64Array, base: number, n: number, colToRow: Int32Array, m: number, start: number): number {
  for (let j = start; j < n; j++) if (cost[base + j] === m && colToRow[j] === NONE) return j;
  for (let j = 0; j < start; j++) if (cost[base + j] === m && colToRow[j] === NONE) return j;
  return NONE;
}

/** Square instances below this size never switch to the auction (searches are cheap there). */
const AUCTION_MIN_N = 200;
/** Matrices' worth of cells the searches may read before the auction takes over. */
const SEARCH_BUDGET = 4;

/**
 * The rest of a perfect assignment by the auction: prices from the searches so far
 * (v = −price) go in, ε-optimal prices and a full assignment come out; every row
 * whose pair is then its exact cheapest option at those prices keeps it (tight, and
 * every other pair of it feasible), the others are searched again. Free columns may
 * have any price in the perfect case (the prices are shifted at the end).
 */
function finishByAuction(
  inst: DenseInstance,
  u: Float64Array,
  v: Float64Array,
  rowToCol: Int32Array,
  colToRow: Int32Array,
  search: DenseSearch,
): { bids: number; searches: number; scanned: number } {
  const { nRows: n, cost } = inst;
  let scale = 0;
  for (let k = 0; k < cost.length; k++) {
    const a = Math.abs(cost[k]!);
    if (a < Infinity && a > scale) scale = a;
  }
  if (!(scale > 0)) scale = 1;
  const price = new Float64Array(n);
  for (let j = 0; j < n; j++) price[j] = -v[j]!;
  const assigned = new Int32Array(n);
  // ε from a 64th of the largest cost down to 1e-7 of it, by 8 per phase (measured
  // on the structured families of bench/solver.ts).
  const a = denseAuction(cost, n, price, assigned, scale / 64, scale * 1e-7, 8, 400 * n * n);
  let scanned = a.scanned;
  if (!a.finished) {
    // Out of budget (e.g. a row that cannot be matched): the searches finish alone.
    let searches = 0;
    for (let r = 0; r < n; r++) {
      if (rowToCol[r] !== NONE) continue;
      searches++;
      scanned += search.run(r);
    }
    return { bids: a.bids, searches, scanned };
  }
  rowToCol.fill(NONE);
  colToRow.fill(NONE);
  for (let j = 0; j < n; j++) v[j] = -price[j]!;
  const tie = 1e-12 * scale;
  const free: number[] = [];
  for (let r = 0; r < n; r++) {
    const j = assigned[r]!;
    const base = r * n;
    const m = cheapestExcept(cost, base, n, v, -1);
    scanned += n;
    const own = cost[base + j]! - v[j]!;
    if (j >= 0 && own - m <= tie) {
      rowToCol[r] = j;
      colToRow[j] = r;
      u[r] = own;
    } else {
      free.push(r);
    }
  }
  for (const r of free) scanned += search.run(r);
  return { bids: a.bids, searches: free.length, scanned };
}

/**
 * Column reduction (each column priced at its cheapest pair, given to that row if
 * still free) and reduction transfer (a row holding one column moves its slack onto
 * that column's price), for a square instance where every row must be matched.
 * Reads every cell first. Returns the pairs scanned.
 */
function columnStart(inst: DenseInstance, u: Float64Array, v: Float64Array, rowToCol: Int32Array, colToRow: Int32Array): number {
  const { nRows, nCols, cost } = inst;
  const colArg = new Int32Array(nCols).fill(NONE);
  v.fill(Infinity);
  for (let r = 0; r < nRows; r++) foldColumnMins(cost, r * nCols, nCols, r, v, colArg);
  for (let j = 0; j < nCols; j++) if (v[j] === -Infinity) checkDenseCells(inst);
  let scanned = nRows * nCols;
  const hits = new Int32Array(nRows);
  for (let j = nCols - 1; j >= 0; j--) {
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
  for (let r = 0; r < nRows; r++) {
    const j1 = rowToCol[r]!;
    u[r] = 0;
    if (j1 === NONE || hits[r] !== 1) continue;
    const m = cheapestExcept(cost, r * nCols, nCols, v, j1);
    scanned += nCols;
    if (m < Infinity) {
      v[j1] = v[j1]! - m;
      u[r] = m;
    }
  }
  return scanned;
}

/** Column reduction, one row: lowers each column's running minimum to this row's cost. */
function foldColumnMins(cost: Float64Array, base: number, nCols: number, r: number, v: Float64Array, colArg: Int32Array): void {
  for (let j = 0; j < nCols; j++) {
    const x = cost[base + j]!;
    if (x < v[j]!) {
      v[j] = x;
      colArg[j] = r;
    }
  }
}

/** The row's lowest reduced cost over every column but `skip`. */
function cheapestExcept(cost: Float64Array, base: number, nCols: number, v: Float64Array, skip: number): number {
  let m = Infinity;
  for (let j = 0; j < nCols; j++) {
    if (j === skip) continue;
    const x = cost[base + j]! - v[j]!;
    if (x < m) m = x;
  }
  return m;
}

/**
 * The row's two lowest reduced costs and their columns, starting from option
 * (`u0`, `j0`) — the private column, or none. Writes u1, u2, j1, j2 into `out`.
 */
function twoCheapest(cost: Float64Array, base: number, nCols: number, v: Float64Array, u0: number, j0: number, out: Float64Array): void {
  let u1 = u0;
  let j1 = j0;
  let u2 = Infinity;
  let j2 = NONE;
  for (let j = 0; j < nCols; j++) {
    const x = cost[base + j]! - v[j]!;
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
  out[0] = u1;
  out[1] = u2;
  out[2] = j1;
  out[3] = j2;
}

/**
 * Two passes of augmenting row reduction (reduction.ts). Without a column start
 * every row is free, so the first pass reads every cell: that is where a -Infinity
 * cell is caught on that path.
 */
function reduceDenseRows(
  inst: DenseInstance,
  delta: Float64Array | null,
  u: Float64Array,
  v: Float64Array,
  rowToCol: Int32Array,
  colToRow: Int32Array,
): Reduced {
  const { nRows, nCols, cost } = inst;
  const freeRows = new Int32Array(nRows);
  let nFree = 0;
  for (let r = 0; r < nRows; r++) if (rowToCol[r] === NONE) freeRows[nFree++] = r;
  return reduceRows(freeRows, nFree, u, v, rowToCol, colToRow, {
    passes: 2,
    noDisplace: false,
    cheapestTwo: (r, two) => {
      const hasPrivate = delta !== null && delta[r]! < Infinity;
      twoCheapest(cost, r * nCols, nCols, v, hasPrivate ? delta[r]! : Infinity, hasPrivate ? PRIVATE : NONE, two);
      if (two[0] === -Infinity) checkDenseCells(inst);
      return nCols;
    },
    infeasible: (r) => infeasible(inst, r),
  });
}

/**
 * One shortest-augmenting-path search at a time over whole rows (Dijkstra on
 * reduced costs against the list of unsettled columns), reusing its arrays.
 */
class DenseSearch {
  private readonly dist: Float64Array;
  private readonly pred: Int32Array;
  private readonly remaining: Int32Array;
  private readonly done: Int32Array;

  constructor(
    private readonly inst: DenseInstance,
    private readonly delta: Float64Array | null,
    private readonly u: Float64Array,
    private readonly v: Float64Array,
    private readonly rowToCol: Int32Array,
    private readonly colToRow: Int32Array,
  ) {
    const n = inst.nCols;
    this.dist = new Float64Array(n);
    this.pred = new Int32Array(n);
    this.remaining = new Int32Array(n);
    this.done = new Int32Array(n);
  }

  /** Augments from free row r0 (or settles it unmatched); returns the pairs scanned. */
  run(r0: number): number {
    const { inst, delta, u, v, rowToCol, colToRow, dist, pred, remaining, done } = this;
    const { nCols, cost } = inst;
    dist.fill(Infinity);
    for (let j = 0; j < nCols; j++) remaining[j] = j;
    let nRem = nCols;
    let nDone = 0;
    let bestPriv = Infinity;
    let privRow = NONE;
    let sink = NONE;
    let minVal = 0;
    let i = r0;
    let ui = 0;
    let base = 0;
    let scanned = 0;
    let j = 0;
    for (;;) {
      if (delta !== null) {
        const x = base + delta[i]! - ui;
        if (x < bestPriv) {
          bestPriv = x;
          privRow = i;
        }
      }
      const at = relaxRow(cost, i * nCols, base - ui, i, v, dist, pred, remaining, nRem, colToRow);
      const lowest = at === NONE ? Infinity : dist[remaining[at]!]!;
      scanned += nRem;
      if (at === NONE || lowest > bestPriv) {
        if (bestPriv === Infinity) throw infeasible(inst, r0);
        minVal = bestPriv;
        break;
      }
      j = remaining[at]!;
      if (colToRow[j] === NONE) {
        sink = j;
        minVal = lowest;
        break;
      }
      remaining[at] = remaining[--nRem]!;
      done[nDone++] = j;
      i = colToRow[j]!;
      base = lowest;
      ui = u[i]!;
    }

    for (let t = 0; t < nDone; t++) {
      j = done[t]!;
      const d = minVal - dist[j]!;
      v[j] = v[j]! - d;
      const ri = colToRow[j]!;
      u[ri] = u[ri]! + d;
    }
    u[r0] = minVal;

    shiftAlongPath(r0, sink, privRow, pred, delta, u, rowToCol, colToRow);
    return scanned;
  }
}

/**
 * One step of the dense search: relaxes row `i` (at distance offset `off`) against
 * the unsettled columns and returns the position in `remaining` of the closest one,
 * preferring a free column on ties (it ends the search sooner), or NONE. Kept small
 * and separate so the engine optimises this hot loop on its own.
 */
function relaxRow(
  cost: Float64Array,
  rowBase: number,
  off: number,
  i: number,
  v: Float64Array,
  dist: Float64Array,
  pred: Int32Array,
  remaining: Int32Array,
  nRem: number,
  colToRow: Int32Array,
): number {
  let lowest = Infinity;
  let at = NONE;
  for (let t = 0; t < nRem; t++) {
    const j = remaining[t]!;
    const x = off + cost[rowBase + j]! - v[j]!;
    let s = dist[j]!;
    if (x < s) {
      pred[j] = i;
      dist[j] = x;
      s = x;
    }
    if (s <= lowest && (s < lowest || (s < Infinity && colToRow[j] === NONE))) {
      lowest = s;
      at = t;
    }
  }
  return at;
}

/** Candidate pairs per row for the candidates strategy: enough that few pairs price out. */
function candidateCount(nCols: number): number {
  return Math.min(nCols, Math.max(8, Math.ceil(2.5 * Math.log2(nCols + 1))));
}

/**
 * Exact dense solve on a sparse subset: each row's k cheapest pairs (plus its warm
 * pair) are solved by the sparse core; then every pair of the matrix is priced with
 * the duals found, and any with negative reduced cost joins its row's candidates for
 * a warm re-solve. When none prices out, the duals certify the dense instance too:
 * the constraints are the same, only checked on more pairs. Returns null when the
 * subset cannot be matched (the caller then searches the full matrix).
 *
 * Most rows are priced without reading them again: a pair left out of row r costs at
 * least floor[r] (its dearest candidate), and every column price is at most vTop
 * (≤ 0), so floor[r] − u[r] − vTop ≥ 0 proves the whole row. Where prices differ
 * much from one part of the matrix to another (a distance's dual prices follow the
 * map) that bound fails on most rows, so a row read in one round keeps the lowest
 * c − v off its candidates; in the next round that minimum, lowered by the most any
 * column's price rose since, still bounds c − v off the candidates, and proves the
 * row again while the row's price u stays below it. Only rows where both bounds fail
 * are read pair by pair (geometric n = 2000
 * and 4000: 6.2 and 6.4 matrices read in all, now 3.5 and 3.9 with the pairs that
 * price out gathered on the same read; clustered n = 2000: 9.0, now 6.4).
 *
 * Where a crowded cluster holds more rows than columns, the rows' cheapest pairs
 * cannot all be matched and the pairs that lead out of the cluster are far down
 * their rows. One coarse phase of the list auction (list-auction.ts) finds them: the
 * crowded columns' prices rise until rows bid elsewhere, and each row's list at the
 * end, with its auction column, joins its candidates. Before, short rows were
 * "bridged" to the nearest columns outside the rows reachable from the shortage, in
 * waves; the sparse optimum on those pairs priced whole blocks of pairs out
 * (clustered n = 4000: 976 k after the first solve, 446 M pairs scanned by the next;
 * 3.4–3.9 s in all, against 1.0–1.1 s with the auction's pairs).
 */
function solveByCandidates(inst: DenseInstance, opts: SolveOptions, k: number): SolveResult | null {
  const { nRows, nCols, cost } = inst;
  // per-row candidate lists, grown in place: row r owns slots [r * cap, r * cap + count[r])
  let cap = k + 1;
  let slots = new Int32Array(nRows * cap);
  let slotCost = new Float64Array(nRows * cap);
  const count = new Int32Array(nRows);
  const floor = new Float64Array(nRows);
  const bufKey = new Float64Array(4 * k);
  const bufCol = new Int32Array(4 * k);
  const maxAbs = new Float64Array(1);
  const guess = Float64Array.of(Infinity);
  let scanned = nRows * nCols;
  const wPair = opts.warm?.rowToCol;
  for (let r = 0; r < nRows; r++) {
    const base = r * nCols;
    const at = r * cap;
    let n = pickRow(cost, base, nCols, k, bufKey, bufCol, guess, r, at, slots, slotCost, floor, maxAbs);
    if (n < 0) checkDenseCells(inst);
    if (wPair !== undefined) n = addWarmPair(cost, base, nCols, wPair[r]!, at, n, slots, slotCost);
    count[r] = n;
  }

  /** Room for `need` candidates in every row's list. */
  const ensureCap = (need: number): void => {
    if (need <= cap) return;
    const nextCap = Math.max(need, 2 * cap);
    const grown = new Int32Array(nRows * nextCap);
    const grownCost = new Float64Array(nRows * nextCap);
    for (let r = 0; r < nRows; r++) {
      grown.set(slots.subarray(r * cap, r * cap + count[r]!), r * nextCap);
      grownCost.set(slotCost.subarray(r * cap, r * cap + count[r]!), r * nextCap);
    }
    slots = grown;
    slotCost = grownCost;
    cap = nextCap;
  };
  // Every row must be matched: the candidates must hold a full matching, or the
  // sparse solve below is infeasible (a corner of a geometric matrix, or a cluster,
  // with more rows than columns among their nearest). Checked before solving, as a
  // maximum matching of the candidates costs far less than a solve that fails late
  // (geometric n = 4000: 1.1 s against 1.8 s when widened after the failed solve).
  let bids = 0;
  let auctionWarm: WarmStart | undefined;
  if (nRows <= nCols && mustMatchAll(inst.unmatchedCost ?? null)) {
    const crowd = opts.strategy === 'candidates' || nRows >= CROWDED_MIN_ROWS;
    const w = widenUntilMatchable(inst, k, count, floor, maxAbs, wPair, ensureCap, () => ({ slots, slotCost, cap }), crowd);
    if (w === CROWDED && (opts.strategy ?? 'auto') === 'auto' && wPair === undefined && nRows === nCols && nRows <= KERNEL_CROWDED_MAX_N) {
      // a crowded cluster: the kernel's full search beats the list auction up to here
      const res = solveByKernel(inst);
      if (res !== null) {
        res.stats.scannedPairs += scanned;
        return res;
      }
    }
    if (w === CROWDED) {
      const lists = auctionLists(slots, slotCost, cap, count, floor);
      const price = new Float64Array(nCols);
      const assigned = new Int32Array(nRows);
      const eps = sampledScale(cost, nRows, nCols) / crowdEpsDivisor(nRows);
      const a = listAuction(cost, nRows, nCols, lists, price, assigned, eps, eps, 2, CROWD_BUDGET * nRows * nCols);
      scanned += a.scanned;
      bids = a.bids;
      if (!a.finished) return null;
      ensureCap(maxCount(count) + lists.k + 1);
      addAuctionPairs(cost, nCols, lists, assigned, slots, slotCost, cap, count, maxAbs);
      // the sparse solve starts warm from the auction's prices and assignment
      const colPrices = new Float64Array(nCols);
      for (let j = 0; j < nCols; j++) colPrices[j] = -price[j]!;
      auctionWarm = { rowToCol: assigned, colPrices };
    } else if (w < 0) {
      return null;
    } else {
      scanned += w;
    }
  }

  let warm: WarmStart | undefined = opts.warm ?? auctionWarm;
  let augmentations = 0;
  let stamp: Int32Array | null = null;
  let mark = 0;
  const outMin = new Float64Array(nRows);
  const rowMin = new Float64Array(2);
  // the pairs that price out, by row (row r's from pendFrom[r]), added once a round is priced
  const pendFrom = new Int32Array(nRows + 1);
  let pendCol = new Int32Array(4 * nCols);
  let pendCost = new Float64Array(4 * nCols);
  let pendLen = 0;
  let vPrev: Float64Array | null = null;
  for (let round = 0; round < 20; round++) {
    const sub = packCandidates(nRows, nCols, slots, slotCost, cap, count, inst.unmatchedCost ?? null);
    let res: SolveResult;
    try {
      res = solveSparseCore(sub, { ...(warm !== undefined ? { warm } : {}), ...(opts.now !== undefined ? { now: opts.now } : {}), strategy: 'full' });
    } catch (err) {
      if (err instanceof PairflowError && err.code === 'PAIRFLOW_ERR_SOLVER_INFEASIBLE') return null;
      throw err;
    }
    augmentations += res.stats.augmentations;
    scanned += res.stats.scannedPairs;
    // price every pair; a pair may miss by rounding noise far below the certificate's
    // tolerance. The scale takes the candidates' costs and the duals: a pair left out
    // costs at least its row's cheapest candidate, so a pair that prices out is no
    // larger than these in magnitude.
    const u = res.rowDuals;
    const v = res.colDuals;
    let scale = maxAbs[0]!;
    for (let r = 0; r < nRows; r++) scale = Math.max(scale, Math.abs(u[r]!));
    let vTop = -Infinity;
    for (let j = 0; j < nCols; j++) {
      scale = Math.max(scale, Math.abs(v[j]!));
      if (v[j]! > vTop) vTop = v[j]!;
    }
    const slack = -1e-11 * (scale > 0 ? scale : 1);
    // Rows read in an earlier round keep outMin[r], a lower bound on c − v over the
    // columns off their candidates at that round's prices; no column's price rose by
    // more than `rise` since, so outMin[r] − rise bounds c − v at these prices.
    let rise = Infinity;
    if (vPrev !== null) {
      rise = -Infinity;
      for (let j = 0; j < nCols; j++) if (v[j]! - vPrev[j]! > rise) rise = v[j]! - vPrev[j]!;
    }
    stamp ??= new Int32Array(nCols);
    let violations = 0;
    pendLen = 0;
    for (let r = 0; r < nRows; r++) {
      const ur = u[r]!;
      // The bound is computed in the same order as the per-pair test and rounding is
      // monotone, so when it holds no pair of the row can fail that test.
      let proven = floor[r]! - ur - vTop >= slack;
      if (proven) {
        outMin[r] = floor[r]! - vTop;
      } else if (rise < Infinity) {
        // Not the per-pair test's terms: it must hold by a rounding allowance.
        const m = outMin[r]! - rise;
        proven = m - ur >= 1e-14 * (Math.abs(outMin[r]!) + Math.abs(rise) + Math.abs(ur) + scale);
        if (proven) outMin[r] = m;
      }
      pendFrom[r] = pendLen;
      if (!proven) {
        mark++;
        for (let t = r * cap; t < r * cap + count[r]!; t++) stamp[slots[t]!] = mark;
        if (pendCol.length < pendLen + nCols) {
          const size = Math.max(2 * pendCol.length, pendLen + nCols);
          const grownCol = new Int32Array(size);
          grownCol.set(pendCol.subarray(0, pendLen));
          const grownCost = new Float64Array(size);
          grownCost.set(pendCost.subarray(0, pendLen));
          pendCol = grownCol;
          pendCost = grownCost;
        }
        violations += priceRow(cost, r * nCols, nCols, ur, v, slack, stamp, mark, pendCol, pendCost, pendLen, rowMin);
        pendLen = rowMin[1]!;
        outMin[r] = rowMin[0]!;
        scanned += nCols;
      }
    }
    pendFrom[nRows] = pendLen;
    vPrev = v;
    if (violations === 0) return certified(res, augmentations, scanned, opts, bids);
    // only candidates missed, by rounding within the sparse solve's own certificate
    if (pendLen === 0) return certified(res, augmentations, scanned, opts, bids);
    // grow the lists and add the pairs that priced out and are not candidates yet
    let need = 0;
    for (let r = 0; r < nRows; r++) need = Math.max(need, count[r]! + pendFrom[r + 1]! - pendFrom[r]!);
    ensureCap(need);
    for (let r = 0; r < nRows; r++) {
      let n = count[r]!;
      for (let t = pendFrom[r]!; t < pendFrom[r + 1]!; t++) {
        slots[r * cap + n] = pendCol[t]!;
        slotCost[r * cap + n++] = pendCost[t]!;
      }
      count[r] = n;
    }
    warm = { colPrices: v, rowPrices: u, rowToCol: res.rowToCol };
  }
  return null;
}

/*
 * When widening gives up. A local shortage (a corner of a geometric matrix: 7 of
 * 4000 rows short) is met by a doubling or two. Rows that must reach much farther (a
 * cluster with more rows than columns: 1–6 % of the rows short, the shortage not
 * shrinking as the lists double) are not helped by more of their own nearest
 * columns (measured: clustered n = 4000 took 35 s widened, 5 s by the full search);
 * on matrices of CROWDED_MIN_ROWS rows or more they go to the list auction instead
 * (see solveByCandidates; it also takes the place of doubling there), and below that
 * to the full search. Give up when a doubling did not shrink the shortage, or at 4×
 * the first count.
 */
const WIDEN_MAX = 4;
const WIDEN_MAX_SHORT = 100;

/** Candidate lists as they stand (ensureCap may replace the arrays). */
interface Lists {
  slots: Int32Array;
  slotCost: Float64Array;
  cap: number;
}

/**
 * Widens candidate lists until a matching of every row fits inside them: a maximum
 * matching of the candidate graph (Hopcroft–Karp), then every row reachable by an
 * alternating path from an unmatched row (the rows that compete for too few columns,
 * Hall's condition) takes twice its cheapest pairs, and again. The pairs added are
 * each row's next cheapest, so the lists stay "the row's cheapest" and `floor` stays
 * a bound on every pair left out. Returns the cells read; CROWDED when `crowd` is
 * set and the candidates leave rows short, at most a CROWDED_MAX_SHORT share (the
 * caller gathers the pairs out of the crowded cluster); -1 when it gives up (see
 * WIDEN_MAX; the full search then runs and reports rows that cannot all be
 * matched). A row's warm pair, if any, is added back after its list is picked again.
 */
function widenUntilMatchable(
  inst: DenseInstance,
  k0: number,
  count: Int32Array,
  floor: Float64Array,
  maxAbs: Float64Array,
  wPair: Int32Array | undefined,
  ensureCap: (need: number) => void,
  lists: () => Lists,
  crowd: boolean,
): number {
  const { nRows, nCols, cost } = inst;
  let scanned = 0;
  const rowSeen = new Uint8Array(nRows);
  const colSeen = new Uint8Array(nCols);
  const queue = new Int32Array(nRows);
  const guess = Float64Array.of(Infinity);
  let lastDeficit = Infinity;
  for (let k = k0; ; ) {
    let cur = lists();
    const { rowPtr, colIdx } = packCandidates(nRows, nCols, cur.slots, cur.slotCost, cur.cap, count, null);
    const m = maxCardinalityMatching({ nRows, nCols, rowPtr, colIdx });
    if (m.size === nRows) return scanned;
    // rows reachable from an unmatched row by alternating paths
    rowSeen.fill(0);
    colSeen.fill(0);
    let head = 0;
    let tail = 0;
    for (let r = 0; r < nRows; r++) {
      if (m.rowToCol[r] === -1) {
        rowSeen[r] = 1;
        queue[tail++] = r;
      }
    }
    while (head < tail) {
      const r = queue[head++]!;
      for (let e = rowPtr[r]!; e < rowPtr[r + 1]!; e++) {
        const c = colIdx[e]!;
        if (colSeen[c] === 1) continue;
        colSeen[c] = 1;
        const q = m.colToRow[c]!;
        if (q >= 0 && rowSeen[q] === 0) {
          rowSeen[q] = 1;
          queue[tail++] = q;
        }
      }
    }
    const deficit = nRows - m.size;
    if (crowd && deficit <= nRows / CROWDED_MAX_SHORT) return CROWDED;
    if (deficit > nRows / WIDEN_MAX_SHORT) return -1;
    if (deficit >= lastDeficit || k >= WIDEN_MAX * k0 || k >= nCols) return -1;
    lastDeficit = deficit;
    k = Math.min(nCols, 2 * k);
    ensureCap(k + 1);
    cur = lists();
    const key = new Float64Array(4 * k);
    const col = new Int32Array(4 * k);
    for (let t = 0; t < tail; t++) {
      const r = queue[t]!;
      if (count[r]! >= k) continue;
      guess[0] = Infinity;
      let n = pickRow(cost, r * nCols, nCols, k, key, col, guess, r, r * cur.cap, cur.slots, cur.slotCost, floor, maxAbs);
      if (n < 0) checkDenseCells(inst);
      if (wPair !== undefined) n = addWarmPair(cost, r * nCols, nCols, wPair[r]!, r * cur.cap, n, cur.slots, cur.slotCost);
      count[r] = n;
      scanned += nCols;
    }
  }
}

/** What widenUntilMatchable returns for a crowded cluster (see CROWDED_MAX_SHORT). */
const CROWDED = -2;
/**
 * A shortage of more than this share of the rows is no crowded cluster: where every
 * row wants the same few columns (rank one, Machol–Wien: 98 % of the rows short of a
 * match among the candidates, against 2–7 % on clustered costs) the full search takes
 * over at once.
 */
const CROWDED_MAX_SHORT = 4;
/**
 * From this many rows, `auto` meets a crowded cluster by the list auction; below, the
 * full search is faster on a first solve (measured in fresh processes on clustered
 * costs, medians of 4–6 alternating runs, full search against list auction and
 * pricing rounds: n = 600 55 against 67 ms, n = 800 88 against 82 ms, n = 1000
 * 123–143 against 102–112 ms over three seeds, the instance built in the process;
 * in bench:solver's child, which reads it from a file, n = 1000 was even: medians of
 * 10, 159 against 160 ms, at a load of 2.5; n = 2000 440 against 286 ms).
 */
const CROWDED_MIN_ROWS = 1000;
/**
 * The list auction's one phase runs at ε = (largest cost) / crowdEpsDivisor(rows):
 * coarse prices suffice to gather the pairs out of crowded clusters, and the exact
 * prices come from the sparse solves after it, which start warm from the auction's
 * prices and assignment (first solves in fresh processes, clustered n = 2000 and
 * 4000: 10–15 % faster than starting cold). Measured the same way, whole solve in ms:
 * n = 2000, divisor 4 / 8 / 16 / 32: 340 / 290–300 / 330 / 340–390 (two seeds);
 * n = 4000, divisor 4 / 8 / 16: 1960 / 1170–1230 / 1020–1060 (two seeds; a third
 * about even). Fewer phases pay: six phases down to a divisor of 300 took 326 ms at
 * n = 2000 and 1534 ms at n = 4000 where one phase at 16 took 246 and 1110 (steady
 * state).
 */
function crowdEpsDivisor(nRows: number): number {
  return Math.min(16, Math.max(8, nRows / 250));
}
/** Matrices' worth of cells the list auction may read before the full search takes over. */
const CROWD_BUDGET = 16;

/** Largest finite |cost| over every 64th row: the scale of ε. */
function sampledScale(cost: Float64Array, nRows: number, nCols: number): number {
  let scale = 0;
  for (let r = 0; r < nRows; r += 64) {
    for (let j = r * nCols; j < (r + 1) * nCols; j++) {
      const a = Math.abs(cost[j]!);
      if (a < Infinity && a > scale) scale = a;
    }
  }
  return scale > 0 ? scale : 1;
}

/** The candidates as the list auction's lists: each row's pairs, its floor as the bound (prices start at 0). */
function auctionLists(slots: Int32Array, slotCost: Float64Array, cap: number, count: Int32Array, floor: Float64Array): AuctionLists {
  const nRows = count.length;
  const k = maxCount(count);
  const col = new Int32Array(nRows * k);
  const val = new Float64Array(nRows * k);
  for (let r = 0; r < nRows; r++) {
    col.set(slots.subarray(r * cap, r * cap + count[r]!), r * k);
    val.set(slotCost.subarray(r * cap, r * cap + count[r]!), r * k);
  }
  return { k, stride: k, col, val, len: Int32Array.from(count), bound: Float64Array.from(floor) };
}

/**
 * Appends to each row's candidates the columns of its auction list and its auction
 * column, where not candidates yet. They are not among the row's cheapest, so
 * floor[r] stays a bound on every pair left out; the auction's assignment is a full
 * matching inside the lists, so the sparse solve of the candidates is feasible.
 */
function addAuctionPairs(
  cost: Float64Array,
  nCols: number,
  lists: AuctionLists,
  assigned: Int32Array,
  slots: Int32Array,
  slotCost: Float64Array,
  cap: number,
  count: Int32Array,
  maxAbs: Float64Array,
): void {
  const stamp = new Int32Array(nCols).fill(-1);
  let big = maxAbs[0]!;
  for (let r = 0; r < count.length; r++) {
    const at = r * cap;
    let n = count[r]!;
    for (let t = 0; t < n; t++) stamp[slots[at + t]!] = r;
    const from = r * lists.stride;
    const len = lists.len[r]!;
    for (let t = 0; t <= len; t++) {
      const j = t < len ? lists.col[from + t]! : assigned[r]!;
      if (j < 0 || stamp[j] === r) continue;
      stamp[j] = r;
      const c = cost[r * nCols + j]!;
      slots[at + n] = j;
      slotCost[at + n++] = c;
      if (c > big) big = c;
      else if (-c > big) big = -c;
    }
    count[r] = n;
  }
  maxAbs[0] = big;
}

function maxCount(count: Int32Array): number {
  let m = 0;
  for (let r = 0; r < count.length; r++) if (count[r]! > m) m = count[r]!;
  return m;
}

/**
 * Row r's candidates: its k cheapest allowed pairs go to slots/slotCost from `at`;
 * floor[r] becomes a lower bound on the cost of every allowed pair left out (the
 * dearest candidate, or +Infinity when none is left out) and maxAbs[0] the largest
 * |cost| among the candidates so far. Returns the count, or -1 when the row holds a
 * -Infinity cell.
 */
function pickRow(
  cost: Float64Array,
  base: number,
  nCols: number,
  k: number,
  key: Float64Array,
  col: Int32Array,
  guess: Float64Array,
  r: number,
  at: number,
  slots: Int32Array,
  slotCost: Float64Array,
  floor: Float64Array,
  maxAbs: Float64Array,
): number {
  const n = cheapestK(cost, base, nCols, k, key, col, guess, scanStart(r, nCols));
  let top = -Infinity;
  let big = maxAbs[0]!;
  for (let t = 0; t < n; t++) {
    const c = key[t]!;
    if (c === -Infinity) return -1;
    if (c > top) top = c;
    if (c > big) big = c;
    else if (-c > big) big = -c;
    slots[at + t] = col[t]!;
    slotCost[at + t] = c;
  }
  maxAbs[0] = big;
  floor[r] = n < k ? Infinity : top;
  return n;
}

/** Adds the row's warm pair to its n candidates unless it is one or not allowed; returns the count. */
function addWarmPair(cost: Float64Array, base: number, nCols: number, wj: number, at: number, n: number, slots: Int32Array, slotCost: Float64Array): number {
  if (wj < 0 || wj >= nCols || !(cost[base + wj]! < Infinity)) return n;
  for (let t = 0; t < n; t++) if (slots[at + t] === wj) return n;
  slots[at + n] = wj;
  slotCost[at + n] = cost[base + wj]!;
  return n + 1;
}

function certified(res: SolveResult, augmentations: number, scanned: number, opts: SolveOptions, bids: number): SolveResult {
  return {
    ...res,
    stats: { ...res.stats, augmentations, scannedPairs: scanned, warm: opts.warm !== undefined && res.stats.warm, ms: 0, ...(bids > 0 ? { auctionBids: bids } : {}) },
  };
}

/**
 * Moves the k cheapest allowed pairs of one row (as a set, ties broken by position in
 * the row's scan order, see {@link scanStart}) into key/col[0 .. returned count);
 * `key` holds 4k. Pairs below a threshold are gathered; when the buffer fills, a
 * selection keeps the 2k cheapest and lowers the threshold to the dearest kept. The
 * threshold starts at `guess[0]`, the previous row's 2k-th cheapest cost (rows of one
 * matrix tend to look alike), so a row costs one read and about 2k gathered pairs;
 * when fewer than k pairs fall below it the row is read again from +Infinity. Any
 * guess gives the same set; a good one is only faster. The row's 2k-th cheapest
 * (raised by an ulp or two, so ties at it are gathered) becomes the next guess.
 */
function cheapestK(cost: Float64Array, base: number, nCols: number, k: number, key: Float64Array, col: Int32Array, guess: Float64Array, start: number): number {
  let n = gatherBelow(cost, base, nCols, 2 * k, key, col, guess[0]!, start);
  if (n < k && guess[0]! < Infinity) n = gatherBelow(cost, base, nCols, 2 * k, key, col, Infinity, start);
  if (n >= 2 * k) {
    // The next row gathers below a hair above this row's 2k-th cheapest, so that ties
    // at it count: with few distinct costs it is often the row's minimum (0), and a
    // strict "below 0" would gather nothing and read every row twice.
    const kth = keepCheapest(key, col, n, 2 * k);
    guess[0] = kth + Math.max(Math.abs(kth) * Number.EPSILON, Number.MIN_VALUE);
    n = 2 * k;
  }
  if (n > k) {
    keepCheapest(key, col, n, k);
    n = k;
  }
  return n;
}

/**
 * Where row r's scan for its cheapest pairs starts: a column spread over the row by
 * the golden ratio (Fibonacci hashing), the scan wrapping round from there. Among
 * pairs of equal cost the first ones scanned are kept, so with a common start every
 * row of a matrix with few distinct costs (integers 0..9, say) would take its ties
 * from the same first columns, and the candidates would crowd onto a few hundred
 * columns that cannot serve every row: many pricing rounds. Spread starts give each
 * row a different share of its ties. Any start gives the exact optimum.
 */
function scanStart(r: number, nCols: number): number {
  return Math.floor(((r * 0.6180339887498949) % 1) * nCols);
}

/**
 * Gathers the row's pairs with cost below `threshold` into key/col, scanning from
 * column `start` round to `start − 1`; whenever the buffer fills, keeps the `keep`
 * cheapest and lowers the threshold to the dearest of them, so the `keep` cheapest
 * pairs below the starting threshold are always among those gathered. Returns how
 * many were gathered.
 */
function gatherBelow(cost: Float64Array, base: number, nCols: number, keep: number, key: Float64Array, col: Int32Array, threshold: number, start: number): number {
  const size = key.length;
  let n = 0;
  for (let pass = 0; pass < 2; pass++) {
    const from = pass === 0 ? start : 0;
    const to = pass === 0 ? nCols : start;
    for (let j = from; j < to; j++) {
      const c = cost[base + j]!;
      if (c < threshold) {
        key[n] = c;
        col[n++] = j;
        if (n === size) {
          threshold = keepCheapest(key, col, n, keep);
          n = keep;
        }
      }
    }
  }
  return n;
}

/**
 * One row's pricing: returns how many of its pairs have reduced cost below `slack`
 * (negative: they price out), appends those off its candidates (the columns stamped
 * with `mark`) to col/val from `at`, and writes to out[0] the lowest c − v over the
 * columns off its candidates, to out[1] where the appended pairs end.
 */
function priceRow(
  cost: Float64Array,
  base: number,
  nCols: number,
  ur: number,
  v: Float64Array,
  slack: number,
  stamp: Int32Array,
  mark: number,
  col: Int32Array,
  val: Float64Array,
  at: number,
  out: Float64Array,
): number {
  let n = 0;
  let low = Infinity;
  for (let j = 0; j < nCols; j++) {
    const c = cost[base + j]!;
    const x = c - v[j]!;
    if (stamp[j] === mark) {
      if (c - ur - v[j]! < slack) n++;
      continue;
    }
    if (x < low) low = x;
    if (c - ur - v[j]! < slack) {
      n++;
      col[at] = j;
      val[at++] = c;
    }
  }
  out[0] = low;
  out[1] = at;
  return n;
}

function packCandidates(
  nRows: number,
  nCols: number,
  slots: Int32Array,
  slotCost: Float64Array,
  cap: number,
  count: Int32Array,
  unmatchedCost: Float64Array | null,
): SparseInstance {
  const rowPtr = new Int32Array(nRows + 1);
  for (let r = 0; r < nRows; r++) rowPtr[r + 1] = rowPtr[r]! + count[r]!;
  const nnz = rowPtr[nRows]!;
  const colIdx = new Int32Array(nnz);
  const sub = new Float64Array(nnz);
  for (let r = 0; r < nRows; r++) {
    const at = r * cap;
    const n = count[r]!;
    colIdx.set(slots.subarray(at, at + n), rowPtr[r]!);
    sub.set(slotCost.subarray(at, at + n), rowPtr[r]!);
  }
  return { nRows, nCols, rowPtr, colIdx, cost: sub, unmatchedCost };
}

/**
 * The allowed cells of a dense matrix (cost < +Infinity; NaN is not allowed) as CSR.
 * Its first pass reads every cell, so it is where a -Infinity is caught on this path.
 */
function denseToCsr(inst: DenseInstance): SparseInstance {
  const { nRows, nCols, cost } = inst;
  const rowPtr = new Int32Array(nRows + 1);
  let nnz = 0;
  for (let k = 0; k < cost.length; k++) {
    const c = cost[k]!;
    if (c < Infinity) nnz++;
    if (c === -Infinity) checkDenseCells(inst);
  }
  const colIdx = new Int32Array(nnz);
  const sub = new Float64Array(nnz);
  let e = 0;
  for (let r = 0; r < nRows; r++) {
    const base = r * nCols;
    for (let j = 0; j < nCols; j++) {
      const c = cost[base + j]!;
      if (!(c < Infinity)) continue;
      colIdx[e] = j;
      sub[e++] = c;
    }
    rowPtr[r + 1] = e;
  }
  return { nRows, nCols, rowPtr, colIdx, cost: sub, unmatchedCost: inst.unmatchedCost ?? null };
}

