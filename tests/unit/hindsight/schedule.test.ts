import { describe, expect, it } from 'vitest';

import { buildCompactGraph, packMarket, type HindsightUnit, type PackedMarket } from '../../../src/hindsight/graph.js';
import { defaultMemoryBudget, estimatePeakPairs, heldPairs, nextMarket, presentPairs, workersBeside } from '../../../src/hindsight/schedule.js';
import { orderBy, subMarket, timeSegments } from '../../../src/hindsight/segments.js';
import { DEFAULT_CONFIG, type PairflowConfig } from '../../../src/model.js';
import { mulberry32, randInt } from '../../helpers/random.js';

const config: PairflowConfig = { ...DEFAULT_CONFIG, metric: 'euclidean', maxTravelMin: 6, speedKmh: 30 };

/**
 * A market on the plane with a busy burst and, two hours later, a quieter one (two
 * time segments of different sizes): demand and supply spread over `spanMin`.
 */
function twoBursts(seed: number, busy: number, quiet: number): PackedMarket {
  const rand = mulberry32(seed);
  const units: HindsightUnit[] = [];
  const burst = (n: number, t0: number, km: number): void => {
    for (let i = 0; i < n; i++) {
      const t = t0 + randInt(rand, 0, 40 * 60_000);
      const side = rand() < 0.5 ? 'demand' : 'supply';
      const stay = side === 'demand' ? 5 * 60_000 : 20 * 60_000;
      units.push({ side, t, end: t + randInt(rand, 0, stay), x: rand() * km, y: rand() * km });
    }
  };
  burst(busy, 0, 6);
  burst(quiet, 3 * 3_600_000, 12);
  units.sort((a, b) => a.t - b.t);
  return packMarket(units, config);
}

/** The allowed pairs of each time segment, built in full. */
function segmentPairs(m: PackedMarket): number[] {
  const seg = timeSegments(m);
  const out: number[] = [];
  for (let q = 0; q < seg.count; q++) {
    const sub = subMarket(m, seg.demand.idx.subarray(seg.demand.start[q]!, seg.demand.start[q + 1]!), seg.supply.idx.subarray(seg.supply.start[q]!, seg.supply.start[q + 1]!));
    out.push(buildCompactGraph(sub, config).codes.length);
  }
  return out;
}

describe('estimatePeakPairs()', () => {
  it('is the largest time segment\'s pair count when every demand is sampled', () => {
    for (const seed of [1, 2, 3]) {
      const m = twoBursts(seed, 900, 300);
      const exact = segmentPairs(m);
      expect(exact.length).toBeGreaterThanOrEqual(2);
      expect(estimatePeakPairs(m, config, m.nDemand)).toBe(Math.max(...exact));
    }
  });

  it('comes within 10 % of it from a sample of a tenth of the demands', () => {
    for (const seed of [4, 5, 6]) {
      const m = twoBursts(seed, 3000, 600);
      const peak = Math.max(...segmentPairs(m));
      const est = estimatePeakPairs(m, config, Math.ceil(m.nDemand / 10));
      expect(Math.abs(est - peak) / peak).toBeLessThan(0.1);
    }
  });

  it('is 0 for a market with no demand or no supply', () => {
    const m = twoBursts(7, 200, 0);
    expect(estimatePeakPairs({ ...m, nDemand: 0, demandT: new Float64Array(0) }, config)).toBe(0);
    expect(estimatePeakPairs(subMarket(m, new Int32Array([0, 1]), new Int32Array(0)), config)).toBe(0);
  });
});

