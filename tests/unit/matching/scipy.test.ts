import { describe, expect, it } from 'vitest';
import { checkCertificate, solveDense, solveSparse } from '../../../src/matching/index.js';
import type { DenseInstance } from '../../../src/matching/types.js';
import { scipyDenseCosts, scipyVersion } from '../../helpers/python.js';
import { denseToSparse, mulberry32, randInt, randomDense, type CostKind } from './gen.js';

/*
 * Reference: scipy.optimize.linear_sum_assignment (SciPy ≥ 1.4, from PyPI; the
 * version in use is printed in the test name). Unmatched costs go through the usual
 * dummy-column augmentation: n extra columns, column n + r allowed only for row r at
 * cost δ_r. All instances go to Python in one batch.
 */

const version = scipyVersion();

function instances(count: number): { seed: number; inst: DenseInstance }[] {
  const kinds: CostKind[] = ['uniform', 'ties', 'negative', 'exp'];
  const out: { seed: number; inst: DenseInstance }[] = [];
  for (let seed = 1000; seed < 1000 + count; seed++) {
    const rand = mulberry32(seed);
    const withDelta = seed % 3 !== 0;
    const big = seed % 10 === 0;
    let nRows = randInt(rand, 1, big ? 90 : 30);
    let nCols = randInt(rand, 1, big ? 90 : 30);
    const shape = seed % 4; // 0 square, 1 wide, 2 tall (only with δ), 3 as drawn
    if (shape === 0) nCols = nRows;
    if (shape === 1 && nCols < nRows) [nRows, nCols] = [nCols, nRows];
    if (shape === 2 && nCols > nRows) [nRows, nCols] = [nCols, nRows];
    if (!withDelta && nRows > nCols) [nRows, nCols] = [nCols, nRows];
    out.push({
      seed,
      inst: randomDense(rand, {
        nRows,
        nCols,
        kind: kinds[seed % kinds.length]!,
        forbidden: [0, 0.2, 0.5, 0.85][(seed >> 2) % 4]!,
        withDelta,
      }),
    });
  }
  return out;
}

describe.skipIf(version === null)(`solvers against scipy ${version} linear_sum_assignment`, () => {
  it('solveDense() and solveSparse() reach scipy’s optimum on 240 seeded instances, each certified', () => {
    const cases = instances(240);
    const want = scipyDenseCosts(cases.map(({ inst }) => inst));
    let feasible = 0;
    cases.forEach(({ seed, inst }, k) => {
      const label = `seed ${seed} (${inst.nRows}×${inst.nCols}, δ ${inst.unmatchedCost ? 'yes' : 'no'})`;
      const ref = want[k];
      const sparse = denseToSparse(inst, mulberry32(seed));
      if (ref === null || ref === undefined) {
        expect(() => solveDense(inst), label).toThrow(expect.objectContaining({ code: 'PAIRFLOW_ERR_SOLVER_INFEASIBLE' }));
        expect(() => solveDense(inst, { strategy: 'candidates' }), label).toThrow(
          expect.objectContaining({ code: 'PAIRFLOW_ERR_SOLVER_INFEASIBLE' }),
        );
        expect(() => solveSparse(sparse), label).toThrow(expect.objectContaining({ code: 'PAIRFLOW_ERR_SOLVER_INFEASIBLE' }));
        return;
      }
      feasible++;
      const tol = 1e-9 * Math.max(1, Math.abs(ref));
      for (const strategy of ['full', 'candidates'] as const) {
        const rd = solveDense(inst, { strategy });
        expect(checkCertificate(inst, rd).problems, `${label} dense ${strategy}`).toEqual([]);
        expect(Math.abs(rd.cost - ref), `${label} dense ${strategy}`).toBeLessThanOrEqual(tol);
      }
      const rs = solveSparse(sparse);
      expect(checkCertificate(sparse, rs).problems, `${label} sparse`).toEqual([]);
      expect(Math.abs(rs.cost - ref), `${label} sparse`).toBeLessThanOrEqual(tol);
    });
    // the batch must mostly exercise the optimum, not the infeasible path
    expect(feasible).toBeGreaterThan(200);
  });
});
