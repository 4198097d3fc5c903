import { describe, expect, it } from 'vitest';
import { DEFAULT_CONFIG, type PairflowConfig, type PairflowEvent, type SourcedEvent } from '../../../src/model.js';
import {
  type AssignmentRecord, type EngineOptions, type EngineSink, type EpochRecord, type ExpiryRecord, WindowEngine,
} from '../../../src/window/engine.js';
import { haversineKm } from '../../../src/window/geo.js';
import { solveSparse } from '../../../src/matching/index.js';
import { mulberry32, randInt } from '../../helpers/random.js';

const MIN = 60_000;
/** Plane metric at 60 km/h: one km of distance is one minute of travel. */
const base: PairflowConfig = {
  ...DEFAULT_CONFIG, metric: 'euclidean', speedKmh: 60, maxTravelMin: 10, waitWeight: 1,
  abandonPenalty: 30, reserve: null, windowMs: 1000, demandPatienceMin: 10, supplyPatienceMin: 30,
};

type Ev = Partial<PairflowEvent> & { type: PairflowEvent['type']; id: string; t: number };

class Recorder implements EngineSink {
  readonly assignments: AssignmentRecord[] = [];
  readonly expiries: ExpiryRecord[] = [];
  readonly epochs: EpochRecord[] = [];
  readonly order: string[] = [];
  assignment(a: AssignmentRecord): void {
    this.assignments.push(a);
    this.order.push(`A ${a.epoch} ${a.demandId}-${a.supplyId}`);
  }
  expiry(e: ExpiryRecord): void {
    this.expiries.push(e);
    this.order.push(`E ${e.epoch} ${e.side} ${e.id}`);
  }
  epoch(s: EpochRecord): void {
    this.epochs.push(s);
    this.order.push(`S ${s.epoch}`);
  }
}

function sourced(evs: Ev[]): SourcedEvent[] {
  return evs.map((e, i) => {
    const b = { market: 'm', ...e };
    const event = (e.type === 'withdraw' ? { side: 'demand', ...b } : { until: null, x: 0, y: 0, ...b }) as PairflowEvent;
    return { event, pos: { file: 'test.jsonl', line: i + 1 }, seq: i };
  });
}

/** Drives the engine as replay does: advanceTo(t) then ingest, then finish. */
function replay(evs: Ev[], config: Partial<PairflowConfig> = {}, opts: EngineOptions = {}): { rec: Recorder; engine: WindowEngine } {
  const rec = new Recorder();
  const engine = new WindowEngine({ ...base, ...config }, rec, { verify: true, ...opts });
  const list = sourced(evs).sort((a, b) => a.event.t - b.event.t || a.seq - b.seq);
  for (const ev of list) {
    engine.advanceTo(ev.event.t);
    engine.ingest(ev);
  }
  engine.finish();
  return { rec, engine };
}

const pairs = (r: Recorder): Array<[number, string, string]> => r.assignments.map((a) => [a.epoch, a.demandId, a.supplyId]);

describe('WindowEngine: epochs and the pool (SPEC §3)', () => {
  it('an event at exactly τ is not known at τ; one a millisecond earlier is', () => {
    const { rec } = replay([
      { type: 'supply', id: 's1', t: 0, x: 3, y: 4 },
      { type: 'demand', id: 'd1', t: 1000 },
      { type: 'supply', id: 's2', t: 5000, x: 30, y: 0 },
      { type: 'demand', id: 'd2', t: 5999, x: 30, y: 1 },
    ]);
    // d1 arrives at τ = 1000 exactly: first pooled at 2000, travel 5 km = 5 min, wait 1 s.
    expect(pairs(rec)).toEqual([[2000, 'd1', 's1'], [6000, 'd2', 's2']]);
    expect(rec.assignments[0]!.cost).toBeCloseTo(5 + 1000 / MIN, 12);
    expect(rec.assignments[0]).toMatchObject({ travelMin: 5, waitMin: 1000 / MIN, decidedAt: 2000, demandT: 1000, supplyT: 0 });
    expect(rec.assignments[1]!.cost).toBeCloseTo(1 + 1 / MIN, 12);
  });

  it('a unit whose until is exactly τ is still in the pool at τ, and gone one epoch later', () => {
    const a = replay([
      { type: 'demand', id: 'd', t: 0, until: 3000 },
      { type: 'supply', id: 's', t: 2500, x: 1, y: 0 },
    ]);
    expect(pairs(a.rec)).toEqual([[3000, 'd', 's']]);
    const b = replay([
      { type: 'demand', id: 'd', t: 0, until: 2999 },
      { type: 'supply', id: 's', t: 2500, x: 1, y: 0 },
    ]);
    expect(pairs(b.rec)).toEqual([]);
    expect(b.rec.expiries.find((e) => e.side === 'demand')).toMatchObject({ id: 'd', epoch: 3000, end: 2999, cost: 30 });
  });

  it('a pair is allowed only within maxTravelMin, boundary included', () => {
    const { rec } = replay([
      { type: 'supply', id: 'near', t: 0, x: 10, y: 0 },
      { type: 'supply', id: 'far', t: 0, x: 0, y: 10.001 },
      { type: 'demand', id: 'd1', t: 0 },
      { type: 'demand', id: 'd2', t: 0, x: 0, y: 0.001 },
    ]);
    // Only 'near' is within 10 min of d1 (exactly 10); 'far' is within 10 min of d2 (exactly 10).
    expect(pairs(rec).sort()).toEqual([[1000, 'd1', 'near'], [1000, 'd2', 'far']]);
  });
});

describe('WindowEngine: degenerate settings', () => {
  it('maxTravelMin = 0 allows only pairs at the same point', () => {
    const { rec } = replay([
      { type: 'supply', id: 'here', t: 0, x: 2, y: 2 },
      { type: 'supply', id: 'near', t: 0, x: 0, y: 0.001 },
      { type: 'demand', id: 'd', t: 0, x: 2, y: 2 },
      { type: 'demand', id: 'e', t: 0 },
    ], { maxTravelMin: 0 });
    expect(pairs(rec)).toEqual([[1000, 'd', 'here']]);
    expect(rec.assignments[0]!.travelMin).toBe(0);
  });

  it('a window longer than the patience: a unit ending before the first epoch after it arrived never pools', () => {
    const { rec, engine } = replay([
      { type: 'supply', id: 's', t: 0, x: 1 },
      { type: 'demand', id: 'd', t: 10_000 },
    ], { windowMs: 300_000, demandPatienceMin: 1 });
    expect(pairs(rec)).toEqual([]);
    expect(rec.expiries.map((e) => [e.side, e.epoch])).toEqual([['demand', 300_000], ['supply', 2_100_000]]);
    expect(engine.totals()).toMatchObject({ abandoned: 1, cost: 30 });
  });

  it('a negative reserve defers every demand to its last chance', () => {
    const { rec } = replay([
      { type: 'supply', id: 's', t: 0, x: 1 },
      { type: 'demand', id: 'd', t: 0, until: 3500 },
    ], { reserve: -1 });
    expect(pairs(rec)).toEqual([[3000, 'd', 's']]);
  });
});

