import { describe, expect, it } from 'vitest';

import { solveSparse } from '../../../src/matching/index.js';
import type { SolveOptions, SolveResult, SparseInstance } from '../../../src/matching/types.js';
import { DEFAULT_CONFIG, type PairflowConfig } from '../../../src/model.js';
import { packMarket, type HindsightUnit } from '../../../src/hindsight/graph.js';
import { solvePackedMarket } from '../../../src/hindsight/solve.js';
import { mulberry32, randInt } from '../../helpers/random.js';

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
  it('redoes cold a warm solve whose prices fail the certificate, and still ends exact', () => {
    // A solver that spoils its prices whenever it is warm-started.
    const spoilWarm = (inst: SparseInstance, opts?: SolveOptions): SolveResult => {
      const r = solveSparse(inst, opts);
      if (opts?.warm === undefined) return r;
      const rowDuals = r.rowDuals.slice();
      rowDuals[0] = rowDuals[0]! + 5;
      return { ...r, rowDuals };
    };
    for (const seed of [1, 2, 3]) {
      const m = packMarket(market(seed), config);
      const honest = solvePackedMarket('a', m, config, solveSparse, { candidatesPerDemand: 1 }, true);
      const spoiled = solvePackedMarket('a', m, config, spoilWarm, { candidatesPerDemand: 1 }, true);
      expect(honest.pricingRounds, `seed ${seed}`).toBeGreaterThan(1);
      expect(spoiled.detail!.warmRetries, `seed ${seed}`).toBeGreaterThan(0);
      expect(honest.detail!.warmRetries, `seed ${seed}`).toBe(0);
      expect(spoiled.cost, `seed ${seed}`).toBeCloseTo(honest.cost, 9);
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

  it('hands the solver only pairs cheaper than P, each row with its own unmatched column', () => {
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
      expect(inst.unmatchedCost ?? null).toBeNull();
      for (let row = 0; row < inst.nRows; row++) {
        const last = inst.rowPtr[row + 1]! - 1;
        // The row's last pair is its private column, at cost P.
        expect(inst.colIdx[last]).toBe(inst.nCols - inst.nRows + row);
        expect(inst.cost[last]).toBe(6);
        for (let e = inst.rowPtr[row]!; e < last; e++) {
          expect(inst.cost[e]!).toBeLessThan(6);
          realPairs++;
        }
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
