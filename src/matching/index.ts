/**
 * The exact assignment solver (SPEC §5): min-cost and max-weight forms on dense and
 * CSR instances, each returning dual prices that {@link checkCertificate} verifies.
 */
import type { DenseInstance, SolveOptions, SolveResult, SparseInstance } from './types.js';
import { solveDenseCore } from './dense.js';
import { solveSparseCore } from './sparse.js';

export type * from './types.js';
export { checkCertificate } from './certificate.js';
export type { CertificateOptions, CertificateReport } from './certificate.js';
export { maximizeDense, maximizeSparse } from './maximize.js';
export { maxCardinalityMatching, minVertexCover, type BipartiteGraph, type CardinalityMatching, type VertexCover } from './cardinality.js';

/**
 * Min-cost assignment on a CSR instance, exactly, by shortest augmenting paths with
 * dual prices. Never builds a dense matrix: memory and work follow the allowed pairs.
 *
 * Throws `PAIRFLOW_ERR_SOLVER_INPUT` for a malformed instance (bad CSR, duplicate
 * pair, non-finite cost, wrong lengths) and `PAIRFLOW_ERR_SOLVER_INFEASIBLE` when
 * some row without an unmatched cost cannot be matched. `unmatchedCost[r]` may be
 * +Infinity: that row must be matched.
 *
 * `opts.warm` (prices and pairs of a previous solve, mapped to this instance) only
 * changes the work done, never the optimum: still-allowed previous pairs start
 * matched at their previous column prices, a row that now prefers something else is
 * searched afresh, every other column is priced by column reduction, and free
 * columns left below price 0 after the searches are fixed by reverse shortest-path
 * searches — so any input, even garbage, ends at the exact optimum with a valid
 * certificate. It pays off in proportion to what survives: free when costs only
 * shift per row, about 1.3–1.5× faster than cold at 20 % turnover per window and
 * about even at 50 % (docs/benchmarks.md).
 * @example
 * const res = solveSparse({ nRows: 2, nCols: 2, rowPtr: Int32Array.of(0, 2, 3),
 *   colIdx: Int32Array.of(0, 1, 0), cost: Float64Array.of(1, 4, 2),
 *   unmatchedCost: Float64Array.of(10, 10) });
 * // res.cost === 6 (row 0 → column 1, row 1 → column 0)
 */
export function solveSparse(inst: SparseInstance, opts: SolveOptions = {}): SolveResult {
  return solveSparseCore(inst, opts);
}

/**
 * Min-cost assignment on a dense row-major matrix (`Infinity` or NaN = not allowed).
 * Same contract as {@link solveSparse}; faster when most pairs are allowed.
 * @example
 * const res = solveDense({ nRows: 2, nCols: 3, cost: Float64Array.of(4, 1, 6, 2, 0, 5) });
 * // res.cost === 3 (row 0 → column 1, row 1 → column 0)
 */
export function solveDense(inst: DenseInstance, opts: SolveOptions = {}): SolveResult {
  return solveDenseCore(inst, opts);
}

export { denseCosts } from './dense.js';
