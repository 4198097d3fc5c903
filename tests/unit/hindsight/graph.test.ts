import { describe, expect, it } from 'vitest';

import { DEFAULT_CONFIG, type PairflowConfig } from '../../../src/model.js';
import {
  buildAllowedGraph,
  buildCompactGraph,
  CODE_TOP,
  codeOf,
  columnOf,
  plainColumns,
  GraphStore,
  packMarket,
  pairCostOf,
  QUICK_COST_SLACK,
  quickPairCostOf,
  type CompactGraph,
  type HindsightUnit,
} from '../../../src/hindsight/graph.js';
import { matchCeiling } from '../../../src/hindsight/ceiling.js';
import { maxCardinalityMatching } from '../../../src/matching/cardinality.js';
import { euclideanKm, haversineKm, travelMin } from '../../../src/window/geo.js';
import { mulberry32, randInt } from '../../helpers/random.js';

/** Every allowed, time-overlapping pair by comparing all pairs (SPEC §2, §4): the slow truth. */
function allPairs(units: readonly HindsightUnit[], config: PairflowConfig): Map<string, number> {
  const demand = units.filter((u) => u.side === 'demand');
  const supply = units.filter((u) => u.side === 'supply');
  const out = new Map<string, number>();
  demand.forEach((d, r) => {
    supply.forEach((s, c) => {
      if (Math.max(s.t, d.t) > Math.min(s.end, d.end)) return;
      if (!(d.needs ?? []).every((n) => (s.has ?? []).includes(n))) return;
      const km =
        config.metric === 'euclidean'
          ? euclideanKm(s.x ?? NaN, s.y ?? NaN, d.x ?? NaN, d.y ?? NaN)
          : haversineKm(s.lat ?? NaN, s.lon ?? NaN, d.lat ?? NaN, d.lon ?? NaN);
      const travel = travelMin(km, config.speedKmh);
      if (!(travel <= config.maxTravelMin)) return;
      out.set(`${r},${c}`, travel + (config.waitWeight * Math.max(0, s.t - d.t)) / 60_000);
    });
  });
  return out;
}

function graphPairs(units: readonly HindsightUnit[], config: PairflowConfig): Map<string, number> {
  const g = buildAllowedGraph(packMarket(units, config), config);
  const out = new Map<string, number>();
  for (let r = 0; r < g.nRows; r++) {
    for (let e = g.rowPtr[r]!; e < g.rowPtr[r + 1]!; e++) {
      const key = `${r},${g.colIdx[e]}`;
      expect(out.has(key), `pair ${key} listed twice`).toBe(false);
      out.set(key, g.cost[e]!);
    }
  }
  return out;
}

function sameGraph(units: readonly HindsightUnit[], config: PairflowConfig, ctx: string): number {
  const want = allPairs(units, config);
  const got = graphPairs(units, config);
  expect([...got.keys()].sort(), ctx).toEqual([...want.keys()].sort());
  for (const [k, c] of want) expect(got.get(k), `${ctx} pair ${k}`).toBe(c);
  return want.size;
}

function randomUnits(seed: number, place: (rand: () => number) => Partial<HindsightUnit>, n = 60): HindsightUnit[] {
  const rand = mulberry32(seed);
  const caps = ['a', 'b', 'c'];
  return Array.from({ length: n }, () => {
    const side = rand() < 0.5 ? 'demand' : 'supply';
    const t = randInt(rand, 0, 3_600_000);
    const end = t + (rand() < 0.05 ? 0 : randInt(rand, 0, 1_800_000));
    const tags = caps.filter(() => rand() < 0.3);
    return { side, t, end, ...place(rand), ...(side === 'supply' ? { has: tags } : { needs: tags.slice(0, 1) }) } as HindsightUnit;
  });
}

