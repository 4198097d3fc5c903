/** Records on the bus (SPEC §7): input values told apart per record, refused with a code; outputs in both formats. */
import { describe, expect, it } from 'vitest';
import { toEventRecord, toJsonLine } from '../../../src/consume/schema.js';
import { createEventSerde } from '../../../src/kafka/index.js';
import { DEFAULT_MAX_RECORD_BYTES, InputDecoder, OutputDecoder, OutputEncoder } from '../../../src/live/records.js';
import type { PairflowEvent } from '../../../src/model.js';
import type { AssignmentRecord, EpochRecord, ExpiryRecord } from '../../../src/ports.js';

const origin = { topic: 'events', partition: 2, offset: 41 };
const ev: PairflowEvent = { type: 'supply', id: 'c7', market: 'harbour', t: 1_790_000_000_000, until: null, lat: 48.1, lon: 11.5, has: ['cold-bag'] };

describe('InputDecoder', () => {
  const dec = new InputDecoder({ metric: 'haversine' });
  const serde = createEventSerde();

  it('takes a JSON value and an Avro single-object value of the same event alike, positioned at topic, partition and offset', () => {
    const a = dec.decode(origin, Buffer.from('harbour'), Buffer.from(toJsonLine(ev)));
    const b = dec.decode(origin, Buffer.from('harbour'), serde.encode(toEventRecord(ev)));
    expect(a).toEqual(b);
    expect(a.ok && a.ev).toMatchObject({ event: ev, seq: 41, pos: { file: 'events', partition: 2, offset: 41, line: 41 } });
  });

  it('refuses each kind of bad record with its code, keeping an excerpt', () => {
    const avro = serde.encode(toEventRecord(ev));
    const other = Buffer.from(avro);
    other.writeBigUInt64LE(1n, 2);
    const cases: Array<[string, Buffer | null, Buffer | null]> = [
      ['bad-json', Buffer.from('harbour'), Buffer.from('{"type":')],
      ['bad-json', Buffer.from('harbour'), null],
      ['bad-avro', Buffer.from('harbour'), avro.subarray(0, 6)],
      ['bad-avro', Buffer.from('harbour'), avro.subarray(0, 13)],
      ['unknown-fingerprint', Buffer.from('harbour'), other],
      ['invalid-event', Buffer.from('harbour'), Buffer.from(JSON.stringify({ ...ev, lat: 95 }))],
      ['key-mismatch', Buffer.from('old-town'), Buffer.from(toJsonLine(ev))],
      ['key-mismatch', null, Buffer.from(toJsonLine(ev))],
      ['oversized', Buffer.from('harbour'), Buffer.alloc(DEFAULT_MAX_RECORD_BYTES + 1, 0x20)],
    ];
    for (const [code, key, value] of cases) {
      const d = dec.decode(origin, key, value);
      expect(d.ok, code).toBe(false);
      if (d.ok) continue;
      expect(d.code, d.reason).toBe(code);
      expect(d.reject.reason.startsWith(`${code}: `)).toBe(true);
      expect(d.reject.pos).toMatchObject({ file: 'events', partition: 2, offset: 41 });
      expect(d.reject.raw.length).toBeLessThanOrEqual(512);
    }
  });

  it('takes a record up to maxRecordBytes and refuses one byte more', () => {
    const line = Buffer.from(toJsonLine(ev));
    const tight = new InputDecoder({ metric: 'haversine', maxRecordBytes: line.length });
    expect(tight.decode(origin, Buffer.from('harbour'), line).ok).toBe(true);
    const padded = Buffer.concat([line, Buffer.from(' ')]);
    const d = tight.decode(origin, Buffer.from('harbour'), padded);
    expect(d.ok === false && d.code).toBe('oversized');
  });
});

describe('OutputEncoder / OutputDecoder', () => {
  const a: AssignmentRecord = { market: 'harbour', epoch: 1_790_000_005_000, demandId: 'o1', supplyId: 'c7', demandT: 1_790_000_001_234, supplyT: 1_790_000_000_000, decidedAt: 1_790_000_005_000, travelMin: 3.25, waitMin: 0.0627, cost: 3.3127 };
  const e: ExpiryRecord = { market: 'harbour', side: 'demand', id: 'o2', t: 1, end: 600_001, epoch: 605_000, cost: 30, lat: 1, lon: 2 };
  const w: EpochRecord = { market: 'harbour', epoch: 5000, poolDemand: 3, poolSupply: 4, candidatePairs: 9, matched: 2, tentative: 0, solveMs: 0.1, warm: true, augmentations: 2, primalCost: 7.5, dualObjective: 7.5, priceMin: -1, priceMean: -0.5, priceMax: 0, late: 3 };

  for (const format of ['json', 'avro'] as const) {
    it(`${format}: assignment, expiry, window and reject values decode back to the bus fields`, () => {
      const enc = new OutputEncoder(format);
      const dec = new OutputDecoder();
      const { decidedAt: _d, ...busA } = a;
      expect(dec.decode('assignment', enc.assignment(a), 'x')).toEqual(busA);
      const { lat: _la, lon: _lo, ...busE } = e;
      expect(dec.decode('expired', enc.expired(e), 'x')).toEqual(busE);
      expect(dec.decode('window', enc.window(w), 'x')).toEqual(w);
      const r = dec.decode('reject', enc.reject(origin, 'bad-json', 'not JSON', Buffer.from('{"x"')), 'x');
      expect(r).toMatchObject({ sourceTopic: 'events', partition: 2, offset: 41, reasonCode: 'bad-json', reason: 'not JSON', size: 4 });
      if (format === 'avro') expect(enc.assignment(a).subarray(0, 2)).toEqual(Buffer.from([0xc3, 0x01]));
    });
  }
});
