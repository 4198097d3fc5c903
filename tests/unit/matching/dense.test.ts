import { describe, expect, it } from 'vitest';
import { checkCertificate, solveDense } from '../../../src/matching/index.js';
import type { DenseInstance, SolveOptions } from '../../../src/matching/types.js';
import { scipyDenseCosts, scipyVersion } from '../../helpers/python.js';
import { bruteForce, mulberry32, randInt } from './gen.js';

/*
 * The dense solver's own paths: the full search started by row reduction on wide
 * matrices, the candidates strategy (each row's k cheapest pairs gathered from a
 * threshold guessed from the row before, rows priced by a bound before being read),
 * and the check of the cells that rides on each path's first pass. References:
 * exhaustive search over every assignment (common practice for tiny instances) and
 * scipy.optimize.linear_sum_assignment (version in the test name), with unmatched
 * costs as the usual dummy columns (column nCols + r allowed only for row r, at δ_r).
 */


const version = scipyVersion();
const INPUT = expect.objectContaining({ code: 'PAIRFLOW_ERR_SOLVER_INPUT' });
const STRATEGIES: readonly NonNullable<SolveOptions['strategy']>[] = ['auto', 'full', 'candidates'];

type Kind = 'int' | 'ties' | 'allSame' | 'scaledRows';

/** Costs: integers 1..1000 (ties are common), 0..3 (ties everywhere), one value, or rows at very different scales. */
function build(seed: number, nRows: number, nCols: number, kind: Kind, forbidden: number, withDelta: boolean): DenseInstance {
  const rand = mulberry32(seed);
  const cost = new Float64Array(nRows * nCols);
  for (let r = 0; r < nRows; r++) {
    // scaledRows: each row's costs times 1, 1000 or 0.001, so the previous row's
    // threshold is far off for the next one
    const scale = kind === 'scaledRows' ? [1, 1000, 0.001][randInt(rand, 0, 2)]! : 1;
    for (let j = 0; j < nCols; j++) {
      let c: number;
      if (kind === 'int') c = randInt(rand, 1, 1000);
      else if (kind === 'ties') c = randInt(rand, 0, 3);
      else if (kind === 'allSame') c = 7;
      else c = scale * (1 + rand() * 99);
      cost[r * nCols + j] = rand() < forbidden ? Infinity : c;
    }
  }
  const unmatchedCost = withDelta ? Float64Array.from({ length: nRows }, () => (kind === 'int' ? randInt(rand, 200, 1500) : randInt(rand, 1, 4))) : null;
  return { nRows, nCols, cost, unmatchedCost };
}

function expectOptimal(inst: DenseInstance, want: number, label: string): void {
  for (const strategy of STRATEGIES) {
    const res = solveDense(inst, { strategy });
    expect(checkCertificate(inst, res).problems, `${label} ${strategy}`).toEqual([]);
    expect(Math.abs(res.cost - want), `${label} ${strategy}: ${res.cost} vs ${want}`).toBeLessThanOrEqual(1e-9 * Math.max(1, Math.abs(want)));
  }
}

describe('solveDense() against exhaustive search on few rows and many columns', () => {
  // 1–3 rows and 33–60 columns: k = 15–16 candidates per row and a 4k buffer, so
  // gathering fills the buffer, selects, and (scaledRows) reads rows again when the
  // previous row's threshold lets too few pairs through.
  it('reaches the optimum with a certificate on 300 seeded instances, every strategy', () => {
    const kinds: Kind[] = ['int', 'ties', 'allSame', 'scaledRows'];
    for (let seed = 0; seed < 300; seed++) {
      const rand = mulberry32(90_000 + seed);
      const nRows = randInt(rand, 1, 3);
      const nCols = randInt(rand, 33, 60);
      const kind = kinds[seed % kinds.length]!;
      const inst = build(90_000 + seed, nRows, nCols, kind, seed % 5 === 0 ? 0.4 : 0, seed % 2 === 0);
      const want = bruteForce(inst);
      const label = `seed ${90_000 + seed} ${kind} ${nRows}×${nCols}`;
      if (want === Infinity) {
        for (const strategy of STRATEGIES) {
          expect(() => solveDense(inst, { strategy }), label).toThrow(expect.objectContaining({ code: 'PAIRFLOW_ERR_SOLVER_INFEASIBLE' }));
        }
        continue;
      }
      expectOptimal(inst, want, label);
    }
  });
});

describe('solveDense() on matrices where every assignment costs the same', () => {
  it('all-equal costs: every perfect assignment of the rows costs n × 7, square and wide, with a certificate', () => {
    // Any assignment of n rows to distinct columns at cost 7 each costs 7n (direct).
    for (const [nRows, nCols] of [
      [40, 40],
      [30, 70],
      [520, 520],
      [400, 700],
    ] as const) {
      const inst = build(1, nRows, nCols, 'allSame', 0, false);
      expectOptimal(inst, 7 * nRows, `${nRows}×${nCols}`);
    }
  });
});

