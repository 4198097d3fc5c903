import { describe, expect, it } from 'vitest';
import { checkCertificate, solveDense, solveSparse } from '../../../src/matching/index.js';
import type { DenseInstance, SolveResult, SparseInstance, WarmStart } from '../../../src/matching/types.js';
import { bruteForce, denseToSparse, mulberry32, randInt, randomDense, WindowSequence, type CostKind } from './gen.js';

function sameCost(a: number, b: number): boolean {
  return Math.abs(a - b) <= 1e-9 * Math.max(1, Math.abs(a), Math.abs(b));
}

/** Random garbage: prices of any sign and size (or NaN), pairs to any index, repeated, or -1. */
function garbageWarm(rand: () => number, nRows: number, nCols: number): WarmStart {
  const price = (): number => {
    const p = rand();
    if (p < 0.15) return NaN;
    if (p < 0.3) return (rand() - 0.5) * 1e6;
    return (rand() - 0.7) * 50;
  };
  const rowToCol = Int32Array.from({ length: nRows }, () => (rand() < 0.2 ? -1 : randInt(rand, -2, nCols + 1)));
  return {
    ...(rand() < 0.8 ? { colPrices: Float64Array.from({ length: nCols }, price) } : {}),
    ...(rand() < 0.5 ? { rowPrices: Float64Array.from({ length: nRows }, price) } : {}),
    rowToCol,
  };
}

describe('solveSparse()/solveDense() with a garbage warm start', () => {
  it('still reach the exact optimum (exhaustive search) with a valid certificate, 800 seeded cases', () => {
    // Reference: exhaustive enumeration (common practice) for tiny instances.
    const kinds: CostKind[] = ['ties', 'negative', 'uniform'];
    for (let seed = 1; seed <= 800; seed++) {
      const rand = mulberry32(90_000 + seed);
      const d = randomDense(rand, {
        nRows: randInt(rand, 1, 6),
        nCols: randInt(rand, 1, 6),
        kind: kinds[seed % 3]!,
        forbidden: [0, 0.3][seed % 2]!,
        withDelta: seed % 4 !== 0,
      });
      const want = bruteForce(d);
      if (want === Infinity) continue;
      const warm = garbageWarm(rand, d.nRows, d.nCols);
      const label = `seed ${90_000 + seed}`;
      for (const strategy of ['full', 'candidates'] as const) {
        const rd = solveDense(d, { warm, strategy });
        expect(checkCertificate(d, rd).problems, `${label} ${strategy}`).toEqual([]);
        expect(sameCost(rd.cost, want), `${label} ${strategy}: ${rd.cost} vs ${want}`).toBe(true);
      }
      const s = denseToSparse(d, rand);
      const rs = solveSparse(s, { warm, warmWhen: 'always' });
      expect(checkCertificate(s, rs).problems, label).toEqual([]);
      expect(sameCost(rs.cost, want), `${label}: ${rs.cost} vs ${want}`).toBe(true);
    }
  });

  it('negative warm prices on columns that end free are reset, so those columns end at price 0', () => {
    // Hand-worked: one row, δ = 5, columns cost 1 and 2; warm says column 1 at -100.
    const inst: SparseInstance = {
      nRows: 1,
      nCols: 2,
      rowPtr: Int32Array.of(0, 2),
      colIdx: Int32Array.of(0, 1),
      cost: Float64Array.of(1, 2),
      unmatchedCost: Float64Array.of(5),
    };
    const res = solveSparse(inst, { warmWhen: 'always', warm: { colPrices: Float64Array.of(-100, -100), rowToCol: Int32Array.of(1) } });
    expect(res.cost).toBe(1);
    expect([...res.rowToCol]).toEqual([0]);
    expect(res.colDuals[1]).toBe(0);
    expect(checkCertificate(inst, res).ok).toBe(true);
  });
});

