import { readFileSync } from 'node:fs';
import { describe, expect, it } from 'vitest';
import type avro from 'avsc';
import { canonicalSchema, crc64Avro, createAvroSerde } from '../../../src/kafka/avro.js';
import { mulberry32, randInt } from '../../helpers/random.js';
import avsc from 'avsc';

const eventSchema = JSON.parse(readFileSync(new URL('../../../schemas/event.avsc', import.meta.url), 'utf8')) as avro.Schema;

interface Rec {
  type: string; id: string; market: string; t: number; until: number | null;
  lat: number | null; lon: number | null; x: number | null; y: number | null;
  has: string[] | null; needs: string[] | null; side: string | null;
}

function randomRecord(rand: () => number): Rec {
  const maybe = <T>(v: T): T | null => (rand() < 0.5 ? v : null);
  return {
    type: ['supply', 'demand', 'withdraw', 'unknown-kind'][randInt(rand, 0, 3)] as string,
    id: `id-${randInt(rand, 0, 1e6)}-é`,
    market: `m${randInt(rand, 0, 9)}`,
    t: randInt(rand, 0, 2 ** 52),
    until: maybe(randInt(rand, 0, 2 ** 52)),
    lat: maybe(rand() * 180 - 90),
    lon: maybe(rand() * 360 - 180),
    x: maybe(rand() * 1e4),
    y: maybe(-rand() * 1e4),
    has: maybe(Array.from({ length: randInt(rand, 0, 3) }, (_, i) => `cap${i}`)),
    needs: maybe([]),
    side: maybe(rand() < 0.5 ? 'supply' : 'demand'),
  };
}

describe('crc64Avro()', () => {
  // Expected values from Apache Avro's own fingerprint tests (lang/ruby test_fingerprints.rb:
  // "int" -> 0x7275d51a3f395c8f) and linkedin/goavro crc64avro_test.go ("string").
  it('matches the published CRC-64-AVRO fingerprints of "int" and "string"', () => {
    expect(crc64Avro(Buffer.from('"int"'))).toBe(0x7275d51a3f395c8fn);
    expect(crc64Avro(Buffer.from('"string"'))).toBe(0x8f014872634503c7n);
  });
});

describe('canonicalSchema()', () => {
  it('gives the Parsing Canonical Form: full names, docs and defaults stripped, attributes in spec order', () => {
    // Rules [FULLNAMES], [STRIP], [ORDER] of the Avro 1.11 specification, applied by hand.
    const type = avsc.Type.forSchema({
      type: 'record', namespace: 'a.b', name: 'R', doc: 'x',
      fields: [{ name: 'f', type: 'int', default: 1, doc: 'y' }, { name: 'g', type: ['null', 'string'], default: null }],
    } as avro.Schema);
    expect(canonicalSchema(type)).toBe('{"name":"a.b.R","type":"record","fields":[{"name":"f","type":"int"},{"name":"g","type":["null","string"]}]}');
  });
});

describe('createAvroSerde()', () => {
  it('writes the single-object header C3 01 + little-endian fingerprint', () => {
    // Header bytes from Apache Avro's Ruby test_single_object_encoding_header for "int".
    const serde = createAvroSerde<number>('int');
    expect([...serde.header]).toEqual([0xc3, 0x01, 0x8f, 0x5c, 0x39, 0x3f, 0x1a, 0xd5, 0x75, 0x72]);
    const bytes = serde.encode(-3);
    expect([...bytes.subarray(0, 10)]).toEqual([...serde.header]);
    // Avro binary ints are zig-zag varints: -3 -> 5 (Avro specification, "Binary Encoding").
    expect([...bytes.subarray(10)]).toEqual([5]);
    expect(serde.decode(bytes)).toBe(-3);
  });

  it('round-trips seeded event records of schemas/event.avsc exactly, as plain objects', () => {
    const seed = 4242;
    const rand = mulberry32(seed);
    const serde = createAvroSerde<Rec>(eventSchema);
    for (let i = 0; i < 300; i++) {
      const rec = randomRecord(rand);
      const back = serde.decode(serde.encode(rec));
      expect(back, `seed ${seed}, record ${i}`).toEqual(rec);
      expect(Object.getPrototypeOf(back), `seed ${seed}, record ${i}`).toBe(Object.prototype);
    }
  });

  it('decode() refuses bytes without the marker, with another schema, or with a broken body', () => {
    const serde = createAvroSerde<Rec>(eventSchema);
    const good = serde.encode(randomRecord(mulberry32(7)));
    const other = createAvroSerde<string>('string').encode('hello');
    const cases: Array<[string, Uint8Array]> = [
      ['empty', new Uint8Array(0)],
      ['plain JSON', Buffer.from('{"type":"supply"}')],
      ['no marker', good.subarray(2)],
      ['other schema', other],
      ['truncated body', good.subarray(0, good.length - 3)],
      ['trailing bytes', Buffer.concat([good, Buffer.from([1, 2])])],
    ];
    for (const [label, bytes] of cases) {
      expect(() => serde.decode(bytes, 'topic/0@12'), label).toThrowError(expect.objectContaining({ code: 'PAIRFLOW_ERR_KAFKA_AVRO' }));
    }
  });

  it('decode() accepts a Uint8Array view into a larger buffer', () => {
    const serde = createAvroSerde<string>('string');
    const bytes = serde.encode('pool');
    const big = new Uint8Array(bytes.length + 8);
    big.set(bytes, 4);
    expect(serde.decode(big.subarray(4, 4 + bytes.length))).toBe('pool');
  });

  it('encode() refuses a value that does not fit the schema, naming the field', () => {
    const serde = createAvroSerde<Rec>(eventSchema);
    const rec = { ...randomRecord(mulberry32(9)), t: 'soon' as unknown as number };
    try {
      serde.encode(rec);
      expect.unreachable('encode should have thrown');
    } catch (err) {
      expect((err as { code: string }).code).toBe('PAIRFLOW_ERR_KAFKA_AVRO');
      expect((err as { params: { detail: string } }).params.detail).toContain('t=');
    }
  });

  it('the event schema fingerprint changes when the schema does, so old readers refuse new records', () => {
    const changed = JSON.parse(JSON.stringify(eventSchema)) as { fields: Array<{ name: string }> };
    changed.fields.push({ name: 'extra', type: ['null', 'int'], default: null } as never);
    const a = createAvroSerde<Rec>(eventSchema);
    const b = createAvroSerde<Rec>(changed as avro.Schema);
    expect(a.fingerprint).not.toBe(b.fingerprint);
    const rec = randomRecord(mulberry32(11));
    expect(() => a.decode(b.encode({ ...rec, extra: null } as Rec))).toThrowError(expect.objectContaining({ code: 'PAIRFLOW_ERR_KAFKA_AVRO' }));
  });
});
