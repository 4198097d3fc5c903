import munkres from 'munkres';
import { linearSumAssignment } from 'linear-sum-assignment';
import { describe, expect, it } from 'vitest';
import { checkCertificate, solveDense, solveSparse } from '../../../src/matching/index.js';
import { denseToSparse, drawCost, mulberry32, randInt, randomDense } from './gen.js';

function toRows(cost: Float64Array, nRows: number, nCols: number): number[][] {
  const rows: number[][] = [];
  for (let r = 0; r < nRows; r++) rows.push(Array.from(cost.subarray(r * nCols, (r + 1) * nCols)));
  return rows;
}

describe('solveDense() against npm reference solvers', () => {
  it('matches munkres 2.0.4 (Hungarian method) on 120 seeded instances with forbidden pairs', () => {
    // Reference: npm `munkres` 2.0.4 (Infinity = not allowed). Only fully matchable
    // square instances are compared, where both minimise over perfect matchings.
    let compared = 0;
    for (let seed = 1; seed <= 120; seed++) {
      const rand = mulberry32(5000 + seed);
      const n = randInt(rand, 1, 25);
      const inst = randomDense(rand, { nRows: n, nCols: n, kind: seed % 2 ? 'ties' : 'negative', forbidden: 0.15, withDelta: false });
      let res;
      try {
        res = solveDense(inst);
      } catch (err) {
        expect((err as { code?: string }).code, `seed ${seed}`).toBe('PAIRFLOW_ERR_SOLVER_INFEASIBLE');
        continue;
      }
      compared++;
      const pairs = munkres(toRows(inst.cost, n, n));
      let ref = 0;
      for (const [r, c] of pairs) ref += inst.cost[r * n + c]!;
      expect(Math.abs(res.cost - ref), `seed ${seed}`).toBeLessThanOrEqual(1e-9 * Math.max(1, Math.abs(ref)));
      expect(checkCertificate(inst, res).ok, `seed ${seed}`).toBe(true);
    }
    expect(compared).toBeGreaterThan(60);
  });

  it('matches linear-sum-assignment 1.0.9 (Jonker–Volgenant, Crouse) on 120 seeded rectangular instances', () => {
    // Reference: npm `linear-sum-assignment` 1.0.9; with nRows ≤ nCols it matches every row.
    for (let seed = 1; seed <= 120; seed++) {
      const rand = mulberry32(7000 + seed);
      const nRows = randInt(rand, 1, 20);
      const nCols = randInt(rand, nRows, 30);
      const inst = randomDense(rand, { nRows, nCols, kind: seed % 2 ? 'uniform' : 'ties', forbidden: 0, withDelta: false });
      const ref = linearSumAssignment(toRows(inst.cost, nRows, nCols), { maximaze: false });
      const res = solveDense(inst);
      expect(Math.abs(res.cost - ref.gain), `seed ${seed}`).toBeLessThanOrEqual(1e-9 * Math.max(1, Math.abs(ref.gain)));
      const rs = solveSparse(denseToSparse(inst));
      expect(Math.abs(rs.cost - ref.gain), `seed ${seed}`).toBeLessThanOrEqual(1e-9 * Math.max(1, Math.abs(ref.gain)));
      expect(checkCertificate(inst, res).ok, `seed ${seed}`).toBe(true);
    }
  });
});

describe('random assignment with i.i.d. Exp(1) costs', () => {
  it('mean optimal cost matches the exact E = Σ_{k=1..n} 1/k² within 4 standard errors', () => {
    // Exact expectation: Linusson & Wästlund (2004); Nair, Prabhakar & Sharma (2005)
    // (Parisi's conjecture). Tolerance from the sample variance of the seeded runs.
    const n = 40;
    const samples = 300;
    const rand = mulberry32(20260101);
    let sum = 0;
    let sumSq = 0;
    for (let s = 0; s < samples; s++) {
      const cost = new Float64Array(n * n);
      for (let k = 0; k < cost.length; k++) cost[k] = drawCost(rand, 'exp');
      const inst = { nRows: n, nCols: n, cost };
      const res = s % 2 === 0 ? solveDense(inst) : solveSparse(denseToSparse(inst));
      sum += res.cost;
      sumSq += res.cost * res.cost;
    }
    let expected = 0;
    for (let k = 1; k <= n; k++) expected += 1 / (k * k);
    const mean = sum / samples;
    const variance = (sumSq - samples * mean * mean) / (samples - 1);
    const se = Math.sqrt(variance / samples);
    expect(se).toBeGreaterThan(0);
    expect(Math.abs(mean - expected)).toBeLessThanOrEqual(4 * se);
  });
});