function runSequence(seed: number, commit: 'all' | 'due', replace: number, steps: number): { cold: number; warm: number } {
  const seq = new WindowSequence(seed, { nDemand: 150, nSupply: 140, k: 12, replace, commit, waitPerStep: 0.4, defer: 3 });
  let coldWork = 0;
  let warmWork = 0;
  for (let t = 0; t < steps; t++) {
    const label = `seed ${seed} ${commit} step ${t}`;
    const cold = solveSparse(seq.inst);
    const warm = solveSparse(seq.inst, seq.warm !== undefined ? { warm: seq.warm, warmWhen: 'always' } : {});
    expect(checkCertificate(seq.inst, cold).problems, label).toEqual([]);
    expect(checkCertificate(seq.inst, warm).problems, label).toEqual([]);
    expect(sameCost(cold.cost, warm.cost), `${label}: ${cold.cost} vs ${warm.cost}`).toBe(true);
    coldWork += cold.stats.scannedPairs;
    warmWork += warm.stats.scannedPairs;
    seq.advance(warm);
  }
  return { cold: coldWork, warm: warmWork };
}

describe('warm start on window sequences', () => {
  it.each([
    [11, 'all', 0.2],
    [12, 'all', 0.5],
    [13, 'due', 0.2],
    [14, 'due', 0.5],
  ] as const)('seed %i, commit "%s", %f replaced: warm and cold give the same cost and both certify', (seed, commit, replace) => {
    runSequence(seed, commit, replace, 15);
  });

  it('a warm start from the previous optimum, with every row shifted by its own wait term, needs no search', () => {
    // Shifting all of a row's costs by a constant keeps every previous pair optimal
    // (common practice: row reduction), so the warm start is already optimal.
    for (let seed = 1; seed <= 20; seed++) {
      const rand = mulberry32(31_000 + seed);
      const n = randInt(rand, 20, 60);
      const d = randomDense(rand, { nRows: n, nCols: n + 5, kind: 'uniform', forbidden: 0.5, withDelta: true });
      const first = solveDense(d);
      const shifted = new Float64Array(d.cost);
      const delta = new Float64Array(d.unmatchedCost!);
      for (let r = 0; r < n; r++) {
        const w = rand() * 3;
        for (let j = 0; j < d.nCols; j++) shifted[r * d.nCols + j]! += w;
        delta[r]! += w;
      }
      const next: DenseInstance = { ...d, cost: shifted, unmatchedCost: delta };
      const warm: WarmStart = { colPrices: first.colDuals, rowToCol: first.rowToCol };
      const cold = solveDense(next);
      const hot = solveDense(next, { warm });
      const label = `seed ${31_000 + seed}`;
      expect(sameCost(cold.cost, hot.cost), label).toBe(true);
      expect(checkCertificate(next, hot).problems, label).toEqual([]);
      // every previously matched row keeps its pair, so only the unmatched ones are searched
      const matched = first.rowToCol.filter((j) => j >= 0).length;
      expect(hot.stats.warmPairsKept, label).toBe(matched);
      expect(hot.stats.augmentations, label).toBe(0);
      const s = denseToSparse(next);
      const hotSparse = solveSparse(s, { warm, warmWhen: 'always' });
      expect(hotSparse.stats.augmentations, label).toBe(0);
      expect(sameCost(hotSparse.cost, cold.cost), label).toBe(true);
    }
  });
});

export type { SolveResult };

