import { describe, expect, it } from 'vitest';

import { FirstCandidates } from '../../../src/hindsight/candidates.js';
import { buildCompactGraph, GraphStore, plainColumns, packMarket, type HindsightUnit } from '../../../src/hindsight/graph.js';
import { maxCardinalityMatching } from '../../../src/matching/cardinality.js';
import { DEFAULT_CONFIG, type PairflowConfig } from '../../../src/model.js';
import { mulberry32, randInt } from '../../helpers/random.js';

describe('FirstCandidates: the earliest-deadline greedy', () => {
  // Everyone at one spot, so only time decides which pairs exist: demand d and supply
  // s are allowed iff their presence intervals overlap. On such interval graphs the
  // greedy that serves demands in the order they leave, each with the overlapping free
  // supply that leaves first, is a maximum matching (exchange argument, common
  // practice for interval scheduling): here it must equal Hopcroft–Karp's size.
  const config: PairflowConfig = { ...DEFAULT_CONFIG, metric: 'euclidean', waitWeight: 0 };

  it('matches as many rows as a maximum matching when only time constrains (30 seeded logs)', () => {
    for (let seed = 1; seed <= 30; seed++) {
      const rnd = mulberry32(seed);
      const units: HindsightUnit[] = [];
      const n = 20 + randInt(rnd, 0, 180);
      for (let i = 0; i < n; i++) {
        const t = randInt(rnd, 0, 3_600_000);
        const side = rnd() < 0.5 ? 'demand' : 'supply';
        // Short demands, longer and more varied shifts: many rows compete.
        const end = t + (side === 'demand' ? randInt(rnd, 0, 600_000) : randInt(rnd, 0, 1_800_000));
        units.push({ side, t, end, x: 0, y: 0 });
      }
      const m = packMarket(units, config);
      const first = new FirstCandidates(m.nDemand, m.nSupply, 1, m.supplyEnd);
      const g = buildCompactGraph(m, config, undefined, 0, first);
      const max = maxCardinalityMatching({ nRows: g.nRows, nCols: g.nCols, rowPtr: g.rowPtr, colIdx: plainColumns(g) }).size;
      expect(first.greedy, `seed ${seed}`).toBe(max);
      expect(max, `seed ${seed}: the case is not trivial`).toBeGreaterThan(0);
    }
  });

  it('takes no column twice and only allowed pairs when place matters too', () => {
    const rnd = mulberry32(7);
    const units: HindsightUnit[] = [];
    for (let i = 0; i < 400; i++) {
      const t = randInt(rnd, 0, 7_200_000);
      const side = rnd() < 0.5 ? 'demand' : 'supply';
      units.push({ side, t, end: t + randInt(rnd, 0, 1_800_000), x: rnd() * 12, y: rnd() * 12 });
    }
    const m = packMarket(units, config);
    const first = new FirstCandidates(m.nDemand, m.nSupply, 1, m.supplyEnd);
    const g = buildCompactGraph(m, config, undefined, 0, first);
    const max = maxCardinalityMatching({ nRows: g.nRows, nCols: g.nCols, rowPtr: g.rowPtr, colIdx: plainColumns(g) }).size;
    // A greedy matching is maximal, so at least half a maximum one, and never more.
    expect(first.greedy).toBeLessThanOrEqual(max);
    expect(2 * first.greedy).toBeGreaterThanOrEqual(max);
  });
});

describe('FirstCandidates through the row kernel', () => {
  // Built into a kernel memory (GraphStore(true, true)), the graph's rows are looked at
  // by the kernel's `visit` over arrays in that memory: the same candidates must come
  // out as from the JavaScript loop, with and without the greedy, for several k.
  for (const [k, greedy] of [[1, true], [4, true], [3, false]] as const) {
    it(`picks the same pairs, ranges and greedy as JavaScript (k = ${k}, greedy ${greedy}, seeded)`, () => {
      const config: PairflowConfig = { ...DEFAULT_CONFIG, metric: 'euclidean', waitWeight: 0.7 };
      // One store for every build, as a worker keeps one: each build finds the last one's numbers in its memory.
      const store = new GraphStore(true, true);
      for (let seed = 1; seed <= 5; seed++) {
        const rnd = mulberry32(400 + seed);
        const units: HindsightUnit[] = [];
        for (let i = 0; i < 600; i++) {
          const t = randInt(rnd, 0, 7_200_000);
          // A few spots and ends on the quarter hour: equal codes and equal ends, so ties
          // are broken the same way or not at all.
          const end = Math.ceil((t + randInt(rnd, 0, 1_800_000)) / 900_000) * 900_000;
          units.push({ side: rnd() < 0.5 ? 'demand' : 'supply', t, end, x: randInt(rnd, 0, 8), y: randInt(rnd, 0, 8) });
        }
        const m = packMarket(units, config);
        const run = (store: GraphStore | undefined) => {
          const first = new FirstCandidates(m.nDemand, m.nSupply, k, greedy ? m.supplyEnd : null);
          const g = buildCompactGraph(m, config, store, 0, first);
          const picked = Array.from(first.markColumns(g.codes));
          return { byKernel: g.byKernel, picked, codes: Array.from(g.codes), colLo: Array.from(first.colLo), colHi: Array.from(first.colHi), greedy: first.greedy, greedyEdges: Array.from(first.greedyEdges) };
        };
        const plain = run(undefined);
        const kernel = run(store);
        expect(plain.byKernel).toBe(false);
        expect(kernel.byKernel).toBe(true);
        expect({ ...kernel, byKernel: false }, `seed ${seed}`).toEqual(plain);
        expect(plain.picked.length).toBeGreaterThan(m.nDemand / 2);
        if (greedy) expect(plain.greedy).toBeGreaterThan(0);
      }
    });
  }
});
