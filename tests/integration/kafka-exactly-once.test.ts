/**
 * Against a real broker (tests/setup/kafka-global.ts): Avro events through kafkajs, a
 * consumer group, and the exactly-once pattern — a transaction that writes outputs and
 * the consumer group's input offsets together, committed or aborted as one.
 */
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import type { Admin, Consumer, Producer } from 'kafkajs';
import { createAvroSerde, createEventSerde, createKafka, eventMessage, marketPartitioner, readEventValue } from '../../src/kafka/index.js';
import type { EventRecord } from '../../src/consume/schema.js';
import type { PairflowEvent } from '../../src/model.js';
import { mulberry32, randInt } from '../helpers/random.js';
import { BROKERS, FAST_CONSUMER, collect, eventSchema, uniqueName } from './helpers/kafka.js';

const SEED = 20261201;
const MARKETS = ['north', 'harbour', 'old-town', 'airport'];

/** Seeded events spread over the markets, in time order, with every field kind used. */
function makeEvents(seed: number, n: number): EventRecord[] {
  const rand = mulberry32(seed);
  const out: EventRecord[] = [];
  let t = 1_780_000_000_000;
  for (let i = 0; i < n; i++) {
    t += randInt(rand, 0, 900);
    const market = MARKETS[randInt(rand, 0, MARKETS.length - 1)] as string;
    const kind = randInt(rand, 0, 9);
    const base = { id: `u${i}`, market, t, until: null, lat: null, lon: null, x: null, y: null, has: null, needs: null, side: null };
    if (kind === 0) {
      out.push({ ...base, type: 'withdraw', side: rand() < 0.5 ? 'supply' : 'demand' });
    } else if (kind < 5) {
      out.push({ ...base, type: 'supply', lat: 48 + rand(), lon: 11 + rand(), until: t + 1_800_000, has: rand() < 0.3 ? ['cold-bag'] : null });
    } else {
      out.push({ ...base, type: 'demand', x: rand() * 20, y: rand() * 20, needs: rand() < 0.2 ? ['cold-bag'] : [] });
    }
  }
  return out;
}