describe('WindowEngine: deferral cost P at the last chance, R otherwise', () => {
  it('a match costlier than R waits for the demand\'s last chance, where it beats P', () => {
    // R = 5 < travel 8 < P = 30. until = 4500: last chance at τ = 4000 (4500 < 4000 + 1000).
    const { rec } = replay([
      { type: 'demand', id: 'd', t: 0, until: 4500 },
      { type: 'supply', id: 's', t: 0, x: 8, y: 0 },
    ], { reserve: 5 });
    expect(pairs(rec)).toEqual([[4000, 'd', 's']]);
    expect(rec.assignments[0]!.cost).toBeCloseTo(8 + 4000 / MIN, 12);
    // Solved at 1000 (the join) and at 4000 (the last-chance transition) only.
    expect(rec.epochs.map((e) => [e.epoch, e.matched, e.primalCost])).toEqual([
      [1000, 0, 5], [4000, 1, 8 + 4000 / MIN],
    ]);
  });

  it('until = τ + W exactly is not yet the last chance (until < τ + W is strict)', () => {
    const { rec } = replay([
      { type: 'demand', id: 'd', t: 0, until: 5000 },
      { type: 'supply', id: 's', t: 0, x: 8, y: 0 },
      // Out of reach; it only makes τ = 4000 an epoch that is solved.
      { type: 'supply', id: 'far', t: 3500, x: 100, y: 0 },
    ], { reserve: 5 });
    expect(rec.epochs.map((e) => e.epoch)).toEqual([1000, 4000, 5000]);
    expect(pairs(rec)).toEqual([[5000, 'd', 's']]);
  });

  it('a match costlier than P is never made, and the demand is abandoned at P', () => {
    const { rec, engine } = replay([
      { type: 'demand', id: 'd', t: 0, until: 4500 },
      { type: 'supply', id: 's', t: 0, x: 8, y: 0 },
    ], { abandonPenalty: 7, reserve: 5 });
    expect(pairs(rec)).toEqual([]);
    expect(rec.expiries).toEqual([
      { market: 'm', side: 'demand', id: 'd', t: 0, end: 4500, epoch: 5000, cost: 7, x: 0, y: 0 },
      { market: 'm', side: 'supply', id: 's', t: 0, end: 30 * MIN, epoch: 30 * MIN + 1000, cost: 0, x: 8, y: 0 },
    ]);
    expect(engine.totals()).toMatchObject({ demandUnits: 1, supplyUnits: 1, matched: 0, abandoned: 1, cost: 7 });
  });
});

describe('WindowEngine: commit "all" versus "due"', () => {
  const log: Ev[] = [
    { type: 'demand', id: 'd1', t: 0, until: 10_000, x: 0 },
    { type: 'supply', id: 's1', t: 0, until: 60_000, x: 5 },
    { type: 'demand', id: 'd2', t: 1500, until: 4000, x: 5.5 },
    { type: 'supply', id: 's2', t: 2500, until: 60_000, x: 0.2 },
  ];

  it('"all" executes every pair of each window solution', () => {
    const { rec, engine } = replay(log, { commit: 'all' });
    expect(pairs(rec)).toEqual([[1000, 'd1', 's1'], [3000, 'd2', 's2']]);
    const want = 5 + 1000 / MIN + 5.3 + 1500 / MIN;
    expect(engine.totals().cost).toBeCloseTo(want, 9);
  });

  it('"due" keeps tentative pairs, re-optimises them, and executes each at a unit\'s last chance', () => {
    const { rec, engine } = replay(log, { commit: 'due' });
    // Under "all" d1 took s1 at τ=1000; here nothing is due before d2's last chance at
    // τ=4000 (4000 < 5000), where the optimum is d2–s1 (0.5) and d1–s2 (0.2): d2–s1
    // executes, d1–s2 stays tentative until d1's last chance at τ=10000.
    expect(pairs(rec)).toEqual([[4000, 'd2', 's1'], [10_000, 'd1', 's2']]);
    expect(rec.epochs.map((e) => [e.epoch, e.matched, e.tentative])).toEqual([[4000, 1, 1], [10_000, 1, 0]]);
    expect(engine.totals().cost).toBeCloseTo(0.5 + 2500 / MIN + 0.2 + 10_000 / MIN, 9);
  });

  it('"due" executes a pair when the supply, not the demand, is at its last chance', () => {
    const { rec } = replay([
      { type: 'demand', id: 'd', t: 0, until: 60_000, x: 0 },
      { type: 'supply', id: 's', t: 0, until: 2500, x: 1 },
    ], { commit: 'due' });
    expect(pairs(rec)).toEqual([[2000, 'd', 's']]);
  });
});

describe('WindowEngine: abandonment and expiry records', () => {
  it('an unmatched demand costs P when its end passes; unmatched supply costs 0', () => {
    const { rec, engine } = replay([
      { type: 'demand', id: 'd', t: 100 },
      { type: 'supply', id: 's', t: 200, x: 50 },
    ]);
    expect(rec.expiries).toEqual([
      { market: 'm', side: 'demand', id: 'd', t: 100, end: 100 + 10 * MIN, epoch: 601_000, cost: 30, x: 0, y: 0 },
      { market: 'm', side: 'supply', id: 's', t: 200, end: 200 + 30 * MIN, epoch: 1_801_000, cost: 0, x: 50, y: 0 },
    ]);
    expect(engine.totals()).toMatchObject({ abandoned: 1, cost: 30, matched: 0 });
  });

  it('a demand withdrawn before its first epoch never enters a pool and still costs P', () => {
    const { rec, engine } = replay([
      { type: 'supply', id: 's', t: 0, x: 1 },
      { type: 'demand', id: 'd', t: 1100 },
      { type: 'withdraw', side: 'demand', id: 'd', t: 1500 },
    ]);
    expect(pairs(rec)).toEqual([]);
    expect(rec.expiries[0]).toEqual({ market: 'm', side: 'demand', id: 'd', t: 1100, end: 1500, epoch: 2000, cost: 30, x: 0, y: 0 });
    expect(engine.totals().abandoned).toBe(1);
  });

  it('a withdraw at exactly τ is not known at τ: the unit can still be matched then', () => {
    const { rec } = replay([
      { type: 'demand', id: 'd', t: 0 },
      { type: 'supply', id: 's', t: 1500, x: 1 },
      { type: 'withdraw', side: 'demand', id: 'd', t: 2000 },
    ]);
    expect(pairs(rec)).toEqual([[2000, 'd', 's']]);
  });

  it('a withdraw of a pooled demand removes it at the next epoch, at cost P', () => {
    const { rec } = replay([
      { type: 'demand', id: 'd', t: 0 },
      { type: 'withdraw', side: 'demand', id: 'd', t: 2500 },
      { type: 'supply', id: 's', t: 2700, x: 1 },
    ]);
    expect(pairs(rec)).toEqual([]);
    expect(rec.expiries[0]).toMatchObject({ side: 'demand', id: 'd', end: 2500, epoch: 3000, cost: 30 });
  });
});

