import { describe, expect, it } from 'vitest';
import { DEFAULT_CONFIG, type PairflowConfig, type PairflowEvent, type SourcedEvent } from '../../../src/model.js';
import { buildOccurrences, OccurrenceLedger } from '../../../src/window/occurrences.js';

const MIN = 60_000;
const config: PairflowConfig = { ...DEFAULT_CONFIG, demandPatienceMin: 10, supplyPatienceMin: 30 };

let seq = 0;
function ev(e: Partial<PairflowEvent> & { type: PairflowEvent['type']; id: string; t: number }): SourcedEvent {
  seq++;
  const base = { market: 'm', ...e };
  const event = (e.type === 'withdraw' ? { side: 'demand', ...base } : { until: null, lat: 0, lon: 0, ...base }) as PairflowEvent;
  return { event, pos: { file: 'test.jsonl', line: seq }, seq };
}

describe('OccurrenceLedger', () => {
  it('apply() starts an occurrence per arrival with until defaulting to t + patience of its side', () => {
    const l = new OccurrenceLedger(config);
    const a = l.apply(ev({ type: 'demand', id: 'd', t: 1000 }));
    const b = l.apply(ev({ type: 'supply', id: 's', t: 2000 }));
    const c = l.apply(ev({ type: 'demand', id: 'e', t: 3000, until: 5000 }));
    expect(a.kind === 'arrival' && a.occurrence.until).toBe(1000 + 10 * MIN);
    expect(b.kind === 'arrival' && b.occurrence.until).toBe(2000 + 30 * MIN);
    expect(c.kind === 'arrival' && [c.occurrence.until, c.occurrence.end]).toEqual([5000, 5000]);
    expect(l.occurrences.map((o) => o.index)).toEqual([0, 1, 2]);
  });

  it('an arrival with the same side, id and t as an earlier one is ignored and counted', () => {
    const l = new OccurrenceLedger(config);
    l.apply(ev({ type: 'demand', id: 'd', t: 1000 }));
    expect(l.apply(ev({ type: 'demand', id: 'd', t: 1000 })).kind).toBe('duplicate');
    // Same id on the other side, or in another market, is another unit.
    expect(l.apply(ev({ type: 'supply', id: 'd', t: 1000 })).kind).toBe('arrival');
    expect(l.apply(ev({ type: 'demand', id: 'd', t: 1000, market: 'n' })).kind).toBe('arrival');
    // An earlier arrival still counts after the unit re-arrived in between.
    l.apply(ev({ type: 'demand', id: 'd', t: 2000 }));
    expect(l.apply(ev({ type: 'demand', id: 'd', t: 2000 })).kind).toBe('duplicate');
    expect(l.duplicates).toBe(2);
    expect(l.occurrences).toHaveLength(4);
  });

  it('a re-arrival ends the previous occurrence at the new t only while it is still available', () => {
    const l = new OccurrenceLedger(config);
    l.apply(ev({ type: 'supply', id: 's', t: 0, until: 10_000 }));
    const r = l.apply(ev({ type: 'supply', id: 's', t: 4000, until: 20_000 }));
    expect(r.kind === 'arrival' && r.ended?.index).toBe(0);
    // At exactly until the first is still available (until is its last instant): no change.
    const r2 = l.apply(ev({ type: 'supply', id: 's', t: 20_000, until: 30_000 }));
    expect(r2.kind === 'arrival' && r2.ended).toBe(null);
    // After until it is no longer available, so nothing is cut.
    l.apply(ev({ type: 'supply', id: 's', t: 40_000 }));
    expect(l.historyOf('supply', 'm', 's').map((o) => [o.t, o.end])).toEqual([
      [0, 4000], [4000, 20_000], [20_000, 30_000], [40_000, 40_000 + 30 * MIN],
    ]);
    expect(l.historyOf('demand', 'm', 's')).toEqual([]);
  });

  it('a withdraw ends the latest occurrence with t ≤ w at w; one finding nothing available is counted', () => {
    const l = new OccurrenceLedger(config);
    l.apply(ev({ type: 'demand', id: 'd', t: 0, until: 10_000 }));
    l.apply(ev({ type: 'demand', id: 'd', t: 5000, until: 50_000 }));
    const w = l.apply(ev({ type: 'withdraw', side: 'demand', id: 'd', t: 7000 }));
    expect(w.kind === 'withdraw' && [w.ended.index, w.changed]).toEqual([1, true]);
    expect(l.occurrences.map((o) => o.end)).toEqual([5000, 7000]);
    // Same millisecond again: the occurrence is still available at 7000 (its last instant).
    expect(l.apply(ev({ type: 'withdraw', side: 'demand', id: 'd', t: 7000 })).kind).toBe('withdraw');
    expect(l.apply(ev({ type: 'withdraw', side: 'demand', id: 'd', t: 7001 })).kind).toBe('ignored-withdraw');
    expect(l.apply(ev({ type: 'withdraw', side: 'demand', id: 'nobody', t: 7001 })).kind).toBe('ignored-withdraw');
    expect(l.apply(ev({ type: 'withdraw', side: 'supply', id: 'd', t: 7002 })).kind).toBe('ignored-withdraw');
    expect(l.ignoredWithdraws).toBe(3);
  });

  it('a withdraw at exactly until applies; one millisecond later it is ignored', () => {
    const l = new OccurrenceLedger(config);
    l.apply(ev({ type: 'supply', id: 's', t: 0, until: 9000 }));
    const w = l.apply(ev({ type: 'withdraw', side: 'supply', id: 's', t: 9000 }));
    expect(w.kind === 'withdraw' && w.changed).toBe(false);
    l.apply(ev({ type: 'supply', id: 'u', t: 0, until: 9000 }));
    expect(l.apply(ev({ type: 'withdraw', side: 'supply', id: 'u', t: 9001 })).kind).toBe('ignored-withdraw');
    expect(l.ignoredWithdraws).toBe(1);
  });

  it('events at the same t apply in seq order: arrival then withdraw ends the new occurrence at once', () => {
    const a = new OccurrenceLedger(config);
    a.apply(ev({ type: 'demand', id: 'd', t: 0, until: 60_000 }));
    a.apply(ev({ type: 'demand', id: 'd', t: 3000, until: 60_000 }));
    a.apply(ev({ type: 'withdraw', side: 'demand', id: 'd', t: 3000 }));
    expect(a.occurrences.map((o) => [o.t, o.end])).toEqual([[0, 3000], [3000, 3000]]);
    const b = new OccurrenceLedger(config);
    b.apply(ev({ type: 'demand', id: 'd', t: 0, until: 60_000 }));
    b.apply(ev({ type: 'withdraw', side: 'demand', id: 'd', t: 3000 }));
    b.apply(ev({ type: 'demand', id: 'd', t: 3000, until: 60_000 }));
    expect(b.occurrences.map((o) => [o.t, o.end])).toEqual([[0, 3000], [3000, 60_000]]);
  });

  it('a late arrival is placed by time: it ends the one before it and is ended by the one after', () => {
    const l = new OccurrenceLedger(config);
    l.apply(ev({ type: 'supply', id: 's', t: 0, until: 100_000 }));
    l.apply(ev({ type: 'supply', id: 's', t: 50_000, until: 100_000 }));
    const late = l.apply(ev({ type: 'supply', id: 's', t: 20_000, until: 90_000 }));
    expect(late.kind === 'arrival' && late.ended?.index).toBe(0);
    expect(l.historyOf('supply', 'm', 's').map((o) => [o.t, o.end])).toEqual([
      [0, 20_000], [20_000, 50_000], [50_000, 100_000],
    ]);
    // A late duplicate is still recognised, and a late withdraw finds the occurrence live at w.
    expect(l.apply(ev({ type: 'supply', id: 's', t: 20_000 })).kind).toBe('duplicate');
    const w = l.apply(ev({ type: 'withdraw', side: 'supply', id: 's', t: 30_000 }));
    expect(w.kind === 'withdraw' && w.ended.t).toBe(20_000);
    expect(l.occurrences[2]!.end).toBe(30_000);
  });
});

