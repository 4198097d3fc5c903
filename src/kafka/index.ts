/** Kafka edge of pairflow: client factory, Avro message values, event records (docs/kafka.md). */
export { createKafka, parseBrokers, pinoLogCreator, kafkaLogLevelFor, marketPartitioner, kafkaError, verifyConnection, SASL_MECHANISMS } from './client.js';
export type { CreateKafkaOptions, KafkaSecurity, KafkaTls, SaslMechanism, KafkaErrorContext } from './client.js';
export { createAvroSerde, crc64Avro, canonicalSchema, SINGLE_OBJECT_MARKER, SINGLE_OBJECT_HEADER_BYTES } from './avro.js';
export type { AvroSerde } from './avro.js';
export { createEventSerde, eventMessage, readEventValue } from './events.js';