describe('WindowEngine: occurrences (SPEC §1)', () => {
  it('a duplicate arrival is ignored and counted; a re-arrival starts a new occurrence', () => {
    const { rec, engine } = replay([
      { type: 'supply', id: 's', t: 0, x: 1 },
      { type: 'supply', id: 's', t: 0, x: 1 },
      { type: 'demand', id: 'd1', t: 100 },
      // The courier re-announces itself after its job: a second occurrence.
      { type: 'supply', id: 's', t: 1200, x: 2 },
      { type: 'demand', id: 'd2', t: 1300 },
      { type: 'withdraw', side: 'supply', id: 'nobody', t: 1400 },
    ]);
    expect(pairs(rec)).toEqual([[1000, 'd1', 's'], [2000, 'd2', 's']]);
    expect(rec.assignments.map((a) => a.supplyT)).toEqual([0, 1200]);
    expect(engine.totals()).toMatchObject({ demandUnits: 2, supplyUnits: 2, duplicates: 1, ignoredWithdraws: 1, matched: 2 });
  });

  it('a re-arrival of a pooled unit ends the old occurrence: only the new one can match', () => {
    const { rec } = replay([
      { type: 'supply', id: 's', t: 0, x: 1 },
      { type: 'supply', id: 's', t: 500, x: 20 },
      { type: 'demand', id: 'd', t: 600 },
    ]);
    // The occurrence at x=1 ended at 500, before any epoch: it never pools.
    expect(pairs(rec)).toEqual([]);
    expect(rec.expiries.filter((e) => e.side === 'supply').map((e) => [e.t, e.end, e.epoch])).toEqual([
      [0, 500, 1000], [500, 500 + 30 * MIN, 500 + 30 * MIN + 500],
    ]);
  });

  it('markets never match across each other; a supply and a demand may share an id', () => {
    const { rec } = replay([
      { type: 'supply', id: 'u', t: 0, x: 1, market: 'a' },
      { type: 'demand', id: 'u', t: 0, market: 'b' },
      { type: 'demand', id: 'u', t: 0, market: 'a' },
    ]);
    expect(rec.assignments.map((a) => [a.market, a.demandId, a.supplyId])).toEqual([['a', 'u', 'u']]);
    expect(rec.expiries.map((e) => [e.market, e.side])).toEqual([['b', 'demand']]);
  });
});

describe('WindowEngine: capabilities', () => {
  it('a demand is matched only to supply that has every capability it needs', () => {
    const { rec } = replay([
      { type: 'supply', id: 'plain', t: 0, x: 1, has: ['van'] },
      { type: 'supply', id: 'cold', t: 0, x: 6, has: ['van', 'cold-bag'] },
      { type: 'demand', id: 'd', t: 0, needs: ['cold-bag'] },
      { type: 'demand', id: 'e', t: 0, x: 0.5 },
    ]);
    expect(pairs(rec).sort()).toEqual([[1000, 'd', 'cold'], [1000, 'e', 'plain']]);
  });
});

describe('WindowEngine: late events (live mode)', () => {
  // Lateness 5 s: the late events below are within what the engine keeps history for.
  const lax: PairflowConfig = { ...base, allowedLatenessMs: 5000 };

  it('an event before an epoch already closed is counted and joins from the next epoch', () => {
    const rec = new Recorder();
    const engine = new WindowEngine(lax, rec, { verify: true });
    const [d, s] = sourced([
      { type: 'demand', id: 'd', t: 2000 },
      { type: 'supply', id: 's', t: 5500, x: 1 },
    ]);
    engine.advanceTo(5600);
    engine.ingest(s!);
    engine.ingest(d!); // late: 2000 < 5000, the last closed epoch
    engine.advanceTo(6000);
    expect(pairs(rec)).toEqual([[6000, 'd', 's']]);
    expect(rec.assignments[0]!.waitMin).toBeCloseTo(4000 / MIN, 12);
    expect(engine.totals().late).toBe(1);
  });

  it('a late unit no longer available when it could join is expired, not pooled', () => {
    const rec = new Recorder();
    const engine = new WindowEngine(lax, rec, { verify: true });
    const [d, s] = sourced([
      { type: 'demand', id: 'd', t: 2000, until: 4000 },
      { type: 'supply', id: 's', t: 5500, x: 1 },
    ]);
    engine.advanceTo(5000);
    engine.ingest(s!);
    engine.ingest(d!);
    engine.finish();
    expect(pairs(rec)).toEqual([]);
    expect(rec.expiries[0]).toMatchObject({ side: 'demand', id: 'd', epoch: 6000, cost: 30 });
    expect(engine.totals()).toMatchObject({ late: 1, abandoned: 1 });
  });

  it('late events are counted in the next epoch record of their market', () => {
    const rec = new Recorder();
    const engine = new WindowEngine(lax, rec, { verify: true });
    const [d, s, d2, s2] = sourced([
      { type: 'demand', id: 'd', t: 2000 },
      { type: 'supply', id: 's', t: 2500, x: 1 },
      { type: 'demand', id: 'd2', t: 3500, x: 0.5 },
      { type: 'supply', id: 's2', t: 5500, x: 0.5 },
    ]);
    engine.advanceTo(4000);
    engine.ingest(d!); // both late: before the closed epoch 4000
    engine.ingest(s!);
    engine.advanceTo(5000);
    engine.ingest(d2!); // late
    engine.ingest(s2!); // on time
    engine.advanceTo(6000);
    expect(rec.epochs.map((e) => [e.epoch, e.late])).toEqual([[5000, 2], [6000, 1]]);
  });

  it('an event older than the last closed epoch minus allowedLatenessMs is refused, with the reason', () => {
    const rec = new Recorder();
    const engine = new WindowEngine(base, rec, { verify: true });
    const [d, d2] = sourced([{ type: 'demand', id: 'd', t: 2999 }, { type: 'demand', id: 'd2', t: 3000 }]);
    engine.advanceTo(5000);
    expect(engine.ingest(d!)).toMatch(/too late/);
    expect(engine.ingest(d2!)).toBeNull();
    expect(engine.totals()).toMatchObject({ tooLate: 1, late: 1, demandUnits: 1 });
    // Unbounded, nothing is forgotten and nothing refused.
    const keepAll = new WindowEngine(base, new Recorder(), { bounded: false });
    keepAll.advanceTo(5000);
    expect(keepAll.ingest(d!)).toBeNull();
    expect(keepAll.totals()).toMatchObject({ tooLate: 0, late: 1 });
  });

  it('an event at exactly the last closed epoch is not late', () => {
    const rec = new Recorder();
    const engine = new WindowEngine(base, rec);
    engine.advanceTo(5000);
    engine.ingest(sourced([{ type: 'demand', id: 'd', t: 5000 }])[0]!);
    expect(engine.totals().late).toBe(0);
  });

  it('advanceTo(w, market) closes one market only', () => {
    const rec = new Recorder();
    const engine = new WindowEngine(base, rec);
    const evs = sourced([
      { type: 'demand', id: 'd', t: 100, market: 'a' },
      { type: 'supply', id: 's', t: 100, x: 1, market: 'a' },
      { type: 'demand', id: 'd', t: 100, market: 'b' },
      { type: 'supply', id: 's', t: 100, x: 1, market: 'b' },
    ]);
    for (const e of evs) engine.ingest(e);
    engine.advanceTo(1000, 'a');
    expect(rec.assignments.map((a) => a.market)).toEqual(['a']);
    expect([engine.closedThrough('a'), engine.closedThrough('b')]).toEqual([1000, -Infinity]);
    engine.advanceTo(1999);
    expect(rec.assignments.map((a) => a.market)).toEqual(['a', 'b']);
    expect([engine.closedThrough('b'), engine.closedThrough('new')]).toEqual([1000, 1000]);
  });
});

