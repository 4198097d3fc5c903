/**
 * Records on the bus (SPEC §7): input values told apart per record (Avro single-object
 * encoding by its marker `C3 01`, JSON otherwise) and turned into events or rejects,
 * and output values in JSON or Avro single-object encoding (schemas/*.avsc).
 */
import { readFileSync } from 'node:fs';
import type { Schema } from 'avsc';
import { toEventRecord, toJsonLine, type EventRecord } from '../consume/schema.js';
import { validateEvent } from '../consume/validate.js';
import { createAvroSerde, createEventSerde, type AvroSerde } from '../kafka/index.js';
import type { Metric, PairflowEvent, Reject, SourcedEvent } from '../model.js';
import type { AssignmentRecord, EpochRecord, ExpiryRecord } from '../ports.js';

/** Output value format (`--format`). */
export type BusFormat = 'json' | 'avro';

/** Why an input record was refused: the `pairflow-reason` header and the reject's `reasonCode`. */
export type RejectCode = 'bad-json' | 'bad-avro' | 'unknown-fingerprint' | 'invalid-event' | 'key-mismatch' | 'oversized' | 'too-late';

/** Where a consumed record came from. */
export interface RecordOrigin {
  topic: string;
  partition: number;
  /** Offset as a number (offsets stay far below 2^53). */
  offset: number;
}

/** A consumed record turned into an event, or refused with a code and a reason. */
export type DecodedRecord =
  | { ok: true; ev: SourcedEvent }
  | { ok: false; code: RejectCode; reason: string; reject: Reject };

/** The largest input value taken, in bytes. @default 65536 */
export const DEFAULT_MAX_RECORD_BYTES = 65_536;

/** Bytes of the raw value kept in a reject. */
const EXCERPT_BYTES = 256;

/** The position of a consumed record: file = topic, line = offset (SourcePosition's Kafka form). */
export function kafkaPosition(o: RecordOrigin): SourcedEvent['pos'] {
  return { file: o.topic, line: o.offset, partition: o.partition, offset: o.offset };
}

function rawText(value: Buffer): string {
  const cut = value.subarray(0, EXCERPT_BYTES);
  // Binary values (Avro) as hex, text as text: either way a person can read the excerpt.
  const text = cut.toString('utf8');
  return cut[0] === 0xc3 || text.includes('\uFFFD') ? cut.toString('hex') : text;
}

/**
 * Decodes input values of one topic. An Avro value must carry the fingerprint of
 * schemas/event.avsc; anything else starting with the marker is refused.
 */
export class InputDecoder {
  private readonly serde: AvroSerde<EventRecord> = createEventSerde();
  private readonly metric: Metric;
  private readonly maxBytes: number;

  constructor(opts: { metric: Metric; maxRecordBytes?: number }) {
    this.metric = opts.metric;
    this.maxBytes = opts.maxRecordBytes ?? DEFAULT_MAX_RECORD_BYTES;
  }

  /** One record: its key (the market, SPEC §7) and value. */
  decode(origin: RecordOrigin, key: Buffer | null, value: Buffer | null): DecodedRecord {
    const pos = kafkaPosition(origin);
    const v = value ?? Buffer.alloc(0);
    const refuse = (code: RejectCode, reason: string): DecodedRecord => ({
      ok: false, code, reason, reject: { pos, reason: `${code}: ${reason}`, raw: rawText(v) },
    });
    if (v.length > this.maxBytes) return refuse('oversized', `value of ${v.length} bytes, more than the ${this.maxBytes} taken`);
    let obj: unknown;
    if (v.length >= 2 && v[0] === 0xc3 && v[1] === 0x01) {
      if (v.length < 10) return refuse('bad-avro', `Avro single-object value cut short (${v.length} bytes, the header alone is 10)`);
      if (v.readBigUInt64LE(2) !== this.serde.fingerprint) {
        return refuse('unknown-fingerprint', `schema fingerprint ${v.readBigUInt64LE(2).toString(16)}, expected ${this.serde.fingerprint.toString(16)} (schemas/event.avsc)`);
      }
      try {
        obj = this.serde.decode(v, `${origin.topic}/${origin.partition}@${origin.offset}`);
      } catch (err) {
        return refuse('bad-avro', (err as Error).message);
      }
    } else {
      try {
        obj = JSON.parse(v.toString('utf8'));
      } catch (err) {
        return refuse('bad-json', v.length === 0 ? 'empty value, expected one JSON object' : `not JSON: ${(err as Error).message}`);
      }
    }
    const res = validateEvent(obj, this.metric);
    if (!res.ok) return refuse('invalid-event', res.reason);
    const market = res.event.market;
    const k = key === null ? null : key.toString('utf8');
    if (k !== market) {
      return refuse('key-mismatch', `record key ${k === null ? 'missing' : JSON.stringify(k)}, expected the market ${JSON.stringify(market)} (markets are partition keys)`);
    }
    return { ok: true, ev: { event: res.event, pos, seq: origin.offset } };
  }
}

