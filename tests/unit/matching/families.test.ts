import { describe, expect, it } from 'vitest';
import { checkCertificate, solveDense, solveSparse } from '../../../src/matching/index.js';
import { maxCardinalityMatching } from '../../../src/matching/cardinality.js';
import { DENSE_FAMILIES, denseFamily } from '../../../bench/lib/instances.js';
import { scipyDenseCosts, scipyVersion } from '../../helpers/python.js';
import { denseToSparse, mulberry32 } from './gen.js';
import type { DenseInstance } from '../../../src/matching/types.js';

/*
 * Reference: scipy.optimize.linear_sum_assignment (from PyPI; the version in use is
 * printed in the test name) on the structured families bench:solver times
 * (bench/lib/instances.ts). Sizes from 30 to 320: the larger ones are past the size
 * where the dense solver may hand a perfect assignment over to the auction
 * (dense-auction.ts), so both paths are checked.
 */

const version = scipyVersion();

describe.skipIf(version === null)(`structured dense families against scipy ${version}`, () => {
  it('solveDense() (both strategies) and solveSparse() reach scipy’s optimum on every family, each certified', () => {
    const cases = DENSE_FAMILIES.flatMap((family, f) => [30, 120, 320].map((n, k) => ({ family, n, seed: 7000 + 31 * f + k, inst: denseFamily(7000 + 31 * f + k, n, family) })));
    const want = scipyDenseCosts(cases.map((c) => c.inst));
    cases.forEach(({ family, n, seed, inst }, k) => {
      const label = `${family} n=${n} seed ${seed}`;
      const ref = want[k]!;
      expect(ref, label).not.toBeNull();
      const tol = 1e-9 * Math.max(1, Math.abs(ref));
      for (const strategy of ['auto', 'full', 'candidates'] as const) {
        const r = solveDense(inst, { strategy });
        expect(checkCertificate(inst, r).problems, `${label} ${strategy}`).toEqual([]);
        expect(Math.abs(r.cost - ref), `${label} ${strategy}: ${r.cost} vs ${ref}`).toBeLessThanOrEqual(tol);
      }
      if (n <= 120) {
        const sparse = denseToSparse(inst, mulberry32(seed));
        const rs = solveSparse(sparse);
        expect(checkCertificate(sparse, rs).problems, `${label} sparse`).toEqual([]);
        expect(Math.abs(rs.cost - ref), `${label} sparse`).toBeLessThanOrEqual(tol);
      }
    });
  });

  it('hands Machol–Wien and rank-one costs over to the auction at n = 320', () => {
    for (const family of ['machol-wien', 'rank-one'] as const) {
      const r = solveDense(denseFamily(9100, 320, family), { strategy: 'full' });
      expect(r.stats.auctionBids ?? 0, family).toBeGreaterThan(0);
    }
  });
});