describe('WindowEngine: haversine metric', () => {
  it('uses great-circle travel at speedKmh', () => {
    // 0.05° of latitude is 5.5597 km on the IUGG sphere (πR/180 · 0.05, from memory).
    const rec = new Recorder();
    const engine = new WindowEngine({ ...DEFAULT_CONFIG, windowMs: 5000 }, rec, { verify: true });
    const evs = sourced([
      { type: 'supply', id: 's', t: 0, lat: 52.05, lon: 13.4 },
      { type: 'demand', id: 'd', t: 0, lat: 52.0, lon: 13.4 },
    ]);
    for (const e of evs) { engine.advanceTo(e.event.t); engine.ingest(e); }
    engine.finish();
    const km = (Math.PI * 6371.0088 * 0.05) / 180;
    expect(rec.assignments[0]!.travelMin).toBeCloseTo((km / 25) * 60, 9);
  });
});

// ------------------------------------------------------------------ seeded random logs

interface Scenario { evs: Ev[]; config: PairflowConfig; seed: number }

/** A tiny random log (pools stay small enough for exhaustive search). */
function randomScenario(seed: number, units = 8, span = 20_000, sphere = false): Scenario {
  const rand = mulberry32(seed);
  const W = [1000, 2500, 4000][randInt(rand, 0, 2)]!;
  const markets = rand() < 0.3 ? ['m', 'n'] : ['m'];
  const tags = ['a', 'b'];
  const evs: Ev[] = [];
  for (const side of ['demand', 'supply'] as const) {
    for (let i = 0; i < units; i++) {
      const t = randInt(rand, 0, span);
      const e: Ev = {
        type: side, id: `${side[0]}${i}`, t, market: markets[randInt(rand, 0, markets.length - 1)]!,
        ...(sphere
          // Straddling the ±180° meridian: 0.1° is about 11 km here.
          ? { lat: 10 + rand() * 0.1, lon: wrapLon(179.95 + rand() * 0.1), x: undefined, y: undefined }
          : { x: rand() * 12, y: rand() * 12 }),
        until: rand() < 0.4 ? t + randInt(rand, 0, 15_000) : null,
      };
      if (side === 'supply' && rand() < 0.4) e.has = tags.filter(() => rand() < 0.6);
      if (side === 'demand' && rand() < 0.25) e.needs = [tags[randInt(rand, 0, 1)]!];
      evs.push(e);
      if (rand() < 0.15) evs.push({ ...e });
      if (rand() < 0.2) evs.push({ type: 'withdraw', side, id: e.id, market: e.market!, t: t + randInt(rand, 0, 8000) });
    }
  }
  const reserve = rand() < 0.5 ? null : randInt(rand, 1, 40);
  const config: PairflowConfig = {
    ...base, windowMs: W, reserve, abandonPenalty: [15, 30][randInt(rand, 0, 1)]!,
    waitWeight: [0, 0.5, 1, 3][randInt(rand, 0, 3)]!, demandPatienceMin: 0.1, supplyPatienceMin: 0.2,
    commit: rand() < 0.5 ? 'all' : 'due', metric: sphere ? 'haversine' : 'euclidean',
  };
  return { evs, config, seed };
}

function wrapLon(lon: number): number {
  return lon > 180 ? lon - 360 : lon;
}

interface RefUnit { side: 'demand' | 'supply'; id: string; market: string; t: number; until: number; end: number; x: number; y: number; lat: number; lon: number; has: string[]; needs: string[]; done: boolean }

/**
 * An independent model of SPEC §1 + §3 for logs whose ids arrive once per side and
 * market: solve every epoch by exhaustive search and execute per the commit rule.
 */
