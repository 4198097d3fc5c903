/**
 * The topics of live mode (SPEC §7): the outputs under a prefix, created with the input
 * topic's partition count so that the outputs and pool state of input partition p can
 * go to partition p, and never deleted for their age (logs replay past event times).
 */
import kafkajs from 'kafkajs';
import type { ITopicConfig } from 'kafkajs';
import type { Logger } from 'pino';
import { pairflowError } from '../errors.js';

type KafkaClient = InstanceType<typeof kafkajs.Kafka>;

/** The topic names under one output prefix. */
export interface LiveTopics {
  assignments: string;
  expired: string;
  windows: string;
  rejects: string;
  pool: string;
}

/** @example liveTopics('city').assignments // 'city.assignments' */
export function liveTopics(prefix: string): LiveTopics {
  return {
    assignments: `${prefix}.assignments`,
    expired: `${prefix}.expired`,
    windows: `${prefix}.windows`,
    rejects: `${prefix}.rejects`,
    pool: `${prefix}.pool`,
  };
}

/** Topic settings for outputs: kept whatever the age of their records. */
export const OUTPUT_TOPIC_CONFIG: ReadonlyArray<{ name: string; value: string }> = [
  { name: 'retention.ms', value: '-1' },
];

/**
 * The pool topic: compacted (the latest state per market and unit), in segments rolled every
 * minute so that compaction keeps up and a restore reads little more than the latest
 * states; records up to 64 MiB (a market with a large pool is one record). A segment
 * must hold a transaction's whole batch of pool records (the broker refuses a batch
 * larger than `segment.bytes`): while a backlog drains, a partition's pools can hold
 * tens of thousands of units (measured: 50,000 units, over 8 MiB, in one partition of a
 * scale-20 city), so segments may grow to 128 MiB and `segment.ms` rolls them.
 */
export const POOL_TOPIC_CONFIG: ReadonlyArray<{ name: string; value: string }> = [
  { name: 'cleanup.policy', value: 'compact' },
  { name: 'segment.bytes', value: String(128 << 20) },
  { name: 'segment.ms', value: '60000' },
  { name: 'min.cleanable.dirty.ratio', value: '0.1' },
  // Every unit that leaves a market leaves a tombstone for its unit record; a restore
  // reads every tombstone still kept, so they go after a minute, not the default day.
  // (A restore that read a unit record whose tombstone went while it read finds a
  // record no market names, and deletes it again.)
  { name: 'delete.retention.ms', value: '60000' },
  { name: 'max.message.bytes', value: String(64 << 20) },
];

/** An input topic made by `pairflow publish`: events keep their event times and are never deleted for their age. */
export const INPUT_TOPIC_CONFIG: ReadonlyArray<{ name: string; value: string }> = [
  { name: 'retention.ms', value: '-1' },
];

/** Partition counts of existing topics (absent ones are left out). */
export async function partitionCounts(kafka: KafkaClient, topics: readonly string[]): Promise<Map<string, number>> {
  const admin = kafka.admin();
  await admin.connect();
  try {
    const existing = new Set(await admin.listTopics());
    const wanted = topics.filter((t) => existing.has(t));
    if (wanted.length === 0) return new Map();
    const meta = await admin.fetchTopicMetadata({ topics: wanted });
    return new Map(meta.topics.map((t) => [t.name, t.partitions.length]));
  } finally {
    await admin.disconnect();
  }
}

/**
 * Creates `topics` with `partitions` partitions where missing; an existing one with
 * another partition count is an error (its partitions would not line up).
 */
export async function ensureTopics(
  kafka: KafkaClient,
  wanted: ReadonlyArray<{ topic: string; config: ReadonlyArray<{ name: string; value: string }> }>,
  partitions: number,
  logger?: Logger,
): Promise<void> {
  const counts = await partitionCounts(kafka, wanted.map((w) => w.topic));
  for (const w of wanted) {
    const n = counts.get(w.topic);
    if (n !== undefined && n !== partitions) {
      throw pairflowError('PAIRFLOW_ERR_KAFKA_TOPIC', {
        topic: w.topic, detail: `has ${n} partitions, expected ${partitions} (one per input partition); delete it or use another --out prefix`,
      });
    }
  }
  const missing: ITopicConfig[] = wanted
    .filter((w) => !counts.has(w.topic))
    .map((w) => ({ topic: w.topic, numPartitions: partitions, configEntries: [...w.config] }));
  if (missing.length === 0) return;
  const admin = kafka.admin();
  await admin.connect();
  try {
    await admin.createTopics({ topics: missing, waitForLeaders: true });
    logger?.info({ topics: missing.map((m) => m.topic), partitions }, 'topics created');
  } catch (err) {
    // Another process may have created them at the same moment.
    const again = await partitionCounts(kafka, missing.map((m) => m.topic));
    if (missing.some((m) => again.get(m.topic) !== partitions)) {
      throw pairflowError('PAIRFLOW_ERR_KAFKA_TOPIC', { topic: missing.map((m) => m.topic).join(', '), detail: `cannot be created: ${(err as Error).message}` }, err);
    }
  } finally {
    await admin.disconnect();
  }
}

/**
 * Live mode's topics: the input must exist; the outputs are created like it.
 * Returns the input's partition count.
 */
export async function ensureOutputTopics(kafka: KafkaClient, input: string, topics: LiveTopics, logger?: Logger): Promise<number> {
  const counts = await partitionCounts(kafka, [input]);
  const n = counts.get(input);
  if (n === undefined) {
    throw pairflowError('PAIRFLOW_ERR_KAFKA_TOPIC', { topic: input, detail: 'does not exist (create it, or write it with `pairflow publish`)' });
  }
  await ensureTopics(kafka, [
    { topic: topics.assignments, config: OUTPUT_TOPIC_CONFIG },
    { topic: topics.expired, config: OUTPUT_TOPIC_CONFIG },
    { topic: topics.windows, config: OUTPUT_TOPIC_CONFIG },
    { topic: topics.rejects, config: OUTPUT_TOPIC_CONFIG },
    { topic: topics.pool, config: POOL_TOPIC_CONFIG },
  ], n, logger);
  return n;
}
