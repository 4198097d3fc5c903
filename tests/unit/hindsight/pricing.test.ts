import { describe, expect, it } from 'vitest';

import { DEFAULT_CONFIG, type PairflowConfig } from '../../../src/model.js';
import { buildCompactGraph, columnOf, GraphStore, isMarked, packMarket, pairCostOf, quickPairCostOf, type HindsightUnit } from '../../../src/hindsight/graph.js';
import { columnPicks, kernelPicks, Pricer } from '../../../src/hindsight/pricing.js';
import { mulberry32, randInt } from '../../helpers/random.js';

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

describe('Pricer.pass() adding by columns', () => {
  // Three demands at one spot and two supplies, 1 and 2 km away (3 and 6 min at 20
  // km/h), all present together: under u = P and v = 0 all six pairs price out, and
  // each row's most negative is the near supply.
  const units: HindsightUnit[] = [
    { side: 'supply', t: 0, end: 5000, x: 1, y: 0 },
    { side: 'supply', t: 0, end: 5000, x: 2, y: 0 },
    { side: 'demand', t: 100, end: 1000, x: 0, y: 0 },
    { side: 'demand', t: 100, end: 2000, x: 0, y: 0 },
    { side: 'demand', t: 100, end: 3000, x: 0, y: 0 },
  ];
  const setup = (perColumn: number) => {
    const m = packMarket(units, config);
    const g = buildCompactGraph(m, config);
    const colLo = new Int32Array(g.nRows);
    const colHi = new Int32Array(g.nRows).fill(m.nSupply - 1);
    const pricer = new Pricer(g, pairCostOf(m, config), colLo, colHi, 1, config.abandonPenalty, perColumn);
    return { m, g, pricer, u: new Float64Array(g.nRows).fill(config.abandonPenalty), v: new Float64Array(g.nCols) };
  };

  it('adds by rows alone when asked for none a column: every row takes the near supply', () => {
    const { pricer, u, v } = setup(0);
    const found = pricer.pass(u, v);
    expect(found.violators).toBe(6);
    expect(Array.from(found.cols.subarray(0, found.n))).toEqual([0, 0, 0]);
  });

  it('adds the far supply by its own most negative pair, which no row took, once', () => {
    const { m, g, pricer, u, v } = setup(1);
    const found = pricer.pass(u, v);
    expect(found.violators).toBe(6);
    // The rows' three first (rows ascending), then the far column's: a three-way tie
    // at 6 min, kept by the first row that found it.
    expect(Array.from(found.rows.subarray(0, found.n))).toEqual([0, 1, 2, 0]);
    expect(Array.from(found.cols.subarray(0, found.n))).toEqual([0, 0, 0, 1]);
    expect(found.costs[3]).toBe(pairCostOf(m, config)(g.rowDemand[0]!, 1));
    expect(found.costs[3]).toBeCloseTo(6, 9);
    // All four are candidates now: the same prices find the two pairs left.
    const again = pricer.pass(u, v);
    expect(again.violators).toBe(2);
    expect(Array.from(again.rows.subarray(0, again.n))).toEqual([1, 2]);
    expect(Array.from(again.cols.subarray(0, again.n))).toEqual([1, 1]);
  });

  it('adds nothing by a column whose most negative pair its row already took', () => {
    // One demand, two supplies: addPerRow 1 takes the near one; the far one is the
    // only violator left and its column adds it.
    const m = packMarket([units[0]!, units[1]!, units[2]!], config);
    const g = buildCompactGraph(m, config);
    const pricer = new Pricer(g, pairCostOf(m, config), new Int32Array(1), new Int32Array(1).fill(1), 1, config.abandonPenalty, 2);
    const found = pricer.pass(new Float64Array(1).fill(config.abandonPenalty), new Float64Array(2));
    expect(Array.from(found.cols.subarray(0, found.n))).toEqual([0, 1]);
  });
});