function reference(sc: Scenario): { pairs: Array<[number, string, string, string]>; cost: number; optimum: Map<string, number> } {
  const { config } = sc;
  const W = config.windowMs;
  const R = config.reserve ?? config.abandonPenalty;
  const units: RefUnit[] = [];
  const sorted = sc.evs.map((e, i) => ({ e, i })).sort((a, b) => a.e.t - b.e.t || a.i - b.i);
  for (const { e } of sorted) {
    const market = e.market ?? 'm';
    if (e.type === 'withdraw') {
      const u = units.find((v) => v.side === e.side && v.id === e.id && v.market === market && v.t <= e.t && e.t <= v.end);
      if (u) u.end = e.t;
      continue;
    }
    if (units.some((v) => v.side === e.type && v.id === e.id && v.market === market && v.t === e.t)) continue;
    const patience = e.type === 'demand' ? config.demandPatienceMin : config.supplyPatienceMin;
    const until = e.until ?? e.t + Math.round(patience * 60_000);
    units.push({ side: e.type, id: e.id, market, t: e.t, until, end: until, x: e.x ?? NaN, y: e.y ?? NaN, lat: e.lat ?? NaN, lon: e.lon ?? NaN, has: e.has ?? [], needs: e.needs ?? [], done: false });
  }
  const last = Math.max(...units.map((u) => u.end));
  const out: Array<[number, string, string, string]> = [];
  const optimum = new Map<string, number>();
  let cost = 0;
  for (let tau = W; tau <= last + W; tau += W) {
    for (const market of [...new Set(units.map((u) => u.market))]) {
      const pool = units.filter((u) => u.market === market && !u.done && u.t < tau && tau <= u.end);
      const ds = pool.filter((u) => u.side === 'demand');
      const ss = pool.filter((u) => u.side === 'supply');
      const km = (d: RefUnit, s: RefUnit): number =>
        config.metric === 'haversine' ? haversineKm(d.lat, d.lon, s.lat, s.lon) : Math.hypot(d.x - s.x, d.y - s.y);
      const travel = (d: RefUnit, s: RefUnit): number => (km(d, s) / config.speedKmh) * 60;
      const allowed = (d: RefUnit, s: RefUnit): boolean => travel(d, s) <= config.maxTravelMin && d.needs.every((n) => s.has.includes(n));
      const c = (d: RefUnit, s: RefUnit): number => travel(d, s) + (config.waitWeight * (tau - d.t)) / 60_000;
      const defer = (d: RefUnit): number => (d.until < tau + W ? config.abandonPenalty : R);
      let best = Infinity;
      let bestPick: number[] = [];
      const pick: number[] = [];
      const used = new Array<boolean>(ss.length).fill(false);
      const search = (i: number, acc: number): void => {
        if (i === ds.length) {
          if (acc < best - 1e-12) {
            best = acc;
            bestPick = pick.slice();
          }
          return;
        }
        pick[i] = -1;
        search(i + 1, acc + defer(ds[i]!));
        for (let j = 0; j < ss.length; j++) {
          if (used[j] || !allowed(ds[i]!, ss[j]!)) continue;
          used[j] = true;
          pick[i] = j;
          search(i + 1, acc + c(ds[i]!, ss[j]!));
          used[j] = false;
        }
      };
      search(0, 0);
      if (ds.length > 0 && ss.length > 0) optimum.set(`${market} ${tau}`, best);
      for (let i = 0; i < ds.length; i++) {
        const j = bestPick[i]!;
        if (j < 0) continue;
        const d = ds[i]!, s = ss[j]!;
        if (config.commit === 'due' && d.until >= tau + W && s.until >= tau + W) continue;
        d.done = s.done = true;
        cost += c(d, s);
        out.push([tau, market, d.id, s.id]);
      }
    }
  }
  cost += config.abandonPenalty * units.filter((u) => u.side === 'demand' && !u.done).length;
  out.sort((a, b) => a[0] - b[0] || a[1].localeCompare(b[1]) || a[2].localeCompare(b[2]));
  return { pairs: out, cost, optimum };
}

function runScenario(sc: Scenario, opts: EngineOptions = {}): { rec: Recorder; engine: WindowEngine } {
  return replay(sc.evs, sc.config, { now: () => 0, ...opts });
}

describe('WindowEngine against an exhaustive-search model of the policy (seeded random logs)', () => {
  it('every window solution equals exhaustive search, and the executed pairs and total cost match the model', () => {
    for (let seed = 1; seed <= 300; seed++) {
      // Every sixth log is on the sphere across the ±180° meridian.
      const sc = randomScenario(seed, 8, 20_000, seed % 6 === 0);
      const ref = reference(sc);
      const { rec, engine } = runScenario(sc);
      const got = rec.assignments.map((a) => [a.epoch, a.market, a.demandId, a.supplyId] as [number, string, string, string])
        .sort((a, b) => a[0] - b[0] || a[1].localeCompare(b[1]) || a[2].localeCompare(b[2]));
      expect(got, `seed ${seed}`).toEqual(ref.pairs);
      expect(engine.totals().cost, `seed ${seed}`).toBeCloseTo(ref.cost, 9);
      for (const s of rec.epochs) {
        const want = ref.optimum.get(`${s.market} ${s.epoch}`);
        expect(want, `seed ${seed} epoch ${s.epoch}`).toBeDefined();
        expect(s.primalCost, `seed ${seed} epoch ${s.epoch}`).toBeCloseTo(want!, 9);
        expect(s.dualObjective, `seed ${seed} epoch ${s.epoch}`).toBeCloseTo(want!, 9);
      }
    }
  });
});

describe('WindowEngine: warm prices, determinism, and how epochs are closed', () => {
  const strip = (r: Recorder): unknown => ({ a: r.assignments, e: r.expiries, s: r.epochs.map((x) => ({ ...x, warm: null, augmentations: null })) });

  it('warm and cold starts give the same assignments and total cost (seeded random logs)', () => {
    let warmUsed = 0;
    for (let seed = 1000; seed < 1040; seed++) {
      const sc = randomScenario(seed, 120, 200_000);
      const warm = runScenario(sc, { warm: true });
      // These pools are below the solver's own warm threshold: forced, the warm path runs on every hint.
      const forced = runScenario(sc, { warm: true, solve: (inst, o) => solveSparse(inst, { ...o, warmWhen: 'always' }) });
      const cold = runScenario(sc, { warm: false });
      for (const w of [warm, forced]) {
        expect(w.engine.totals().cost, `seed ${seed}`).toBeCloseTo(cold.engine.totals().cost, 9);
        expect(pairs(w.rec), `seed ${seed}`).toEqual(pairs(cold.rec));
      }
      expect(cold.rec.epochs.every((e) => !e.warm), `seed ${seed}`).toBe(true);
      warmUsed += forced.rec.epochs.filter((e) => e.warm).length;
    }
    // The warm option does reach the solver.
    expect(warmUsed).toBeGreaterThan(0);
  });

  it('the same input gives the same records, in the same order', () => {
    for (let seed = 2000; seed < 2010; seed++) {
      const sc = randomScenario(seed, 60, 100_000);
      const a = runScenario(sc);
      const b = runScenario(sc);
      expect(a.rec.order, `seed ${seed}`).toEqual(b.rec.order);
      expect(a.rec.assignments, `seed ${seed}`).toEqual(b.rec.assignments);
      expect(a.rec.epochs, `seed ${seed}`).toEqual(b.rec.epochs);
    }
  });

  it('events in time order give the same assignments however the watermark advances (live vs replay)', () => {
    for (let seed = 3000; seed < 3020; seed++) {
      const sc = randomScenario(seed, 60, 100_000);
      const ref = runScenario(sc);
      const rec = new Recorder();
      const engine = new WindowEngine(sc.config, rec, { verify: true, now: () => 0 });
      const rand = mulberry32(seed);
      const list = sourced(sc.evs).sort((a, b) => a.event.t - b.event.t || a.seq - b.seq);
      // Watermark = largest time seen − lateness, advanced at random moments.
      let maxT = -Infinity;
      for (const ev of list) {
        engine.ingest(ev);
        maxT = Math.max(maxT, ev.event.t);
        if (rand() < 0.3) engine.advanceTo(maxT - 2000);
      }
      engine.finish();
      expect(engine.totals().late, `seed ${seed}`).toBe(0);
      expect(strip(rec), `seed ${seed}`).toEqual(strip(ref.rec));
    }
  });

  it('totals() agree with the records: cost = Σ assignment costs + Σ expiry costs', () => {
    for (let seed = 4000; seed < 4010; seed++) {
      const { rec, engine } = runScenario(randomScenario(seed, 60, 100_000));
      const t = engine.totals();
      const sum = rec.assignments.reduce((x, a) => x + a.cost, 0) + rec.expiries.reduce((x, e) => x + e.cost, 0);
      expect(t.cost, `seed ${seed}`).toBeCloseTo(sum, 9);
      expect(t.matched).toBe(rec.assignments.length);
      expect(t.abandoned).toBe(rec.expiries.filter((e) => e.side === 'demand').length);
      // Every occurrence ends in exactly one record: matched or expired.
      expect(2 * t.matched + rec.expiries.length, `seed ${seed}`).toBe(t.demandUnits + t.supplyUnits);
    }
  });
});

