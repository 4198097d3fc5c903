/**
 * Events as Kafka records: the Avro value of schemas/event.avsc, the market as key (SPEC
 * §3), and the event time as the record timestamp, so a consumer can find the offset of
 * an event time with ListOffsets (kafkajs `admin.fetchTopicOffsetsByTimestamp`).
 */
import type { Message } from 'kafkajs';
import type { Metric, PairflowEvent } from '../model.js';
import { EVENT_SCHEMA, toEventRecord, type EventRecord } from '../consume/schema.js';
import { validateEvent, type ValidationResult } from '../consume/validate.js';
import { createAvroSerde, type AvroSerde } from './avro.js';

/** The serde of {@link EVENT_SCHEMA} (same schema, so same fingerprint, as schemas/event.avsc). */
export function createEventSerde(): AvroSerde<EventRecord> {
  return createAvroSerde<EventRecord>(EVENT_SCHEMA as unknown as Parameters<typeof createAvroSerde>[0]);
}

/**
 * The Kafka message of one validated event: key = market, value = Avro single-object
 * encoding, timestamp = event time.
 * @example await producer.send({ topic, messages: events.map((ev) => eventMessage(serde, ev)) })
 */
export function eventMessage(serde: AvroSerde<EventRecord>, ev: PairflowEvent): Message {
  return { key: ev.market, value: serde.encode(toEventRecord(ev)), timestamp: String(ev.t) };
}

/**
 * Decodes and validates one consumed value. Throws PAIRFLOW_ERR_KAFKA_AVRO when the bytes
 * are not an event record (`where` names it); returns the validation result of
 * src/consume otherwise, so a bad record becomes a reject like a bad file line.
 */
export function readEventValue(serde: AvroSerde<EventRecord>, value: Uint8Array, metric: Metric, where?: string): ValidationResult {
  return validateEvent(serde.decode(value, where), metric);
}
