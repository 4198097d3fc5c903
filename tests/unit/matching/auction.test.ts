import { describe, expect, it } from 'vitest';
import { auctionPrices } from '../../../src/matching/auction.js';
import { checkCertificate, solveSparse } from '../../../src/matching/index.js';
import { bruteForce, denseToSparse, mulberry32, randInt, randomDense, type CostKind } from './gen.js';

/*
 * The auction (auction.ts) only starts the exact solver: with presolve 'auction' the
 * optimum must be the cold solver's and exhaustive search's (common practice for tiny
 * instances), certified, on every kind of instance: rectangular, with and without
 * unmatched costs, ties, negative costs, forbidden pairs, infeasible rows.
 */

function cases(count: number, big: boolean): { seed: number; inst: ReturnType<typeof denseToSparse> }[] {
  const kinds: CostKind[] = ['uniform', 'ties', 'negative', 'exp'];
  const out = [];
  for (let seed = 500; seed < 500 + count; seed++) {
    const rand = mulberry32(seed);
    const withDelta = seed % 3 !== 0;
    const nRows = big ? randInt(rand, 50, 400) : randInt(rand, 1, 7);
    const nCols = big ? randInt(rand, 50, 400) : randInt(rand, 1, 7);
    const dense = randomDense(rand, { nRows, nCols: withDelta ? nCols : Math.max(nCols, nRows), kind: kinds[seed % 4]!, forbidden: [0, 0.3, 0.8][seed % 3]!, withDelta });
    out.push({ seed, inst: denseToSparse(dense, rand) });
  }
  return out;
}

describe('solveSparse() with presolve auction', () => {
  it('reaches the exhaustive optimum on 300 tiny seeded instances, certified, infeasible ones refused alike', () => {
    for (const { seed, inst } of cases(300, false)) {
      const dense = { nRows: inst.nRows, nCols: inst.nCols, cost: new Float64Array(inst.nRows * inst.nCols).fill(Infinity), unmatchedCost: inst.unmatchedCost ?? null };
      for (let r = 0; r < inst.nRows; r++) for (let e = inst.rowPtr[r]!; e < inst.rowPtr[r + 1]!; e++) dense.cost[r * inst.nCols + inst.colIdx[e]!] = inst.cost[e]!;
      const want = bruteForce(dense);
      if (want === Infinity) {
        expect(() => solveSparse(inst, { presolve: 'auction' }), `seed ${seed}`).toThrow(expect.objectContaining({ code: 'PAIRFLOW_ERR_SOLVER_INFEASIBLE' }));
        continue;
      }
      const r = solveSparse(inst, { presolve: 'auction' });
      expect(checkCertificate(inst, r).problems, `seed ${seed}`).toEqual([]);
      expect(r.cost, `seed ${seed}`).toBeCloseTo(want, 9);
    }
  });

  it('equals the cold solve on 40 larger seeded instances, and is warm-started', () => {
    for (const { seed, inst } of cases(40, true)) {
      let cold;
      try {
        cold = solveSparse(inst);
      } catch {
        expect(() => solveSparse(inst, { presolve: 'auction' }), `seed ${seed}`).toThrow(expect.objectContaining({ code: 'PAIRFLOW_ERR_SOLVER_INFEASIBLE' }));
        continue;
      }
      const r = solveSparse(inst, { presolve: 'auction' });
      expect(checkCertificate(inst, r).problems, `seed ${seed}`).toEqual([]);
      expect(Math.abs(r.cost - cold.cost), `seed ${seed}`).toBeLessThanOrEqual(1e-9 * Math.max(1, Math.abs(cold.cost)));
    }
  });
});

describe('auctionPrices()', () => {
  it('leaves no column free above price 0 and stops at its scan budget when asked', () => {
    const { inst } = cases(1, true)[0]!;
    const a = auctionPrices(inst);
    expect(a.finished).toBe(true);
    const taken = new Uint8Array(inst.nCols);
    for (const j of a.rowToCol) if (j >= 0) taken[j] = 1;
    for (let j = 0; j < inst.nCols; j++) {
      expect(a.colPrices[j]!).toBeLessThanOrEqual(0);
      if (!taken[j]) expect(a.colPrices[j]!).toBe(0);
    }
    const cut = auctionPrices(inst, { maxScans: 10 });
    expect(cut.finished).toBe(false);
  });
});