describe('presentPairs()', () => {
  it('is the largest segment\'s allowed pairs where the reach spans the whole map, and above them where it does not', () => {
    // Ended before it began: such a supply meets nobody, nor such a demand.
    const broken = (m: PackedMarket): PackedMarket => {
      const supplyEnd = Float64Array.from(m.supplyEnd);
      const demandEnd = Float64Array.from(m.demandEnd);
      for (let j = 0; j < m.nSupply; j += 7) supplyEnd[j] = m.supplyT[j]! - 1;
      for (let d = 0; d < m.nDemand; d += 11) demandEnd[d] = m.demandT[d]! - 1;
      return { ...m, supplyEnd, demandEnd };
    };
    const everywhere: PairflowConfig = { ...config, maxTravelMin: 1e4 };
    for (const seed of [11, 12, 13]) {
      const m = broken(twoBursts(seed, 900, 300));
      const present = presentPairs(m);
      const exact = timeSegments(m);
      const peak = (c: PairflowConfig): number => {
        let best = 0;
        for (let q = 0; q < exact.count; q++) {
          const sub = subMarket(m, exact.demand.idx.subarray(exact.demand.start[q]!, exact.demand.start[q + 1]!), exact.supply.idx.subarray(exact.supply.start[q]!, exact.supply.start[q + 1]!));
          best = Math.max(best, buildCompactGraph(sub, c).codes.length);
        }
        return best;
      };
      expect(present).toBe(peak(everywhere));
      expect(present).toBeGreaterThan(peak(config));
    }
  });

  it('caps what heldPairs() counts', () => {
    const m = twoBursts(14, 900, 300);
    const present = presentPairs(m);
    expect(heldPairs(m, config, 1, present)).toBe(Math.min(present, estimatePeakPairs(m, config)));
    expect(heldPairs(m, config, 1, 10)).toBe(10);
  });
});

describe('heldPairs()', () => {
  it('counts a market too small to matter at its bound, without building', () => {
    const m = twoBursts(8, 400, 100);
    expect(heldPairs(m, config, m.nDemand * m.nSupply * 1001)).toBe(m.nDemand * m.nSupply);
    expect(heldPairs(m, config, 1)).toBe(estimatePeakPairs(m, config));
  });
});

describe('orderBy()', () => {
  it('orders indices by key, the lower first on a tie, whether the keys come in order or not', () => {
    const rand = mulberry32(15);
    const byComparator = (k: Float64Array): number[] => [...k.keys()].sort((a, b) => k[a]! - k[b]! || a - b);
    for (let n = 0; n < 60; n += 7) {
      const ascending = Float64Array.from({ length: n }, (_, i) => Math.floor(i / 3));
      const shuffled = Float64Array.from({ length: n }, () => randInt(rand, 0, 5));
      expect([...orderBy(ascending)]).toEqual(byComparator(ascending));
      expect([...orderBy(shuffled)]).toEqual(byComparator(shuffled));
    }
  });

  it('gives the same time segments for a market whose arrivals are out of order', () => {
    const m = twoBursts(16, 500, 200);
    // Reversed, the demands and supplies are out of order: the merge of the ordered case does not apply.
    const reversed = subMarket(m, Int32Array.from({ length: m.nDemand }, (_, i) => m.nDemand - 1 - i), Int32Array.from({ length: m.nSupply }, (_, i) => m.nSupply - 1 - i));
    const a = timeSegments(m);
    const b = timeSegments(reversed);
    expect(b.count).toBe(a.count);
    for (let q = 0; q < a.count; q++) {
      const back = (idx: Int32Array, n: number): number[] => [...idx].map((i) => n - 1 - i).sort((x, y) => x - y);
      expect(back(b.demand.idx.subarray(b.demand.start[q]!, b.demand.start[q + 1]!), m.nDemand)).toEqual([...a.demand.idx.subarray(a.demand.start[q]!, a.demand.start[q + 1]!)]);
      expect(back(b.supply.idx.subarray(b.supply.start[q]!, b.supply.start[q + 1]!), m.nSupply)).toEqual([...a.supply.idx.subarray(a.supply.start[q]!, a.supply.start[q + 1]!)]);
    }
  });
});