describe('buildAllowedGraph()', () => {
  it('finds exactly the pairs an all-pairs scan finds, with the same costs (haversine, seeded)', () => {
    const config: PairflowConfig = { ...DEFAULT_CONFIG, maxTravelMin: 20, speedKmh: 30, waitWeight: 1.5 };
    let total = 0;
    for (let seed = 1; seed <= 25; seed++) {
      // Cities at random latitudes, some astride the antimeridian, some near a pole.
      const rand0 = mulberry32(seed * 7919);
      const lat0 = seed % 5 === 0 ? 88.5 : -70 + rand0() * 140;
      const lon0 = seed % 3 === 0 ? 179.95 : -180 + rand0() * 360;
      const units = randomUnits(seed, (rand) => {
        const lat = Math.max(-90, Math.min(90, lat0 + (rand() - 0.5) * 0.3));
        let lon = lon0 + (rand() - 0.5) * (seed % 5 === 0 ? 40 : 0.4);
        if (lon > 180) lon -= 360;
        if (lon < -180) lon += 360;
        return { lat, lon };
      });
      total += sameGraph(units, config, `seed ${seed}`);
    }
    expect(total).toBeGreaterThan(500);
  });

  it('finds pairs across the antimeridian and over a pole', () => {
    const config: PairflowConfig = { ...DEFAULT_CONFIG, maxTravelMin: 60, speedKmh: 60 };
    const units: HindsightUnit[] = [
      { side: 'demand', t: 0, end: 600_000, lat: 10, lon: 179.9 },
      { side: 'supply', t: 0, end: 600_000, lat: 10, lon: -179.9 },
      { side: 'demand', t: 0, end: 600_000, lat: 89.9, lon: 0 },
      { side: 'supply', t: 0, end: 600_000, lat: 89.9, lon: 180 },
      { side: 'supply', t: 0, end: 600_000, lat: 90, lon: 37 },
    ];
    const n = sameGraph(units, config, 'edges of the map');
    // ~21.9 km across the antimeridian, ~22.2 km over the pole, ~11.1 km to the pole itself.
    expect(n).toBe(3);
  });

  it('finds exactly the all-pairs set on the plane, also when coordinates spread far and cells must grow', () => {
    const config: PairflowConfig = { ...DEFAULT_CONFIG, metric: 'euclidean', maxTravelMin: 12 };
    for (let seed = 1; seed <= 15; seed++) {
      const spread = seed % 3 === 0 ? 1e9 : 20;
      const units = randomUnits(seed, (rand) => {
        // Clusters far apart, so pairs exist even with a huge spread.
        const cx = Math.floor(rand() * 3) * spread;
        return { x: cx + rand() * 8, y: cx + rand() * 8 };
      });
      sameGraph(units, config, `seed ${seed}`);
    }
  });

  it('allows a pair at distance zero when maxTravelMin is 0', () => {
    const config: PairflowConfig = { ...DEFAULT_CONFIG, metric: 'euclidean', maxTravelMin: 0 };
    const units: HindsightUnit[] = [
      { side: 'demand', t: 0, end: 10, x: 1, y: 1 },
      { side: 'supply', t: 5, end: 10, x: 1, y: 1 },
      { side: 'supply', t: 5, end: 10, x: 1, y: 1.000001 },
    ];
    expect(sameGraph(units, config, 'zero reach')).toBe(1);
  });

  it('meets at one shared instant: a zero-length occurrence, or one arriving at the other\'s end', () => {
    const config: PairflowConfig = { ...DEFAULT_CONFIG, metric: 'euclidean' };
    const units: HindsightUnit[] = [
      { side: 'demand', t: 100, end: 100, x: 0, y: 0 },
      { side: 'supply', t: 0, end: 100, x: 1, y: 0 },
      { side: 'supply', t: 100, end: 200, x: 1, y: 0 },
      { side: 'supply', t: 101, end: 200, x: 1, y: 0 },
      { side: 'supply', t: 0, end: 99, x: 1, y: 0 },
    ];
    expect(sameGraph(units, config, 'instants')).toBe(2);
  });

  it('checks needs ⊆ has over more than 32 capability names', () => {
    const config: PairflowConfig = { ...DEFAULT_CONFIG, metric: 'euclidean' };
    const names = Array.from({ length: 70 }, (_, i) => `tag${i}`);
    const rand = mulberry32(5);
    const units: HindsightUnit[] = Array.from({ length: 80 }, (_, i) => {
      const side = i % 2 === 0 ? 'demand' : 'supply';
      const tags = names.filter(() => rand() < (side === 'supply' ? 0.6 : 0.04));
      return { side, t: 0, end: 1000, x: rand(), y: rand(), ...(side === 'supply' ? { has: tags } : { needs: tags }) } as HindsightUnit;
    });
    expect(packMarket(units, config).capWords).toBe(3);
    const n = sameGraph(units, config, 'many tags');
    expect(n).toBeGreaterThan(0);
    expect(n).toBeLessThan(40 * 40);
  });

  it('gives a unit without coordinates no pairs', () => {
    const config = DEFAULT_CONFIG;
    const units: HindsightUnit[] = [
      { side: 'demand', t: 0, end: 1000 },
      { side: 'supply', t: 0, end: 1000, lat: 1, lon: 1 },
      { side: 'demand', t: 0, end: 1000, lat: 1, lon: 1 },
    ];
    const g = buildAllowedGraph(packMarket(units, config), config);
    expect(Array.from(g.rowPtr)).toEqual([0, 0, 1]);
  });
});

