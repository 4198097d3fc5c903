import { describe, expect, it, vi } from 'vitest';
import { solveDense, solveSparse } from '../../../src/matching/index.js';
import type { SparseInstance } from '../../../src/matching/types.js';
import { validateSparse } from '../../../src/matching/validate.js';

// The real check, watched: whether a solve ran it.
vi.mock('../../../src/matching/validate.js', async (importOriginal) => {
  const actual = await importOriginal<typeof import('../../../src/matching/validate.js')>();
  return { ...actual, validateSparse: vi.fn(actual.validateSparse) };
});

const INPUT = expect.objectContaining({ code: 'PAIRFLOW_ERR_SOLVER_INPUT' });

function base(): SparseInstance {
  return {
    nRows: 2,
    nCols: 2,
    rowPtr: Int32Array.of(0, 2, 3),
    colIdx: Int32Array.of(0, 1, 1),
    cost: Float64Array.of(1, 2, 3),
  };
}

describe('validateSparse() via solveSparse()', () => {
  it('accepts the well-formed base instance', () => {
    expect(solveSparse(base()).cost).toBe(4);
  });

  it.each([
    ['NaN cost', { cost: Float64Array.of(1, NaN, 3) }],
    ['+Infinity cost', { cost: Float64Array.of(1, Infinity, 3) }],
    ['-Infinity cost', { cost: Float64Array.of(-Infinity, 2, 3) }],
    ['duplicate pair', { colIdx: Int32Array.of(0, 0, 1) }],
    ['column out of range', { colIdx: Int32Array.of(0, 2, 1) }],
    ['negative column', { colIdx: Int32Array.of(0, -1, 1) }],
    ['rowPtr too short', { rowPtr: Int32Array.of(0, 3) }],
    ['rowPtr not starting at 0', { rowPtr: Int32Array.of(1, 2, 3) }],
    ['rowPtr decreasing', { rowPtr: Int32Array.of(0, 3, 2), colIdx: Int32Array.of(0, 1, 1), cost: Float64Array.of(1, 2, 3) }],
    ['rowPtr end ≠ nnz', { rowPtr: Int32Array.of(0, 2, 2) }],
    ['cost length ≠ nnz', { cost: Float64Array.of(1, 2) }],
    ['colIdx not an Int32Array', { colIdx: [0, 1, 1] as unknown as Int32Array }],
    ['fractional nRows', { nRows: 1.5 }],
    ['negative nCols', { nCols: -1 }],
    ['unmatchedCost wrong length', { unmatchedCost: Float64Array.of(1) }],
    ['unmatchedCost NaN', { unmatchedCost: Float64Array.of(1, NaN) }],
    ['unmatchedCost -Infinity', { unmatchedCost: Float64Array.of(1, -Infinity) }],
    // SPEC §5: finite costs whose sums overflow are input errors stating the bound.
    ['cost near the double limit', { cost: Float64Array.of(1e308, 2, 3) }],
    ['unmatchedCost near the double limit', { unmatchedCost: Float64Array.of(1, -1e308) }],
  ])('rejects %s with PAIRFLOW_ERR_SOLVER_INPUT', (_name, patch) => {
    expect(() => solveSparse({ ...base(), ...patch } as SparseInstance)).toThrow(INPUT);
  });

  it('check: false leaves the pass over every pair out, and solves the same', () => {
    const checked = vi.mocked(validateSparse);
    checked.mockClear();
    const a = solveSparse(base());
    expect(checked).toHaveBeenCalledTimes(1);
    const b = solveSparse(base(), { check: false });
    expect(checked).toHaveBeenCalledTimes(1);
    expect(b.cost).toBe(a.cost);
    expect([...b.rowToCol]).toEqual([...a.rowToCol]);
    // The warm arrays' lengths are still checked (they cost nothing to check).
    expect(() => solveSparse(base(), { check: false, warm: { colPrices: new Float64Array(3) } })).toThrow(INPUT);
  });

  it('rejects warm arrays of the wrong length with PAIRFLOW_ERR_SOLVER_INPUT', () => {
    expect(() => solveSparse(base(), { warm: { colPrices: new Float64Array(3) } })).toThrow(INPUT);
    expect(() => solveSparse(base(), { warm: { rowPrices: new Float64Array(1) } })).toThrow(INPUT);
    expect(() => solveSparse(base(), { warm: { rowToCol: new Int32Array(5) } })).toThrow(INPUT);
  });
});

