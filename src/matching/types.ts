/**
 * The solver's data contract (SPEC §5). Rows are demand, columns are supply. Only
 * allowed pairs exist. Each row is matched once, or left unmatched at its own cost
 * `unmatchedCost[row]` (δ); with no `unmatchedCost` every row must be matched. Each
 * column is matched at most once, unmatched at cost 0.
 */

/** Allowed pairs in CSR form: row r's pairs are `colIdx[rowPtr[r] .. rowPtr[r+1])`. */
export interface SparseInstance {
  readonly nRows: number;
  readonly nCols: number;
  /** Length nRows + 1. */
  readonly rowPtr: Int32Array;
  /** Length nnz; column of each pair. No duplicate column within a row. */
  readonly colIdx: Int32Array;
  /** Length nnz; cost of each pair (finite; negative and fractional allowed). */
  readonly cost: Float64Array;
  /** δ per row (length nRows), or null/undefined when every row must be matched. */
  readonly unmatchedCost?: Float64Array | null;
}

/** A dense row-major cost matrix; `Infinity` (or NaN) marks a pair that is not allowed. */
export interface DenseInstance {
  readonly nRows: number;
  readonly nCols: number;
  /** Length nRows * nCols, row-major. */
  readonly cost: Float64Array;
  readonly unmatchedCost?: Float64Array | null;
}

/**
 * Warm-start hints from a previous solve, already mapped onto this instance's indices.
 * Prices are used only for the columns of previous pairs (`rowToCol`) that are still
 * allowed: every other column is priced afresh from the kept pairs (column reduction),
 * and a free column left below 0 is fixed by a reverse shortest-path search, because a
 * free column must end at price 0 for the certificate. Without `rowToCol` the hints
 * are ignored.
 */
export interface WarmStart {
  /** Column prices v (length nCols); NaN where unknown (a new column). */
  readonly colPrices?: Float64Array;
  /** Row prices u (length nRows); NaN where unknown. */
  readonly rowPrices?: Float64Array;
  /** A previous assignment: column per row, -1 where none (length nRows). Pairs that are not allowed are ignored. */
  readonly rowToCol?: Int32Array;
}

export interface SolveOptions {
  readonly warm?: WarmStart;
  /**
   * When a warm hint is used: `'pays'` where it is worth its fixed cost (see
   * {@link WarmStart}), `'always'` whenever it is given (tests of the warm start
   * itself on tiny instances). @default 'pays'
   */
  readonly warmWhen?: 'pays' | 'always';
  /** Clock for `stats.ms`; injected so the core does no I/O. @default performance.now */
  readonly now?: () => number;
  /**
   * How `solveDense` works (sparse input ignores it): `'full'` searches whole rows;
   * `'candidates'` first solves on each row's cheapest pairs, then prices every
   * allowed pair with the duals found, adds any that prices out and re-solves
   * (warm) until none does — exact either way; `'auto'` uses candidates for
   * matrices of 250,000 cells or more with fewer than 1.08 columns per row
   * (measured crossovers; wider ones are faster searched in full). On that path a
   * square matrix whose rows must all be matched first tries the row-minima start
   * (row reduction and a greedy pass on tied minima: costs with few distinct values
   * are solved in about one read of the matrix; it gives up at once on unique minima),
   * and where the candidates cannot match every row (a crowded cluster) one coarse
   * phase of an auction bidding from each row's candidates finds the pairs that lead
   * out of the cluster, which join the candidates — always under `'candidates'`,
   * under `'auto'` from 1000 rows (dense.ts, list-auction.ts). @default 'auto'
   */
  readonly strategy?: 'auto' | 'full' | 'candidates';
  /**
   * How the shortest-path solver is started. `'auction'` first finds near-optimal
   * prices with the forward–reverse auction (auction.ts) and warm-starts from them
   * (from `warm`'s column prices when given): much faster on costs with many
   * near-ties; the result is exact and certified either way. @default 'none'
   */
  readonly presolve?: 'none' | 'auction';
  /**
   * Whether `solveSparse` first checks that the instance is well formed (sizes,
   * columns in range and once per row, costs finite and within the bound): a pass
   * over every pair, a quarter of the window engine's online replay of the demo day
   * under `commit: "due"` (pools of hundreds of units, solved anew every epoch).
   * `false` is for callers whose instances are well formed by construction;
   * a malformed one then gives an undefined result instead of
   * PAIRFLOW_ERR_SOLVER_INPUT. Dense input is checked in its first pass anyway.
   * @default true
   */
  readonly check?: boolean;
}

export interface SolveStats {
  /** Shortest augmenting paths run. */
  augmentations: number;
  /** Pairs whose reduced cost was looked at. */
  scannedPairs: number;
  /** Wall time of the solve, by the injected clock. */
  ms: number;
  /** Whether a warm start was used. */
  warm: boolean;
  /** Warm pairs kept matched when the warm start began (0 when cold). */
  warmPairsKept?: number;
  /** Reverse searches the warm start ran from freed columns with a price below 0 (also counted in `augmentations`). */
  reverseSearches?: number;
  /** Rows left for shortest-path search after the warm start and greedy passes. */
  searchedRows?: number;
  /**
   * Bids of an auction the dense solver ran: the auction it handed over to
   * (dense-auction.ts), or the list auction that gathers the pairs out of a crowded
   * cluster for the candidates strategy (list-auction.ts).
   */
  auctionBids?: number;
  /** True when the dense solve ran in the WebAssembly kernel (wasm/dense-jv.wat). */
  wasmKernel?: boolean;
}

export interface SolveResult {
  /** Σ matched costs + Σ δ over unmatched rows. */
  readonly cost: number;
  /** Column per row, -1 when unmatched (length nRows). */
  readonly rowToCol: Int32Array;
  /** Row per column, -1 when unmatched (length nCols). */
  readonly colToRow: Int32Array;
  /** u per row: the certificate of SPEC §5 holds for (rowDuals, colDuals). */
  readonly rowDuals: Float64Array;
  /** v per column, every one ≤ 0. */
  readonly colDuals: Float64Array;
  readonly stats: SolveStats;
}
