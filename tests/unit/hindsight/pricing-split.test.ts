import { existsSync } from 'node:fs';
import { fileURLToPath } from 'node:url';

import { afterAll, describe, expect, it } from 'vitest';

import { DEFAULT_CONFIG, type PairflowConfig } from '../../../src/model.js';
import { buildCompactGraph, GraphStore, packMarket, pairCostOf, quickPairCostOf, type HindsightUnit, type PackedMarket, type PairCost } from '../../../src/hindsight/graph.js';
import { columnPicks, Pricer, pricerTables, rowAdds, SCAN_CHUNK, type ColumnPicks, type RowAdds, type ScanCounts, type ScanParams } from '../../../src/hindsight/pricing.js';
import { PricingHelper, type Gauge, type PricingSplitter, type SegmentSplit, type SplitSegment } from '../../../src/hindsight/pricing-split.js';
import { solvePackedMarket } from '../../../src/hindsight/solve.js';
import { solveSparse } from '../../../src/matching/index.js';
import { mulberry32, randInt } from '../../helpers/random.js';

// A pass split over two pricers (or threads) must find what one pricer reading every
// row finds: the same pairs in the same order, the same counts, the same state for
// the next pass. Checked against the one-thread pass of the same code, which
// pricing.test.ts holds to a plain reading of the rules.

const config: PairflowConfig = { ...DEFAULT_CONFIG, metric: 'euclidean', speedKmh: 20, abandonPenalty: 25 };

/** `n` units over `hours` hours within `km` of each other, places on a grid of `grid` km when given (equal distances: ties). */
function market(seed: number, n: number, hours: number, km: number, grid = 0): PackedMarket {
  const rnd = mulberry32(seed);
  const units: HindsightUnit[] = [];
  const place = (): number => (grid > 0 ? Math.round((rnd() * km) / grid) * grid : rnd() * km);
  for (let i = 0; i < n; i++) {
    const t = randInt(rnd, 0, hours * 3_600_000);
    units.push({ side: i % 2 === 0 ? 'demand' : 'supply', t, end: t + randInt(rnd, 300_000, 1_800_000), x: place(), y: place() });
  }
  return packMarket(units, config);
}

/**
 * A split whose second share is read on this same thread, by a second pricer over the
 * same tables, when the pass ends: the first pricer takes the even chunks, the second
 * the odd ones. The same bookkeeping as a helper thread's, for tests of the merge.
 */
class InlineSplit implements SegmentSplit {
  private readonly other: Pricer;
  private readonly picks: ColumnPicks;
  private readonly adds: RowAdds;
  private pending: { u: Float64Array; v: Float64Array; params: ScanParams } | null = null;
  private mine = 0;

  constructor(seg: SplitSegment, exact: PairCost, quick: PairCost) {
    const { g } = seg;
    this.picks = columnPicks(g.nCols, seg.addPerColumn);
    this.adds = rowAdds(seg.addPerRow * g.nRows, true);
    this.other = new Pricer(g, exact, seg.colLo, seg.colHi, seg.addPerRow, seg.P, seg.addPerColumn, quick, seg.turns, seg.tables, this.picks, this.adds);
  }

  start(u: Float64Array, v: Float64Array, params: ScanParams): boolean {
    this.pending = { u, v, params };
    this.mine = 0;
    return true;
  }

  claim(): number {
    return 2 * this.mine++;
  }

  finish(): { counts: ScanCounts; rows: Int32Array; cols: Int32Array; costs: Float64Array; picks: ColumnPicks } {
    const { u, v, params } = this.pending!;
    this.pending = null;
    this.picks.count.fill(0);
    let k = 0;
    const counts = this.other.scanChunks(() => 2 * k++ + 1, u, v, params);
    return { counts, rows: this.adds.rows, cols: this.adds.cols, costs: this.adds.costs, picks: this.picks };
  }

  close(): void {}
}

const inlineSplitter: PricingSplitter = {
  wants: () => true,
  open: (seg: SplitSegment) => new InlineSplit(seg, pairCostOf(seg.m, seg.config), quickPairCostOf(seg.m, seg.config)),
};

