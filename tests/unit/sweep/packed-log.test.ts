import { describe, expect, it } from 'vitest';

import type { PairflowEvent, SourcedEvent } from '../../../src/model.js';
import { packLog, unpackLog } from '../../../src/sweep/packed-log.js';
import { mulberry32, randInt } from '../../helpers/random.js';

/** Seeded events of every shape the validator produces: both metrics, withdraws, until, capabilities, Avro positions. */
function events(seed: number, n: number): SourcedEvent[] {
  const rand = mulberry32(seed);
  const caps = ['cold-bag', 'large', 'pet', 'ünïcode'];
  const out: SourcedEvent[] = [];
  for (let i = 0; i < n; i++) {
    const t = 1_700_000_000_000 + randInt(rand, 0, 1e8);
    const market = `m${randInt(rand, 0, 3)}`;
    const id = `u-${randInt(rand, 0, n)}-${rand() < 0.1 ? 'ß✓' : ''}`;
    let event: PairflowEvent;
    const kind = rand();
    if (kind < 0.2) {
      event = { type: 'withdraw', id, market, t, side: rand() < 0.5 ? 'supply' : 'demand' };
    } else {
      const type = kind < 0.6 ? 'supply' : 'demand';
      const ev: Record<string, unknown> = { type, id, market, t, until: rand() < 0.3 ? t + randInt(rand, 0, 1e6) : null };
      if (rand() < 0.5) {
        ev.lat = -90 + rand() * 180;
        ev.lon = -180 + rand() * 360;
      } else {
        ev.x = rand() * 10;
        ev.y = -rand() * 10;
      }
      if (rand() < 0.4) ev[type === 'supply' ? 'has' : 'needs'] = caps.filter(() => rand() < 0.4);
      event = ev as unknown as PairflowEvent;
    }
    const file = rand() < 0.5 ? 'a.jsonl' : 'b.avro';
    const pos = file === 'a.jsonl' ? { file, line: i + 1 } : { file, line: i + 1, block: randInt(rand, 0, 9), record: randInt(rand, 0, 99) };
    out.push({ event, pos, seq: i });
  }
  return out;
}

describe('packLog() / unpackLog()', () => {
  it('gives back every event, in order, equal field by field (seeded)', () => {
    for (const seed of [1, 2, 3]) {
      const evs = events(seed, 500);
      const back = [...unpackLog(packLog(evs))];
      expect(back, `seed ${seed}`).toEqual(evs);
      // Same fields present, not just equal values: `until: null` stays, absent stays absent.
      for (let i = 0; i < evs.length; i++) expect(Object.keys(back[i]!.event).sort(), `seed ${seed} event ${i}`).toEqual(Object.keys(evs[i]!.event).sort());
    }
  });

  it('packs into shared memory, so worker threads read one copy', () => {
    const p = packLog(events(4, 50));
    for (const a of [p.num, p.int, p.strBytes, p.strStart, p.listStart, p.listItems]) expect(a.buffer).toBeInstanceOf(SharedArrayBuffer);
  });

  it('handles an empty log', () => {
    expect([...unpackLog(packLog([]))]).toEqual([]);
  });

  it('hands out a fresh capability array per event', () => {
    const evs = events(5, 200).filter((e) => e.event.type !== 'withdraw' && (e.event.has ?? e.event.needs) !== undefined);
    const back = [...unpackLog(packLog(evs))];
    expect(back.length).toBeGreaterThan(2);
    const a = back[0]!.event as { has?: string[]; needs?: string[] };
    const b = back[1]!.event as { has?: string[]; needs?: string[] };
    expect(a.has ?? a.needs).not.toBe(b.has ?? b.needs);
  });
});
