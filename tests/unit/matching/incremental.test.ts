import { describe, expect, it } from 'vitest';
import { GrowingAssignment } from '../../../src/matching/incremental.js';
import { checkCertificate, solveSparse } from '../../../src/matching/index.js';
import { bruteForce, mulberry32, randInt } from './gen.js';

/*
 * A growing assignment must equal a cold solve of the pairs it holds after every
 * round of additions (and exhaustive search on tiny instances, common practice),
 * with a certificate (SPEC §5) each time.
 */

function sameCost(a: number, b: number): boolean {
  return Math.abs(a - b) <= 1e-9 * Math.max(1, Math.abs(a), Math.abs(b));
}

describe('GrowingAssignment', () => {
  it('solves the example of its documentation, searching only the disturbed row', () => {
    const a = new GrowingAssignment(2, 2, Float64Array.of(10, 10));
    a.add(0, 0, 4);
    a.add(1, 0, 1);
    a.solve();
    let r = a.result({ augmentations: 0, scannedPairs: 0, ms: 0, warm: false });
    expect(r.cost).toBe(11);
    expect(Array.from(r.rowToCol)).toEqual([-1, 0]);
    a.add(0, 1, 2);
    const st = a.solve();
    r = a.result(st);
    expect(r.cost).toBe(3);
    expect(Array.from(r.rowToCol)).toEqual([1, 0]);
    expect(st.searchedRows).toBeLessThanOrEqual(1);
    expect(checkCertificate(a.instance(), r).problems).toEqual([]);
  });

  it('equals a cold solve after every round of additions, 60 seeded growing instances', () => {
    for (let seed = 1; seed <= 60; seed++) {
      const rand = mulberry32(8_100 + seed);
      const nRows = randInt(rand, 1, 120);
      const nCols = randInt(rand, 1, 120);
      const delta = Float64Array.from({ length: nRows }, () => 5 + rand() * 40);
      const a = new GrowingAssignment(nRows, nCols, delta);
      const taken = new Set<number>();
      const rounds = randInt(rand, 1, 6);
      for (let round = 0; round < rounds; round++) {
        const adds = randInt(rand, 0, 3 * nRows);
        for (let q = 0; q < adds; q++) {
          const r = randInt(rand, 0, nRows - 1);
          const j = randInt(rand, 0, nCols - 1);
          if (taken.has(r * nCols + j)) continue;
          taken.add(r * nCols + j);
          // ties now and then (integer costs), as sums of travel and wait produce
          a.add(r, j, seed % 3 === 0 ? randInt(rand, 0, 9) : rand() * 40);
        }
        const res = a.result(a.solve());
        const inst = a.instance();
        expect(checkCertificate(inst, res).problems, `seed ${seed} round ${round}`).toEqual([]);
        expect(sameCost(res.cost, solveSparse(inst).cost), `seed ${seed} round ${round}`).toBe(true);
      }
    }
  });

  it('searches in WebAssembly, forward and reverse, to the same prices and pairs as in JavaScript, round after round (40 seeded instances)', () => {
    let searched = 0;
    let reversed = 0;
    for (let seed = 1; seed <= 40; seed++) {
      const rand = mulberry32(9_300 + seed);
      const nRows = randInt(rand, 1, 150);
      const nCols = randInt(rand, 1, 150);
      const delta = Float64Array.from({ length: nRows }, () => 5 + rand() * 40);
      // A room of a few pairs a row, so the kernel's pool must also move to a larger one.
      const plain = new GrowingAssignment(nRows, nCols, delta);
      const kernel = new GrowingAssignment(nRows, nCols, delta, undefined, 2 * nRows);
      expect(plain.inKernel).toBe(false);
      expect(kernel.inKernel).toBe(true);
      const taken = new Set<number>();
      for (let round = 0; round < 6; round++) {
        const adds = randInt(rand, 0, 4 * nRows);
        for (let q = 0; q < adds; q++) {
          const r = randInt(rand, 0, nRows - 1);
          const j = randInt(rand, 0, nCols - 1);
          if (taken.has(r * nCols + j)) continue;
          taken.add(r * nCols + j);
          const c = seed % 3 === 0 ? randInt(rand, 0, 9) : rand() * 40;
          plain.add(r, j, c);
          kernel.add(r, j, c);
        }
        const a = plain.solve();
        const b = kernel.solve();
        searched += b.searchedRows ?? 0;
        reversed += b.reverseSearches ?? 0;
        const at = `seed ${seed} round ${round}`;
        expect({ ...b, ms: 0 }, at).toEqual({ ...a, ms: 0 });
        expect(Array.from(kernel.u), at).toEqual(Array.from(plain.u));
        expect(Array.from(kernel.v), at).toEqual(Array.from(plain.v));
        expect(Array.from(kernel.rowToCol), at).toEqual(Array.from(plain.rowToCol));
      }
    }
    expect(searched).toBeGreaterThan(1000);
    expect(reversed).toBeGreaterThan(20);
  });

  it('reaches the exhaustive optimum on 300 tiny seeded instances grown pair by pair', () => {
    for (let seed = 1; seed <= 300; seed++) {
      const rand = mulberry32(9_300 + seed);
      const nRows = randInt(rand, 1, 6);
      const nCols = randInt(rand, 1, 6);
      const delta = Float64Array.from({ length: nRows }, () => randInt(rand, 0, 12));
      const cost = new Float64Array(nRows * nCols).fill(Infinity);
      const a = new GrowingAssignment(nRows, nCols, delta);
      for (let r = 0; r < nRows; r++) {
        for (let j = 0; j < nCols; j++) {
          if (rand() < 0.4) continue;
          cost[r * nCols + j] = randInt(rand, -3, 10);
          a.add(r, j, cost[r * nCols + j]!);
          if (rand() < 0.3) a.solve();
        }
      }
      const res = a.result(a.solve());
      expect(checkCertificate(a.instance(), res).problems, `seed ${seed}`).toEqual([]);
      expect(res.cost, `seed ${seed}`).toBe(bruteForce({ nRows, nCols, cost, unmatchedCost: delta }));
    }
  });

  it('takes over a cold solve with adopt() and goes on from there', () => {
    const rand = mulberry32(77);
    const n = 60;
    const a = new GrowingAssignment(n, n, new Float64Array(n).fill(30));
    for (let r = 0; r < n; r++) for (let q = 0; q < 4; q++) if (rand() < 0.9) a.add(r, (r + q * 7) % n, rand() * 20);
    a.adopt(solveSparse(a.instance()));
    for (let r = 0; r < n; r++) a.add(r, (r + 3) % n, rand() * 5);
    const res = a.result(a.solve());
    expect(checkCertificate(a.instance(), res).problems).toEqual([]);
    expect(sameCost(res.cost, solveSparse(a.instance()).cost)).toBe(true);
  });

  it('raises a column its row left as far as the other rows allow, so no reverse search brings it back', () => {
    // Row 0 holds column 0 at cost 1 with prices u = 4, v = −3 (an optimum: row 1 and
    // column 1 have no pair, and column 0's price may lie anywhere in [−9, 0]). Pair
    // (0, 1) at cost 2 prices out (2 − 4 − 0 < 0), so row 0 leaves column 0. No other
    // row wants column 0, so its price goes to 0 before the search, where row 0 takes
    // it back at 1 (against 2 for column 1). Left at −3, column 0 would cost row 0 4,
    // it would take column 1, and a reverse search would follow.
    const a = new GrowingAssignment(2, 2, Float64Array.of(10, 10));
    a.add(0, 0, 1);
    a.adopt({
      cost: 11,
      rowToCol: Int32Array.of(0, -1),
      colToRow: Int32Array.of(0, -1),
      rowDuals: Float64Array.of(4, 10),
      colDuals: Float64Array.of(-3, 0),
      stats: { augmentations: 0, scannedPairs: 0, ms: 0, warm: false },
    });
    a.add(0, 1, 2);
    const st = a.solve();
    const res = a.result(st);
    expect(st.reverseSearches).toBe(0);
    expect(Array.from(res.rowToCol)).toEqual([0, -1]);
    expect(res.cost).toBe(11);
    expect(checkCertificate(a.instance(), res).problems).toEqual([]);
  });

  it('refuses a row that may not stay unmatched and a cost that is not finite (PAIRFLOW_ERR_SOLVER_INPUT)', () => {
    expect(() => new GrowingAssignment(2, 2, Float64Array.of(1, Infinity))).toThrow(expect.objectContaining({ code: 'PAIRFLOW_ERR_SOLVER_INPUT' }));
    const a = new GrowingAssignment(1, 1, Float64Array.of(1));
    expect(() => a.add(0, 0, NaN)).toThrow(expect.objectContaining({ code: 'PAIRFLOW_ERR_SOLVER_INPUT' }));
  });
});