describe('solveSparse() warm-started from its own optimum', () => {
  it('keeps every pair and searches no row, despite rounding in degenerate duals', () => {
    // An optimal solve's pairs and prices are already a certificate (SPEC §5), so a
    // warm start from them has nothing left to do. Real-valued costs that are sums
    // (travel + wait, as in the hindsight optimum) leave ulp-sized gaps between tied
    // reduced costs; those must count as ties, not count as violations.
    for (let seed = 1; seed <= 20; seed++) {
      const rand = mulberry32(4_200 + seed);
      const nRows = randInt(rand, 200, 400);
      const nCols = randInt(rand, 200, 400);
      // Half the seeds give each row's "unmatched" option as an explicit column at
      // cost P (as the hindsight optimum does), half as δ.
      const explicit = seed % 2 === 0;
      const rowPtr = new Int32Array(nRows + 1);
      const cols: number[] = [];
      const costs: number[] = [];
      for (let r = 0; r < nRows; r++) {
        const picked = new Set<number>();
        const k = randInt(rand, 3, 12);
        while (picked.size < k) picked.add(randInt(rand, 0, nCols - 1));
        for (const c of [...picked].sort((a, b) => a - b)) {
          cols.push(c);
          // travel minutes (km / speed · 60) plus minutes waited, as the cost model forms them
          costs.push(((rand() * 6.25) / 25) * 60 + Math.floor(rand() * 600_000) / 60_000);
        }
        if (explicit) {
          cols.push(nCols + r);
          costs.push(8);
        }
        rowPtr[r + 1] = cols.length;
      }
      const inst: SparseInstance = {
        nRows, nCols: explicit ? nCols + nRows : nCols, rowPtr, colIdx: Int32Array.from(cols), cost: Float64Array.from(costs),
        unmatchedCost: explicit ? null : new Float64Array(nRows).fill(8),
      };
      const cold = solveSparse(inst);
      expect(checkCertificate(inst, cold).ok, `seed ${seed}`).toBe(true);
      const warm = solveSparse(inst, { warmWhen: 'always', warm: { colPrices: cold.colDuals, rowPrices: cold.rowDuals, rowToCol: cold.rowToCol } });
      expect(checkCertificate(inst, warm).ok, `seed ${seed}`).toBe(true);
      expect(sameCost(warm.cost, cold.cost), `seed ${seed}`).toBe(true);
      const matched = cold.rowToCol.reduce((n, c) => n + (c >= 0 ? 1 : 0), 0);
      expect(warm.stats.warmPairsKept, `seed ${seed}`).toBe(matched);
      expect(warm.stats.augmentations, `seed ${seed}`).toBe(0);
    }
  });
});

describe('solveSparse() warm-started from its own optimum on a hindsight instance', () => {
  it('keeps every pair: ulp-sized gaps between tied reduced costs count as ties', async () => {
    // The restricted hindsight problems of the demo city have many degenerate duals
    // (rows whose second-best option is tight); rounding leaves some of those a few
    // ulps apart. Treating such a gap as a violation once cascaded and dropped half the pairs.
    const { generateEvents } = await import('../../../src/gen/gen.js');
    const { packMarket } = await import('../../../src/hindsight/graph.js');
    const { solvePackedMarket } = await import('../../../src/hindsight/solve.js');
    const { buildOccurrences } = await import('../../../src/window/occurrences.js');
    const { DEFAULT_CONFIG } = await import('../../../src/model.js');
    const events = [...generateEvents({ days: 1, seed: 1, markets: 1, scale: 0.08 })].map((event, seq) => ({
      event, pos: { file: 'gen', line: seq + 1 }, seq,
    }));
    const { occurrences } = buildOccurrences(events, DEFAULT_CONFIG);
    let checked = 0;
    const solve = (inst: SparseInstance, opts: Parameters<typeof solveSparse>[1]): SolveResult => {
      const r = solveSparse(inst, opts);
      if (inst.nRows > 500 && checked < 3) {
        checked++;
        const again = solveSparse(inst, { warmWhen: 'always', warm: { colPrices: r.colDuals, rowPrices: r.rowDuals, rowToCol: r.rowToCol } });
        expect(checkCertificate(inst, again).ok).toBe(true);
        expect(sameCost(again.cost, r.cost)).toBe(true);
        const matched = r.rowToCol.reduce((n, c) => n + (c >= 0 ? 1 : 0), 0);
        expect(again.stats.warmPairsKept).toBe(matched);
        // Only rows the hint leaves without a pair (unmatched at δ) may be searched.
        expect(again.stats.augmentations).toBeLessThanOrEqual(inst.nRows - matched);
      }
      return r;
    };
    solvePackedMarket('m', packMarket(occurrences, DEFAULT_CONFIG), DEFAULT_CONFIG, solve, {});
    expect(checked).toBeGreaterThan(0);
  });
});

