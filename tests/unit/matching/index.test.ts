import { describe, expect, it } from 'vitest';
import { checkCertificate, solveDense, solveSparse } from '../../../src/matching/index.js';
import type { DenseInstance, SolveResult } from '../../../src/matching/types.js';
import { bruteForce, denseToSparse, mulberry32, randInt, randomDense, type CostKind } from './gen.js';

function certify(inst: Parameters<typeof checkCertificate>[0], res: SolveResult, label: string): void {
  const rep = checkCertificate(inst, res);
  expect(rep.problems, label).toEqual([]);
  expect(rep.ok, label).toBe(true);
}

function solveBoth(d: DenseInstance, label: string): number {
  const rd = solveDense(d);
  certify(d, rd, `${label} dense`);
  const s = denseToSparse(d, mulberry32(7));
  const rs = solveSparse(s);
  certify(s, rs, `${label} sparse`);
  expect(Math.abs(rd.cost - rs.cost), label).toBeLessThanOrEqual(1e-9 * Math.max(1, Math.abs(rd.cost)));
  return rd.cost;
}

describe('solveDense()/solveSparse() on tiny instances', () => {
  it('solveDense() picks the cheaper diagonal of a 2 × 2 matrix', () => {
    // Hand-worked: 1 + 2 = 3 beats 4 + 3 = 7.
    const res = solveDense({ nRows: 2, nCols: 2, cost: Float64Array.of(1, 4, 3, 2) });
    expect(res.cost).toBe(3);
    expect([...res.rowToCol]).toEqual([0, 1]);
    expect([...res.colToRow]).toEqual([0, 1]);
  });

  it('solveSparse() leaves a row unmatched when δ is cheaper than any pair', () => {
    // Hand-worked: row 1 would pay 9 for column 0, or displace row 0 (1→4); δ = 5 wins.
    const inst = {
      nRows: 2,
      nCols: 2,
      rowPtr: Int32Array.of(0, 2, 3),
      colIdx: Int32Array.of(0, 1, 0),
      cost: Float64Array.of(1, 20, 9),
      unmatchedCost: Float64Array.of(100, 5),
    };
    const res = solveSparse(inst);
    expect(res.cost).toBe(6);
    expect([...res.rowToCol]).toEqual([0, -1]);
    expect([...res.colToRow]).toEqual([0, -1]);
    expect(res.colDuals[1]).toBe(0);
    certify(inst, res, 'hand');
  });

  it('solveSparse() and solveDense() do what their JSDoc examples say', () => {
    const s = solveSparse({
      nRows: 2,
      nCols: 2,
      rowPtr: Int32Array.of(0, 2, 3),
      colIdx: Int32Array.of(0, 1, 0),
      cost: Float64Array.of(1, 4, 2),
      unmatchedCost: Float64Array.of(10, 10),
    });
    expect(s.cost).toBe(6);
    expect([...s.rowToCol]).toEqual([1, 0]);
    const d = solveDense({ nRows: 2, nCols: 3, cost: Float64Array.of(4, 1, 6, 2, 0, 5) });
    expect(d.cost).toBe(3);
    expect([...d.rowToCol]).toEqual([1, 0]);
    expect([...d.colToRow]).toEqual([1, 0, -1]);
    expect(d.colDuals[2]).toBe(0);
  });

  it('match exhaustive search on 600 seeded instances up to 6 × 6, every result certified', () => {
    // Reference: exhaustive enumeration of all assignments (common practice).
    const kinds: CostKind[] = ['uniform', 'ties', 'negative', 'exp'];
    for (let seed = 1; seed <= 600; seed++) {
      const rand = mulberry32(seed);
      const d = randomDense(rand, {
        nRows: randInt(rand, 0, 6),
        nCols: randInt(rand, 0, 6),
        kind: kinds[seed % 4]!,
        forbidden: [0, 0.3, 0.6][seed % 3]!,
        withDelta: seed % 5 !== 0,
      });
      const want = bruteForce(d);
      const label = `seed ${seed} (${d.nRows}×${d.nCols})`;
      if (want === Infinity) {
        expect(() => solveDense(d), label).toThrow(expect.objectContaining({ code: 'PAIRFLOW_ERR_SOLVER_INFEASIBLE' }));
        expect(() => solveSparse(denseToSparse(d)), label).toThrow(
          expect.objectContaining({ code: 'PAIRFLOW_ERR_SOLVER_INFEASIBLE' }),
        );
        continue;
      }
      const got = solveBoth(d, label);
      expect(Math.abs(got - want), label).toBeLessThanOrEqual(1e-9 * Math.max(1, Math.abs(want)));
    }
  });
});