describe('WindowEngine: skipping epochs where nothing can change', () => {
  it('a week at W = 1 s solves only where a unit joins or reaches its last chance', () => {
    const DAY = 86_400_000;
    const evs: Ev[] = [];
    // A courier available all week far from every order, and an order a day.
    evs.push({ type: 'supply', id: 's', t: 0, until: 7 * DAY, x: 100 });
    for (let k = 0; k < 7; k++) evs.push({ type: 'demand', id: `d${k}`, t: k * DAY + 500, until: k * DAY + 60_500 });
    const { rec, engine } = replay(evs, { windowMs: 1000, reserve: 5 });
    // One solve when each order joins, one at its last chance (P ≠ R); none in between.
    expect(rec.epochs.map((e) => e.epoch)).toEqual(
      Array.from({ length: 7 }, (_, k) => [k * DAY + 1000, k * DAY + 60_000]).flat(),
    );
    expect(engine.totals()).toMatchObject({ abandoned: 7, matched: 0 });
    expect(rec.expiries.map((e) => e.epoch)).toEqual([
      ...Array.from({ length: 7 }, (_, k) => k * DAY + 61_000), 7 * DAY + 1000,
    ]);
  });
});

describe('WindowEngine: many markets', () => {
  it('markets are independent, and records arrive in epoch order across markets', () => {
    const rand = mulberry32(77);
    const evs: Ev[] = [];
    const markets = Array.from({ length: 40 }, (_, k) => `city-${k}`);
    for (let i = 0; i < 600; i++) {
      const market = markets[randInt(rand, 0, markets.length - 1)]!;
      evs.push({ type: rand() < 0.5 ? 'demand' : 'supply', id: `u${i}`, market, t: randInt(rand, 0, 120_000), x: rand() * 8, y: rand() * 8 });
    }
    const all = replay(evs, { windowMs: 2000 });
    const epochs = [...all.rec.assignments.map((a) => a.epoch), ...all.rec.expiries.map((e) => e.epoch)];
    expect(epochs.length).toBeGreaterThan(100);
    // Record order: a sink sees epochs never going back in time.
    const seen: number[] = [];
    const orderSink: EngineSink = {
      assignment: (a) => seen.push(a.epoch), expiry: (e) => seen.push(e.epoch), epoch: (x) => seen.push(x.epoch),
    };
    const engine = new WindowEngine({ ...base, windowMs: 2000 }, orderSink);
    for (const ev of sourced(evs).sort((a, b) => a.event.t - b.event.t || a.seq - b.seq)) { engine.advanceTo(ev.event.t); engine.ingest(ev); }
    engine.finish();
    expect(seen.every((x, i) => i === 0 || seen[i - 1]! <= x)).toBe(true);
    for (const market of markets.slice(0, 8)) {
      const alone = replay(evs.filter((e) => e.market === market), { windowMs: 2000 });
      expect(pairs(alone.rec), market).toEqual(pairs(all.rec).filter((_, i) => all.rec.assignments[i]!.market === market));
    }
  });
});

