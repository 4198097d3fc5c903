import { readFileSync } from 'node:fs';
import { describe, expect, it } from 'vitest';
import type avro from 'avsc';
import type { PairflowEvent } from '../../../src/model.js';
import { toEventRecord } from '../../../src/consume/schema.js';
import { createAvroSerde } from '../../../src/kafka/avro.js';
import { createEventSerde, eventMessage, readEventValue } from '../../../src/kafka/events.js';
import { mulberry32, randInt } from '../../helpers/random.js';

function randomEvent(rand: () => number, i: number): PairflowEvent {
  const t = 1_780_000_000_000 + randInt(rand, 0, 86_400_000);
  const market = `m${randInt(rand, 0, 3)}`;
  const kind = randInt(rand, 0, 2);
  if (kind === 0) return { type: 'withdraw', id: `u${i}`, market, t, side: rand() < 0.5 ? 'supply' : 'demand' };
  const until = rand() < 0.5 ? null : t + randInt(rand, 0, 3_600_000);
  if (kind === 1) {
    return { type: 'supply', id: `s${i}`, market, t, until, lat: rand() * 170 - 85, lon: rand() * 350 - 175, ...(rand() < 0.3 ? { has: ['cold-bag'] } : {}) };
  }
  return { type: 'demand', id: `d${i}`, market, t, until, lat: rand() * 170 - 85, lon: rand() * 350 - 175, ...(rand() < 0.3 ? { needs: ['cold-bag'] } : {}) };
}

describe('createEventSerde()', () => {
  it('has the same fingerprint as schemas/event.avsc, so files and topics share one schema', () => {
    const file = JSON.parse(readFileSync(new URL('../../../schemas/event.avsc', import.meta.url), 'utf8')) as avro.Schema;
    expect(createEventSerde().fingerprint).toBe(createAvroSerde(file).fingerprint);
  });
});

describe('eventMessage() and readEventValue()', () => {
  it('key by market, stamp with event time, and read back the same validated event', () => {
    const seed = 77;
    const rand = mulberry32(seed);
    const serde = createEventSerde();
    for (let i = 0; i < 200; i++) {
      const ev = randomEvent(rand, i);
      const msg = eventMessage(serde, ev);
      expect(msg.key, `seed ${seed} #${i}`).toBe(ev.market);
      expect(msg.timestamp, `seed ${seed} #${i}`).toBe(String(ev.t));
      const res = readEventValue(serde, msg.value as Buffer, 'haversine', `t/0@${i}`);
      expect(res.ok, `seed ${seed} #${i}: ${res.ok ? '' : res.reason}`).toBe(true);
      if (res.ok) expect(toEventRecord(res.event), `seed ${seed} #${i}`).toEqual(toEventRecord(ev));
    }
  });

  it('readEventValue() turns a well-encoded but invalid event into a validation failure, not a throw', () => {
    const serde = createEventSerde();
    const bad = serde.encode({ ...toEventRecord({ type: 'withdraw', id: 'x', market: 'm', t: 5, side: 'demand' }), type: 'teleport' });
    const res = readEventValue(serde, bad, 'haversine');
    expect(res.ok).toBe(false);
  });

  it('readEventValue() throws PAIRFLOW_ERR_KAFKA_AVRO for bytes that are not an event record', () => {
    const serde = createEventSerde();
    expect(() => readEventValue(serde, Buffer.from('{"type":"supply"}'), 'haversine', 'in/3@41')).toThrowError(
      expect.objectContaining({ code: 'PAIRFLOW_ERR_KAFKA_AVRO', message: expect.stringContaining('in/3@41') }),
    );
  });
});
