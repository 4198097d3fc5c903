/**
 * Avro message values for Kafka, in the Avro specification's *single-object encoding*:
 * two marker bytes `C3 01`, the 8-byte little-endian CRC-64-AVRO fingerprint of the
 * writer schema's Parsing Canonical Form, then the Avro binary body. The fingerprint
 * lets a reader refuse a record written with another schema instead of misreading it,
 * without a schema registry. Built on avsc.
 */
import avro from 'avsc';
import { pairflowError } from '../errors.js';

/** The two bytes that open every single-object encoded value (Avro spec 1.8+). */
export const SINGLE_OBJECT_MARKER = Buffer.from([0xc3, 0x01]);

/** Marker plus fingerprint. */
export const SINGLE_OBJECT_HEADER_BYTES = 10;

// CRC-64-AVRO: the Rabin fingerprint the Avro specification defines; EMPTY is its seed.
const EMPTY = 0xc15d213aa4d7a795n;
const MASK64 = 0xffffffffffffffffn;
let table: BigInt64Array | undefined;

function fingerprintTable(): BigInt64Array {
  if (table) return table;
  table = new BigInt64Array(256);
  for (let i = 0; i < 256; i++) {
    let fp = BigInt(i);
    for (let j = 0; j < 8; j++) fp = (fp >> 1n) ^ (EMPTY & -(fp & 1n));
    table[i] = BigInt.asIntN(64, fp);
  }
  return table;
}

/**
 * The CRC-64-AVRO fingerprint of `bytes` as an unsigned 64-bit integer.
 * @example crc64Avro(Buffer.from('"int"')) // 0x7275d51a3f395c8fn
 */
export function crc64Avro(bytes: Uint8Array): bigint {
  const t = fingerprintTable();
  let fp = EMPTY;
  for (const b of bytes) {
    fp = (fp >> 8n) ^ BigInt.asUintN(64, t[Number((fp ^ BigInt(b)) & 0xffn)] as bigint);
  }
  return fp & MASK64;
}

/** The schema's Parsing Canonical Form (avsc drops docs, defaults and aliases). */
export function canonicalSchema(type: avro.Type): string {
  return JSON.stringify(type.schema());
}

/** Encodes and decodes one Avro type as single-object encoded Kafka values. */
export interface AvroSerde<T> {
  /** The avsc type, for callers that need schema resolution or validation. */
  readonly type: avro.Type;
  /** CRC-64-AVRO fingerprint of the schema, unsigned. */
  readonly fingerprint: bigint;
  /** `C3 01` + fingerprint (little-endian). */
  readonly header: Buffer;
  /** Throws PAIRFLOW_ERR_KAFKA_AVRO when `value` does not fit the schema (names the field). */
  encode(value: T): Buffer;
  /**
   * Throws PAIRFLOW_ERR_KAFKA_AVRO when `bytes` lacks the marker, carries another
   * schema's fingerprint, or its body does not decode. `where` names the record in the
   * message (e.g. `topic/partition@offset`).
   */
  decode(bytes: Uint8Array, where?: string): T;
}

/**
 * Builds a serde for one schema.
 * @param schema an Avro schema (parsed JSON, e.g. the contents of `schemas/event.avsc`)
 * @example
 * const serde = createAvroSerde<EventRecord>(EVENT_SCHEMA);
 * await producer.send({ topic, messages: [{ key: ev.market, value: serde.encode(rec) }] });
 */
export function createAvroSerde<T>(schema: avro.Schema): AvroSerde<T> {
  // Plain objects out (not avsc's record classes), so decoded values compare and spread simply.
  const type = avro.Type.forSchema(schema);
  const fingerprint = crc64Avro(Buffer.from(canonicalSchema(type), 'utf8'));
  const header = Buffer.alloc(SINGLE_OBJECT_HEADER_BYTES);
  SINGLE_OBJECT_MARKER.copy(header, 0);
  header.writeBigUInt64LE(fingerprint, 2);
  const isRecord = type.typeName === 'record';
  const schemaName = 'name' in type && typeof type.name === 'string' ? type.name : String(type.typeName);

  return {
    type,
    fingerprint,
    header,
    encode(value: T): Buffer {
      const problems: string[] = [];
      if (!type.isValid(value, { errorHook: (path, v) => problems.push(`${path.join('.') || '(value)'}=${shorten(v)}`) })) {
        throw pairflowError('PAIRFLOW_ERR_KAFKA_AVRO', {
          where: 'encode',
          detail: `value does not fit Avro schema ${schemaName}: ${problems.join(', ')}`,
        });
      }
      return Buffer.concat([header, type.toBuffer(value)]);
    },
    decode(bytes: Uint8Array, where = 'message'): T {
      const buf = Buffer.isBuffer(bytes) ? bytes : Buffer.from(bytes.buffer, bytes.byteOffset, bytes.byteLength);
      if (buf.length < SINGLE_OBJECT_HEADER_BYTES || buf[0] !== 0xc3 || buf[1] !== 0x01) {
        throw pairflowError('PAIRFLOW_ERR_KAFKA_AVRO', {
          where,
          detail: `expected an Avro single-object value (C3 01 + fingerprint), got ${buf.subarray(0, 10).toString('hex') || 'no bytes'}`,
        });
      }
      const got = buf.readBigUInt64LE(2);
      if (got !== fingerprint) {
        throw pairflowError('PAIRFLOW_ERR_KAFKA_AVRO', {
          where,
          detail: `written with schema fingerprint ${got.toString(16)}, expected ${fingerprint.toString(16)} (${schemaName})`,
        });
      }
      try {
        const value: unknown = type.fromBuffer(buf.subarray(SINGLE_OBJECT_HEADER_BYTES));
        return (isRecord ? { ...(value as object) } : value) as T;
      } catch (err) {
        throw pairflowError('PAIRFLOW_ERR_KAFKA_AVRO', { where, detail: `Avro body does not decode: ${(err as Error).message}` }, err);
      }
    },
  };
}

function shorten(v: unknown): string {
  let s: string;
  try {
    s = JSON.stringify(v) ?? String(v);
  } catch {
    s = String(v);
  }
  return s.length > 40 ? `${s.slice(0, 37)}...` : s;
}