describe('Pricer.pass() with many violators a row', () => {
  // The early passes find tens of millions of violators and keep a few a row and a
  // column; the pass only counts the rest. Checked against a plain reading of the
  // rules (pricing.ts): rank by the code's reduced cost lo − u − v, earlier pairs first
  // on a tie; each row keeps its addPerRow smallest, each column its addPerColumn
  // smallest over all rows, added where its row did not take them.
  for (const [addPerRow, addPerColumn] of [[2, 1], [3, 2], [1, 0]] as const) {
    it(`keeps exactly the reference's pairs and counts every violator (${addPerRow} a row, ${addPerColumn} a column, seeded)`, () => {
      // Units within 1.4 km of each other (at most 6 min at 20 km/h, no wait cost),
      // u = P = 25 and v in [−P/2, 0]: every pair prices out by at least P/4, far
      // from the line where the code cannot decide.
      const cfg: PairflowConfig = { ...config, waitWeight: 0 };
      const P = cfg.abandonPenalty;
      const rnd = mulberry32(40 + addPerRow * 3 + addPerColumn);
      const units: HindsightUnit[] = [];
      for (let i = 0; i < 400; i++) {
        const t = randInt(rnd, 0, 3_600_000);
        units.push({ side: i % 2 === 0 ? 'demand' : 'supply', t, end: t + randInt(rnd, 300_000, 1_800_000), x: rnd() * 1.4, y: rnd() * 1.4 });
      }
      const m = packMarket(units, cfg);
      const g = buildCompactGraph(m, cfg);
      const exact = pairCostOf(m, cfg);
      const colLo = new Int32Array(g.nRows);
      const colHi = new Int32Array(g.nRows).fill(g.nCols - 1);
      const u = new Float64Array(g.nRows).fill(P);
      const v = Float64Array.from({ length: g.nCols }, () => -rnd() * (P / 2));
      // The reference, from the graph before the pass marks anything.
      type Pair = { r: number; j: number; e: number; red: number };
      const rowsKept: Pair[][] = [];
      const byColumn: Pair[][] = Array.from({ length: g.nCols }, () => []);
      let violators = 0;
      for (let r = 0; r < g.nRows; r++) {
        const found: Pair[] = [];
        for (let e = g.rowPtr[r]!; e < g.rowPtr[r + 1]!; e++) {
          const code = g.codes[e]!;
          const j = columnOf(g, r, e);
          const red = code * g.step - u[r]! - v[j]!;
          expect(exact(g.rowDemand[r]!, j) - u[r]! - v[j]!).toBeLessThan(-P / 4 + 1e-9);
          found.push({ r, j, e, red });
          byColumn[j]!.push({ r, j, e, red });
        }
        violators += found.length;
        rowsKept.push([...found].sort((a, b) => a.red - b.red).slice(0, addPerRow));
      }
      const taken = new Set(rowsKept.flat().map((p) => p.e));
      const want: Array<[number, number]> = rowsKept.flat().map((p) => [p.r, p.j]);
      for (let j = 0; j < g.nCols; j++) {
        for (const p of [...byColumn[j]!].sort((a, b) => a.red - b.red).slice(0, addPerColumn)) if (!taken.has(p.e)) want.push([p.r, p.j]);
      }
      expect(violators).toBeGreaterThan(20 * g.nRows);

      const pricer = new Pricer(g, exact, colLo, colHi, addPerRow, P, addPerColumn, quickPairCostOf(m, cfg));
      const got = pricer.pass(u, v);
      expect(got.violators).toBe(violators);
      const pairs = Array.from({ length: got.n }, (_, q) => [got.rows[q]!, got.cols[q]!] as [number, number]);
      expect(pairs).toEqual(want);
      for (let q = 0; q < got.n; q++) expect(got.costs[q]).toBe(exact(g.rowDemand[got.rows[q]!]!, got.cols[q]!));
    });
  }
});

