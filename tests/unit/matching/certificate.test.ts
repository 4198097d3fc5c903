import { describe, expect, it } from 'vitest';
import { checkCertificate, solveDense, solveSparse } from '../../../src/matching/index.js';
import type { SolveResult, SparseInstance } from '../../../src/matching/types.js';
import { denseToSparse, mulberry32, randomDense } from './gen.js';

function copy(res: SolveResult): SolveResult {
  return {
    ...res,
    rowToCol: new Int32Array(res.rowToCol),
    colToRow: new Int32Array(res.colToRow),
    rowDuals: new Float64Array(res.rowDuals),
    colDuals: new Float64Array(res.colDuals),
    stats: { ...res.stats },
  };
}

// Hand-worked: rows {0,1}, columns {0,1,2}; optimum 1 + 2 = 3 with row 0 → 0, row 1 → 1.
const inst: SparseInstance = {
  nRows: 2,
  nCols: 3,
  rowPtr: Int32Array.of(0, 3, 5),
  colIdx: Int32Array.of(0, 1, 2, 0, 1),
  cost: Float64Array.of(1, 5, 9, 4, 2),
  unmatchedCost: Float64Array.of(20, 20),
};

describe('checkCertificate()', () => {
  it('accepts hand-made optimal duals: u = (1, 2), v = (0, 0, 0), Σ = 3', () => {
    const res: SolveResult = {
      cost: 3,
      rowToCol: Int32Array.of(0, 1),
      colToRow: Int32Array.of(0, 1, -1),
      rowDuals: Float64Array.of(1, 2),
      colDuals: Float64Array.of(0, 0, 0),
      stats: { augmentations: 0, scannedPairs: 0, ms: 0, warm: false },
    };
    const rep = checkCertificate(inst, res);
    expect(rep).toEqual({ ok: true, primalCost: 3, dualObjective: 3, maxViolation: 0, problems: [] });
  });

  it('rejects a feasible but suboptimal assignment whatever duals come with it', () => {
    // row 0 → 1 and row 1 → 0 costs 9 > 3: no duals can close that gap
    const res: SolveResult = {
      cost: 9,
      rowToCol: Int32Array.of(1, 0),
      colToRow: Int32Array.of(1, 0, -1),
      rowDuals: Float64Array.of(5, 4),
      colDuals: Float64Array.of(0, 0, 0),
      stats: { augmentations: 0, scannedPairs: 0, ms: 0, warm: false },
    };
    const rep = checkCertificate(inst, res);
    expect(rep.ok).toBe(false);
    expect(rep.maxViolation).toBeGreaterThan(0);
  });

  it('flags each kind of broken certificate', () => {
    const good = solveSparse(inst);
    expect(checkCertificate(inst, good).ok).toBe(true);
    const breakers: [string, (r: SolveResult) => void][] = [
      ['positive column dual', (r) => { r.colDuals[2] = 0.5; }],
      ['row dual above δ', (r) => { r.rowDuals[0] = 25; }],
      ['pair constraint violated', (r) => { r.rowDuals[1] = r.rowDuals[1]! + 1; }],
      ['duality gap', (r) => { r.rowDuals[0] = r.rowDuals[0]! - 1; }],
      ['wrong cost', (r) => { (r as { cost: number }).cost = 4; }],
      ['rowToCol/colToRow disagree', (r) => { r.colToRow[2] = 0; }],
      ['unmatched row without δ', (r) => { r.rowToCol[0] = -1; r.colToRow[0] = -1; }],
      ['pair not allowed', (r) => { r.rowToCol[1] = 2; r.colToRow[2] = 1; r.colToRow[1] = -1; }],
      ['NaN dual', (r) => { r.colDuals[0] = NaN; }],
    ];
    for (const [what, breakIt] of breakers) {
      const bad = copy(good);
      breakIt(bad);
      const target = what === 'unmatched row without δ' ? { ...inst, unmatchedCost: null } : inst;
      const rep = checkCertificate(target, bad);
      expect(rep.ok, what).toBe(false);
      expect(rep.problems.length, what).toBeGreaterThan(0);
    }
  });

  it('rejects result arrays of the wrong length without throwing', () => {
    const res = copy(solveSparse(inst));
    const rep = checkCertificate(inst, { ...res, colDuals: new Float64Array(2) });
    expect(rep.ok).toBe(false);
  });

  it('holds on dense and sparse solves of seeded random instances (LP duality, Egerváry)', () => {
    // Duals summing to the primal cost while feasible is LP strong duality
    // (Egerváry's theorem for assignment); the solver must always produce it.
    for (let seed = 1; seed <= 40; seed++) {
      const rand = mulberry32(400 + seed);
      const d = randomDense(rand, { nRows: 30, nCols: 25, kind: 'negative', forbidden: 0.4, withDelta: true });
      const rd = solveDense(d);
      const rep = checkCertificate(d, rd);
      expect(rep.problems, `seed ${400 + seed}`).toEqual([]);
      expect(Math.abs(rep.dualObjective - rep.primalCost)).toBeLessThanOrEqual(1e-9 * Math.max(1, Math.abs(rep.primalCost)));
      const s = denseToSparse(d);
      expect(checkCertificate(s, solveSparse(s)).ok, `seed ${400 + seed}`).toBe(true);
    }
  });
});