describe('validateDense() via solveDense()', () => {
  it('treats +Infinity and NaN as pairs that are not allowed', () => {
    // Hand-worked: only (0,1) and (1,0) are allowed: 5 + 7.
    const res = solveDense({ nRows: 2, nCols: 2, cost: Float64Array.of(Infinity, 5, 7, NaN) });
    expect(res.cost).toBe(12);
    expect([...res.rowToCol]).toEqual([1, 0]);
  });

  it('rejects -Infinity costs and wrong lengths with PAIRFLOW_ERR_SOLVER_INPUT', () => {
    expect(() => solveDense({ nRows: 1, nCols: 2, cost: Float64Array.of(-Infinity, 1) })).toThrow(INPUT);
    expect(() => solveDense({ nRows: 2, nCols: 2, cost: Float64Array.of(1, 2, 3) })).toThrow(INPUT);
    expect(() => solveDense({ nRows: 1, nCols: 1, cost: Float64Array.of(1), unmatchedCost: Float64Array.of(1, 2) })).toThrow(INPUT);
  });
});

describe('infeasible instances', () => {
  const INFEASIBLE = expect.objectContaining({ code: 'PAIRFLOW_ERR_SOLVER_INFEASIBLE' });

  it('solveDense() throws PAIRFLOW_ERR_SOLVER_INFEASIBLE when rows outnumber columns without δ', () => {
    expect(() => solveDense({ nRows: 3, nCols: 2, cost: new Float64Array(6) })).toThrow(INFEASIBLE);
  });

  it('solveSparse() throws PAIRFLOW_ERR_SOLVER_INFEASIBLE when two rows share their only column', () => {
    const inst = { nRows: 2, nCols: 3, rowPtr: Int32Array.of(0, 1, 2), colIdx: Int32Array.of(2, 2), cost: Float64Array.of(1, 1) };
    expect(() => solveSparse(inst)).toThrow(INFEASIBLE);
  });

  it('a row whose δ is +Infinity must be matched even when others may stay unmatched', () => {
    // Hand-worked: row 1 (δ = ∞) takes the only column; row 0 pays δ = 2.
    const inst = {
      nRows: 2,
      nCols: 1,
      rowPtr: Int32Array.of(0, 1, 2),
      colIdx: Int32Array.of(0, 0),
      cost: Float64Array.of(1, 50),
      unmatchedCost: Float64Array.of(2, Infinity),
    };
    const res = solveSparse(inst);
    expect(res.cost).toBe(52);
    expect([...res.rowToCol]).toEqual([-1, 0]);
    const both = { ...inst, unmatchedCost: Float64Array.of(Infinity, Infinity) };
    expect(() => solveSparse(both)).toThrow(INFEASIBLE);
  });

  it('with no columns every row pays its δ, or the instance is infeasible without δ', () => {
    const rowsOnly = { nRows: 2, nCols: 0, cost: new Float64Array(0), unmatchedCost: Float64Array.of(3, 4) };
    const res = solveDense(rowsOnly);
    expect(res.cost).toBe(7);
    expect([...res.rowDuals]).toEqual([3, 4]);
    expect(() => solveDense({ ...rowsOnly, unmatchedCost: null })).toThrow(INFEASIBLE);
    const sparse = { nRows: 2, nCols: 0, rowPtr: Int32Array.of(0, 0, 0), colIdx: new Int32Array(0), cost: new Float64Array(0) };
    expect(solveSparse({ ...sparse, unmatchedCost: Float64Array.of(3, 4) }).cost).toBe(7);
    expect(() => solveSparse(sparse)).toThrow(INFEASIBLE);
  });

  it('a square instance with a column nobody may take is infeasible without δ', () => {
    const inst = { nRows: 2, nCols: 2, rowPtr: Int32Array.of(0, 1, 2), colIdx: Int32Array.of(0, 0), cost: Float64Array.of(1, 2) };
    expect(() => solveSparse(inst)).toThrow(INFEASIBLE);
    expect(() => solveDense({ nRows: 2, nCols: 2, cost: Float64Array.of(1, Infinity, 2, Infinity) })).toThrow(INFEASIBLE);
  });

  it('empty instances solve to cost 0', () => {
    expect(solveDense({ nRows: 0, nCols: 0, cost: new Float64Array(0) }).cost).toBe(0);
    const none = solveSparse({ nRows: 0, nCols: 3, rowPtr: Int32Array.of(0), colIdx: new Int32Array(0), cost: new Float64Array(0) });
    expect(none.cost).toBe(0);
    expect([...none.colDuals]).toEqual([0, 0, 0]);
  });
});
