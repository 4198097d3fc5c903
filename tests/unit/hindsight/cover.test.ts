import { describe, expect, it } from 'vitest';

import { generateEvents } from '../../../src/gen/gen.js';
import { solveHindsight, solveHindsightMarketDetailed } from '../../../src/hindsight/hindsight.js';
import { DEFAULT_CONFIG, type PairflowConfig, type SourcedEvent } from '../../../src/model.js';
import { buildOccurrences } from '../../../src/window/occurrences.js';

const config: PairflowConfig = { ...DEFAULT_CONFIG };

function events(seed: number): SourcedEvent[] {
  // A thin slice of the demo city, so some demand has no courier in reach.
  return [...generateEvents({ days: 1, seed, scale: 0.01, markets: 2 })]
    .map((event, i) => ({ event, pos: { file: 'gen', line: i + 1 }, seq: i }))
    .sort((a, b) => a.event.t - b.event.t || a.seq - b.seq);
}

describe('hindsight cover and waits', () => {
  it('the cover has as many units as the match ceiling and touches every allowed pair (König)', async () => {
    for (const seed of [3, 8]) {
      const evs = events(seed);
      const h = await solveHindsight(evs, config, { threads: 1, cover: true });
      const { occurrences } = buildOccurrences(evs, config);
      for (const m of h.markets) {
        const cover = m.cover!;
        expect(cover.demand.length % 3, `seed ${seed}`).toBe(0);
        expect(cover.demand.length / 3 + cover.supply.length / 3, `seed ${seed} ${m.market}`).toBe(m.ceiling);
        // Every allowed pair of the market's graph has a covered end: check on the full graph.
        const occ = occurrences.filter((o) => o.market === m.market);
        const d = solveHindsightMarketDetailed(occ, config);
        const dem = occ.filter((o) => o.side === 'demand');
        const sup = occ.filter((o) => o.side === 'supply');
        const key = (t: number, a: number, b: number): string => `${t}|${a}|${b}`;
        const place = (o: (typeof occ)[number]): [number, number] => (config.metric === 'haversine' ? [o.lat!, o.lon!] : [o.x!, o.y!]);
        const coveredD = new Set<string>();
        for (let i = 0; i < cover.demand.length; i += 3) coveredD.add(key(cover.demand[i]!, cover.demand[i + 1]!, cover.demand[i + 2]!));
        const coveredS = new Set<string>();
        for (let i = 0; i < cover.supply.length; i += 3) coveredS.add(key(cover.supply[i]!, cover.supply[i + 1]!, cover.supply[i + 2]!));
        const g = d.detail.graph;
        let pairs = 0;
        for (let r = 0; r < g.nRows; r++) {
          const dk = key(dem[r]!.t, ...place(dem[r]!));
          for (let e = g.rowPtr[r]!; e < g.rowPtr[r + 1]!; e++) {
            const s = sup[g.colIdx[e]!]!;
            pairs++;
            expect(coveredD.has(dk) || coveredS.has(key(s.t, ...place(s))), `seed ${seed} pair ${r},${g.colIdx[e]}`).toBe(true);
          }
        }
        expect(pairs).toBeGreaterThan(0);
      }
    }
  });

  it('without the option there is no cover', async () => {
    const h = await solveHindsight(events(3), config, { threads: 1 });
    expect(h.markets.every((m) => m.cover === undefined)).toBe(true);
  });

  it('demandWait is NaN exactly for unmatched demand, and cost = travel + waitWeight · wait for the rest', async () => {
    const cfg = { ...config, waitWeight: 2 };
    const h = await solveHindsight(events(5), cfg, { threads: 1 });
    let matched = 0;
    for (let i = 0; i < h.demandWait.length; i++) {
      const w = h.demandWait[i]!;
      if (Number.isNaN(w)) {
        expect(h.demandCost[i]).toBe(cfg.abandonPenalty);
        continue;
      }
      matched++;
      expect(w).toBeGreaterThanOrEqual(0);
      const travel = h.demandCost[i]! - cfg.waitWeight * w;
      expect(travel).toBeGreaterThanOrEqual(-1e-9);
      expect(travel).toBeLessThanOrEqual(cfg.maxTravelMin + 1e-9);
    }
    expect(matched).toBe(h.matched);
  });
});
