import { describe, expect, it } from 'vitest';

import { DEFAULT_CONFIG, type PairflowConfig } from '../../../src/model.js';
import { buildCompactGraph, packMarket, pairCostOf, type HindsightUnit } from '../../../src/hindsight/graph.js';
import { Pricer } from '../../../src/hindsight/pricing.js';

const config: PairflowConfig = { ...DEFAULT_CONFIG, metric: 'euclidean', speedKmh: 20, abandonPenalty: 25 };

describe('Pricer.pass()', () => {
  it('finds the most negative reduced costs of every row, a row wider than 65 535 columns too, and marks them', () => {
    // Demand 0 meets 70 000 supplies, each a little farther than the one before (its
    // row is kept apart in the graph); demand 1 meets the first 30. Under u = P and
    // v = 0 every pair prices out, the nearest most.
    const units: HindsightUnit[] = [
      ...Array.from({ length: 70_000 }, (_, i) => ({ side: 'supply', t: 0, end: i < 30 ? 2000 : 500, x: 1 + i * 1e-5, y: 1 }) as HindsightUnit),
      { side: 'demand', t: 100, end: 400, x: 1, y: 1 },
      { side: 'demand', t: 1000, end: 1500, x: 1, y: 1 },
    ];
    const m = packMarket(units, config);
    const g = buildCompactGraph(m, config);
    expect(g.wide.size).toBe(1);
    const colLo = new Int32Array(g.nRows);
    const colHi = new Int32Array(g.nRows).fill(m.nSupply - 1);
    const pricer = new Pricer(g, pairCostOf(m, config), colLo, colHi, 12, config.abandonPenalty);
    const u = new Float64Array(g.nRows).fill(config.abandonPenalty);
    const v = new Float64Array(g.nCols);
    const found = pricer.pass(u, v);
    expect(found.violators).toBe(70_000 + 30);
    expect(found.n).toBe(24);
    for (const d of [0, 1]) {
      const r = g.demandRow[d]!;
      const cols = Array.from({ length: found.n }, (_, q) => q).filter((q) => found.rows[q] === r).map((q) => found.cols[q]!);
      expect(cols.sort((a, b) => a - b), `demand ${d}`).toEqual(Array.from({ length: 12 }, (_, i) => i));
      for (let q = 0; q < found.n; q++) if (found.rows[q] === r) expect(found.costs[q]).toBe(pairCostOf(m, config)(d, found.cols[q]!));
    }
    // Marked pairs are candidates now: the next pass under the same prices skips them.
    const again = pricer.pass(u, v);
    expect(again.violators).toBe(70_000 + 30 - 24);
  });
});
