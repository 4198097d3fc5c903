import { describe, expect, it } from 'vitest';
import { validateEvent } from '../../../src/consume/validate.js';
import type { ArrivalEvent, PairflowEvent, WithdrawEvent } from '../../../src/model.js';
import { CITY_CENTRE, DISTRICTS, districtsFor } from '../../../src/gen/city.js';
import { DEMAND_PER_DAY, generateDay, generateEvents, GEN_DEFAULTS, resolveGenOptions, syncMarkerFor, type GenOptions } from '../../../src/gen/gen.js';

const DAY = 86_400_000;
// One default day, shared by the tests that only read it.
const day0 = generateDay({}, 0);
const arrivals = (evs: PairflowEvent[], type: 'supply' | 'demand'): ArrivalEvent[] => evs.filter((e): e is ArrivalEvent => e.type === type);
const withdraws = (evs: PairflowEvent[], side: 'supply' | 'demand'): WithdrawEvent[] => evs.filter((e): e is WithdrawEvent => e.type === 'withdraw' && e.side === side);

describe('generateDay()', () => {
  it('makes about 43,000 demand and 43,000 supply occurrences over 4 markets by default, all valid events', () => {
    expect(arrivals(day0, 'demand')).toHaveLength(DEMAND_PER_DAY);
    expect(arrivals(day0, 'supply')).toHaveLength(DEMAND_PER_DAY);
    expect(new Set(day0.map((e) => e.market))).toEqual(new Set(DISTRICTS.slice(0, 4).map((d) => d.market)));
    for (const ev of day0) {
      const res = validateEvent(JSON.parse(JSON.stringify(ev)), 'haversine');
      if (!res.ok) throw new Error(`${JSON.stringify(ev)}: ${res.reason}`);
    }
  });

  it('keeps every event inside its day and in time order', () => {
    const start = GEN_DEFAULTS.startMs;
    const outside = day0.filter((e) => e.t < start || e.t >= start + DAY);
    const unordered = day0.filter((e, i) => i > 0 && day0[i - 1]!.t > e.t);
    expect(outside).toEqual([]);
    expect(unordered).toEqual([]);
  });

  it('is deterministic: the same seed gives equal events, another seed different ones', () => {
    const small = { scale: 0.02 };
    expect(generateDay({ ...small, seed: 9 }, 0)).toEqual(generateDay({ ...small, seed: 9 }, 0));
    expect(generateDay({ ...small, seed: 9 }, 0)).not.toEqual(generateDay({ ...small, seed: 10 }, 0));
    expect(generateDay(small, 1)).not.toEqual(generateDay(small, 0));
  });

  it('follows a daily curve with morning, lunch and evening peaks', () => {
    const perHour = new Array<number>(24).fill(0);
    for (const ev of arrivals(day0, 'demand')) perHour[Math.floor((ev.t - GEN_DEFAULTS.startMs) / 3_600_000)]! += 1;
    const [night, morning, midMorning, lunch, afternoon, evening] = [perHour[3]!, perHour[8]!, perHour[10]!, perHour[12]!, perHour[15]!, perHour[19]!];
    expect(morning).toBeGreaterThan(1.5 * midMorning);
    expect(lunch).toBeGreaterThan(2 * midMorning);
    expect(lunch).toBeGreaterThan(2 * afternoon);
    expect(evening).toBeGreaterThan(lunch);
    expect(evening).toBeGreaterThan(10 * night);
  });

  it('brings couriers back after jobs: re-arrivals of the same id inside one shift, with until at shift end', () => {
    const byId = new Map<string, ArrivalEvent[]>();
    for (const ev of arrivals(day0, 'supply')) byId.set(ev.id, [...(byId.get(ev.id) ?? []), ev]);
    const shifts = [...byId.values()];
    expect(shifts.length).toBeGreaterThan(1000);
    let reArrivals = 0;
    const problems: string[] = [];
    for (const occ of shifts) {
      const until = occ[0]!.until!;
      if (!(until > occ[0]!.t)) problems.push(`${occ[0]!.id}: until ${until} not after t`);
      for (const ev of occ) if (ev.until !== until) problems.push(`${ev.id}: until changes within the shift`);
      for (let k = 1; k < occ.length; k += 1) {
        const gap = occ[k]!.t - occ[k - 1]!.t;
        if (gap < 12 * 60_000 || gap > 30 * 60_000) problems.push(`${occ[k]!.id}: job of ${gap} ms`);
      }
      reArrivals += occ.length - 1;
    }
    expect(problems).toEqual([]);
    expect(reArrivals / DEMAND_PER_DAY).toBeGreaterThan(0.7);
  });

  it('cancels some demand with a withdraw after its arrival and before it expires', () => {
    const demand = new Map(arrivals(day0, 'demand').map((e) => [e.id, e]));
    const cancels = withdraws(day0, 'demand');
    expect(cancels.length / demand.size).toBeGreaterThan(0.02);
    expect(cancels.length / demand.size).toBeLessThan(0.06);
    const wrong = cancels.filter((w) => {
      const d = demand.get(w.id);
      return !d || d.market !== w.market || !(w.t > d.t) || !(w.t < (d.until ?? d.t + 10 * 60_000));
    });
    expect(wrong).toEqual([]);
  });

  it('ends a few shifts early with a supply withdraw after the last arrival of that courier', () => {
    const lastArrival = new Map<string, ArrivalEvent>();
    for (const ev of arrivals(day0, 'supply')) lastArrival.set(ev.id, ev);
    const off = withdraws(day0, 'supply');
    expect(off.length).toBeGreaterThan(20);
    for (const w of off) {
      const a = lastArrival.get(w.id)!;
      expect(w.t).toBeGreaterThan(a.t);
      expect(w.t).toBeLessThan(a.until!);
    }
  });

  it('tags capabilities: cold-bag and large-box on some couriers and some orders', () => {
    const has = arrivals(day0, 'supply').filter((e) => e.has?.includes('cold-bag')).length / DEMAND_PER_DAY;
    const needs = arrivals(day0, 'demand').filter((e) => e.needs?.includes('cold-bag')).length / DEMAND_PER_DAY;
    expect(has).toBeGreaterThan(0.2);
    expect(needs).toBeGreaterThan(0.04);
    expect(needs).toBeLessThan(0.15);
    expect(arrivals(day0, 'demand').some((e) => e.needs?.includes('large-box'))).toBe(true);
    expect(arrivals(day0, 'demand').every((e) => e.has === undefined)).toBe(true);
  });

  it('places units around the invented centre, within the districts', () => {
    // 0.2° of latitude is ~22 km; 0.3° of longitude at 46.5° N is ~23 km.
    const far = day0.filter((e) => e.type !== 'withdraw' && (Math.abs(e.lat! - CITY_CENTRE.lat) > 0.2 || Math.abs(e.lon! - CITY_CENTRE.lon) > 0.3));
    expect(far).toEqual([]);
  });

  it('scales demand with scale, and takes any number of markets', () => {
    const small = generateDay({ scale: 0.1, markets: 10 }, 0);
    expect(arrivals(small, 'demand')).toHaveLength(4300);
    expect(arrivals(small, 'supply')).toHaveLength(4300);
    expect(new Set(small.map((e) => e.market)).size).toBe(10);
    expect(districtsFor(10).map((d) => d.code)).toHaveLength(new Set(districtsFor(10).map((d) => d.code)).size);
  });

  it('writes x/y in km instead of lat/lon with coords xy', () => {
    const evs = generateDay({ scale: 0.01, coords: 'xy' }, 0);
    expect(evs.filter((ev) => !validateEvent(ev, 'euclidean').ok)).toEqual([]);
    expect(arrivals(evs, 'supply').every((e) => e.lat === undefined && Number.isFinite(e.x))).toBe(true);
  });

  it('shuffles the same events when asked', () => {
    const sorted = generateDay({ scale: 0.02 }, 0);
    const shuffled = generateDay({ scale: 0.02, shuffle: true }, 0);
    expect(shuffled).not.toEqual(sorted);
    const key = (e: PairflowEvent): string => JSON.stringify(e);
    expect(shuffled.map(key).sort()).toEqual(sorted.map(key).sort());
  });
});

