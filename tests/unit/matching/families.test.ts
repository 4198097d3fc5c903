import { describe, expect, it } from 'vitest';
import { checkCertificate, solveDense, solveSparse } from '../../../src/matching/index.js';
import { DENSE_FAMILIES, denseFamily } from '../../../bench/lib/instances.js';
import { scipyDenseCosts, scipyVersion } from '../../helpers/python.js';
import { denseToSparse, mulberry32 } from './gen.js';

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
    // full search ran: 28 matrix reads, 371 searches and the auction.
    const n = 600;
    const inst = denseFamily(31, n, 'geometric');
    const r = solveDense(inst, { strategy: 'candidates' });
    expect(checkCertificate(inst, r).problems).toEqual([]);
    expect(r.cost).toBeCloseTo(solveDense(inst, { strategy: 'full' }).cost, 9);
    expect(r.stats.auctionBids).toBeUndefined();
    expect(r.stats.scannedPairs).toBeLessThan(10 * n * n);
  });

  it('gives clustered costs whose cheapest pairs leave many rows short to the full search, with the same optimum', () => {
    // seed 5, n = 400: 19 rows short among their 22 cheapest (over 1 %).
    const inst = denseFamily(5, 400, 'clustered');
    const r = solveDense(inst, { strategy: 'candidates' });
    expect(checkCertificate(inst, r).problems).toEqual([]);
    expect(r.cost).toBeCloseTo(solveDense(inst, { strategy: 'full' }).cost, 9);
  });
});