describe('Pricer.pass() in turns', () => {
  // 120 demands and 150 supplies within 1.4 km of each other, all present together:
  // under u = P and v in [−P/2, 0] every pair prices out, 150 violators a row.
  const cfg: PairflowConfig = { ...config, waitWeight: 0 };
  const P = cfg.abandonPenalty;
  const setup = (turns: number) => {
    const rnd = mulberry32(77);
    const units: HindsightUnit[] = [];
    for (let i = 0; i < 270; i++) units.push({ side: i < 120 ? 'demand' : 'supply', t: 0, end: 3_600_000, x: rnd() * 1.4, y: rnd() * 1.4 });
    const m = packMarket(units, cfg);
    const g = buildCompactGraph(m, cfg);
    const colLo = new Int32Array(g.nRows);
    const colHi = new Int32Array(g.nRows).fill(g.nCols - 1);
    const pricer = new Pricer(g, pairCostOf(m, cfg), colLo, colHi, 2, P, 1, quickPairCostOf(m, cfg), turns);
    const u = new Float64Array(g.nRows).fill(P);
    const v = Float64Array.from({ length: g.nCols }, () => -rnd() * (P / 2));
    return { g, pricer, u, v };
  };
  const rowsOf = (found: { n: number; rows: Int32Array }): Set<number> => new Set(Array.from(found.rows.subarray(0, found.n)));

  it('reads one row in three a pass while violators are many, each in its turn, and every row when exhaustive', () => {
    const { g, pricer, u, v } = setup(3);
    const whole = setup(1);
    const all = whole.pricer.pass(whole.u, whole.v);
    expect(all.violators).toBe(g.nRows * g.nCols);
    for (let turn = 0; turn < 3; turn++) {
      const found = pricer.pass(u, v);
      const rows = Array.from({ length: g.nRows }, (_, r) => r).filter((r) => r % 3 === turn);
      // Every pair of the rows read prices out, and no other row is read.
      expect(found.violators, `turn ${turn}`).toBe(rows.length * g.nCols);
      expect([...rowsOf(found)].sort((a, b) => a - b), `turn ${turn}`).toEqual(rows);
    }
    // The exhaustive pass reads every row: every pair not yet a candidate prices out.
    const candidates = countMarked(g);
    const proof = pricer.pass(u, v, true);
    expect(rowsOf(proof).size).toBe(g.nRows);
    expect(proof.violators).toBe(g.nRows * g.nCols - candidates);
  });

  it('reads every row again once a pass finds few violators', () => {
    const { g, pricer, u, v } = setup(3);
    pricer.pass(u, v);
    expect(pricer.rowsPriced).toBe(g.nRows / 3);
    // Prices under which no pair prices out: the next third of the rows finds none.
    const quiet = pricer.pass(new Float64Array(g.nRows), v);
    expect(quiet.violators).toBe(0);
    expect(pricer.rowsPriced).toBe((2 * g.nRows) / 3);
    // After a pass that found few, the next reads every row, whatever it finds.
    const back = pricer.pass(u, v);
    expect(rowsOf(back).size).toBe(g.nRows);
    expect(pricer.rowsPriced).toBe((5 * g.nRows) / 3);
  });

  it('refuses a share that is not a whole number ≥ 1', () => {
    const { g } = setup(1);
    for (const bad of [0, 1.5, Number.NaN]) {
      expect(() => new Pricer(g, () => 0, new Int32Array(g.nRows), new Int32Array(g.nRows), 1, P, 0, () => 0, bad)).toThrow(/turns/);
    }
  });
});

/** Pairs marked candidates in a graph. */
function countMarked(g: { codes: Uint8Array }): number {
  let n = 0;
  for (const b of g.codes) if (isMarked(b)) n++;
  return n;
}