describe('WindowEngine: snapshot() and restore()', () => {
  it('a restored engine makes the same assignments as the one that kept running (seeded random logs)', () => {
    let restoredUnits = 0;
    for (let seed = 5000; seed < 5030; seed++) {
      for (const commit of ['all', 'due'] as const) {
        const sc = randomScenario(seed, 60, 100_000);
        sc.config = { ...sc.config, commit };
        const list = sourced(sc.evs).sort((a, b) => a.event.t - b.event.t || a.seq - b.seq);
        const ref = runScenario(sc);
        const rand = mulberry32(seed);
        // Cut between two events with different times (a duplicate shares its original's t).
        let cut = randInt(rand, 1, list.length - 1);
        while (cut < list.length && list[cut]!.event.t === list[cut - 1]!.event.t) cut++;
        const recA = new Recorder();
        const a = new WindowEngine(sc.config, recA, { verify: true, now: () => 0 });
        for (const ev of list.slice(0, cut)) { a.advanceTo(ev.event.t); a.ingest(ev); }
        const states = a.marketNames().map((name) => JSON.parse(JSON.stringify(a.snapshot(name))) as unknown);
        const recB = new Recorder();
        const b = new WindowEngine(sc.config, recB, { verify: true, now: () => 0 });
        a.marketNames().forEach((name, k) => b.restore(name, states[k]));
        restoredUnits += b.totals().demandUnits + b.totals().supplyUnits;
        for (const ev of list.slice(cut)) { b.advanceTo(ev.event.t); b.ingest(ev); }
        b.finish();
        const key = (x: AssignmentRecord): string => `${x.epoch} ${x.market} ${x.demandId}@${x.demandT} ${x.supplyId}@${x.supplyT}`;
        const got = [...recA.assignments, ...recB.assignments].map(key).sort();
        expect(got, `seed ${seed} ${commit} cut ${cut}`).toEqual(ref.rec.assignments.map(key).sort());
        const costA = recA.assignments.reduce((x, r) => x + r.cost, 0) + recA.expiries.reduce((x, r) => x + r.cost, 0);
        expect(costA + b.totals().cost, `seed ${seed} ${commit}`).toBeCloseTo(ref.engine.totals().cost, 9);
      }
    }
    expect(restoredUnits).toBeGreaterThan(0);
  });

  it('snapshot() is JSON-safe and carries prices, tentative pairs and the last closed epoch', () => {
    const rec = new Recorder();
    const engine = new WindowEngine({ ...base, commit: 'due' }, rec, { verify: true });
    for (const ev of sourced([
      { type: 'demand', id: 'd', t: 0, until: 60_000, needs: ['van'] },
      // Out of reach; its last chance at τ = 2000 makes that epoch solved.
      { type: 'demand', id: 'e', t: 0, until: 2500, x: 50 },
      { type: 'supply', id: 's', t: 0, until: 60_000, x: 1, has: ['van'] },
      { type: 'supply', id: 'later', t: 2500, x: 3 },
    ])) engine.ingest(ev);
    engine.advanceTo(2000);
    const snap = engine.snapshot('m');
    expect(JSON.parse(JSON.stringify(snap))).toEqual(snap);
    expect(snap).toMatchObject({ version: 2, market: 'm', windowMs: 1000, lastClosed: 2000, late: 0 });
    expect(snap.units.map((u) => [u.side, u.id, u.state])).toEqual([
      ['demand', 'd', 'pool'], ['demand', 'e', 'pool'], ['supply', 's', 'pool'], ['supply', 'later', 'pending'],
    ]);
    expect(rec.epochs.map((x) => [x.epoch, x.tentative])).toEqual([[2000, 1]]);
    expect(snap.units[0]).toMatchObject({ needs: ['van'], x: 0 });
    expect(snap.units[3]!.joinEpoch).toBe(3000);
    expect(snap.units.slice(0, 3).map((u) => u.slot)).toEqual([0, 1, 0]);
    expect(snap.pools).toEqual({ demand: { high: 2, free: [] }, supply: { high: 1, free: [] } });
    expect(snap.tentative).toEqual([[0, 2]]);
    expect(snap.units.every((u) => u.state === 'pending' || typeof u.price === 'number')).toBe(true);
    expect(engine.snapshot('none')).toMatchObject({ lastClosed: 2000, units: [], tentative: [] });
  });

  it('restore() rejects another version, another window or a damaged state with PAIRFLOW_ERR_STATE_INVALID', () => {
    const pools = { demand: { high: 1, free: [] }, supply: { high: 0, free: [] } };
    const good = { version: 2, market: 'm', windowMs: 1000, lastClosed: 5000, late: 0, pools, units: [], tentative: [] };
    const noSlots = { ...good, pools: { demand: { high: 0, free: [] }, supply: { high: 0, free: [] } } };
    const unit = { side: 'demand', id: 'd', t: 0, until: 9000, end: 9000, seq: 0, price: null, state: 'pool', slot: 0 };
    const cases: unknown[] = [
      null, 'x', { ...good, version: 1 }, { ...good, windowMs: 5000 }, { ...good, units: 'no' },
      { ...good, units: [{ ...unit, side: 'both' }] }, { ...good, units: [{ ...unit, t: 'soon' }] },
      { ...good, units: [{ ...unit, has: [1] }] }, { ...good, units: [unit], tentative: [[0, 0]] },
      { ...good, units: [unit], tentative: [[0, 7]] }, { ...good, units: [unit, { ...unit, t: 1 }] },
      { ...good, units: [unit, unit] }, { ...good, late: -1 }, { ...good, pools: null },
      // Slot 0 below high but neither used nor free; a slot out of range; a pending unit without joinEpoch.
      good, { ...noSlots, units: [unit] }, { ...noSlots, units: [{ ...unit, state: 'pending', slot: undefined }] },
      { ...good, pools: { ...pools, demand: { high: 1, free: [0] } }, units: [unit] },
    ];
    for (const state of cases) {
      const engine = new WindowEngine(base, new Recorder());
      let code: unknown = null;
      try {
        engine.restore('m', state);
      } catch (err) {
        code = (err as { code?: unknown }).code;
      }
      expect(code, JSON.stringify(state)).toBe('PAIRFLOW_ERR_STATE_INVALID');
    }
    const ok = new WindowEngine(base, new Recorder());
    ok.restore('m', { ...good, units: [unit] });
    expect(ok.snapshot('m').units.map((u) => u.id)).toEqual(['d']);
    const done = new WindowEngine(base, new Recorder());
    done.restore('m', { ...noSlots, units: [{ ...unit, state: 'done', slot: undefined, end: 4000 }] });
    expect(done.snapshot('m').units.map((u) => [u.id, u.state])).toEqual([['d', 'done']]);
  });
});