describe('nextMarket()', () => {
  it('starts the first market whatever its size when nothing runs, and then only what fits', () => {
    const pairs = [800, 440, 350, 250];
    expect(nextMarket([0, 1, 2, 3], pairs, 0, 0, 100)).toBe(0);
    expect(nextMarket([1, 2, 3], pairs, 800, 1, 860)).toBe(-1);
    expect(nextMarket([1, 2, 3], pairs, 800, 1, 1050)).toBe(2);
    expect(nextMarket([2, 3], pairs, 440, 1, 860)).toBe(0);
    expect(nextMarket([], pairs, 0, 0, 860)).toBe(-1);
  });

  it('counts what the caller holds: with it, even the first market waits unless it fits beside it', () => {
    const pairs = [800, 440, 350, 250];
    expect(nextMarket([0, 1, 2, 3], pairs, 0, 0, 860, 450)).toBe(2);
    expect(nextMarket([0, 1, 3], pairs, 350, 1, 860, 450)).toBe(-1);
    expect(nextMarket([0], pairs, 0, 0, 860, 100)).toBe(-1);
    expect(nextMarket([0], pairs, 0, 0, 860, 0)).toBe(0);
  });

  it('keeps the pairs held within the budget whenever two or more run, and runs every market', () => {
    // A schedule simulated with random market sizes and durations on 2–4 workers.
    for (let seed = 1; seed <= 200; seed++) {
      const rand = mulberry32(seed);
      const n = randInt(rand, 1, 12);
      const pairs = Array.from({ length: n }, () => randInt(rand, 0, 1000));
      const length = Array.from({ length: n }, () => 1 + rand() * 10);
      const budget = randInt(rand, 200, 2500);
      const threads = randInt(rand, 2, 4);
      const queue = pairs.map((_, i) => i).sort((a, b) => pairs[b]! - pairs[a]! || a - b);
      const running: Array<{ i: number; until: number }> = [];
      let held = 0;
      let now = 0;
      const started: number[] = [];
      for (;;) {
        while (running.length < threads) {
          const at = nextMarket(queue, pairs, held, running.length, budget);
          if (at < 0) break;
          const i = queue.splice(at, 1)[0]!;
          running.push({ i, until: now + length[i]! });
          held += pairs[i]!;
          started.push(i);
          if (running.length >= 2) expect(held, `seed ${seed}`).toBeLessThanOrEqual(budget);
        }
        if (running.length === 0) break;
        running.sort((a, b) => a.until - b.until);
        const done = running.shift()!;
        now = done.until;
        held -= pairs[done.i]!;
      }
      expect(queue, `seed ${seed}`).toEqual([]);
      expect([...started].sort((a, b) => a - b), `seed ${seed}`).toEqual(pairs.map((_, i) => i));
    }
  });
});

describe('workersBeside()', () => {
  it('leaves a busy caller a core of its own only where workers and caller would outnumber the cores', () => {
    expect(workersBeside(2, 2, true)).toBe(1);
    expect(workersBeside(8, 8, true)).toBe(7);
    expect(workersBeside(6, 4, true)).toBe(3);
    // Room for the caller already: nothing held back.
    expect(workersBeside(3, 4, true)).toBe(3);
    expect(workersBeside(2, 8, true)).toBe(2);
    // Never fewer than one worker, and all of them once the caller is done.
    expect(workersBeside(1, 1, true)).toBe(1);
    expect(workersBeside(2, 1, true)).toBe(1);
    expect(workersBeside(2, 2, false)).toBe(2);
    expect(workersBeside(8, 2, false)).toBe(8);
  });
});

describe('defaultMemoryBudget()', () => {
  it('is an eighth of the machine, never under 3 GiB', () => {
    expect(defaultMemoryBudget(64 * 2 ** 30)).toBe(8 * 2 ** 30);
    expect(defaultMemoryBudget(8 * 2 ** 30)).toBe(3 * 2 ** 30);
  });
});