describe('Pricer.pass() skipping rows by their bounds', () => {
  /** The compact graph of `units`, each row's column range and the cost of its cheapest pair (P when none). */
  function graphWithRanges(units: readonly HindsightUnit[], cfg: PairflowConfig) {
    const m = packMarket(units, cfg);
    const g = buildCompactGraph(m, cfg);
    const exact = pairCostOf(m, cfg);
    const quick = quickPairCostOf(m, cfg);
    const colLo = new Int32Array(g.nRows).fill(g.nCols);
    const colHi = new Int32Array(g.nRows).fill(-1);
    const rowMin = new Float64Array(g.nRows).fill(cfg.abandonPenalty);
    for (let r = 0; r < g.nRows; r++) {
      for (let e = g.rowPtr[r]!; e < g.rowPtr[r + 1]!; e++) {
        const j = columnOf(g, r, e);
        colLo[r] = Math.min(colLo[r]!, j);
        colHi[r] = Math.max(colHi[r]!, j);
        rowMin[r] = Math.min(rowMin[r]!, exact(g.rowDemand[r]!, j));
      }
    }
    return { g, exact, quick, colLo, colHi, rowMin };
  }

  it('never skips a row that holds a violator, while prices rise and fall between passes (seeded)', () => {
    const euclid: PairflowConfig = { ...DEFAULT_CONFIG, metric: 'euclidean', waitWeight: 0.5 };
    const P = euclid.abandonPenalty;
    for (let seed = 1; seed <= 5; seed++) {
      const rnd = mulberry32(seed);
      const units: HindsightUnit[] = [];
      for (let i = 0; i < 300; i++) {
        const t = randInt(rnd, 0, 7_200_000);
        units.push({ side: i % 2 === 0 ? 'demand' : 'supply', t, end: t + randInt(rnd, 60_000, 2_400_000), x: rnd() * 8, y: rnd() * 8 });
      }
      const { g, exact, quick, colLo, colHi, rowMin } = graphWithRanges(units, euclid);
      const pricer = new Pricer(g, exact, colLo, colHi, 3, P, 0, quick);
      // Prices near each row's cheapest pair, so a few pairs price out in each pass.
      const u = Float64Array.from(rowMin, (c) => Math.min(P, c + rnd() * 2));
      const v = new Float64Array(g.nCols);
      const passes = 10;
      for (let p = 0; p < passes; p++) {
        const found = pricer.pass(u, v);
        const reported = new Set(Array.from(found.rows.subarray(0, found.n)));
        // A row the pass added nothing to must hold no violator among the pairs left out.
        for (let r = 0; r < g.nRows; r++) {
          if (reported.has(r)) continue;
          for (let e = g.rowPtr[r]!; e < g.rowPtr[r + 1]!; e++) {
            if (isMarked(g.codes[e]!)) continue;
            const j = columnOf(g, r, e);
            const c = exact(g.rowDemand[r]!, j);
            if (!(c < P)) continue;
            expect(c - u[r]! - v[j]!, `seed ${seed} pass ${p} row ${r} column ${j}`).toBeGreaterThan(-1e-9 * (1 + c));
          }
        }
        // Prices move: some columns fall, some rise (never above 0), some rows move.
        for (let j = 0; j < g.nCols; j++) if (rnd() < 0.3) v[j] = Math.min(0, v[j]! + (rnd() - 0.65) * 1.5);
        for (let r = 0; r < g.nRows; r++) if (rnd() < 0.2) u[r] = Math.min(P, u[r]! + (rnd() - 0.5));
      }
      // The bounds did skip rows (otherwise this test would not test them).
      expect(pricer.rowsPriced, `seed ${seed}`).toBeLessThan(passes * g.nRows);
    }
  });

  it('has its exhaustive pass read again every row it skipped by a bound', () => {
    const euclid: PairflowConfig = { ...DEFAULT_CONFIG, metric: 'euclidean' };
    const P = euclid.abandonPenalty;
    const rnd = mulberry32(11);
    const units: HindsightUnit[] = [];
    for (let i = 0; i < 200; i++) {
      const t = randInt(rnd, 0, 3_600_000);
      units.push({ side: i % 2 === 0 ? 'demand' : 'supply', t, end: t + randInt(rnd, 60_000, 1_800_000), x: rnd() * 6, y: rnd() * 6 });
    }
    const { g, exact, quick, colLo, colHi, rowMin } = graphWithRanges(units, euclid);
    const withPairs = Array.from(colHi).filter((hi, r) => hi >= colLo[r]!).length;
    expect(withPairs).toBeGreaterThan(20);
    // Every pair 3 above pricing out; then every column's price rises by half: the
    // bound still covers each row, so the next pass reads none of them.
    const u = Float64Array.from(rowMin, (c) => c - 2);
    const v = new Float64Array(g.nCols).fill(-1);
    const pricer = new Pricer(g, exact, colLo, colHi, 3, P, 0, quick);
    expect(pricer.pass(u, v).violators).toBe(0);
    const afterFirst = pricer.rowsPriced;
    v.fill(-0.5);
    expect(pricer.pass(u, v).violators).toBe(0);
    expect(pricer.rowsPriced).toBe(afterFirst);
    // Under the same prices the exhaustive pass reads each of them again.
    expect(pricer.pass(u, v, true).violators).toBe(0);
    expect(pricer.rowsPriced - afterFirst).toBe(withPairs);
  });
});