describe('warm start: free columns left below price 0', () => {
  it('a column freed by a departed row is taken back by a reverse search (hand-worked)', () => {
    // Before: row 0 → column 1 (cost 2), row 1 → column 0 (cost 1); duals u = (2, 2),
    // v = (−1, 0) sum to 3. Row 1 leaves. Column 0 is free at −1, which complementary
    // slackness forbids; row 0 is better off on it (cost 1), and only a move of row 0
    // frees column 1 at price 0.
    const inst: SparseInstance = {
      nRows: 1,
      nCols: 2,
      rowPtr: Int32Array.of(0, 2),
      colIdx: Int32Array.of(0, 1),
      cost: Float64Array.of(1, 2),
      unmatchedCost: Float64Array.of(10),
    };
    const res = solveSparse(inst, { warmWhen: 'always', warm: { colPrices: Float64Array.of(-1, 0), rowToCol: Int32Array.of(1) } });
    expect(res.cost).toBe(1);
    expect([...res.rowToCol]).toEqual([0]);
    expect(res.stats.warm).toBe(true);
    expect(res.stats.warmPairsKept).toBe(1);
    expect(res.stats.reverseSearches).toBe(1);
    expect(res.colDuals[1]).toBe(0);
    expect(checkCertificate(inst, res).problems).toEqual([]);
  });

  it('an unmatched row joins a column left below 0 when that is cheaper than raising the column to 0 (hand-worked)', () => {
    // Row 1 held column 1 at price −1 but may no longer take it (its pair is gone), so
    // column 1 stays free at −1. Row 0 (δ = 1.5) sees column 1 at 1 − (−1) = 2 and stays
    // unmatched; row 1 takes column 0 (cost 3). The reverse search from column 1 then
    // has two ways out: raise it to 0 (costs 1) or let row 0 join at
    // 1 − 1.5 − (−1) = 0.5. Row 0 joins: cost 1 + 3 = 4 (unmatched it would be 1.5 + 3).
    // Row 2 keeps its pair (cost 1) on a column of its own, so the warm start is used.
    const inst: SparseInstance = {
      nRows: 3,
      nCols: 3,
      rowPtr: Int32Array.of(0, 1, 2, 3),
      colIdx: Int32Array.of(1, 0, 2),
      cost: Float64Array.of(1, 3, 1),
      unmatchedCost: Float64Array.of(1.5, 10, 10),
    };
    const res = solveSparse(inst, { warmWhen: 'always', warm: { colPrices: Float64Array.of(NaN, -1, 0), rowToCol: Int32Array.of(-1, 1, 2) } });
    expect(res.stats.warm).toBe(true);
    expect(res.stats.warmPairsKept).toBe(1);
    expect(res.stats.reverseSearches).toBe(1);
    expect([...res.rowToCol]).toEqual([1, 0, 2]);
    expect(res.cost).toBe(5);
    expect(res.colDuals[1]).toBe(-0.5);
    expect(checkCertificate(inst, res).problems).toEqual([]);
    expect(res.cost).toBe(solveSparse(inst).cost);
  });

  it('rows leave and columns arrive: the warm solve equals exhaustive search, 400 seeded cases', () => {
    // Reference: exhaustive enumeration (common practice). Each case solves an instance,
    // drops some rows (their columns keep negative prices) and adds new columns (priced
    // by column reduction), then re-solves warm from the first optimum.
    let reverse = 0;
    for (let seed = 1; seed <= 400; seed++) {
      const rand = mulberry32(77_000 + seed);
      const nRows = randInt(rand, 2, 6);
      const nCols = randInt(rand, 2, 5);
      const extra = randInt(rand, 0, 2);
      const d = randomDense(rand, { nRows, nCols: nCols + extra, kind: seed % 2 === 0 ? 'ties' : 'uniform', forbidden: 0.3, withDelta: true });
      // first window: without the extra columns
      const firstCost = new Float64Array(nRows * nCols);
      for (let r = 0; r < nRows; r++) for (let j = 0; j < nCols; j++) firstCost[r * nCols + j] = d.cost[r * (nCols + extra) + j]!;
      const first = solveDense({ nRows, nCols, cost: firstCost, unmatchedCost: d.unmatchedCost! });
      // second window: the rows that stay, every column (old ones first, same indices)
      const stay: number[] = [];
      for (let r = 0; r < nRows; r++) if (rand() < 0.6) stay.push(r);
      if (stay.length === 0) continue;
      const nextCost = new Float64Array(stay.length * (nCols + extra));
      stay.forEach((r, i) => nextCost.set(d.cost.subarray(r * (nCols + extra), (r + 1) * (nCols + extra)), i * (nCols + extra)));
      const next: DenseInstance = { nRows: stay.length, nCols: nCols + extra, cost: nextCost, unmatchedCost: Float64Array.from(stay, (r) => d.unmatchedCost![r]!) };
      const colPrices = new Float64Array(nCols + extra).fill(NaN);
      colPrices.set(first.colDuals);
      const warm: WarmStart = { colPrices, rowToCol: Int32Array.from(stay, (r) => first.rowToCol[r]!) };
      const want = bruteForce(next);
      const label = `seed ${77_000 + seed}`;
      const s = denseToSparse(next, rand);
      const hot = solveSparse(s, { warm, warmWhen: 'always' });
      expect(checkCertificate(s, hot).problems, label).toEqual([]);
      expect(sameCost(hot.cost, want), `${label}: ${hot.cost} vs ${want}`).toBe(true);
      const hotDense = solveDense(next, { warm });
      expect(checkCertificate(next, hotDense).problems, label).toEqual([]);
      expect(sameCost(hotDense.cost, want), label).toBe(true);
      reverse += hot.stats.reverseSearches ?? 0;
    }
    // the path under test ran
    expect(reverse).toBeGreaterThan(20);
  });
});