describe.skipIf(version === null)(`solveDense() against scipy ${version} linear_sum_assignment`, () => {
  it('wide, near-square and square instances with ties and forbidden pairs, every strategy, each certified', () => {
    const cases: { label: string; inst: DenseInstance }[] = [];
    let seed = 70_000;
    // small: the full search from row reduction (wide) and from column reduction (square)
    for (let t = 0; t < 60; t++, seed++) {
      const rand = mulberry32(seed);
      const nRows = randInt(rand, 2, 60);
      const nCols = t % 3 === 0 ? nRows : Math.ceil(nRows * (1.1 + 2 * rand()));
      const kind: Kind = t % 2 === 0 ? 'ties' : 'int';
      const inst = build(seed, nRows, nCols, kind, [0, 0.3, 0.7][t % 3]!, t % 4 === 1);
      cases.push({ label: `seed ${seed} ${kind} ${nRows}×${nCols}`, inst });
    }
    // large enough for 'auto' to choose: candidates (square, near-square), full (wide)
    for (const [nRows, nCols, kind, forbidden, withDelta] of [
      [520, 520, 'int', 0, false],
      [520, 520, 'ties', 0, false],
      [520, 540, 'int', 0, false],
      [500, 700, 'int', 0, false],
      [500, 700, 'ties', 0.2, true],
      [520, 520, 'scaledRows', 0.1, true],
    ] as const) {
      const inst = build(seed, nRows, nCols, kind, forbidden, withDelta);
      cases.push({ label: `seed ${seed} ${kind} ${nRows}×${nCols}`, inst });
      seed++;
    }
    const want = scipyDenseCosts(cases.map(({ inst }) => inst));
    let feasible = 0;
    cases.forEach(({ label, inst }, k) => {
      const ref = want[k];
      if (ref === null || ref === undefined) {
        for (const strategy of STRATEGIES) {
          expect(() => solveDense(inst, { strategy }), label).toThrow(expect.objectContaining({ code: 'PAIRFLOW_ERR_SOLVER_INFEASIBLE' }));
        }
        return;
      }
      feasible++;
      expectOptimal(inst, ref, label);
    });
    expect(feasible).toBeGreaterThan(50);
  });
});

describe('solveDense() checks every cell for -Infinity on every path', () => {
  // The check rides on each path's first pass; an infeasible row met before the bad
  // cell must not hide it.
  const withBadCell = (inst: DenseInstance, at: number): DenseInstance => {
    const cost = inst.cost.slice();
    cost[at] = -Infinity;
    return { ...inst, cost };
  };

  it('square, every row matched (column reduction first)', () => {
    const inst = withBadCell(build(5, 30, 30, 'int', 0, false), 30 * 30 - 1);
    for (const strategy of STRATEGIES) expect(() => solveDense(inst, { strategy }), strategy).toThrow(INPUT);
  });

  it('wide and with δ (row reduction first), the bad cell in the last row', () => {
    for (const withDelta of [false, true]) {
      const inst = withBadCell(build(6, 20, 50, 'ties', 0, withDelta), 19 * 50 + 3);
      for (const strategy of STRATEGIES) expect(() => solveDense(inst, { strategy }), `${strategy} δ ${withDelta}`).toThrow(INPUT);
    }
  });

  it('after a row with no allowed pair (infeasible), still an input error', () => {
    const base = build(7, 10, 40, 'int', 0, false);
    const cost = base.cost.slice();
    for (let j = 0; j < 40; j++) cost[j] = Infinity; // row 0 cannot be matched
    cost[9 * 40 + 11] = -Infinity;
    const inst = { ...base, cost };
    for (const strategy of STRATEGIES) expect(() => solveDense(inst, { strategy }), strategy).toThrow(INPUT);
    // a square one whose first column allows no pair either
    const sq = build(8, 12, 12, 'int', 0, false);
    const c2 = sq.cost.slice();
    for (let r = 0; r < 12; r++) c2[r * 12] = Infinity;
    c2[11 * 12 + 5] = -Infinity;
    for (const strategy of STRATEGIES) expect(() => solveDense({ ...sq, cost: c2 }, { strategy }), `square ${strategy}`).toThrow(INPUT);
  });

  it('with a warm start', () => {
    const good = build(9, 15, 15, 'int', 0, true);
    const prev = solveDense(good);
    const inst = withBadCell(good, 7 * 15 + 2);
    const warm = { colPrices: prev.colDuals, rowPrices: prev.rowDuals, rowToCol: prev.rowToCol };
    for (const strategy of STRATEGIES) expect(() => solveDense(inst, { warm, strategy }), strategy).toThrow(INPUT);
  });
});