describe('Pricer.pass() deciding within a step of zero', () => {
  // A 7-bit code places a cost within a quarter of a minute only, so prices a hair
  // from a pair's cost leave the code unable to tell; the build's cost (and, within
  // its own error, the exact one) must then decide exactly as the exact cost does.
  for (const metric of ['euclidean', 'haversine'] as const) {
    it(`counts as violators exactly the pairs whose exact reduced cost is below zero (${metric}, seeded)`, () => {
      const cfg: PairflowConfig = { ...DEFAULT_CONFIG, metric, abandonPenalty: 30 };
      const rnd = mulberry32(metric === 'euclidean' ? 5 : 6);
      const units: HindsightUnit[] = [];
      for (let i = 0; i < 240; i++) {
        const t = randInt(rnd, 0, 3_600_000);
        const place = metric === 'euclidean' ? { x: rnd() * 6, y: rnd() * 6 } : { lat: 52.3 + rnd() * 0.05, lon: 4.85 + rnd() * 0.08 };
        units.push({ side: i % 2 === 0 ? 'demand' : 'supply', t, end: t + randInt(rnd, 60_000, 1_800_000), ...place });
      }
      const m = packMarket(units, cfg);
      const g = buildCompactGraph(m, cfg);
      const exact = pairCostOf(m, cfg);
      const P = cfg.abandonPenalty;
      // Each row's price a hair (1e-3 to 1e-7 of a minute, either side) from the exact
      // cost of one of its pairs; columns at 0.
      const u = new Float64Array(g.nRows);
      const v = new Float64Array(g.nCols);
      let rowsWithPairs = 0;
      for (let r = 0; r < g.nRows; r++) {
        const n = g.rowPtr[r + 1]! - g.rowPtr[r]!;
        if (n === 0) continue;
        rowsWithPairs++;
        const e = g.rowPtr[r]! + randInt(rnd, 0, n - 1);
        const c = exact(g.rowDemand[r]!, columnOf(g, r, e));
        const hair = 10 ** -randInt(rnd, 3, 8) * (rnd() < 0.5 ? -1 : 1);
        u[r] = Math.min(P, c + hair);
      }
      expect(rowsWithPairs).toBeGreaterThan(60);
      let want = 0;
      for (let r = 0; r < g.nRows; r++) {
        for (let e = g.rowPtr[r]!; e < g.rowPtr[r + 1]!; e++) {
          const c = exact(g.rowDemand[r]!, columnOf(g, r, e));
          if (c < P && c - u[r]! < 0) want++;
        }
      }
      const colLo = new Int32Array(g.nRows);
      const colHi = new Int32Array(g.nRows).fill(g.nCols - 1);
      const pricer = new Pricer(g, exact, colLo, colHi, 1000, P, 0, quickPairCostOf(m, cfg));
      const found = pricer.pass(u, v, true);
      expect(found.violators).toBe(want);
      expect(found.n).toBe(want);
      // The code could not tell for each row's chosen pair at least; the build's cost
      // settled most, and those within its error of the line (hairs of 1e-7, 1e-8)
      // went on to the exact cost.
      expect(pricer.rechecks).toBeGreaterThanOrEqual(rowsWithPairs);
      expect(pricer.exactRechecks).toBeGreaterThan(0);
      expect(pricer.exactRechecks).toBeLessThan(pricer.rechecks / 2);
      // Every pair added is a true violator, at its exact cost.
      for (let q = 0; q < found.n; q++) {
        const c = exact(g.rowDemand[found.rows[q]!]!, found.cols[q]!);
        expect(found.costs[q]).toBe(c);
        expect(c - u[found.rows[q]!]!).toBeLessThan(0);
      }
    });
  }
});

