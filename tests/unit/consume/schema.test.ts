import { readFileSync } from 'node:fs';
import avro from 'avsc';
import { describe, expect, it } from 'vitest';
import { EVENT_SCHEMA, toEventRecord, toJsonLine } from '../../../src/consume/schema.js';
import { validateEvent } from '../../../src/consume/validate.js';
import type { PairflowEvent } from '../../../src/model.js';
import { mulberry32, randInt } from '../../helpers/random.js';

function randomEvent(rand: () => number, i: number, metric: 'haversine' | 'euclidean'): PairflowEvent {
  const t = 1_772_409_600_000 + randInt(rand, 0, 86_400_000);
  const u = rand();
  if (u < 0.2) return { type: 'withdraw', id: `w${i}`, market: 'm', t, side: rand() < 0.5 ? 'supply' : 'demand' };
  const type = u < 0.6 ? 'supply' : 'demand';
  const where = metric === 'haversine' ? { lat: rand() * 180 - 90, lon: rand() * 360 - 180 } : { x: rand() * 40 - 20, y: rand() * 40 - 20 };
  const tags = rand() < 0.4 ? (rand() < 0.5 ? ['cold-bag'] : ['cold-bag', 'large-box']) : undefined;
  return { type, id: `${type[0]}${i}`, market: `m${randInt(rand, 1, 4)}`, t, until: rand() < 0.5 ? null : t + randInt(rand, 0, 3_600_000), ...where, ...(tags ? (type === 'supply' ? { has: tags } : { needs: tags }) : {}) };
}

describe('EVENT_SCHEMA', () => {
  it('is the schema stored in schemas/event.avsc', () => {
    const file = JSON.parse(readFileSync(new URL('../../../schemas/event.avsc', import.meta.url), 'utf8')) as unknown;
    expect(file).toEqual(JSON.parse(JSON.stringify(EVENT_SCHEMA)));
  });

  it('keeps type a string, so an unknown type is a validation reject and not a decode failure', () => {
    const type = avro.Type.forSchema(EVENT_SCHEMA as unknown as avro.Schema);
    const rec = { ...toEventRecord({ type: 'withdraw', id: 'a', market: 'm', t: 1, side: 'demand' }), type: 'order' };
    expect(type.isValid(rec)).toBe(true);
  });
});

describe('toEventRecord() and toJsonLine()', () => {
  it('round-trip every event through avsc binary encoding and through JSON (seeded)', () => {
    const seed = 31337;
    const rand = mulberry32(seed);
    // Reference: avsc 5.7.9 encodes and decodes the records.
    const type = avro.Type.forSchema(EVENT_SCHEMA as unknown as avro.Schema);
    for (let i = 0; i < 300; i += 1) {
      const metric = rand() < 0.5 ? 'haversine' : 'euclidean';
      const ev = randomEvent(rand, i, metric);
      const back = type.fromBuffer(type.toBuffer(toEventRecord(ev))) as unknown;
      expect(validateEvent(back, metric), `seed ${seed}, event ${i}`).toEqual({ ok: true, event: ev });
      expect(validateEvent(JSON.parse(toJsonLine(ev)), metric), `seed ${seed}, event ${i}`).toEqual({ ok: true, event: ev });
    }
  });

  it('write JSON fields in a fixed order and leave absent ones out', () => {
    expect(toJsonLine({ type: 'supply', id: 's', market: 'm', t: 5, until: null, lat: 1, lon: 2, has: ['cold-bag'] })).toBe('{"type":"supply","id":"s","market":"m","t":5,"lat":1,"lon":2,"has":["cold-bag"]}');
    expect(toJsonLine({ type: 'withdraw', id: 'o', market: 'm', t: 5, side: 'demand' })).toBe('{"type":"withdraw","id":"o","market":"m","t":5,"side":"demand"}');
  });
});
