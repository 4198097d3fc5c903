/**
 * `pairflow publish` (SPEC §6): a log's valid events onto a topic in event-time order,
 * keyed by market (so a market's events share a partition, in order), stamped with
 * their event time; or, with `raw`, every line of a JSON Lines log as it is, in file
 * order, bad ones included (to try a processor's rejects).
 */
import { createReadStream } from 'node:fs';
import { createGunzip } from 'node:zlib';
import kafkajs from 'kafkajs';
import type { Message, Producer } from 'kafkajs';
import type { Logger } from 'pino';
import { loadLog, logFormatOf } from '../consume/index.js';
import { splitLines } from '../consume/lines.js';
import { pairflowError } from '../errors.js';
import { createEventSerde, marketPartitioner } from '../kafka/index.js';
import type { Metric, Reject } from '../model.js';
import { eventValue, type BusFormat } from './records.js';
import { ensureTopics, INPUT_TOPIC_CONFIG, partitionCounts } from './topics.js';

type KafkaClient = InstanceType<typeof kafkajs.Kafka>;

/** Options of {@link publishLog}. */
export interface PublishOptions {
  kafka: KafkaClient;
  topic: string;
  paths: readonly string[];
  /** Partitions of the topic when it has to be created. @default 4 */
  partitions?: number;
  /** Value format. @default 'json' */
  format?: BusFormat;
  /** Every line as it is, in file order (JSON Lines only). @default false */
  raw?: boolean;
  metric: Metric;
  /** Records per produce request. @default 2000 */
  batchSize?: number;
  logger?: Logger;
  onReject?: (r: Reject) => void;
  onProgress?: (done: number, total: number) => void;
}

/** What {@link publishLog} did. */
export interface PublishResult {
  topic: string;
  /** Records written. */
  published: number;
  /** Lines or records of the log that were not valid events (not written, unless raw). */
  rejects: number;
  partitions: number;
  created: boolean;
  /** Records per partition. */
  perPartition: number[];
}

async function openProducer(kafka: KafkaClient): Promise<Producer> {
  const producer = kafka.producer({
    createPartitioner: marketPartitioner,
    idempotent: true,
    maxInFlightRequests: 1,
    allowAutoTopicCreation: false,
  });
  await producer.connect();
  return producer;
}

async function* rawLines(path: string): AsyncGenerator<{ line: number; text: Buffer }> {
  const format = logFormatOf(path);
  if (format === 'avro') {
    throw pairflowError('PAIRFLOW_ERR_CLI_OPTION', { option: '--raw', detail: `${path}: --raw publishes lines as they are, so it takes JSON Lines (.jsonl, .jsonl.gz), not Avro` });
  }
  const stream = format === 'jsonl.gz' ? createReadStream(path).pipe(createGunzip()) : createReadStream(path);
  let line = 0;
  for await (const pieces of splitLines(stream as AsyncIterable<Buffer>)) {
    for (const piece of pieces) {
      line = piece.line;
      // Blank lines are no records in a file either; a line too long to keep goes as its head.
      if (piece.kind === 'line' && piece.bytes.toString('utf8').trim() !== '') yield { line, text: piece.bytes };
      else if (piece.kind === 'long') yield { line, text: piece.head };
      else if (piece.kind === 'error') throw pairflowError('PAIRFLOW_ERR_INPUT_FORMAT', { file: path, line, detail: `cannot be read past this line: ${(piece.error as Error).message}` });
    }
  }
}

/**
 * Publishes a log to a topic, creating the topic (`partitions`, never deleting records
 * for their age) when it is missing.
 * @example await publishLog({ kafka, topic: 'events', paths: ['day.jsonl.gz'], metric: 'haversine' })
 */
export async function publishLog(opts: PublishOptions): Promise<PublishResult> {
  const { kafka, topic } = opts;
  const format = opts.format ?? 'json';
  const existing = (await partitionCounts(kafka, [topic])).get(topic);
  const partitions = existing ?? opts.partitions ?? 4;
  if (existing !== undefined && opts.partitions !== undefined && opts.partitions !== existing) {
    opts.logger?.warn({ topic, partitions: existing, asked: opts.partitions }, 'publish: the topic exists with another partition count; keeping it');
  }
  if (existing === undefined) await ensureTopics(kafka, [{ topic, config: INPUT_TOPIC_CONFIG }], partitions, opts.logger);
  const perPartition = new Array<number>(partitions).fill(0);
  const batchSize = opts.batchSize ?? 2000;
  const producer = await openProducer(kafka);
  let published = 0;
  let rejects = 0;
  const send = async (messages: Message[]): Promise<void> => {
    if (messages.length === 0) return;
    await producer.sendBatch({ topicMessages: [{ topic, messages }] });
    published += messages.length;
  };
  try {
    if (opts.raw) {
      let batch: Message[] = [];
      let lineNo = 0;
      for (const path of opts.paths) {
        for await (const { text } of rawLines(path)) {
          lineNo++;
          let key: string | null = null;
          try {
            const obj = JSON.parse(text.toString('utf8')) as { market?: unknown };
            if (typeof obj?.market === 'string' && obj.market !== '') key = obj.market;
          } catch {
            // Not JSON: published as it is, without a key.
          }
          // Keyless lines go round the partitions, so a run of them is spread the same way each time.
          const partition = key === null ? (lineNo - 1) % partitions : undefined;
          const msg: Message = { key, value: text, ...(partition !== undefined ? { partition } : {}) };
          batch.push(msg);
          if (batch.length >= batchSize) {
            await send(batch);
            batch = [];
            opts.onProgress?.(published, 0);
          }
        }
      }
      await send(batch);
    } else {
      const loaded = await loadLog([...opts.paths], { metric: opts.metric, strict: false, ...(opts.onReject ? { onReject: opts.onReject } : {}) });
      rejects = loaded.rejects.length;
      const serde = format === 'avro' ? createEventSerde() : null;
      const total = loaded.events.length;
      for (let i = 0; i < total; i += batchSize) {
        const messages = loaded.events.slice(i, i + batchSize).map(({ event }) => ({
          key: event.market, value: eventValue(event, format, serde), timestamp: String(event.t),
        }));
        await send(messages);
        opts.onProgress?.(published, total);
      }
    }
  } finally {
    await producer.disconnect().catch(() => {});
  }
  const admin = kafka.admin();
  await admin.connect();
  try {
    for (const o of await admin.fetchTopicOffsets(topic)) perPartition[o.partition] = Number(o.high) - Number(o.low);
  } finally {
    await admin.disconnect();
  }
  return { topic, published, rejects, partitions, created: existing === undefined, perPartition };
}