describe('Pricer.pass() with its pairs in a kernel memory', () => {
  // The same market built twice, into plain buffers and into a store whose pairs live
  // in a WebAssembly memory (GraphStore(true, true)): the kernel's passes must find
  // what JavaScript's find, pair for pair, through rounds of moving prices, in turns,
  // adding by rows and by columns, skipping rows by their bounds, and exhaustive.
  for (const metric of ['euclidean', 'haversine'] as const) {
    it(`finds the same pairs, counts and floors as the JavaScript loop (${metric}, seeded)`, () => {
      const cfg: PairflowConfig = { ...DEFAULT_CONFIG, metric, waitWeight: 0.5, abandonPenalty: 30 };
      const P = cfg.abandonPenalty;
      const rnd = mulberry32(metric === 'euclidean' ? 21 : 22);
      const units: HindsightUnit[] = [];
      for (let i = 0; i < 700; i++) {
        const t = randInt(rnd, 0, 5_400_000);
        const place = metric === 'euclidean' ? { x: rnd() * 5, y: rnd() * 5 } : { lat: 52.3 + rnd() * 0.04, lon: 4.85 + rnd() * 0.06 };
        units.push({ side: i % 2 === 0 ? 'demand' : 'supply', t, end: t + randInt(rnd, 60_000, 2_400_000), ...place });
      }
      const m = packMarket(units, cfg);
      const store = new GraphStore(true, true);
      const pricers = [buildCompactGraph(m, cfg), buildCompactGraph(m, cfg, store)].map((g) => {
        const colLo = new Int32Array(g.nRows).fill(g.nCols);
        const colHi = new Int32Array(g.nRows).fill(-1);
        for (let r = 0; r < g.nRows; r++) {
          for (let e = g.rowPtr[r]!; e < g.rowPtr[r + 1]!; e++) {
            colLo[r] = Math.min(colLo[r]!, columnOf(g, r, e));
            colHi[r] = Math.max(colHi[r]!, columnOf(g, r, e));
          }
        }
        const slot = store.holds(g) ? store.columns(0, g.nCols, 1) : null;
        const picks = slot !== null ? kernelPicks(slot, g.nCols, 1) : columnPicks(g.nCols, 1);
        return { g, pricer: new Pricer(g, pairCostOf(m, cfg), colLo, colHi, 2, P, 1, quickPairCostOf(m, cfg), 3, undefined, picks, undefined, slot) };
      });
      const [plain, kernel] = pricers as [(typeof pricers)[0], (typeof pricers)[0]];
      expect(plain.pricer.inKernel).toBe(false);
      expect(kernel.pricer.inKernel).toBe(true);
      expect(kernel.g.codes).toEqual(plain.g.codes);
      const g = plain.g;
      // Far-off prices first (many violators: passes in turns), then nearer ones.
      const u = new Float64Array(g.nRows).fill(P);
      const v = Float64Array.from({ length: g.nCols }, () => -rnd() * 10);
      let violators = 0;
      for (let p = 0; p < 14; p++) {
        const got = pricers.map(({ pricer }) => {
          const f = pricer.pass(u, v, p === 13);
          return { violators: f.violators, pairs: Array.from({ length: f.n }, (_, q) => [f.rows[q], f.cols[q], f.costs[q]]) };
        });
        expect(got[1], `pass ${p}`).toEqual(got[0]);
        violators += got[0]!.violators;
        expect(kernel.pricer.tables.floor, `pass ${p}`).toEqual(plain.pricer.tables.floor);
        expect(kernel.pricer.tables.rowClean, `pass ${p}`).toEqual(plain.pricer.tables.rowClean);
        for (let r = 0; r < g.nRows; r++) u[r] = Math.min(P, u[r]! - rnd() * 3);
        for (let j = 0; j < g.nCols; j++) if (rnd() < 0.3) v[j] = Math.min(0, v[j]! + (rnd() - 0.4) * 2);
      }
      expect(kernel.g.codes).toEqual(plain.g.codes);
      expect(kernel.pricer.rowsPriced).toBe(plain.pricer.rowsPriced);
      expect(kernel.pricer.rechecks).toBe(plain.pricer.rechecks);
      // The passes did find violators, and the bounds did skip rows (else this tests little).
      expect(violators).toBeGreaterThan(10 * g.nRows);
      expect(plain.pricer.rowsPriced).toBeLessThan(14 * g.nRows);
    });
  }

  it('reads the narrow rows of a graph with a wide one in the kernel, and the wide one in JavaScript, as JavaScript alone does', () => {
    const units: HindsightUnit[] = [
      ...Array.from({ length: 70_000 }, (_, i) => ({ side: 'supply', t: 0, end: i < 30 ? 2000 : 500, x: 1 + i * 1e-5, y: 1 }) as HindsightUnit),
      { side: 'demand', t: 100, end: 400, x: 1, y: 1 },
      { side: 'demand', t: 1000, end: 1500, x: 1, y: 1 },
    ];
    const m = packMarket(units, config);
    const store = new GraphStore(true, true);
    const run = (g: ReturnType<typeof buildCompactGraph>, kernel: boolean) => {
      const slot = kernel ? store.columns(0, g.nCols, 1) : null;
      const picks = slot !== null ? kernelPicks(slot, g.nCols, 1) : columnPicks(g.nCols, 1);
      const pricer = new Pricer(g, pairCostOf(m, config), new Int32Array(g.nRows), new Int32Array(g.nRows).fill(m.nSupply - 1), 5, config.abandonPenalty, 1, undefined, 1, undefined, picks, undefined, slot);
      const found = pricer.pass(new Float64Array(g.nRows).fill(config.abandonPenalty), new Float64Array(g.nCols));
      return { pricer, found: { violators: found.violators, rows: Array.from(found.rows.subarray(0, found.n)), cols: Array.from(found.cols.subarray(0, found.n)) } };
    };
    const kernel = run(buildCompactGraph(m, config, store), true);
    const plain = run(buildCompactGraph(m, config), false);
    expect(kernel.pricer.inKernel).toBe(true);
    expect(kernel.pricer.kernelRows).toBe(1);
    expect(kernel.found).toEqual(plain.found);
  });

  it('refuses a kernel slot that does not hold its column picks', () => {
    const m = packMarket([{ side: 'supply', t: 0, end: 1000, x: 0, y: 0 }, { side: 'demand', t: 0, end: 1000, x: 0, y: 0 }], config);
    const store = new GraphStore(true, true);
    const g = buildCompactGraph(m, config, store);
    const slot = store.columns(0, g.nCols, 1)!;
    expect(slot).not.toBeNull();
    const lone = new Int32Array(g.nRows);
    expect(() => new Pricer(g, pairCostOf(m, config), lone, lone, 1, 25, 1, undefined, 1, undefined, columnPicks(g.nCols, 1), undefined, slot)).toThrow(/kernel slot/);
  });
});
