#!/usr/bin/env node
/**
 * Runs every kafkajs feature pairflow uses (and a few it may use) against one broker and
 * prints a table of what works: how docs/kafka.md's broker-version findings were made.
 *
 *   node scripts/kafka/probe-client.mjs 127.0.0.1:PORT [--json]
 *
 * Each step is bounded by a timeout; topics and groups get fresh random names; the
 * broker is left as it was except for deleted probe topics.
 */
import { randomBytes } from 'node:crypto';
import kafkajs from 'kafkajs';

const { Kafka, CompressionTypes, logLevel } = kafkajs;
const STEP_TIMEOUT_MS = 20_000;

const [brokerArg, ...flags] = process.argv.slice(2);
if (!brokerArg) {
  process.stderr.write('usage: node scripts/kafka/probe-client.mjs HOST:PORT [--json]\n');
  process.exit(2);
}
const name = (p) => `pairflow-probe.${p}.${randomBytes(4).toString('hex')}`;
const errors = [];
const kafka = new Kafka({
  clientId: 'pairflow-probe',
  brokers: brokerArg.split(','),
  logLevel: logLevel.ERROR,
  logCreator: () => ({ namespace, log }) => errors.push(`${namespace}: ${log.message}`),
  retry: { retries: 2 },
});

const results = [];
async function step(label, fn) {
  const t0 = Date.now();
  let timer;
  try {
    const detail = await Promise.race([
      fn(),
      new Promise((_, reject) => { timer = setTimeout(() => reject(new Error(`timed out after ${STEP_TIMEOUT_MS} ms`)), STEP_TIMEOUT_MS); }),
    ]);
    results.push({ step: label, ok: true, ms: Date.now() - t0, detail: detail ?? '' });
  } catch (err) {
    const inner = err.partitions ? ` ${JSON.stringify(err.partitions.map((p) => p.error?.type ?? p.error?.message ?? p))}` : '';
    results.push({ step: label, ok: false, ms: Date.now() - t0, detail: `${err.name}: ${err.message}${inner}` });
  } finally {
    clearTimeout(timer);
  }
}

/** Consumes `n` messages; `whileRunning` runs before the consumer stops (commits need a running member). */
async function consumeN(consumer, topic, n, whileRunning = async () => {}) {
  const seen = [];
  await consumer.subscribe({ topics: [topic], fromBeginning: true });
  await consumer.run({ autoCommit: false, eachMessage: async ({ message }) => { seen.push(message); } });
  const deadline = Date.now() + STEP_TIMEOUT_MS - 2000;
  while (seen.length < n && Date.now() < deadline) await new Promise((r) => setTimeout(r, 50));
  try {
    if (seen.length < n) throw new Error(`got ${seen.length} of ${n} messages`);
    await whileRunning();
  } finally {
    await consumer.stop();
  }
  return seen;
}

const fast = { sessionTimeout: 10_000, heartbeatInterval: 1_000, maxWaitTimeInMs: 100, rebalanceTimeout: 10_000 };
const admin = kafka.admin();
const topic = name('t');
const compacted = name('pool');
const out = name('out');
const group = name('g');
const disconnect = [];

