import { pairflowError } from '../errors.js';
import type { DenseInstance, SparseInstance, WarmStart } from './types.js';

/**
 * The largest |cost| (and |unmatched cost|) a solver input may hold. SPEC §5: inputs
 * whose costs cannot be represented are input errors stating the bound. Below it,
 * every sum the solver forms (reduced costs, path lengths over up to 2³² arcs, dual
 * objectives) stays finite, so the certificate can be checked; near the double
 * limit (1.8e308) the sum of two costs already overflows to Infinity.
 */
export const MAX_COST = 1e150;

/** How the bound reads in messages. */
export const MAX_COST_TEXT = '±1e150';

function bad(detail: string): never {
  throw pairflowError('PAIRFLOW_ERR_SOLVER_INPUT', { detail });
}

function checkSize(name: string, value: unknown): number {
  if (typeof value !== 'number' || !Number.isInteger(value) || value < 0 || value > 0x7fffffff) {
    bad(`${name}: got ${String(value)}, expected a whole number ≥ 0`);
  }
  return value;
}

/**
 * δ may be +Infinity (that row must be matched) but never NaN or -Infinity: a row
 * that gains unboundedly by staying unmatched has no optimum.
 */
function checkUnmatched(unmatched: Float64Array | null | undefined, nRows: number): void {
  if (unmatched === null || unmatched === undefined) return;
  if (!(unmatched instanceof Float64Array)) bad('unmatchedCost: expected a Float64Array');
  if (unmatched.length !== nRows) bad(`unmatchedCost: length ${unmatched.length}, expected nRows = ${nRows}`);
  for (let r = 0; r < nRows; r++) {
    const d = unmatched[r]!;
    if (Number.isNaN(d) || d === -Infinity) bad(`unmatchedCost[${r}]: got ${d}, expected a number or +Infinity`);
    if (d !== Infinity && Math.abs(d) > MAX_COST) bad(`unmatchedCost[${r}]: got ${d}, expected a number within ${MAX_COST_TEXT} (or +Infinity)`);
  }
}

/** Throws PAIRFLOW_ERR_SOLVER_INPUT unless `inst` is a well-formed CSR instance. O(nnz + nCols). */
export function validateSparse(inst: SparseInstance): void {
  const nRows = checkSize('nRows', inst.nRows);
  const nCols = checkSize('nCols', inst.nCols);
  const { rowPtr, colIdx, cost } = inst;
  if (!(rowPtr instanceof Int32Array)) bad('rowPtr: expected an Int32Array');
  if (!(colIdx instanceof Int32Array)) bad('colIdx: expected an Int32Array');
  if (!(cost instanceof Float64Array)) bad('cost: expected a Float64Array');
  if (rowPtr.length !== nRows + 1) bad(`rowPtr: length ${rowPtr.length}, expected nRows + 1 = ${nRows + 1}`);
  if (rowPtr[0] !== 0) bad(`rowPtr[0]: got ${rowPtr[0]}, expected 0`);
  const nnz = rowPtr[nRows]!;
  if (colIdx.length !== nnz) bad(`colIdx: length ${colIdx.length}, expected rowPtr[nRows] = ${nnz}`);
  if (cost.length !== nnz) bad(`cost: length ${cost.length}, expected rowPtr[nRows] = ${nnz}`);
  // Stamp each column with the row that last used it, so duplicates cost O(1) to spot.
  const seen = new Int32Array(nCols);
  for (let r = 0; r < nRows; r++) {
    const start = rowPtr[r]!;
    const end = rowPtr[r + 1]!;
    if (end < start) bad(`rowPtr[${r + 1}]: got ${end}, expected ≥ rowPtr[${r}] = ${start}`);
    const stamp = r + 1;
    for (let e = start; e < end; e++) {
      const c = colIdx[e]!;
      if (c < 0 || c >= nCols) bad(`colIdx[${e}] (row ${r}): got ${c}, expected 0 ≤ column < nCols = ${nCols}`);
      if (seen[c] === stamp) bad(`row ${r}: column ${c} listed twice (colIdx[${e}]), expected each pair once`);
      seen[c] = stamp;
      const w = cost[e]!;
      if (!Number.isFinite(w) || Math.abs(w) > MAX_COST) bad(`cost[${e}] (row ${r}, column ${c}): got ${w}, expected a finite number within ${MAX_COST_TEXT}`);
    }
  }
  checkUnmatched(inst.unmatchedCost, nRows);
}

/** Throws PAIRFLOW_ERR_SOLVER_INPUT unless `inst` is a well-formed dense instance. O(nRows·nCols). */
export function validateDense(inst: DenseInstance): void {
  validateDenseShape(inst);
  checkDenseCells(inst);
}

/**
 * The O(nRows + nCols) part of {@link validateDense}: sizes, types, lengths and δ,
 * but not the cells. The dense solver looks at every cell in its first pass anyway,
 * so it spots a -Infinity there and calls {@link checkDenseCells} for the message,
 * instead of reading the whole matrix one more time up front.
 */
export function validateDenseShape(inst: DenseInstance): void {
  const nRows = checkSize('nRows', inst.nRows);
  const nCols = checkSize('nCols', inst.nCols);
  const { cost } = inst;
  if (!(cost instanceof Float64Array)) bad('cost: expected a Float64Array');
  if (cost.length !== nRows * nCols) bad(`cost: length ${cost.length}, expected nRows·nCols = ${nRows * nCols}`);
  checkUnmatched(inst.unmatchedCost, nRows);
}

/** Throws PAIRFLOW_ERR_SOLVER_INPUT naming the first -Infinity cell or finite cell beyond {@link MAX_COST}, if there is one. */
export function checkDenseCells(inst: DenseInstance): void {
  const { cost, nCols } = inst;
  for (let k = 0; k < cost.length; k++) {
    const c = cost[k]!;
    if (c === -Infinity || (Number.isFinite(c) && Math.abs(c) > MAX_COST)) {
      bad(`cost[${k}] (row ${Math.floor(k / nCols)}, column ${k % nCols}): got ${c}, expected a finite number within ${MAX_COST_TEXT}, or +Infinity/NaN for a pair that is not allowed`);
    }
  }
}

/** Throws PAIRFLOW_ERR_SOLVER_INPUT when a warm-start array has the wrong type or length. */
export function validateWarm(warm: WarmStart | undefined, nRows: number, nCols: number): void {
  if (warm === undefined) return;
  if (warm.colPrices !== undefined) {
    if (!(warm.colPrices instanceof Float64Array) || warm.colPrices.length !== nCols) {
      bad(`warm.colPrices: expected a Float64Array of length nCols = ${nCols}`);
    }
  }
  if (warm.rowPrices !== undefined) {
    if (!(warm.rowPrices instanceof Float64Array) || warm.rowPrices.length !== nRows) {
      bad(`warm.rowPrices: expected a Float64Array of length nRows = ${nRows}`);
    }
  }
  if (warm.rowToCol !== undefined) {
    if (!(warm.rowToCol instanceof Int32Array) || warm.rowToCol.length !== nRows) {
      bad(`warm.rowToCol: expected an Int32Array of length nRows = ${nRows}`);
    }
  }
}