describe('the candidates strategy on costs with many ties', () => {
  it('spreads each row’s tied cheapest pairs over the columns, so few-ints (0..9) costs read the matrix about once', () => {
    // With every row taking its tied zeros from the same first columns, the candidates
    // crowded onto a few hundred columns: 3.7 matrix reads and 498 searches at n = 600.
    const n = 600;
    const inst = denseFamily(9200, n, 'few-ints');
    const r = solveDense(inst, { strategy: 'candidates' });
    expect(checkCertificate(inst, r).problems).toEqual([]);
    expect(r.cost).toBeCloseTo(solveDense(inst, { strategy: 'full' }).cost, 9);
    expect(r.stats.scannedPairs).toBeLessThan(1.5 * n * n);
    expect(r.stats.augmentations).toBeLessThan(200);
  });

  it('widens the candidates of rows that cannot all be matched among their cheapest, instead of searching the full matrix', () => {
    // geometric n = 600, seed 31: among each row's 24 nearest columns a full matching
    // is one row short (a corner with more rows than columns). Before widening, the
    // full search ran: 28 matrix reads, 371 searches and the auction. `auto` widens
    // below 1000 rows; `candidates` (and `auto` from 1000 rows) runs the list auction.
    // One more column, dearer than any distance, keeps the shortage and the matrix off
    // the wasm kernel, which `auto` runs on square matrices (wasm-kernel.test.ts).
    const n = 600;
    const square = denseFamily(31, n, 'geometric');
    const cost = new Float64Array(n * (n + 1));
    for (let r = 0; r < n; r++) {
      cost.set(square.cost.subarray(r * n, (r + 1) * n), r * (n + 1));
      cost[r * (n + 1) + n] = 5000;
    }
    const inst: DenseInstance = { nRows: n, nCols: n + 1, cost };
    const full = solveDense(inst, { strategy: 'full' }).cost;
    const r = solveDense(inst);
    expect(checkCertificate(inst, r).problems).toEqual([]);
    expect(r.cost).toBeCloseTo(full, 9);
    expect(r.stats.auctionBids).toBeUndefined();
    expect(r.stats.scannedPairs).toBeLessThan(10 * n * n);
    const c = solveDense(inst, { strategy: 'candidates' });
    expect(checkCertificate(inst, c).problems).toEqual([]);
    expect(c.cost).toBeCloseTo(full, 9);
    expect(c.stats.auctionBids ?? 0).toBeGreaterThan(0);
  });

  it('prices a row of a later round from its last read, less the most any price rose since, instead of reading it again', () => {
    // geometric n = 1000, seed 9301: the dual prices follow the map, so the bound from
    // a row's dearest candidate and the highest price fails on most rows; reading them
    // all again in every round read 9.0 matrices in all. (`auto` runs the wasm kernel
    // on this square matrix; `candidates` is what `auto` ran before it.)
    const n = 1000;
    const inst = denseFamily(9301, n, 'geometric');
    const r = solveDense(inst, { strategy: 'candidates' });
    expect(checkCertificate(inst, r).problems).toEqual([]);
    expect(r.cost).toBeCloseTo(solveDense(inst, { strategy: 'full' }).cost, 9);
    expect(r.stats.scannedPairs).toBeLessThan(7.5 * n * n);
  });

  it.skipIf(version === null)('gathers the pairs out of crowded clusters by the list auction and reaches scipy’s optimum (square, near-square, forbidden far pairs)', () => {
    // clustered seed 5, n = 400: 19 rows short among their 22 cheapest (over 1 %);
    // their own nearest columns never suffice. Under `candidates` one coarse phase of
    // the list auction (list-auction.ts) adds the pairs out of the crowded clusters;
    // `auto` gives such matrices below 1000 rows to the full search.
    const square = [[5, 400], [6, 400], [7, 600]].map(([seed, n]) => ({ label: `clustered n=${n} seed ${seed}`, inst: denseFamily(seed!, n!, 'clustered') }));
    // 380 rows of the 400: still crowded, and the auction bids over 400 columns
    const wide = (() => {
      const base = denseFamily(5, 400, 'clustered');
      return { label: 'clustered 380 × 400 seed 5', inst: { nRows: 380, nCols: 400, cost: base.cost.slice(0, 380 * 400) } };
    })();
    // pairs longer than 500 forbidden: the auction never bids for them
    const far = (() => {
      const base = denseFamily(6, 400, 'clustered');
      return { label: 'clustered n=400 seed 6, pairs over 500 forbidden', inst: { nRows: 400, nCols: 400, cost: base.cost.map((c) => (c > 500 ? Infinity : c)) } };
    })();
    const cases: { label: string; inst: DenseInstance }[] = [...square, wide, far];
    const want = scipyDenseCosts(cases.map((c) => c.inst));
    cases.forEach(({ label, inst }, k) => {
      const ref = want[k]!;
      expect(ref, label).not.toBeNull();
      const tol = 1e-9 * Math.max(1, Math.abs(ref));
      const n = inst.nRows;
      const r = solveDense(inst, { strategy: 'candidates' });
      expect(checkCertificate(inst, r).problems, label).toEqual([]);
      expect(Math.abs(r.cost - ref), `${label}: ${r.cost} vs ${ref}`).toBeLessThanOrEqual(tol);
      expect(r.stats.auctionBids ?? 0, label).toBeGreaterThan(0);
      expect(r.stats.scannedPairs, label).toBeLessThan(20 * n * inst.nCols);
      const auto = solveDense(inst);
      expect(checkCertificate(inst, auto).problems, `${label} auto`).toEqual([]);
      expect(Math.abs(auto.cost - ref), `${label} auto`).toBeLessThanOrEqual(tol);
    });
  });
});