describe('solveSparse(): when a warm hint is used', () => {
  it('ignores it below 512 pairs or when it offers a pair to under a quarter of the rows, and the optimum is the same either way', () => {
    const build = (n: number, perRow: number, seed: number): SparseInstance => {
      const rand = mulberry32(seed);
      const rowPtr = new Int32Array(n + 1);
      const cols: number[] = [];
      const costs: number[] = [];
      for (let r = 0; r < n; r++) {
        const picked = new Set<number>();
        while (picked.size < perRow) picked.add(randInt(rand, 0, n - 1));
        for (const c of [...picked].sort((a, b) => a - b)) {
          cols.push(c);
          costs.push(rand() * 10);
        }
        rowPtr[r + 1] = cols.length;
      }
      return { nRows: n, nCols: n, rowPtr, colIdx: Int32Array.from(cols), cost: Float64Array.from(costs), unmatchedCost: new Float64Array(n).fill(12) };
    };
    const hintOf = (inst: SparseInstance, share: number): { rowToCol: Int32Array; colPrices: Float64Array } => {
      const cold = solveSparse(inst);
      const rowToCol = cold.rowToCol.map((c, r) => (r < share * inst.nRows ? c : -1));
      return { rowToCol, colPrices: cold.colDuals };
    };
    const tiny = build(5, 5, 1); // 25 pairs
    const small = build(12, 10, 3); // 120 pairs
    const mid = build(60, 6, 2); // 360 pairs
    const below = build(73, 7, 4); // 511 pairs
    const at = build(64, 8, 5); // 512 pairs
    const big = build(80, 8, 2); // 640 pairs
    const cases = [[tiny, 1, false], [small, 1, false], [mid, 1, false], [below, 1, false], [at, 1, true], [big, 1, true], [big, 0.2, false], [big, 0.5, true]] as const;
    for (const [inst, share, used] of cases) {
      const warm = hintOf(inst, share);
      const r = solveSparse(inst, { warm });
      expect(r.stats.warm, `${inst.rowPtr[inst.nRows]} pairs, share ${share}`).toBe(used);
      expect(solveSparse(inst, { warm, warmWhen: 'always' }).stats.warm).toBe(true);
      expect(checkCertificate(inst, r).ok).toBe(true);
      expect(sameCost(r.cost, solveSparse(inst).cost)).toBe(true);
    }
  });
});