/** A compact graph's pairs keyed by (demand, supply), with their cost codes. */
function compactPairs(g: CompactGraph): Map<string, number> {
  const out = new Map<string, number>();
  for (let r = 0; r < g.nRows; r++) {
    for (let e = g.rowPtr[r]!; e < g.rowPtr[r + 1]!; e++) out.set(`${g.rowDemand[r]},${columnOf(g, r, e)}`, codeOf(g.codes[e]!));
  }
  return out;
}

/**
 * A code q says the cost lies in [q·step, (q + 1)·step), up to float rounding of a
 * fast distance (2^-24 + 1e-12 relative); the top code says ≥ P.
 */
function expectCodeBounds(c: number, q: number, step: number, P: number, at: string): void {
  const tol = (x: number) => x * 2 ** -22;
  if (q === CODE_TOP) {
    expect(c, at).toBeGreaterThanOrEqual(P - tol(P));
  } else {
    expect(c, at).toBeGreaterThanOrEqual(q * step - tol(c));
    expect(c, at).toBeLessThan((q + 1) * step + tol(c));
  }
}

describe('buildCompactGraph()', () => {
  const config: PairflowConfig = { ...DEFAULT_CONFIG, metric: 'euclidean', maxTravelMin: 12, waitWeight: 1.3 };
  const plane = (rand: () => number): Partial<HindsightUnit> => ({ x: rand() * 8, y: rand() * 8 });

  it('holds the all-pairs set, each code bounding the exact cost to a step, and a row per demand', () => {
    for (let seed = 1; seed <= 10; seed++) {
      const units = randomUnits(seed, plane, 90);
      const m = packMarket(units, config);
      const g = buildCompactGraph(m, config);
      const want = allPairs(units, config);
      const got = compactPairs(g);
      expect([...got.keys()].sort(), `seed ${seed}`).toEqual([...want.keys()].sort());
      for (const [k, c] of want) expectCodeBounds(c, got.get(k)!, g.step, config.abandonPenalty, `seed ${seed} pair ${k}`);
      // rowDemand and demandRow are inverse permutations of the demand.
      expect(g.nRows).toBe(m.nDemand);
      expect([...g.rowDemand].sort((a, b) => a - b)).toEqual(Array.from({ length: m.nDemand }, (_, i) => i));
      for (let r = 0; r < g.nRows; r++) expect(g.demandRow[g.rowDemand[r]!]).toBe(r);
      // pairCostOf recomputes the exact cost of every pair; NaN off the graph's distance limit.
      const exact = pairCostOf(m, config);
      for (const [k, c] of want) {
        const [d, s] = k.split(',').map(Number) as [number, number];
        expect(exact(d, s)).toBe(c);
      }
    }
  });

  it("gives each pair the build's cost within QUICK_COST_SLACK of the exact one, and a code that bounds it (haversine, seeded)", () => {
    const cfg: PairflowConfig = { ...DEFAULT_CONFIG, maxTravelMin: 20, speedKmh: 30, waitWeight: 1.5 };
    let pairs = 0;
    for (let seed = 1; seed <= 12; seed++) {
      // Cities at random latitudes, one near a pole; a fifth of the units share one
      // spot, so distances of 0 and a few metres (where the half-angle terms cancel) occur.
      const rand0 = mulberry32(seed * 104_729);
      const lat0 = seed % 6 === 0 ? 88.5 : -70 + rand0() * 140;
      const lon0 = -180 + rand0() * 360;
      const units = randomUnits(seed, (rand) =>
        rand() < 0.2 ? { lat: lat0, lon: lon0 + rand() * 1e-5 } : { lat: Math.min(90, lat0 + (rand() - 0.5) * 0.2), lon: lon0 + (rand() - 0.5) * 0.3 },
      120);
      const m = packMarket(units, cfg);
      const g = buildCompactGraph(m, cfg);
      const exact = pairCostOf(m, cfg);
      const quick = quickPairCostOf(m, cfg);
      const P = cfg.abandonPenalty;
      for (let r = 0; r < g.nRows; r++) {
        for (let e = g.rowPtr[r]!; e < g.rowPtr[r + 1]!; e++) {
          const d = g.rowDemand[r]!;
          const j = columnOf(g, r, e);
          const c = exact(d, j);
          const at = `seed ${seed} pair ${d},${j}`;
          expect(Math.abs(quick(d, j) - c), at).toBeLessThanOrEqual(QUICK_COST_SLACK * (1 + c));
          expectCodeBounds(c, codeOf(g.codes[e]!), g.step, P, at);
          pairs++;
        }
      }
    }
    expect(pairs).toBeGreaterThan(2000);
  });

  it('writes the rows of demands that ended earlier first', () => {
    const units = randomUnits(3, plane, 120);
    const m = packMarket(units, config);
    const g = buildCompactGraph(m, config);
    // Among demands that can meet anyone (end ≥ t), rows follow `end` (ties by index).
    const ends = Array.from(g.rowDemand).filter((d) => m.demandEnd[d]! >= m.demandT[d]!).map((d) => m.demandEnd[d]!);
    expect(ends.length).toBeGreaterThan(20);
    expect(ends).toEqual([...ends].sort((a, b) => a - b));
  });

  it('gives the same graphs from one store shared by several builds, and from one that must grow', () => {
    const store = new GraphStore();
    for (let seed = 1; seed <= 6; seed++) {
      const units = randomUnits(seed, plane, 40 + 30 * seed);
      const m = packMarket(units, config);
      const fresh = buildCompactGraph(m, config);
      // A reservation of one pair makes the store grow, several times, mid-build.
      const shared = buildCompactGraph(m, config, store, 1);
      expect(compactPairs(shared), `seed ${seed}`).toEqual(compactPairs(fresh));
      expect(Array.from(shared.rowPtr)).toEqual(Array.from(fresh.rowPtr));
    }
  });

  it('keeps the columns of a row that spans more than 65 535 of them apart, and gives them back in place', () => {
    // 70 000 supplies at one place, present throughout; a demand meets them all, so
    // its row spans columns 0..69 999. A second demand meets only the last ten.
    const units: HindsightUnit[] = [
      ...Array.from({ length: 70_000 }, (_, i) => ({ side: 'supply', t: 0, end: i < 69_990 ? 500 : 2000, x: 1, y: 1 }) as HindsightUnit),
      { side: 'demand', t: 100, end: 400, x: 1, y: 1.5 },
      { side: 'demand', t: 1000, end: 1500, x: 1.2, y: 1 },
    ];
    const m = packMarket(units, config);
    const g = buildCompactGraph(m, config);
    expect(g.wide.size).toBe(1);
    const r = g.demandRow[0]!;
    expect(g.rowPtr[r + 1]! - g.rowPtr[r]!).toBe(70_000);
    expect(columnOf(g, r, g.rowPtr[r]! + 69_999)).toBe(69_999);
    const narrow = g.demandRow[1]!;
    const cols = Array.from({ length: 10 }, (_, i) => columnOf(g, narrow, g.rowPtr[narrow]! + i)).sort((a, b) => a - b);
    expect(cols).toEqual(Array.from({ length: 10 }, (_, i) => 69_990 + i));
    const want = Array.from({ length: g.rowPtr[g.nRows]! }, (_, e) => {
      const row = e < g.rowPtr[1]! ? 0 : 1;
      return columnOf(g, row, e);
    });
    expect(Array.from(plainColumns(g))).toEqual(want);
  });

  it('gives the match ceiling of plain columns, from the 16-bit columns and from a graph with a wide row', () => {
    const rnd = mulberry32(17);
    // More demands than supplies, spread out: rows compete and not all are matched.
    const narrow: HindsightUnit[] = Array.from({ length: 400 }, () => {
      const t = randInt(rnd, 0, 3_600_000);
      return { side: rnd() < 0.6 ? 'demand' : 'supply', t, end: t + randInt(rnd, 0, 600_000), x: rnd() * 20, y: rnd() * 20 } as HindsightUnit;
    });
    const wideToo: HindsightUnit[] = [
      ...Array.from({ length: 70_000 }, (_, i) => ({ side: 'supply', t: 0, end: i < 69_990 ? 500 : 2000, x: 1, y: 1 }) as HindsightUnit),
      ...Array.from({ length: 12 }, (_, i) => ({ side: 'demand', t: 1000 + i, end: 1500, x: 1.2, y: 1 }) as HindsightUnit),
      { side: 'demand', t: 100, end: 400, x: 1, y: 1.5 },
    ];
    for (const units of [narrow, wideToo]) {
      const m = packMarket(units, config);
      const g = buildCompactGraph(m, config);
      const want = maxCardinalityMatching({ nRows: g.nRows, nCols: g.nCols, rowPtr: g.rowPtr, colIdx: plainColumns(g) }).size;
      // Wide: ten supplies for the twelve late demands, and the early one's own;
      // narrow: rows left unmatched, so the rows' bases decide which pairs compete.
      if (units === wideToo) expect(want).toBe(11);
      else expect(want).toBeLessThan(g.nRows - 20);
      // Seeded with nothing (no optimum's pairs), the ceiling still finds a maximum matching.
      expect(matchCeiling(g, new Int32Array(g.nRows).fill(-1)).size).toBe(want);
    }
  });
});