describe('the list auction when the rows cannot all be matched', () => {
  it('a crowded cluster whose pairs out of it are all forbidden: an infeasibility error, not a wrong answer', () => {
    // clustered n = 400 seed 5 has 19 rows short among their cheapest; forbid every pair
    // longer than 60 (about two σ) so the crowded cluster cannot send rows elsewhere.
    // Hall's condition then fails among the allowed pairs themselves (checked by
    // Hopcroft–Karp on them): the list auction's rows outbid each other until its
    // budget runs out, and the full search reports the row that cannot be matched.
    const n = 400;
    const inst = denseFamily(5, n, 'clustered');
    const cost = inst.cost.map((c) => (c > 60 ? Infinity : c));
    const rowPtr = new Int32Array(n + 1);
    const cols: number[] = [];
    for (let r = 0; r < n; r++) {
      for (let j = 0; j < n; j++) if (cost[r * n + j]! < Infinity) cols.push(j);
      rowPtr[r + 1] = cols.length;
    }
    expect(maxCardinalityMatching({ nRows: n, nCols: n, rowPtr, colIdx: Int32Array.from(cols) }).size).toBeLessThan(n);
    for (const strategy of ['candidates', 'auto'] as const) {
      expect(() => solveDense({ nRows: n, nCols: n, cost }, { strategy }), strategy).toThrow(expect.objectContaining({ code: 'PAIRFLOW_ERR_SOLVER_INFEASIBLE' }));
    }
  });
});

describe.skipIf(version === null)(`the row-minima start (row reduction, greedy on tight pairs, then searches) against scipy ${version}`, () => {
  // Few distinct costs: each row has about n/10 zeros, so a greedy pass on the rows'
  // cheapest pairs matches all but a few rows and the rest are searched from there.
  const n = 600;
  const variants: { label: string; inst: () => DenseInstance }[] = [
    ...[9300, 9301, 9302].map((seed) => ({ label: `few-ints seed ${seed}`, inst: () => denseFamily(seed, n, 'few-ints') })),
    {
      // no row's cheapest pair is in column 17: the greedy leaves a row over whose
      // search must raise a column price (v ≠ 0) to reach it
      label: 'few-ints, column 17 all nines',
      inst: () => {
        const inst = denseFamily(9303, n, 'few-ints');
        for (let r = 0; r < n; r++) inst.cost[r * n + 17] = 9;
        return inst;
      },
    },
    {
      // forbidden pairs (+Infinity) and negative costs on the same path
      label: 'few-ints shifted by −4, a tenth of the pairs forbidden',
      inst: () => {
        const inst = denseFamily(9304, n, 'few-ints');
        const rand = mulberry32(9304);
        for (let k = 0; k < inst.cost.length; k++) inst.cost[k] = rand() < 0.1 ? Infinity : inst.cost[k]! - 4;
        return inst;
      },
    },
  ];

  it('reaches scipy’s optimum with a certificate, searching only the few rows the greedy pass leaves over', () => {
    const cases = variants.map((c) => ({ ...c, built: c.inst() }));
    const want = scipyDenseCosts(cases.map((c) => c.built));
    cases.forEach(({ label, built }, k) => {
      const ref = want[k]!;
      expect(ref, label).not.toBeNull();
      const r = solveDense(built);
      expect(checkCertificate(built, r).problems, label).toEqual([]);
      expect(Math.abs(r.cost - ref), `${label}: ${r.cost} vs ${ref}`).toBeLessThanOrEqual(1e-9 * Math.max(1, Math.abs(ref)));
      // the path taken: at most n/32 rows searched, the matrix read about once
      expect(r.stats.augmentations, label).toBeLessThanOrEqual(n / 32);
      expect(r.stats.scannedPairs, label).toBeLessThan(2 * n * n);
    });
  });

  it('gives up at once on distances (the rows’ cheapest pairs crowd onto few columns) and the candidates strategy finds the same optimum', () => {
    const inst = denseFamily(9305, n, 'geometric');
    const [ref] = scipyDenseCosts([inst]);
    const r = solveDense(inst);
    expect(checkCertificate(inst, r).problems).toEqual([]);
    expect(Math.abs(r.cost - ref!)).toBeLessThanOrEqual(1e-9 * Math.max(1, Math.abs(ref!)));
    expect(r.stats.augmentations).toBeGreaterThan(n / 32);
  });
});
