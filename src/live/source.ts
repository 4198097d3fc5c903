/**
 * A topic as an event source: every record of every partition, from the start to the
 * end it had when reading began, decoded as live mode decodes it (events, or rejects
 * naming topic, partition and offset). Partition by partition, in offset order — so a
 * market's events come in the order they were published. The same contract tests run
 * against it and against the file source (tests/contract/sources.ts).
 */
import kafkajs from 'kafkajs';
import type { Metric } from '../model.js';
import type { EventSource, SourceItem } from '../ports.js';
import { readToEnd } from './read.js';
import { InputDecoder } from './records.js';

type KafkaClient = InstanceType<typeof kafkajs.Kafka>;

/** Options of {@link kafkaTopicSource}. */
export interface KafkaTopicSourceOptions {
  kafka: KafkaClient;
  topic: string;
  metric: Metric;
  /** Largest value taken. @default 65536 */
  maxRecordBytes?: number;
}

/** @example for await (const item of kafkaTopicSource({ kafka, topic, metric }).items()) … */
export function kafkaTopicSource(opts: KafkaTopicSourceOptions): EventSource {
  const decoder = new InputDecoder({ metric: opts.metric, ...(opts.maxRecordBytes !== undefined ? { maxRecordBytes: opts.maxRecordBytes } : {}) });
  return {
    async *items(): AsyncGenerator<SourceItem> {
      const byPartition = new Map<number, SourceItem[]>();
      await readToEnd({
        kafka: opts.kafka,
        topic: opts.topic,
        onRecord: (partition, m) => {
          const d = decoder.decode({ topic: opts.topic, partition, offset: Number(m.offset) }, m.key, m.value);
          let list = byPartition.get(partition);
          if (!list) byPartition.set(partition, (list = []));
          list.push(d.ok ? { kind: 'event', ev: d.ev } : { kind: 'reject', reject: d.reject });
        },
      });
      for (const p of [...byPartition.keys()].sort((a, b) => a - b)) yield* byPartition.get(p)!;
    },
    close: async () => {},
  };
}