describe('a split pricing pass', () => {
  it('finds the same pairs, in the same order, as one pricer reading every row (ties broken by row, seeded)', () => {
    // Places on a 0.25 km grid: many pairs cost the same, so rows and columns keep
    // their picks among equal reduced costs, by row order.
    const m = market(7, 4000, 6, 3, 0.25);
    const P = config.abandonPenalty;
    const build = () => {
      const g = buildCompactGraph(m, config);
      const colLo = new Int32Array(g.nRows);
      const colHi = new Int32Array(g.nRows).fill(g.nCols - 1);
      return { g, colLo, colHi };
    };
    const one = build();
    const two = build();
    expect(one.g.nRows).toBeGreaterThan(4 * SCAN_CHUNK);
    const exact = pairCostOf(m, config);
    const quick = quickPairCostOf(m, config);
    const plain = new Pricer(one.g, exact, one.colLo, one.colHi, 3, P, 2, quick, 4);
    const tables = pricerTables(two.g.nRows, two.g.nCols, true);
    const split = new Pricer(two.g, exact, two.colLo, two.colHi, 3, P, 2, quick, 4, tables);
    const seg: SplitSegment = { g: two.g, m, config, colLo: two.colLo, colHi: two.colHi, addPerRow: 3, P, addPerColumn: 2, turns: 4, tables };
    split.attach(new InlineSplit(seg, exact, quick));
    // Prices that move between passes as a solve's would: u falls from P, v from 0.
    const rnd = mulberry32(99);
    const u = new Float64Array(one.g.nRows).fill(P);
    const v = new Float64Array(one.g.nCols);
    let total = 0;
    for (let pass = 0; pass < 8; pass++) {
      const a = plain.pass(u, v, pass === 7);
      const b = split.pass(u, v, pass === 7);
      expect(b.violators, `pass ${pass}`).toBe(a.violators);
      expect(b.n, `pass ${pass}`).toBe(a.n);
      expect(Array.from(b.rows.subarray(0, b.n)), `pass ${pass}`).toEqual(Array.from(a.rows.subarray(0, a.n)));
      expect(Array.from(b.cols.subarray(0, b.n)), `pass ${pass}`).toEqual(Array.from(a.cols.subarray(0, a.n)));
      expect(Array.from(b.costs.subarray(0, b.n)), `pass ${pass}`).toEqual(Array.from(a.costs.subarray(0, a.n)));
      total += a.n;
      for (let r = 0; r < u.length; r++) if (rnd() < 0.3) u[r] = Math.max(0, u[r]! - rnd() * 3);
      for (let c = 0; c < v.length; c++) if (rnd() < 0.3) v[c] = v[c]! - rnd() * 2;
    }
    expect(total).toBeGreaterThan(1000);
    expect(split.rowsPriced).toBe(plain.rowsPriced);
    expect(split.splitPasses).toBe(8);
    expect(plain.splitPasses).toBe(0);
    // The graphs' candidate marks are the same too.
    expect(Buffer.compare(Buffer.from(two.g.codes), Buffer.from(one.g.codes))).toBe(0);
  });

  it('gives the same hindsight optimum, prices and assignment as one thread (seeded)', () => {
    const m = market(21, 3000, 8, 4);
    const alone = solvePackedMarket('m', m, config, solveSparse, {}, true);
    const split = solvePackedMarket('m', m, config, solveSparse, {}, true, new GraphStore(true), inlineSplitter);
    expect(split.detail!.splitPasses).toBeGreaterThan(3);
    expect(alone.detail!.splitPasses).toBe(0);
    expect(split.cost).toBe(alone.cost);
    expect(split.pricingRounds).toBe(alone.pricingRounds);
    expect(split.detail!.rowsPriced).toBe(alone.detail!.rowsPriced);
    expect(split.detail!.solves).toBe(alone.detail!.solves);
    expect(Array.from(split.demandCost)).toEqual(Array.from(alone.demandCost));
    expect(Array.from(split.detail!.rowDuals)).toEqual(Array.from(alone.detail!.rowDuals));
    expect(Array.from(split.detail!.colDuals)).toEqual(Array.from(alone.detail!.colDuals));
    expect(Array.from(split.detail!.rowToCol)).toEqual(Array.from(alone.detail!.rowToCol));
    // With the pairs in a kernel memory this thread's share is read by the WebAssembly
    // kernel and the other share (a plain pricer here) in JavaScript: still the same.
    const mixed = solvePackedMarket('m', m, config, solveSparse, {}, true, new GraphStore(true, true), inlineSplitter);
    expect(mixed.cost).toBe(alone.cost);
    expect(mixed.detail!.rowsPriced).toBe(alone.detail!.rowsPriced);
    expect(mixed.detail!.kernelRows).toBeGreaterThan(0);
    expect(mixed.detail!.kernelRows).toBeLessThan(mixed.detail!.rowsPriced);
    expect(alone.detail!.kernelRows).toBe(0);
    expect(Array.from(mixed.detail!.rowDuals)).toEqual(Array.from(alone.detail!.rowDuals));
    expect(Array.from(mixed.detail!.rowToCol)).toEqual(Array.from(alone.detail!.rowToCol));
  });
});