describe('WindowEngine: the candidate pairs of every solve', () => {
  interface Unit { side: 'demand' | 'supply'; t: number; a: number; b: number; needs: string[]; has: string[] }
  interface Seen { rowPtr: Int32Array; colIdx: Int32Array; cost: Float64Array; tau: number; rows: string[]; cols: string[] }

  /**
   * A seeded market wider than the travel radius, with capabilities from `nTags` tags
   * (past 31 the engine's bit masks give way to the lists), withdraws and re-arrivals.
   */
  function scenario(seed: number, sphere: boolean, nTags: number): { evs: Ev[]; config: PairflowConfig; units: Map<string, Unit> } {
    const rand = mulberry32(seed);
    const tags = Array.from({ length: nTags }, (_, i) => `cap${i}`);
    const units = new Map<string, Unit>();
    const evs: Ev[] = [];
    for (let i = 0; i < 160; i++) {
      const side = rand() < 0.5 ? 'demand' : 'supply';
      const id = `${side[0]}${randInt(rand, 0, 60)}`;
      const t = randInt(rand, 0, 20 * MIN);
      // About 25 km across (radius 6.25 km): many pairs out of reach.
      const a = sphere ? 46.4 + rand() * 0.22 : rand() * 25;
      const b = sphere ? -31.3 + rand() * 0.32 : rand() * 25;
      const e: Ev = { type: side, id, t, ...(sphere ? { lat: a, lon: b, x: undefined, y: undefined } : { x: a, y: b }) };
      const pick = (): string[] => tags.filter(() => rand() < 3 / nTags);
      if (side === 'demand' && rand() < 0.4) e.needs = pick();
      if (side === 'supply' && rand() < 0.6) e.has = pick();
      units.set(`${side} ${a},${b}`, { side, t, a, b, needs: e.needs ?? [], has: e.has ?? [] });
      evs.push(e);
      if (rand() < 0.1) evs.push({ type: 'withdraw', side, id, t: t + randInt(rand, 0, 5 * MIN) });
    }
    const config: PairflowConfig = {
      ...base, metric: sphere ? 'haversine' : 'euclidean', speedKmh: 25, maxTravelMin: 15, windowMs: 10_000,
      waitWeight: [0, 1, 2.5][seed % 3]!, commit: seed % 2 === 0 ? 'all' : 'due', demandPatienceMin: 6, supplyPatienceMin: 12,
    };
    return { evs, config, units };
  }

  /** Drives the engine and keeps a copy of every solve's instance with its rows' and columns' units. */
  function observe(evs: Ev[], config: PairflowConfig): Seen[] {
    const seen: Seen[] = [];
    const sink = new Recorder() as Recorder & EngineSink;
    sink.prices = (p) => {
      const last = seen[seen.length - 1]!;
      last.tau = p.epoch;
      const keys = Array.from({ length: p.n }, (_, k) => `${p.side} ${p.a[k]},${p.b[k]}`);
      if (p.side === 'demand') last.rows = keys;
      else last.cols = keys;
    };
    const engine = new WindowEngine(config, sink, {
      verify: true,
      solve: (inst, o) => {
        seen.push({ rowPtr: inst.rowPtr.slice(), colIdx: inst.colIdx.slice(), cost: inst.cost.slice(), tau: NaN, rows: [], cols: [] });
        return solveSparse(inst, o);
      },
    });
    for (const ev of sourced(evs).sort((x, y) => x.event.t - y.event.t || x.seq - y.seq)) {
      engine.advanceTo(ev.event.t);
      engine.ingest(ev);
    }
    engine.finish();
    return seen;
  }

  for (const [name, sphere, nTags] of [['haversine, 3 tags', true, 3], ['euclidean, 3 tags', false, 3], ['haversine, 40 tags', true, 40]] as const) {
    it(`each row holds exactly the allowed pairs (travel ≤ maxTravelMin, needs ⊆ has) in column order, at their exact costs (${name}, seeded)`, () => {
      let pairs = 0;
      for (let seed = 1; seed <= 12; seed++) {
        const { evs, config, units } = scenario(seed, sphere, nTags);
        const seen = observe(evs, config);
        expect(seen.length, `seed ${seed}`).toBeGreaterThan(5);
        for (const s of seen) {
          const rowPtr = [0];
          const colIdx: number[] = [];
          const cost: number[] = [];
          for (const rk of s.rows) {
            const d = units.get(rk)!;
            s.cols.forEach((ck, j) => {
              const u = units.get(ck)!;
              const km = sphere ? haversineKm(d.a, d.b, u.a, u.b) : Math.hypot(d.a - u.a, d.b - u.b);
              const travel = (km / config.speedKmh) * 60;
              if (travel <= config.maxTravelMin && d.needs.every((n) => u.has.includes(n))) {
                colIdx.push(j);
                cost.push(travel + (config.waitWeight / 60_000) * (s.tau - d.t));
              }
            });
            rowPtr.push(colIdx.length);
          }
          expect([...s.rowPtr], `seed ${seed} epoch ${s.tau}`).toEqual(rowPtr);
          expect([...s.colIdx], `seed ${seed} epoch ${s.tau}`).toEqual(colIdx);
          expect([...s.cost], `seed ${seed} epoch ${s.tau}`).toEqual(cost);
          pairs += colIdx.length;
        }
      }
      // Enough pairs to mean something, and not every pair of every pool.
      expect(pairs).toBeGreaterThan(500);
    });
  }

  it('the solver skips its own pass over the pairs of these instances (held to the brute force above), but not when verifying', () => {
    const { evs, config } = scenario(3, true, 3);
    for (const verify of [false, true]) {
      const asked: Array<boolean | undefined> = [];
      const engine = new WindowEngine(config, new Recorder(), {
        verify,
        solve: (inst, o) => {
          asked.push(o.check);
          return solveSparse(inst, o);
        },
      });
      for (const ev of sourced(evs).sort((x, y) => x.event.t - y.event.t || x.seq - y.seq)) {
        engine.advanceTo(ev.event.t);
        engine.ingest(ev);
      }
      engine.finish();
      expect(asked.length).toBeGreaterThan(5);
      expect(new Set(asked), `verify ${verify}`).toEqual(new Set([verify]));
    }
  });

  it('units leaving together are reported in (t, seq) order, also when their indices are reused out of order', () => {
    for (const n of [20, 45]) {
      const evs: Ev[] = [];
      // First a crowd that expires and is forgotten: its indices are reused last-freed first.
      for (let i = 0; i < 80; i++) evs.push({ type: 'demand', id: `old${i}`, t: i * 10, until: 2000 });
      const rand = mulberry32(n);
      const T = 10 * MIN;
      for (let i = 0; i < n; i++) {
        // Few distinct times, so seq (file order) breaks many ties.
        evs.push({ type: 'demand', id: `d${i}`, t: T + 100 * randInt(rand, 0, 6), until: T + 2 * MIN });
      }
      const { rec } = replay(evs, { windowMs: 1000 });
      const got = rec.expiries.filter((e) => e.id.startsWith('d')).map((e) => e.id);
      const want = evs.map((e, seq) => ({ e, seq })).filter(({ e }) => e.id.startsWith('d'))
        .sort((x, y) => x.e.t - y.e.t || x.seq - y.seq).map(({ e }) => e.id);
      expect(got, `n = ${n}`).toEqual(want);
      expect(new Set(rec.expiries.filter((e) => e.id.startsWith('d')).map((e) => e.epoch)).size).toBe(1);
    }
  });

  it('a reported unit is in the snapshot exactly until an advance closes the epoch past its end plus the lateness (seeded)', () => {
    for (let seed = 1; seed <= 6; seed++) {
      const rand = mulberry32(seed);
      const evs: Ev[] = [];
      // Whole seconds and a lateness of 999 ms: ends plus the lateness plus one land on
      // epochs, so the boundary itself is tested.
      const sec = (lo: number, hi: number): number => 1000 * randInt(rand, lo, hi);
      for (let i = 0; i < 30; i++) {
        const t = sec(0, 60);
        evs.push({ type: 'demand', id: `d${i}`, t, until: t + sec(1, 40), x: rand() * 3 });
        evs.push({ type: 'supply', id: `s${i}`, t: sec(0, 60), until: t + sec(1, 90), x: rand() * 3 });
        // Some end earlier after they are reported (a courier back after the job).
        if (rand() < 0.3) evs.push({ type: 'withdraw', side: 'supply', id: `s${i}`, t: t + sec(2, 30) });
      }
      const config = { ...base, windowMs: 1000, allowedLatenessMs: 999 };
      const rec = new Recorder();
      const engine = new WindowEngine(config, rec);
      const ends = new Map<string, number>();
      const list = sourced(evs).sort((x, y) => x.event.t - y.event.t || x.seq - y.seq);
      for (const ev of list) {
        engine.advanceTo(ev.event.t);
        engine.ingest(ev);
        const e = ev.event;
        const key = `${e.type === 'withdraw' ? e.side : e.type} ${e.id}`;
        if (e.type === 'withdraw') ends.set(key, Math.min(ends.get(key)!, e.t));
        else ends.set(key, e.until!);
        const limit = engine.closedThrough('m');
        const reported = new Set([
          ...rec.assignments.flatMap((a) => [`demand ${a.demandId}`, `supply ${a.supplyId}`]),
          ...rec.expiries.map((x) => `${x.side} ${x.id}`),
        ]);
        const done = engine.snapshot('m').units.filter((u) => u.state === 'done').map((u) => `${u.side} ${u.id}`).sort();
        const want = [...reported].filter((k) => ends.get(k)! + config.allowedLatenessMs + 1 > limit).sort();
        expect(done, `seed ${seed} at ${e.t}`).toEqual(want);
      }
    }
  });
});