/** A reject record's value fields (JSON form; Avro carries the excerpt as bytes). */
export interface RejectValue {
  sourceTopic: string;
  partition: number;
  offset: number;
  reasonCode: RejectCode;
  reason: string;
  excerpt: string;
  size: number;
}

const SCHEMA_DIR = new URL('../../schemas/', import.meta.url);

function loadSchema(name: string): Schema {
  return JSON.parse(readFileSync(new URL(name, SCHEMA_DIR), 'utf8')) as Schema;
}

/** Encodes pairflow's output records in one format. */
export class OutputEncoder {
  readonly format: BusFormat;
  private readonly avro: {
    assignment: AvroSerde<Record<string, unknown>>;
    expired: AvroSerde<Record<string, unknown>>;
    window: AvroSerde<Record<string, unknown>>;
    reject: AvroSerde<Record<string, unknown>>;
  } | null;

  constructor(format: BusFormat) {
    this.format = format;
    this.avro = format === 'avro'
      ? {
          assignment: createAvroSerde(loadSchema('assignment.avsc')),
          expired: createAvroSerde(loadSchema('expired.avsc')),
          window: createAvroSerde(loadSchema('window.avsc')),
          reject: createAvroSerde(loadSchema('reject.avsc')),
        }
      : null;
  }

  assignment(a: AssignmentRecord): Buffer {
    const v = {
      market: a.market, epoch: a.epoch, demandId: a.demandId, supplyId: a.supplyId, demandT: a.demandT, supplyT: a.supplyT,
      travelMin: a.travelMin, waitMin: a.waitMin, cost: a.cost,
    };
    return this.avro ? this.avro.assignment.encode(v) : Buffer.from(JSON.stringify(v));
  }

  expired(e: ExpiryRecord): Buffer {
    const v = { market: e.market, side: e.side, id: e.id, t: e.t, end: e.end, epoch: e.epoch, cost: e.cost };
    return this.avro ? this.avro.expired.encode(v) : Buffer.from(JSON.stringify(v));
  }

  window(s: EpochRecord): Buffer {
    const v = {
      market: s.market, epoch: s.epoch, poolDemand: s.poolDemand, poolSupply: s.poolSupply, candidatePairs: s.candidatePairs,
      matched: s.matched, tentative: s.tentative, solveMs: s.solveMs, warm: s.warm, augmentations: s.augmentations,
      primalCost: s.primalCost, dualObjective: s.dualObjective, priceMin: s.priceMin, priceMean: s.priceMean, priceMax: s.priceMax,
      late: s.late,
    };
    return this.avro ? this.avro.window.encode(v) : Buffer.from(JSON.stringify(v));
  }

  reject(origin: RecordOrigin, code: RejectCode, reason: string, value: Buffer | null): Buffer {
    const v = value ?? Buffer.alloc(0);
    const cut = v.subarray(0, EXCERPT_BYTES);
    const base = { sourceTopic: origin.topic, partition: origin.partition, offset: origin.offset, reasonCode: code, reason, size: v.length };
    if (this.avro) return this.avro.reject.encode({ ...base, excerpt: Buffer.from(cut) });
    const json: RejectValue = { ...base, excerpt: rawText(v) };
    return Buffer.from(JSON.stringify(json));
  }
}

/** Decodes pairflow's own output values (either format, told apart per record). */
export class OutputDecoder {
  private readonly serdes = {
    assignment: createAvroSerde<AssignmentValue>(loadSchema('assignment.avsc')),
    expired: createAvroSerde<ExpiredValue>(loadSchema('expired.avsc')),
    window: createAvroSerde<Record<string, unknown>>(loadSchema('window.avsc')),
    reject: createAvroSerde<Record<string, unknown>>(loadSchema('reject.avsc')),
  };

  decode<K extends keyof OutputDecoder['serdes']>(kind: K, value: Buffer, where: string): ReturnType<OutputDecoder['serdes'][K]['decode']> {
    if (value.length >= 2 && value[0] === 0xc3 && value[1] === 0x01) return this.serdes[kind].decode(value, where) as ReturnType<OutputDecoder['serdes'][K]['decode']>;
    return JSON.parse(value.toString('utf8')) as ReturnType<OutputDecoder['serdes'][K]['decode']>;
  }
}

/** An assignment as it travels on the bus. */
export interface AssignmentValue {
  market: string;
  epoch: number;
  demandId: string;
  supplyId: string;
  demandT: number;
  supplyT: number;
  travelMin: number;
  waitMin: number;
  cost: number;
}

/** An expiry as it travels on the bus. */
export interface ExpiredValue {
  market: string;
  side: 'demand' | 'supply';
  id: string;
  t: number;
  end: number;
  epoch: number;
  cost: number;
}

/** The value of an event record for `pairflow publish`. */
export function eventValue(ev: PairflowEvent, format: BusFormat, serde: AvroSerde<EventRecord> | null): Buffer {
  if (format === 'avro') return serde!.encode(toEventRecord(ev));
  return Buffer.from(toJsonLine(ev));
}