describe('OccurrenceLedger.adopt()', () => {
  it('re-creates stored occurrences as they were: no rule applied, same t returned as is', () => {
    const l = new OccurrenceLedger(config);
    const a = l.adopt({ side: 'supply', id: 's', market: 'm', t: 0, until: 9000, end: 9000, seq: 4, x: 1, y: 2 });
    const b = l.adopt({ side: 'supply', id: 's', market: 'm', t: 5000, until: 20_000, end: 7000, seq: 9 });
    expect([a.end, b.end]).toEqual([9000, 7000]);
    expect(l.adopt({ side: 'supply', id: 's', market: 'm', t: 0, until: 1, end: 1, seq: 0 })).toBe(a);
    // Later events see them: a re-arrival ends the newest, a duplicate of it is caught.
    expect(l.apply(ev({ type: 'supply', id: 's', t: 5000 })).kind).toBe('duplicate');
    const r = l.apply(ev({ type: 'supply', id: 's', t: 6000 }));
    expect(r.kind === 'arrival' && r.ended?.index).toBe(b.index);
    expect(l.historyOf('supply', 'm', 's').map((o) => [o.t, o.end])).toEqual([[0, 9000], [5000, 6000], [6000, 6000 + 30 * MIN]]);
  });
});

describe('buildOccurrences()', () => {
  it('agrees with the ledger applied event by event and returns both counts', () => {
    const events = [
      ev({ type: 'supply', id: 'a', t: 0, lat: 1, lon: 2, has: ['van'] }),
      ev({ type: 'demand', id: 'a', t: 0, x: 3, y: 4, needs: ['van'] }),
      ev({ type: 'supply', id: 'a', t: 0 }),
      ev({ type: 'withdraw', side: 'supply', id: 'a', t: 1000 }),
      ev({ type: 'withdraw', side: 'supply', id: 'a', t: 2000 }),
      ev({ type: 'supply', id: 'a', t: 3000 }),
    ];
    const r = buildOccurrences(events, config);
    expect(r.duplicates).toBe(1);
    expect(r.ignoredWithdraws).toBe(1);
    expect(r.occurrences.map((o) => [o.side, o.t, o.end, o.seq])).toEqual([
      ['supply', 0, 1000, events[0]!.seq],
      ['demand', 0, 10 * MIN, events[1]!.seq],
      ['supply', 3000, 3000 + 30 * MIN, events[5]!.seq],
    ]);
    expect(r.occurrences[0]).toMatchObject({ lat: 1, lon: 2, has: ['van'], market: 'm', id: 'a' });
    expect(r.occurrences[1]).toMatchObject({ x: 3, y: 4, needs: ['van'] });
    const l = new OccurrenceLedger(config);
    for (const e of events) l.apply(e);
    expect(l.occurrences).toEqual(r.occurrences);
  });
});
