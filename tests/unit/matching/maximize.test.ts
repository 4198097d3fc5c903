import { describe, expect, it } from 'vitest';
import { checkCertificate, maximizeDense, maximizeSparse, solveDense } from '../../../src/matching/index.js';
import { denseToSparse, mulberry32, randInt, randomDense } from './gen.js';

describe('maximizeDense()/maximizeSparse()', () => {
  it('maximizeSparse() picks the heavier pairs (the JSDoc example)', () => {
    const best = maximizeSparse({ nRows: 1, nCols: 2, rowPtr: Int32Array.of(0, 2), colIdx: Int32Array.of(0, 1), cost: Float64Array.of(3, 5) });
    expect(best.cost).toBe(5);
    expect(best.rowToCol[0]).toBe(1);
  });

  it('leaves a row unmatched when its unmatched value beats every pair, with duals p ≥ ω, q ≥ 0', () => {
    // Hand-worked: row 0 may take column 0 (weight 2) or stay out for 3.
    const inst = { nRows: 1, nCols: 1, cost: Float64Array.of(2), unmatchedCost: Float64Array.of(3) };
    const res = maximizeDense(inst);
    expect(res.cost).toBe(3);
    expect([...res.rowToCol]).toEqual([-1]);
    expect(res.rowDuals[0]).toBe(3);
    expect(res.colDuals[0]).toBe(0);
    expect(checkCertificate(inst, res, { maximize: true }).ok).toBe(true);
  });

  it('equals minus the min-cost optimum of the negated weights, certified in the max convention', () => {
    // Reference: max Σw = −min Σ(−w) (common practice); cross-checked against solveDense.
    for (let seed = 1; seed <= 60; seed++) {
      const rand = mulberry32(800 + seed);
      const d = randomDense(rand, { nRows: randInt(rand, 1, 20), nCols: randInt(rand, 1, 20), kind: 'negative', forbidden: 0, withDelta: true });
      const weights = { ...d, cost: d.cost.map((c) => -c), unmatchedCost: d.unmatchedCost!.map((c) => -c) };
      const min = solveDense(d);
      const max = maximizeDense(weights);
      expect(Math.abs(max.cost + min.cost), `seed ${800 + seed}`).toBeLessThanOrEqual(1e-9 * Math.max(1, Math.abs(min.cost)));
      expect(checkCertificate(weights, max, { maximize: true }).problems, `seed ${800 + seed}`).toEqual([]);
      // the same duals do not certify the min-cost reading of the weights
      const s = denseToSparse(weights);
      const maxS = maximizeSparse(s);
      expect(Math.abs(maxS.cost - max.cost), `seed ${800 + seed}`).toBeLessThanOrEqual(1e-9 * Math.max(1, Math.abs(max.cost)));
      expect(checkCertificate(s, maxS, { maximize: true }).ok, `seed ${800 + seed}`).toBe(true);
      for (const q of maxS.colDuals) expect(q).toBeGreaterThanOrEqual(0);
    }
  });

  it('maximizeDense() treats -Infinity as a pair that is not allowed', () => {
    // Hand-worked: only the anti-diagonal is allowed: 4 + 6.
    const res = maximizeDense({ nRows: 2, nCols: 2, cost: Float64Array.of(-Infinity, 4, 6, -Infinity) });
    expect(res.cost).toBe(10);
    expect([...res.rowToCol]).toEqual([1, 0]);
  });
});
