import type { DenseInstance, SolveOptions, SolveResult, SparseInstance, WarmStart } from './types.js';
import { solveDenseCore } from './dense.js';
import { solveSparseCore } from './sparse.js';

/*
 * The max-weight form is the min-cost form with every number negated; only the
 * signs of what goes in and comes out change, so both forms share one exact core.
 */

function negate(a: Float64Array | null | undefined): Float64Array | null {
  if (a === null || a === undefined) return null;
  const out = new Float64Array(a.length);
  for (let k = 0; k < a.length; k++) out[k] = -a[k]!;
  return out;
}

function negateWarm(warm: WarmStart | undefined): WarmStart | undefined {
  if (warm === undefined) return undefined;
  return {
    ...(warm.colPrices !== undefined ? { colPrices: negate(warm.colPrices)! } : {}),
    ...(warm.rowPrices !== undefined ? { rowPrices: negate(warm.rowPrices)! } : {}),
    ...(warm.rowToCol !== undefined ? { rowToCol: warm.rowToCol } : {}),
  };
}

function flip(res: SolveResult): SolveResult {
  const rowDuals = res.rowDuals;
  const colDuals = res.colDuals;
  for (let k = 0; k < rowDuals.length; k++) rowDuals[k] = 0 - rowDuals[k]!;
  for (let k = 0; k < colDuals.length; k++) colDuals[k] = 0 - colDuals[k]!;
  // 0 − x rather than −x: a zero price stays +0, not −0
  return { ...res, cost: 0 - res.cost, rowDuals, colDuals };
}

function negOptions(opts: SolveOptions): SolveOptions {
  const warm = negateWarm(opts.warm);
  return { ...(opts.now !== undefined ? { now: opts.now } : {}), ...(warm !== undefined ? { warm } : {}) };
}

/**
 * Maximum-weight assignment on a CSR instance: `inst.cost` holds weights and
 * `inst.unmatchedCost` (optional) the value ω_d of leaving row d unmatched
 * (-Infinity: that row must be matched). With no `unmatchedCost` every row must be
 * matched, as in the min-cost form. Maximises Σ matched weights + Σ ω over unmatched
 * rows; `result.cost` is that maximum.
 *
 * Dual convention (the LP dual of the max form): `rowDuals` p and `colDuals` q
 * satisfy p_d + q_s ≥ w_sd on every allowed pair, p_d ≥ ω_d, q_s ≥ 0, and
 * Σp + Σq = the maximum — they are the negated duals of the equivalent min-cost
 * problem. Check with `checkCertificate(inst, res, { maximize: true })`.
 * Warm prices, if given, are in this same (max-form) convention.
 * @example
 * const best = maximizeSparse({ nRows: 1, nCols: 2, rowPtr: Int32Array.of(0, 2),
 *   colIdx: Int32Array.of(0, 1), cost: Float64Array.of(3, 5) });
 * // best.cost === 5, best.rowToCol[0] === 1
 */
export function maximizeSparse(inst: SparseInstance, opts: SolveOptions = {}): SolveResult {
  const neg: SparseInstance = { ...inst, cost: negate(inst.cost)!, unmatchedCost: negate(inst.unmatchedCost) };
  return flip(solveSparseCore(neg, negOptions(opts)));
}

/**
 * Maximum-weight assignment on a dense row-major weight matrix; `-Infinity` or NaN
 * marks a pair that is not allowed. Otherwise as {@link maximizeSparse}.
 */
export function maximizeDense(inst: DenseInstance, opts: SolveOptions = {}): SolveResult {
  const neg: DenseInstance = { ...inst, cost: negate(inst.cost)!, unmatchedCost: negate(inst.unmatchedCost) };
  return flip(solveDenseCore(neg, negOptions(opts)));
}