describe.skipIf(!BROKERS)(`Kafka round trips (broker ${BROKERS || 'none'}, seed ${SEED})`, () => {
  const serde = createAvroSerde<EventRecord>(eventSchema());
  // Built in beforeAll: a skipped suite still runs this body, and '' is no broker list.
  let kafka: ReturnType<typeof createKafka>;
  let admin: Admin;
  const open: Array<Producer | Consumer> = [];
  const track = <T extends Producer | Consumer>(c: T): T => {
    open.push(c);
    return c;
  };

  beforeAll(async () => {
    kafka = createKafka({ brokers: BROKERS, clientId: 'pairflow-it' });
    admin = kafka.admin();
    await admin.connect();
  });

  afterAll(async () => {
    for (const c of open) await c.disconnect().catch(() => {});
    await admin?.disconnect();
  });

  it('Avro events produced with kafkajs come back decoded, in order per market, one partition per market', async () => {
    const topic = uniqueName('events');
    const groupId = uniqueName('group');
    await admin.createTopics({ topics: [{ topic, numPartitions: 3 }], waitForLeaders: true });
    const events = makeEvents(SEED, 80);

    const producer = track(kafka.producer({ createPartitioner: marketPartitioner }));
    await producer.connect();
    await producer.send({ topic, messages: events.map((ev) => ({ key: ev.market, value: serde.encode(ev) })) });

    const consumer = track(kafka.consumer({ groupId, ...FAST_CONSUMER }));
    await consumer.connect();
    const got = await collect(consumer, topic, (seen) => seen.length >= events.length);
    expect(got).toHaveLength(events.length);

    const partitionOf = new Map<string, number>();
    const byMarket = new Map<string, EventRecord[]>();
    for (const { message, partition } of got) {
      const rec = serde.decode(message.value as Buffer, `${topic}/${partition}@${message.offset}`);
      expect(message.key?.toString()).toBe(rec.market);
      // SPEC §3: a market is the partition key, so all of its records share a partition.
      if (!partitionOf.has(rec.market)) partitionOf.set(rec.market, partition);
      expect(partition, `market ${rec.market}`).toBe(partitionOf.get(rec.market));
      byMarket.set(rec.market, [...(byMarket.get(rec.market) ?? []), rec]);
    }
    for (const market of MARKETS) {
      expect(byMarket.get(market) ?? [], `market ${market}`).toEqual(events.filter((e) => e.market === market));
    }
  });

  it('eventMessage() records keep the event time as timestamp, so an event time maps to an offset', async () => {
    const topic = uniqueName('times');
    await admin.createTopics({ topics: [{ topic }], waitForLeaders: true });
    const eventSerde = createEventSerde();
    const rand = mulberry32(SEED + 2);
    let t = 1_780_000_000_000;
    const events: PairflowEvent[] = Array.from({ length: 20 }, (_, i) => {
      t += randInt(rand, 1, 60_000);
      return { type: 'demand', id: `d${i}`, market: 'harbour', t, until: null, x: rand() * 10, y: rand() * 10 };
    });
    const producer = track(kafka.producer({ createPartitioner: marketPartitioner }));
    await producer.connect();
    await producer.send({ topic, messages: events.map((ev) => eventMessage(eventSerde, ev)) });

    const consumer = track(kafka.consumer({ groupId: uniqueName('times'), ...FAST_CONSUMER }));
    await consumer.connect();
    const got = await collect(consumer, topic, (seen) => seen.length >= events.length);
    expect(got.map(({ message }) => Number(message.timestamp))).toEqual(events.map((ev) => ev.t));
    for (const { message } of got) {
      const res = readEventValue(eventSerde, message.value as Buffer, 'euclidean');
      expect(res.ok && res.event.id).toBe(`d${message.offset}`);
    }
    // The broker's time index answers "first record at or after this time" (ListOffsets).
    const k = 13;
    const [hit] = await admin.fetchTopicOffsetsByTimestamp(topic, (events[k] as PairflowEvent).t - 1);
    expect(hit?.offset).toBe(String(k));
  });

  it('a committed transaction publishes its outputs and group offsets together; an aborted one publishes neither', async () => {
    const input = uniqueName('in');
    const output = uniqueName('out');
    const groupId = uniqueName('eos-group');
    await admin.createTopics({ topics: [{ topic: input }, { topic: output }], waitForLeaders: true });
    const events = makeEvents(SEED + 1, 10);
    const plain = track(kafka.producer({ createPartitioner: marketPartitioner }));
    await plain.connect();
    // One input partition, so offsets are the positions in `events`.
    await plain.send({ topic: input, messages: events.map((ev) => ({ key: ev.market, value: serde.encode(ev) })) });

    // Read the input in the group the transactions commit for.
    const reader = track(kafka.consumer({ groupId, ...FAST_CONSUMER }));
    await reader.connect();
    const consumed = await collect(reader, input, (seen) => seen.length >= events.length);
    await reader.disconnect();
    const decoded = consumed.map(({ message }) => serde.decode(message.value as Buffer));
    expect(decoded).toEqual(events);

    const transform = (rec: EventRecord): EventRecord => ({ ...rec, id: `${rec.id}.out` });
    const producer = track(kafka.producer({
      transactionalId: uniqueName('txn'),
      idempotent: true,
      maxInFlightRequests: 1,
      createPartitioner: marketPartitioner,
    }));
    await producer.connect();

    const committedCount = 6;
    const commitTx = await producer.transaction();
    await commitTx.send({
      topic: output,
      messages: decoded.slice(0, committedCount).map((rec) => ({ key: rec.market, value: serde.encode(transform(rec)) })),
    });
    await commitTx.sendOffsets({
      consumerGroupId: groupId,
      topics: [{ topic: input, partitions: [{ partition: 0, offset: String(committedCount) }] }],
    });
    await commitTx.commit();

    const abortTx = await producer.transaction();
    await abortTx.send({
      topic: output,
      messages: decoded.slice(committedCount).map((rec) => ({ key: rec.market, value: serde.encode(transform(rec)) })),
    });
    await abortTx.sendOffsets({
      consumerGroupId: groupId,
      topics: [{ topic: input, partitions: [{ partition: 0, offset: String(events.length) }] }],
    });
    await abortTx.abort();

    // A record after both transactions: once a reader sees it, everything before is settled.
    const sentinel: EventRecord = { ...events[0]!, id: 'sentinel' };
    await plain.send({ topic: output, messages: [{ key: 'sentinel', value: serde.encode(sentinel) }] });
    const untilSentinel = (seen: { message: { key: Buffer | null } }[]) => seen.some((m) => m.message.key?.toString() === 'sentinel');

    const committedReader = track(kafka.consumer({ groupId: uniqueName('rc'), readUncommitted: false, ...FAST_CONSUMER }));
    await committedReader.connect();
    const committedView = (await collect(committedReader, output, untilSentinel)).map(({ message }) => serde.decode(message.value as Buffer));
    expect(committedView).toEqual([...events.slice(0, committedCount).map(transform), sentinel]);

    // The aborted records were written (so the check above is not vacuous) but never committed.
    const rawReader = track(kafka.consumer({ groupId: uniqueName('ru'), readUncommitted: true, ...FAST_CONSUMER }));
    await rawReader.connect();
    const rawView = (await collect(rawReader, output, untilSentinel)).map(({ message }) => serde.decode(message.value as Buffer));
    expect(rawView).toEqual([...events.map(transform), sentinel]);

    // commit() returns once the coordinator has logged the decision; the marker on the
    // offsets topic follows asynchronously, so wait (bounded) until some offset shows.
    let offsets = await admin.fetchOffsets({ groupId, topics: [input] });
    for (let i = 0; i < 100 && offsets[0]?.partitions[0]?.offset === '-1'; i++) {
      await new Promise((r) => setTimeout(r, 100));
      offsets = await admin.fetchOffsets({ groupId, topics: [input] });
    }
    expect(offsets).toEqual([{ topic: input, partitions: [{ partition: 0, offset: String(committedCount), metadata: null }] }]);

    // A restarted member of the group resumes after the committed transaction: it gets the
    // aborted transaction's inputs again, and only those.
    const resumed = track(kafka.consumer({ groupId, ...FAST_CONSUMER }));
    await resumed.connect();
    const again = await collect(resumed, input, (seen) => seen.length >= events.length - committedCount);
    expect(again.map(({ message }) => Number(message.offset))).toEqual([6, 7, 8, 9]);
    expect(again.map(({ message }) => serde.decode(message.value as Buffer))).toEqual(events.slice(committedCount));
  });
});