describe('solveDense()/solveSparse() across magnitudes', () => {
  it('stay exact and certified with costs scaled by 1e-9 and 1e9', () => {
    // Reference: exhaustive enumeration (common practice); scaling every cost and δ
    // by s > 0 scales the optimum by s.
    for (let seed = 1; seed <= 150; seed++) {
      const rand = mulberry32(60_000 + seed);
      const d = randomDense(rand, { nRows: randInt(rand, 1, 6), nCols: randInt(rand, 1, 6), kind: 'negative', forbidden: 0.2, withDelta: true });
      const base = bruteForce(d);
      for (const scale of [1e-9, 1e9]) {
        const scaled = { ...d, cost: d.cost.map((c) => c * scale), unmatchedCost: d.unmatchedCost!.map((c) => c * scale) };
        const got = solveBoth(scaled, `seed ${60_000 + seed} ×${scale}`);
        expect(Math.abs(got - base * scale), `seed ${60_000 + seed} ×${scale}`).toBeLessThanOrEqual(1e-9 * Math.max(Math.abs(base * scale), 6 * 150 * scale));
      }
    }
  });
});

describe('solveDense() candidates strategy', () => {
  // Every row prefers the same few columns, so each row's cheapest pairs are not
  // enough: pairs must price out and join, or (no δ) the candidates cannot match
  // every row and the full search takes over. Reference: the full search.
  function crowded(n: number, withDelta: boolean): DenseInstance {
    const rand = mulberry32(n);
    const cost = new Float64Array(n * n);
    for (let r = 0; r < n; r++) for (let j = 0; j < n; j++) cost[r * n + j] = j + rand() * 0.5;
    return { nRows: n, nCols: n, cost, unmatchedCost: withDelta ? new Float64Array(n).fill(n / 2) : null };
  }

  it('re-solves with the pairs that price out until none does, matching the full search', () => {
    const d = crowded(220, true);
    const full = solveDense(d, { strategy: 'full' });
    const cand = solveDense(d, { strategy: 'candidates' });
    certify(d, cand, 'candidates');
    expect(Math.abs(cand.cost - full.cost)).toBeLessThanOrEqual(1e-9 * Math.abs(full.cost));
    // the first round's candidates are columns 0..19 only (k = 20 at n = 220), so
    // matching more rows than that proves priced-out pairs joined and were used
    const matched = cand.rowToCol.filter((j) => j >= 0).length;
    expect(matched).toBe(full.rowToCol.filter((j) => j >= 0).length);
    expect(matched).toBeGreaterThan(20);
  });

  it('prices pairs relative to the costs’ magnitude, so tiny costs are certified too', () => {
    const d = crowded(220, true);
    const tiny = { ...d, cost: d.cost.map((c) => c * 1e-13), unmatchedCost: d.unmatchedCost!.map((c) => c * 1e-13) };
    const full = solveDense(tiny, { strategy: 'full' });
    const cand = solveDense(tiny, { strategy: 'candidates' });
    certify(tiny, full, 'tiny full');
    certify(tiny, cand, 'tiny candidates');
    expect(Math.abs(cand.cost - full.cost)).toBeLessThanOrEqual(1e-9 * Math.abs(full.cost));
  });

  it('falls back to the full search when the candidates cannot match every row', () => {
    const d = crowded(220, false);
    const full = solveDense(d, { strategy: 'full' });
    const cand = solveDense(d, { strategy: 'candidates' });
    certify(d, cand, 'fallback');
    expect(cand.cost).toBe(full.cost);
  });
});

describe('solver hygiene', () => {
  it('stats.ms comes from the injected clock only', () => {
    // a clock that reads 100 once, then 142 forever: any solve must report 42 ms
    const clock = (): (() => number) => {
      let first = true;
      return () => {
        const t = first ? 100 : 142;
        first = false;
        return t;
      };
    };
    const rand = mulberry32(3);
    const small = randomDense(rand, { nRows: 20, nCols: 25, kind: 'uniform', forbidden: 0.2, withDelta: true });
    const large = randomDense(rand, { nRows: 520, nCols: 520, kind: 'uniform', forbidden: 0, withDelta: false });
    expect(solveDense(small, { now: clock() }).stats.ms).toBe(42);
    expect(solveDense(large, { now: clock() }).stats.ms).toBe(42);
    expect(solveSparse(denseToSparse(small), { now: clock() }).stats.ms).toBe(42);
  });

  it('leaves the instance and the warm-start arrays untouched', () => {
    const rand = mulberry32(4);
    const d = randomDense(rand, { nRows: 30, nCols: 30, kind: 'negative', forbidden: 0.3, withDelta: true });
    const s = denseToSparse(d);
    const before = { cost: new Float64Array(s.cost), colIdx: new Int32Array(s.colIdx), rowPtr: new Int32Array(s.rowPtr), dense: new Float64Array(d.cost) };
    const first = solveSparse(s);
    const warm = { colPrices: new Float64Array(first.colDuals).map((x) => x - 1), rowPrices: new Float64Array(first.rowDuals), rowToCol: new Int32Array(first.rowToCol) };
    const saved = { c: new Float64Array(warm.colPrices), r: new Float64Array(warm.rowPrices), p: new Int32Array(warm.rowToCol) };
    solveSparse(s, { warm });
    solveDense(d, { warm });
    expect(s.cost).toEqual(before.cost);
    expect(s.colIdx).toEqual(before.colIdx);
    expect(s.rowPtr).toEqual(before.rowPtr);
    expect(d.cost).toEqual(before.dense);
    expect(warm.colPrices).toEqual(saved.c);
    expect(warm.rowPrices).toEqual(saved.r);
    expect(warm.rowToCol).toEqual(saved.p);
  });
});