await step('admin.connect + describeCluster (Metadata)', async () => {
  await admin.connect();
  const c = await admin.describeCluster();
  return `${c.brokers.length} broker(s), controller ${c.controller}`;
});
await step('admin.createTopics (3 partitions, plus a compacted one)', async () => {
  await admin.createTopics({
    topics: [
      { topic, numPartitions: 3 },
      { topic: out, numPartitions: 1 },
      { topic: compacted, numPartitions: 1, configEntries: [{ name: 'cleanup.policy', value: 'compact' }] },
    ],
    waitForLeaders: true,
  });
});
await step('admin.listTopics + fetchTopicMetadata', async () => {
  const list = await admin.listTopics();
  if (!list.includes(topic)) throw new Error('new topic not listed');
  const md = await admin.fetchTopicMetadata({ topics: [topic] });
  return `${md.topics[0].partitions.length} partitions`;
});
const producer = kafka.producer();
disconnect.push(producer);
await step('producer.send (acks=all, keyed)', async () => {
  await producer.connect();
  await producer.send({ topic, acks: -1, messages: Array.from({ length: 30 }, (_, i) => ({ key: `m${i % 4}`, value: `v${i}` })) });
});
await step('producer.send (gzip batch)', async () => {
  await producer.send({ topic, compression: CompressionTypes.GZIP, messages: [{ key: 'm0', value: 'gz' }] });
});
await step('producer.send to a compacted topic, with a tombstone', async () => {
  await producer.send({ topic: compacted, messages: [{ key: 'u1', value: 'pooled' }, { key: 'u1', value: null }] });
});
await step('producer.send with a record timestamp 2 h in the future', async () => {
  await producer.send({ topic, messages: [{ key: 'm2', value: 'future', timestamp: String(Date.now() + 2 * 3_600_000) }] });
});
const idem = kafka.producer({ idempotent: true, maxInFlightRequests: 1 });
disconnect.push(idem);
await step('idempotent producer (InitProducerId) send', async () => {
  await idem.connect();
  await idem.send({ topic, messages: [{ key: 'm1', value: 'idem' }] });
});
await step('admin.fetchTopicOffsets (ListOffsets)', async () => {
  const o = await admin.fetchTopicOffsets(topic);
  return o.map((p) => `${p.partition}:${p.high}`).join(' ');
});
await step('admin.fetchTopicOffsetsByTimestamp', async () => {
  const o = await admin.fetchTopicOffsetsByTimestamp(topic, Date.now() - 60_000);
  return o.map((p) => `${p.partition}:${p.offset}`).join(' ');
});
const consumer = kafka.consumer({ groupId: group, ...fast });
disconnect.push(consumer);
await step('consumer group: join, sync, fetch all, commitOffsets (JoinGroup/SyncGroup/Fetch/OffsetCommit)', async () => {
  await consumer.connect();
  const seen = await consumeN(consumer, topic, 33, () => consumer.commitOffsets([{ topic, partition: 1, offset: '3' }]));
  return `${seen.length} messages`;
});
await step('admin.fetchOffsets (OffsetFetch)', async () => {
  const o = await admin.fetchOffsets({ groupId: group, topics: [topic] });
  const p1 = o[0].partitions.find((p) => p.partition === 1);
  if (p1.offset !== '3') throw new Error(`partition 1 at ${p1.offset}, expected the committed 3`);
  return o[0].partitions.map((p) => `${p.partition}:${p.offset}`).join(' ');
});
await step('admin.listGroups + describeGroups', async () => {
  const { groups } = await admin.listGroups();
  const d = await admin.describeGroups([group]);
  return `${groups.length} group(s); ${group.slice(-8)} is ${d.groups[0].state}`;
});
await step('consumer.disconnect (LeaveGroup)', async () => { await consumer.disconnect(); });
await step('admin.setOffsets + resetOffsets (empty group)', async () => {
  await admin.setOffsets({ groupId: group, topic, partitions: [{ partition: 0, offset: '0' }] });
  await admin.resetOffsets({ groupId: group, topic, earliest: true });
});
const tx = kafka.producer({ transactionalId: name('tx'), idempotent: true, maxInFlightRequests: 1 });
disconnect.push(tx);
await step('transaction: send + sendOffsets + commit (AddPartitions/AddOffsets/TxnOffsetCommit/EndTxn)', async () => {
  await tx.connect();
  const t = await tx.transaction();
  await t.send({ topic: out, messages: [{ key: 'k', value: 'committed' }] });
  await t.sendOffsets({ consumerGroupId: group, topics: [{ topic, partitions: [{ partition: 0, offset: '5' }] }] });
  await t.commit();
  // The commit marker reaches the offsets topic asynchronously after commit() returns.
  let p0;
  let polls = 0;
  for (; polls < 100; polls++) {
    const o = await admin.fetchOffsets({ groupId: group, topics: [topic] });
    p0 = o[0].partitions.find((p) => p.partition === 0);
    if (p0.offset === '5') break;
    await new Promise((r) => setTimeout(r, 100));
  }
  if (p0.offset !== '5') throw new Error(`group offset ${p0.offset}, expected 5`);
  return polls === 0 ? 'offset visible at once' : `offset visible after ${polls} polls of 100 ms`;
});
await step('transaction: send + abort', async () => {
  const t = await tx.transaction();
  await t.send({ topic: out, messages: [{ key: 'k', value: 'aborted' }] });
  await t.abort();
  await producer.send({ topic: out, messages: [{ key: 'k', value: 'after' }] });
});
const rc = kafka.consumer({ groupId: name('rc'), readUncommitted: false, ...fast });
disconnect.push(rc);
await step('read_committed consumer skips the aborted record', async () => {
  await rc.connect();
  const seen = await consumeN(rc, out, 2);
  const values = seen.map((m) => m.value.toString());
  if (values.join(',') !== 'committed,after') throw new Error(`saw ${values.join(',')}`);
  return values.join(',');
});
const seeker = kafka.consumer({ groupId: name('seek'), ...fast });
disconnect.push(seeker);
await step('consumer.seek', async () => {
  await seeker.connect();
  const seen = [];
  await seeker.subscribe({ topics: [out], fromBeginning: true });
  await seeker.run({ eachMessage: async ({ message }) => { seen.push(message.offset); } });
  seeker.seek({ topic: out, partition: 0, offset: '0' });
  const deadline = Date.now() + 10_000;
  while (seen.length < 1 && Date.now() < deadline) await new Promise((r) => setTimeout(r, 50));
  await seeker.stop();
  if (seen.length < 1) throw new Error('nothing after seek');
  return `first offset ${seen[0]}`;
});
await step('admin.describeConfigs + alterConfigs', async () => {
  const d = await admin.describeConfigs({ resources: [{ type: 2, name: compacted }], includeSynonyms: false });
  const policy = d.resources[0].configEntries.find((e) => e.configName === 'cleanup.policy');
  await admin.alterConfigs({ resources: [{ type: 2, name: topic, configEntries: [{ name: 'retention.ms', value: '3600000' }] }] });
  return `cleanup.policy=${policy?.configValue}`;
});
await step('admin.createPartitions', async () => {
  await admin.createPartitions({ topicPartitions: [{ topic, count: 4 }] });
});
await step('admin.deleteTopicRecords (DeleteRecords)', async () => {
  // kafkajs 2.2.4 looks the leader up in its metadata cache only: load the topic first.
  await admin.fetchTopicMetadata({ topics: [out] });
  await admin.deleteTopicRecords({ topic: out, partitions: [{ partition: 0, offset: '1' }] });
});
await step('admin.deleteGroups', async () => {
  await seeker.disconnect();
  await rc.disconnect();
  await admin.deleteGroups([group]);
});
await step('admin.deleteTopics', async () => {
  await admin.deleteTopics({ topics: [topic, out, compacted] });
});
for (const c of disconnect) await c.disconnect().catch(() => {});
await admin.disconnect().catch(() => {});

if (flags.includes('--json')) {
  process.stdout.write(`${JSON.stringify({ brokers: brokerArg, results, clientErrors: errors.slice(0, 20) }, null, 2)}\n`);
} else {
  for (const r of results) process.stdout.write(`${r.ok ? 'ok  ' : 'FAIL'} ${String(r.ms).padStart(6)} ms  ${r.step}${r.detail ? `  — ${r.detail}` : ''}\n`);
  if (errors.length) process.stdout.write(`kafkajs error log (first 10):\n  ${errors.slice(0, 10).join('\n  ')}\n`);
}
process.exitCode = results.every((r) => r.ok) ? 0 : 1;
