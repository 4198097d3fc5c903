import { describe, expect, it } from 'vitest';

import { checkCertificate, solveSparse } from '../../../src/matching/index.js';
import type { SolveOptions, SolveResult, SparseInstance } from '../../../src/matching/types.js';
import { DEFAULT_CONFIG, type PairflowConfig } from '../../../src/model.js';
import { packMarket, type HindsightUnit } from '../../../src/hindsight/graph.js';
import { solvePackedMarket } from '../../../src/hindsight/solve.js';
import { mulberry32, randInt } from '../../helpers/random.js';

/** The detail's prices and pairs as a result the certificate checker reads (P per unmatched row). */
function resultOf(d: { rowDuals: Float64Array; colDuals: Float64Array; rowToCol: Int32Array; graph: { nCols: number; rowPtr: Int32Array; colIdx: Int32Array; cost: Float64Array } }, P: number): SolveResult {
  const colToRow = new Int32Array(d.graph.nCols).fill(-1);
  let cost = 0;
  d.rowToCol.forEach((c, r) => {
    if (c < 0) {
      cost += P;
      return;
    }
    colToRow[c] = r;
    for (let e = d.graph.rowPtr[r]!; e < d.graph.rowPtr[r + 1]!; e++) if (d.graph.colIdx[e] === c) cost += d.graph.cost[e]!;
  });
  return { cost, rowToCol: d.rowToCol, colToRow, rowDuals: d.rowDuals, colDuals: d.colDuals, stats: { augmentations: 0, scannedPairs: 0, ms: 0, warm: false } };
}

const config: PairflowConfig = { ...DEFAULT_CONFIG, metric: 'euclidean', speedKmh: 20, abandonPenalty: 25 };

/** A seeded plane market dense enough that a single candidate per demand is not enough. */
function market(seed: number, n = 80): HindsightUnit[] {
  const rand = mulberry32(seed);
  return Array.from({ length: n }, () => {
    const t = randInt(rand, 0, 1_800_000);
    return { side: rand() < 0.5 ? 'demand' : 'supply', t, end: t + randInt(rand, 60_000, 900_000), x: rand() * 4, y: rand() * 4 } as HindsightUnit;
  });
}

describe('solvePackedMarket()', () => {
  it('solves again cold when the first prices fail the certificate, and still ends exact', () => {
    // A solver whose first answer of each segment is spoiled (a column priced above 0).
    const spoilFirst = (): ((inst: SparseInstance, opts?: SolveOptions) => SolveResult) => {
      let calls = 0;
      return (inst, opts) => {
        const r = solveSparse(inst, opts);
        if (calls++ > 0) return r;
        return { ...r, colDuals: r.colDuals.map((v) => v + 1) };
      };
    };
    for (const seed of [1, 2, 3]) {
      const m = packMarket(market(seed), config);
      const honest = solvePackedMarket('a', m, config, solveSparse, { candidatesPerDemand: 1 }, true);
      const spoiled = solvePackedMarket('a', m, config, spoilFirst(), { candidatesPerDemand: 1 }, true);
      expect(honest.pricingRounds, `seed ${seed}`).toBeGreaterThan(1);
      expect(spoiled.detail!.retries, `seed ${seed}`).toBeGreaterThan(0);
      expect(honest.detail!.retries, `seed ${seed}`).toBe(0);
      expect(spoiled.cost, `seed ${seed}`).toBeCloseTo(honest.cost, 9);
      // The final prices certify the optimum over every allowed pair (SPEC §5).
      const g = spoiled.detail!.graph;
      expect(checkCertificate({ ...g, unmatchedCost: new Float64Array(g.nRows).fill(config.abandonPenalty) }, resultOf(spoiled.detail!, config.abandonPenalty)).problems, `seed ${seed}`).toEqual([]);
    }
  });

  it('throws PAIRFLOW_ERR_INTERNAL_BUG when even a cold solve does not certify its result', () => {
    const liar = (inst: SparseInstance, opts?: SolveOptions): SolveResult => {
      const r = solveSparse(inst, opts);
      return { ...r, colDuals: r.colDuals.map((v) => v + 1) };
    };
    const m = packMarket(market(4), config);
    expect(() => solvePackedMarket('a', m, config, liar)).toThrow(expect.objectContaining({ code: 'PAIRFLOW_ERR_INTERNAL_BUG' }));
  });

  it('hands the solver only pairs cheaper than P, every row free to stay unmatched at P', () => {
    const seen: SparseInstance[] = [];
    const spy = (inst: SparseInstance, opts?: SolveOptions): SolveResult => {
      seen.push(inst);
      return solveSparse(inst, opts);
    };
    const cheap: PairflowConfig = { ...config, abandonPenalty: 6 };
    const r = solvePackedMarket('a', packMarket(market(5), cheap), cheap, spy, { candidatesPerDemand: 1_000 }, true);
    expect(seen.length).toBeGreaterThan(0);
    let realPairs = 0;
    for (const inst of seen) {
      expect(Array.from(inst.unmatchedCost!)).toEqual(new Array(inst.nRows).fill(6));
      for (const c of inst.cost) {
        expect(c).toBeLessThan(6);
        realPairs++;
      }
    }
    const graph = r.detail!.graph;
    const underP = Array.from(graph.cost).filter((c) => c < 6).length;
    expect(underP).toBeLessThan(graph.cost.length);
    expect(realPairs).toBe(underP);
  });

  it('refuses a negative waitWeight with PAIRFLOW_ERR_CONFIG_INVALID (costs must be ≥ 0)', () => {
    const bad: PairflowConfig = { ...config, waitWeight: -1 };
    expect(() => solvePackedMarket('a', packMarket(market(6), bad), bad, solveSparse)).toThrow(expect.objectContaining({ code: 'PAIRFLOW_ERR_CONFIG_INVALID' }));
  });
});