describe('buildCompactGraph() with its pairs in a kernel memory', () => {
  /** The graph's arrays, for comparing two builds element by element. */
  const arrays = (g: CompactGraph) => ({
    rowDemand: Array.from(g.rowDemand),
    rowPtr: Array.from(g.rowPtr),
    rowBase: Array.from(g.rowBase),
    cols: Array.from(g.cols),
    codes: Array.from(g.codes),
    wide: [...g.wide].map(([r, c]) => [r, Array.from(c)]),
  });

  for (const metric of ['euclidean', 'haversine'] as const) {
    it(`scans the rows in WebAssembly into the same graph as JavaScript, pair for pair and code for code (${metric}, seeded)`, () => {
      const cfg: PairflowConfig = { ...DEFAULT_CONFIG, metric, maxTravelMin: 12, speedKmh: 24, waitWeight: 1.3 };
      const limitKm = (cfg.maxTravelMin * cfg.speedKmh) / 60;
      const store = new GraphStore(true, true);
      let deferred = 0;
      for (let seed = 1; seed <= 6; seed++) {
        const rand = mulberry32(seed * 7919);
        const place = metric === 'euclidean'
          ? (r: () => number): Partial<HindsightUnit> => ({ x: r() * 9, y: r() * 9 })
          : (r: () => number): Partial<HindsightUnit> => ({ lat: 48.1 + r() * 0.08, lon: 11.5 + r() * 0.12 });
        const units = randomUnits(seed, place, 400);
        // A crowd at one spot (its cell's bucket moves to larger room again and
        // again), units with no place, and pairs within a hair of the distance limit
        // (decided by the exact formula: some allowed, some not).
        for (let i = 0; i < 300; i++) units.push({ side: 'supply', t: randInt(rand, 0, 3_600_000), end: 4_000_000, ...place(() => 0.5) } as HindsightUnit);
        units.push({ side: 'supply', t: 0, end: 4_000_000 } as HindsightUnit, { side: 'demand', t: 0, end: 4_000_000 } as HindsightUnit);
        const near: HindsightUnit[][] = [];
        for (let i = 0; i < 40; i++) {
          const off = (i - 20) * 1e-13 * limitKm;
          const t = randInt(rand, 0, 3_000_000);
          if (metric === 'euclidean') {
            near.push([{ side: 'demand', t, end: t + 600_000, x: 4, y: 4 }, { side: 'supply', t, end: t + 600_000, x: 4 + limitKm + off, y: 4 }]);
          } else {
            const dLat = ((limitKm + off) / 6371.0088) * (180 / Math.PI);
            near.push([{ side: 'demand', t, end: t + 600_000, lat: 48.14, lon: 11.56 }, { side: 'supply', t, end: t + 600_000, lat: 48.14 + dLat, lon: 11.56 }]);
          }
        }
        units.push(...near.flat());
        const m = packMarket(units, cfg);
        const plain = buildCompactGraph(m, cfg);
        const kernel = buildCompactGraph(m, cfg, store);
        expect(plain.byKernel).toBe(false);
        expect(kernel.byKernel, `seed ${seed}`).toBe(true);
        expect(arrays(kernel), `seed ${seed}`).toEqual(arrays(plain));
        expect(compactPairs(kernel).size).toBe(allPairs(units, cfg).size);
        // Near-limit pairs both allowed and not: the exact formula had work to do.
        const allowed = near.filter((pair) => allPairs(pair, cfg).size === 1).length;
        expect(allowed, `seed ${seed}`).toBeGreaterThan(0);
        expect(allowed, `seed ${seed}`).toBeLessThan(40);
        deferred += allowed;
      }
      expect(deferred).toBeGreaterThan(0);
    });
  }

  it('writes a row spanning more than 65 535 columns as JavaScript does (kept apart, zeros in place)', () => {
    const cfg: PairflowConfig = { ...DEFAULT_CONFIG, metric: 'euclidean' };
    const units: HindsightUnit[] = [
      ...Array.from({ length: 70_000 }, (_, i) => ({ side: 'supply', t: 0, end: i < 69_990 ? 500 : 2000, x: 1, y: 1 }) as HindsightUnit),
      { side: 'demand', t: 100, end: 400, x: 1, y: 1.5 },
      { side: 'demand', t: 1000, end: 1500, x: 1.2, y: 1 },
    ];
    const m = packMarket(units, cfg);
    const kernel = buildCompactGraph(m, cfg, new GraphStore(true, true));
    expect(kernel.byKernel).toBe(true);
    expect(kernel.wide.size).toBe(1);
    expect(arrays(kernel)).toEqual(arrays(buildCompactGraph(m, cfg)));
  });

  it('leaves the rows to JavaScript where the kernel cannot scan them (several capability words)', () => {
    const cfg: PairflowConfig = { ...DEFAULT_CONFIG, metric: 'euclidean' };
    const names = Array.from({ length: 40 }, (_, i) => `c${i}`);
    const units: HindsightUnit[] = [
      { side: 'supply', t: 0, end: 1000, x: 0, y: 0, has: names },
      { side: 'demand', t: 0, end: 1000, x: 0, y: 0, needs: ['c39'] },
    ];
    const m = packMarket(units, cfg);
    const g = buildCompactGraph(m, cfg, new GraphStore(true, true));
    expect(g.byKernel).toBe(false);
    expect(g.rowPtr[1]! - g.rowPtr[0]!).toBe(1);
  });
});