describe('generateEvents()', () => {
  it('yields the days one after the other, in time order over the whole stream', () => {
    const evs = [...generateEvents({ days: 3, scale: 0.02, seed: 5 })];
    expect(evs.slice(0, generateDay({ scale: 0.02, seed: 5 }, 0).length)).toEqual(generateDay({ scale: 0.02, seed: 5 }, 0));
    expect(evs.filter((e, i) => i > 0 && evs[i - 1]!.t > e.t)).toEqual([]);
    expect(evs[evs.length - 1]!.t).toBeGreaterThanOrEqual(GEN_DEFAULTS.startMs + 2 * DAY);
  });
});

describe('resolveGenOptions()', () => {
  it('refuses out-of-range options with PAIRFLOW_ERR_CLI_OPTION naming the option', () => {
    const cases: [Partial<GenOptions>, string][] = [[{ days: 0 }, '--days'], [{ markets: 1.5 }, '--markets'], [{ markets: 65 }, '--markets'], [{ scale: 0 }, '--scale'], [{ scale: 21 }, '--scale'], [{ scale: Number.NaN }, '--scale'], [{ seed: 0.5 }, '--seed'],
      // hostile sizes (issue #10): a day count of a lifetime, seeds beyond 32 bits, days past the range of dates
      [{ days: 3661 }, '--days'], [{ days: 1e15 }, '--days'], [{ seed: -1 }, '--seed'], [{ seed: 2 ** 32 }, '--seed'], [{ startMs: 8.64e15 - 86_400_000 }, '--start']];
    for (const [opts, option] of cases) {
      expect(() => resolveGenOptions(opts), option).toThrow(expect.objectContaining({ code: 'PAIRFLOW_ERR_CLI_OPTION', params: expect.objectContaining({ option }) }));
    }
    expect(resolveGenOptions({})).toEqual(GEN_DEFAULTS);
  });
});

describe('syncMarkerFor()', () => {
  it('gives 16 bytes that depend on the seed only', () => {
    expect(syncMarkerFor(1)).toHaveLength(16);
    expect(syncMarkerFor(1)).toEqual(syncMarkerFor(1));
    expect(syncMarkerFor(1)).not.toEqual(syncMarkerFor(2));
  });
});
