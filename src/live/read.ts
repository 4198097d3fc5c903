/**
 * Reading chosen partitions of a topic from the beginning to a known end, with
 * isolation level read_committed: how live mode restores pool state and how
 * `summarize` reads the committed outputs.
 *
 * kafkajs 2.2.4 has no consumer without a group (no `assign`): the reader joins a
 * throwaway group of its own with an assigner that hands it exactly the partitions it
 * asked for. The end of a partition is an offset: a transactional topic ends in a
 * commit marker that no consumer is shown, so "the last record seen" is tracked from
 * kafkajs' batch events, which report the last offset of every fetched batch, control
 * records included.
 */
import { randomUUID } from 'node:crypto';
import kafkajs from 'kafkajs';
import type { Assigner, Consumer, KafkaMessage, PartitionAssigner } from 'kafkajs';
import type { Logger } from 'pino';
import { pairflowError } from '../errors.js';

const { AssignerProtocol } = kafkajs;

type KafkaClient = InstanceType<typeof kafkajs.Kafka>;

/**
 * An assigner for a group of one: its member gets exactly `partitions` of `topic`.
 * (kafkajs calls assigners with the group's members; a read group never has another.)
 */
export function fixedAssigner(topic: string, partitions: readonly number[]): PartitionAssigner {
  return (): Assigner => ({
    name: 'pairflow-fixed',
    version: 1,
    async assign({ members }) {
      return members.map((m, k) => ({
        memberId: m.memberId,
        memberAssignment: AssignerProtocol.MemberAssignment.encode({
          version: 1,
          assignment: k === 0 ? { [topic]: [...partitions] } : {},
          userData: Buffer.alloc(0),
        }),
      }));
    },
    protocol({ topics }) {
      return { name: 'pairflow-fixed', metadata: AssignerProtocol.MemberMetadata.encode({ version: 1, topics, userData: Buffer.alloc(0) }) };
    },
  });
}

/** Options of {@link readToEnd}. */
export interface ReadToEndOptions {
  kafka: KafkaClient;
  topic: string;
  /** Partitions to read. @default every partition of the topic */
  partitions?: readonly number[];
  /**
   * Read each partition up to this offset (exclusive). @default its end offset when the
   * read starts (records committed later are not waited for)
   */
  until?: ReadonlyMap<number, number>;
  /** Called for every record below its partition's end, in offset order per partition. */
  onRecord: (partition: number, message: KafkaMessage) => void;
  /** Called between batches, e.g. to keep another consumer's group membership alive. */
  onBatch?: () => Promise<void>;
  /** Give up after this long without reaching the end. @default 120000 */
  timeoutMs?: number;
  /** Largest bytes fetched per partition (pool records can be large). @default 64 MiB */
  maxBytesPerPartition?: number;
  logger?: Logger;
}

/** Per partition: how many records were delivered. */
export type ReadCounts = Map<number, number>;

/**
 * Reads partitions of a topic from their start to their end (see {@link ReadToEndOptions.until}).
 * @example
 * await readToEnd({ kafka, topic: 'out.assignments', onRecord: (p, m) => rows.push(m) });
 */
export async function readToEnd(opts: ReadToEndOptions): Promise<ReadCounts> {
  const { kafka, topic } = opts;
  const admin = kafka.admin();
  await admin.connect();
  let ends: Map<number, number>;
  let starts: Map<number, number>;
  try {
    const offsets = await admin.fetchTopicOffsets(topic);
    starts = new Map(offsets.map((o) => [o.partition, Number(o.low)]));
    ends = new Map(offsets.map((o) => [o.partition, Number(o.high)]));
  } finally {
    await admin.disconnect();
  }
  const partitions = opts.partitions ?? [...ends.keys()].sort((a, b) => a - b);
  const counts: ReadCounts = new Map(partitions.map((p) => [p, 0]));
  // Per partition: the end to reach, and the last offset seen.
  const target = new Map<number, number>();
  for (const p of partitions) {
    if (!ends.has(p)) throw pairflowError('PAIRFLOW_ERR_KAFKA_TOPIC', { topic, detail: `has no partition ${p}` });
    const end = opts.until?.get(p) ?? ends.get(p)!;
    if (end > starts.get(p)!) target.set(p, end);
  }
  if (target.size === 0) return counts;

  const seen = new Map<number, number>([...target.keys()].map((p) => [p, -1]));
  const groupId = `pairflow-read-${randomUUID()}`;
  const consumer: Consumer = kafka.consumer({
    groupId,
    partitionAssigners: [fixedAssigner(topic, [...target.keys()])],
    readUncommitted: false,
    allowAutoTopicCreation: false,
    maxBytesPerPartition: opts.maxBytesPerPartition ?? 64 << 20,
    maxBytes: Math.max(opts.maxBytesPerPartition ?? 64 << 20, 10 << 20),
    maxWaitTimeInMs: 250,
    sessionTimeout: 30_000,
    heartbeatInterval: 1000,
  });
  let finish!: () => void;
  let fail!: (e: unknown) => void;
  const done = new Promise<void>((res, rej) => { finish = res; fail = rej; });
  const note = (p: number, last: number): void => {
    if (!target.has(p)) return;
    if (last > seen.get(p)!) seen.set(p, last);
    for (const [q, end] of target) if (seen.get(q)! < end - 1) return;
    finish();
  };
  consumer.on(consumer.events.END_BATCH_PROCESS, (e) => note(e.payload.partition, Number(e.payload.lastOffset)));
  consumer.on(consumer.events.CRASH, (e) => {
    if (!e.payload.restart) fail(e.payload.error);
  });
  const timeoutMs = opts.timeoutMs ?? 120_000;
  const timer = setTimeout(() => {
    const behind = [...target].filter(([p, end]) => seen.get(p)! < end - 1).map(([p, end]) => `${p} at ${seen.get(p)! + 1} of ${end}`);
    fail(pairflowError('PAIRFLOW_ERR_KAFKA_TIMEOUT', { what: `reading ${topic} to its end (partitions ${behind.join(', ')})`, ms: timeoutMs }));
  }, timeoutMs);
  try {
    await consumer.connect();
    await consumer.subscribe({ topic, fromBeginning: true });
    await consumer.run({
      autoCommit: false,
      eachBatch: async ({ batch, heartbeat }) => {
        const end = target.get(batch.partition);
        if (end === undefined) return;
        for (const m of batch.messages) {
          if (Number(m.offset) >= end) break;
          opts.onRecord(batch.partition, m);
          counts.set(batch.partition, counts.get(batch.partition)! + 1);
        }
        await heartbeat();
        if (opts.onBatch) await opts.onBatch();
      },
    });
    await done;
  } finally {
    clearTimeout(timer);
    await consumer.disconnect().catch(() => {});
  }
  return counts;
}