describe('PricingHelper (a second thread)', () => {
  const ci = process.env.CI === 'true' || process.env.CI === '1';
  const script = fileURLToPath(new URL('../../../dist/hindsight/pricing-helper.js', import.meta.url));
  const available = existsSync(script);
  if (!available && ci) {
    it('needs the compiled helper under CI (npm test builds first)', () => {
      expect.fail('dist/hindsight/pricing-helper.js is missing: run `npm run build` before the tests');
    });
  }
  const counts = new Int32Array(new SharedArrayBuffer(8));
  let free = true;
  let peak = 0;
  const gauge: Gauge = {
    idle: () => free,
    take: () => void (peak = Math.max(peak, Atomics.add(counts, 1, 1) + 1)),
    give: () => void Atomics.sub(counts, 1, 1),
  };
  const helper = new PricingHelper(gauge, 0);
  afterAll(() => helper.close());

  // Skipped locally when dist/ has not been built; `npm test` builds first.
  it.skipIf(!available)('reads its share of the passes on its own thread, with the same result', () => {
    const m = market(33, 3000, 8, 4);
    const alone = solvePackedMarket('m', m, config, solveSparse, {}, true);
    // The helper is sent a segment by its first pass, which runs on one thread; the
    // next waits for it to set up (its thread to start, the first time).
    const first = solvePackedMarket('m', m, config, solveSparse, {}, true, new GraphStore(true), helper);
    const again = solvePackedMarket('m', m, config, solveSparse, {}, true, new GraphStore(true), helper);
    // Pairs in a kernel memory: both threads read their rows with the WebAssembly kernel.
    const kernel = solvePackedMarket('m', m, config, solveSparse, {}, true, new GraphStore(true, true), helper);
    expect(kernel.detail!.kernelRows).toBe(kernel.detail!.rowsPriced);
    expect(first.detail!.kernelRows).toBe(0);
    // (Its match ceiling's passes ran in WebAssembly too.)
    expect(kernel.ceiling).toBe(alone.ceiling);
    for (const r of [first, again, kernel]) {
      expect(r.cost).toBe(alone.cost);
      expect(Array.from(r.demandCost)).toEqual(Array.from(alone.demandCost));
      expect(Array.from(r.detail!.rowDuals)).toEqual(Array.from(alone.detail!.rowDuals));
      expect(Array.from(r.detail!.rowToCol)).toEqual(Array.from(alone.detail!.rowToCol));
      expect(r.detail!.rowsPriced).toBe(alone.detail!.rowsPriced);
    }
    for (const r of [first, again, kernel]) expect(r.detail!.splitPasses).toBe(r.pricingRounds);
    expect(peak).toBe(1);
    expect(Atomics.load(counts, 1)).toBe(0);
  });

  it.skipIf(!available).each([false, true])('makes a build\'s pages resident ahead of it without changing a pair the build wrote (kernel memory: %s)', (kernel) => {
    const store = new GraphStore(true, kernel);
    store.ensure(1 << 22, 0);
    expect(store.memory !== null).toBe(kernel);
    helper.expectedPairs = 1e9;
    const ahead = helper.prefault(store);
    helper.expectedPairs = 0;
    expect(ahead).not.toBeNull();
    // The build's writes go on while the helper runs ahead: a pattern with zeros in it.
    const n = 3_000_000;
    for (let i = 0; i < n; i++) {
      store.cols[i] = (i * 7) & 0xffff;
      store.codes[i] = i % 5 === 0 ? 0 : i & 0xff;
      if ((i & 0xffff) === 0) Atomics.store(ahead!.progress, 0, i);
    }
    ahead!.done();
    ahead!.done();
    let bad = 0;
    for (let i = 0; i < n; i++) if (store.cols[i] !== ((i * 7) & 0xffff) || store.codes[i] !== (i % 5 === 0 ? 0 : i & 0xff)) bad++;
    expect(bad).toBe(0);
    expect(Atomics.load(counts, 1)).toBe(0);
    // A market expected to be small gets no help.
    expect(helper.prefault(store)).toBeNull();
  });

  it.skipIf(!available)('gives the same result when the helper ran ahead of the build', () => {
    const m = market(36, 3000, 8, 4);
    helper.expectedPairs = 1e9;
    const r = solvePackedMarket('m', m, config, solveSparse, {}, true, new GraphStore(true), helper);
    helper.expectedPairs = 0;
    const alone = solvePackedMarket('m', m, config, solveSparse, {}, true);
    expect(r.cost).toBe(alone.cost);
    expect(Array.from(r.demandCost)).toEqual(Array.from(alone.demandCost));
    expect(Array.from(r.detail!.rowToCol)).toEqual(Array.from(alone.detail!.rowToCol));
  });

  it.skipIf(!available)('is not wanted for a graph outside shared memory (its marks would not reach it)', () => {
    const m = market(35, 600, 2, 3);
    expect(helper.wants(buildCompactGraph(m, config, new GraphStore(true)))).toBe(true);
    expect(helper.wants(buildCompactGraph(m, config, new GraphStore(false)))).toBe(false);
  });

  it.skipIf(!available)('leaves the passes to one thread while no core is free', () => {
    free = false;
    const m = market(34, 2000, 6, 4);
    const r = solvePackedMarket('m', m, config, solveSparse, {}, true, new GraphStore(true), helper);
    free = true;
    expect(r.detail!.splitPasses).toBe(0);
    expect(r.cost).toBe(solvePackedMarket('m', m, config, solveSparse, {}).cost);
  });
});
