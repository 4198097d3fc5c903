/**
 * `pairflow live` as a group and through trouble, against real brokers: processes
 * joining midway, leaving cleanly and being killed (the result equals one process's);
 * the broker stopped and started again on the same data mid-run (the processor
 * recovers by itself); poison records of every kind in the input (each lands in the
 * rejects topic, processing goes on); and the Kafka event source held to the same
 * contract as the file source (tests/contract/sources.ts).
 */
import { mkdtempSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import parsePrometheus from 'parse-prometheus-text-format';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import type { Producer } from 'kafkajs';
import { haltBroker, resumeBroker, startBroker, stopBroker } from '../../scripts/kafka.mjs';
import { loadLog } from '../../src/consume/index.js';
import { toEventRecord, toJsonLine } from '../../src/consume/schema.js';
import { generateEvents } from '../../src/gen/gen.js';
import { createEventSerde, createKafka, marketPartitioner } from '../../src/kafka/index.js';
import { eventValue } from '../../src/live/records.js';
import { kafkaTopicSource } from '../../src/live/source.js';
import { readOutputs, summarizeOutputs, type LiveOutputs } from '../../src/live/summarize.js';
import { DEFAULT_CONFIG, type PairflowConfig, type PairflowEvent } from '../../src/model.js';
import { drive, fileSource, Pipeline, type RecordSink } from '../../src/pipeline/drive.js';
import type { AssignmentRecord, EpochRecord, ExpiryRecord } from '../../src/ports.js';
import { sourceContract } from '../contract/sources.js';
import { BROKERS, uniqueName } from './helpers/kafka.js';
import { startCli, type CliProcess } from './helpers/cli.js';

const dir = mkdtempSync(join(tmpdir(), 'pairflow-group-it-'));
const sleep = (ms: number): Promise<void> => new Promise((r) => setTimeout(r, ms));

function writeFile(name: string, text: string): string {
  const file = join(dir, name);
  writeFileSync(file, text);
  return file;
}

const aKey = (a: { market: string; epoch: number; demandId: string; demandT: number; supplyId: string; supplyT: number; cost: number }): string =>
  `${a.market} ${a.epoch} ${a.demandId}@${a.demandT} ${a.supplyId}@${a.supplyT} ${a.cost}`;
const eKey = (e: { market: string; epoch: number; side: string; id: string; t: number; cost: number }): string =>
  `${e.market} ${e.epoch} ${e.side} ${e.id}@${e.t} ${e.cost}`;

class Tape implements RecordSink {
  assignments: string[] = [];
  expired: string[] = [];
  assignment(a: AssignmentRecord): void { this.assignments.push(aKey(a)); }
  expiry(e: ExpiryRecord): void { this.expired.push(eKey(e)); }
  epoch(_s: EpochRecord): void {}
  reject(): void {}
}

async function replayOf(events: readonly PairflowEvent[], config: PairflowConfig): Promise<{ assignments: string[]; expired: string[] }> {
  const file = writeFile(`ref-${Math.random().toString(36).slice(2)}.jsonl`, events.map(toJsonLine).join('\n') + '\n');
  const tape = new Tape();
  await drive(fileSource(await loadLog([file], { metric: config.metric, strict: false })), new Pipeline(config, tape), null);
  return { assignments: tape.assignments.sort(), expired: tape.expired.sort() };
}

function expectSameAs(outputs: LiveOutputs, want: { assignments: string[]; expired: string[] }, what: string): void {
  expect(outputs.assignments.map(aKey).sort(), what).toEqual(want.assignments);
  expect(outputs.expired.map(eKey).sort(), what).toEqual(want.expired);
  expect(summarizeOutputs('x', outputs), what).toMatchObject({ duplicates: 0, assignedAndExpired: 0 });
}

describe.skipIf(!BROKERS)(`pairflow live in a group and through trouble (broker ${BROKERS || 'none'})`, () => {
  const running: CliProcess[] = [];
  let kafka: ReturnType<typeof createKafka>;
  let producer: Producer;

  beforeAll(async () => {
    kafka = createKafka({ brokers: BROKERS, clientId: 'pairflow-group-it' });
    producer = kafka.producer({ createPartitioner: marketPartitioner, idempotent: true, maxInFlightRequests: 1 });
    await producer.connect();
  });

  afterAll(async () => {
    for (const p of running) p.child.kill('SIGKILL');
    await producer?.disconnect();
  });

  async function createTopic(client: ReturnType<typeof createKafka>, topic: string, partitions: number): Promise<void> {
    const admin = client.admin();
    await admin.connect();
    await admin.createTopics({ topics: [{ topic, numPartitions: partitions, configEntries: [{ name: 'retention.ms', value: '-1' }] }], waitForLeaders: true });
    await admin.disconnect();
  }

  async function publish(p: Producer, topic: string, events: readonly PairflowEvent[]): Promise<void> {
    for (let i = 0; i < events.length; i += 1000) {
      await p.send({ topic, messages: events.slice(i, i + 1000).map((ev) => ({ key: ev.market, value: eventValue(ev, 'json', null), timestamp: String(ev.t) })) });
    }
  }

  function live(brokers: string, a: { input: string; prefix: string; group: string; config: string; idle: string }): CliProcess {
    const p = startCli(['live', '--brokers', brokers, '--in', a.input, '--out', a.prefix, '--group', a.group, '--config', a.config,
      '--exit-when-idle', a.idle, '--session-timeout', '6s', '--log-level', 'info']);
    running.push(p);
    return p;
  }

  it('processes joining midway, one leaving cleanly and one killed: the result equals a single process\'s', async () => {
    const events = [...generateEvents({ days: 1, seed: 31, scale: 0.04, markets: 6 })];
    const cfg: Partial<PairflowConfig> = { commit: 'due', idleMs: 120_000 };
    const config = writeFile('group.json', JSON.stringify(cfg));
    const input = uniqueName('in');
    const prefix = uniqueName('out');
    const group = uniqueName('g');
    await createTopic(kafka, input, 4);
    const part = Math.ceil(events.length / 5);
    const slice = (k: number): PairflowEvent[] => events.slice(k * part, (k + 1) * part);
    const args = { input, prefix, group, config, idle: '10s' };

    await publish(producer, input, slice(0));
    const a = live(BROKERS, args);
    await a.waitForLog('live: partition restored');
    await publish(producer, input, slice(1));
    const b = live(BROKERS, args);
    await b.waitForLog('live: partition restored');
    await publish(producer, input, slice(2));
    const c = live(BROKERS, args);
    await c.waitForLog('live: partition restored');
    c.child.kill('SIGTERM');
    expect(await c.exited, c.stderr().slice(-2000)).toEqual({ code: 0, signal: null });
    await publish(producer, input, slice(3));
    await sleep(1000);
    b.child.kill('SIGKILL');
    await b.exited;
    await publish(producer, input, slice(4));
    expect(await a.exited, a.stderr().slice(-3000)).toEqual({ code: 0, signal: null });

    // Every process owned partitions at some point, and the leaving one committed before it left.
    expect(b.stderr()).toContain('live: partition restored');
    expect(c.stderr()).toContain('"reason":"SIGTERM"');
    expectSameAs(await readOutputs(kafka, prefix), await replayOf(events, { ...DEFAULT_CONFIG, ...cfg }), 'three processes');
  });

  it('the broker stopped and started again on the same data mid-run: the processor recovers by itself, result unchanged', async () => {
    const instance = `pairflow-it-restart-${process.pid}-${Date.now()}`;
    const { brokers } = await startBroker({ instance, ownerPid: process.pid });
    const own = createKafka({ brokers, clientId: 'pairflow-restart-it', retry: { retries: 20, initialRetryTime: 300, maxRetryTime: 5000 } });
    let p: Producer | null = null;
    try {
      const events = [...generateEvents({ days: 1, seed: 32, scale: 0.03 })];
      const cfg: Partial<PairflowConfig> = { commit: 'all', idleMs: 120_000 };
      const config = writeFile('restart.json', JSON.stringify(cfg));
      const input = uniqueName('in');
      const prefix = uniqueName('out');
      await createTopic(own, input, 3);
      p = own.producer({ createPartitioner: marketPartitioner, idempotent: true, maxInFlightRequests: 1 });
      await p.connect();
      const half = Math.floor(events.length / 2);
      await publish(p, input, events.slice(0, half));
      const proc = live(brokers, { input, prefix, group: uniqueName('g'), config, idle: '15s' });
      await proc.waitForLog('live: partition restored');
      await sleep(1500);
      await haltBroker({ instance, graceMs: 10_000 });
      await sleep(3000);
      await resumeBroker({ instance, ownerPid: process.pid });
      await publish(p, input, events.slice(half));
      expect(await proc.exited, proc.stderr().slice(-3000)).toEqual({ code: 0, signal: null });
      expectSameAs(await readOutputs(own, prefix), await replayOf(events, { ...DEFAULT_CONFIG, ...cfg }), 'through a broker restart');
    } finally {
      await p?.disconnect().catch(() => {});
      await stopBroker({ instance });
    }
  });

  it('poison records of every kind land in the rejects topic with their partition, offset and reason; processing goes on', async () => {
    const events = [...generateEvents({ days: 1, seed: 33, scale: 0.02 })];
    const cfg: Partial<PairflowConfig> = { commit: 'all', idleMs: 120_000 };
    const config = writeFile('poison.json', JSON.stringify(cfg));
    const input = uniqueName('in');
    const prefix = uniqueName('out');
    await createTopic(kafka, input, 2);
    const serde = createEventSerde();
    const good = events[10]!;
    const avro = serde.encode(toEventRecord(good));
    const fingerprintless = Buffer.from(avro);
    fingerprintless.writeBigUInt64LE(0x0123456789abcdefn, 2);
    const market = good.market;
    const poison: Array<{ code: string; key: string | null; value: Buffer }> = [
      { code: 'bad-json', key: market, value: Buffer.from('{"type":"demand","id":') },
      { code: 'unknown-fingerprint', key: market, value: fingerprintless },
      { code: 'bad-avro', key: market, value: avro.subarray(0, 14) },
      { code: 'invalid-event', key: market, value: Buffer.from(JSON.stringify({ type: 'demand', market, t: good.t, lat: 1, lon: 1 })) },
      { code: 'oversized', key: market, value: Buffer.alloc(100_000, 0x20) },
      { code: 'key-mismatch', key: 'not-the-market', value: Buffer.from(toJsonLine(good)) },
    ];
    const at: Array<{ code: string; partition: number; offset: number }> = [];
    const third = Math.floor(events.length / 3);
    await publish(producer, input, events.slice(0, third));
    for (const x of poison) {
      const [meta] = await producer.send({ topic: input, messages: [{ key: x.key, value: x.value }] });
      at.push({ code: x.code, partition: meta!.partition, offset: Number(meta!.baseOffset) });
    }
    await publish(producer, input, events.slice(third));
    const proc = live(BROKERS, { input, prefix, group: uniqueName('g'), config, idle: '2s' });
    expect(await proc.exited, proc.stderr().slice(-3000)).toEqual({ code: 0, signal: null });
    const outputs = await readOutputs(kafka, prefix);
    const got = outputs.rejects.map((r) => ({ code: r.reason, partition: r.value.partition as number, offset: r.value.offset as number }));
    expect(got.sort((x, y) => x.offset - y.offset || x.partition - y.partition)).toEqual(at.sort((x, y) => x.offset - y.offset || x.partition - y.partition));
    for (const r of outputs.rejects) {
      expect(r.value).toMatchObject({ sourceTopic: input, reasonCode: r.reason });
      expect(String(r.value.reason)).not.toBe('');
    }
    // The good events went through as if the poison were not there.
    expectSameAs(outputs, await replayOf(events, { ...DEFAULT_CONFIG, ...cfg }), 'with poison records');
  });

  it('an operator sees it work: /metrics counts what it did, /readyz turns ready once its partitions are restored', async () => {
    const events = [...generateEvents({ days: 1, seed: 34, scale: 0.02 })];
    const config = writeFile('metrics.json', JSON.stringify({ commit: 'all', idleMs: 120_000 }));
    const input = uniqueName('in');
    await createTopic(kafka, input, 2);
    await publish(producer, input, events);
    const group = uniqueName('g');
    const proc = startCli(['live', '--brokers', BROKERS, '--in', input, '--out', uniqueName('out'), '--group', group,
      '--config', config, '--metrics-port', '0', '--metrics-host', '127.0.0.1', '--exit-when-idle', '60s', '--log-level', 'info']);
    running.push(proc);
    await proc.waitForLog('live: serving /metrics');
    const url = /"url":"([^"]+)"/.exec(proc.stderr())![1]!;
    expect((await fetch(`${url}/healthz`)).status).toBe(200);
    // Ready once every assigned partition is restored; metrics once the backlog is drained.
    let ready = 0;
    let text = '';
    for (let i = 0; i < 100; i++) {
      ready = (await fetch(`${url}/readyz`)).status;
      text = await (await fetch(`${url}/metrics`)).text();
      const families = parsePrometheus(text) as Array<{ name: string; metrics: Array<{ value?: string; labels?: Record<string, string> }> }>;
      const sum = (name: string): number => (families.find((f) => f.name === name)?.metrics ?? []).reduce((n, m) => n + Number(m.value ?? 0), 0);
      if (ready === 200 && sum('pairflow_events_total') === events.length && sum('pairflow_transactions_total') > 0) {
        expect(sum('pairflow_assignments_total')).toBeGreaterThan(0);
        expect(sum('pairflow_partitions_assigned')).toBe(2);
        break;
      }
      await sleep(200);
    }
    expect(ready).toBe(200);
    expect(text).toContain('pairflow_transactions_total{');
    proc.child.kill('SIGTERM');
    expect(await proc.exited, proc.stderr().slice(-2000)).toEqual({ code: 0, signal: null });
    // A clean stop leaves the group (the next owner need not wait out a session timeout).
    const admin = kafka.admin();
    await admin.connect();
    const { groups } = await admin.describeGroups([group]);
    await admin.disconnect();
    expect(groups[0]!.members).toEqual([]);
  });

  describe('kafkaTopicSource()', () => {
    sourceContract('Kafka topic source', async (log) => {
      const topic = uniqueName('contract');
      await createTopic(kafka, topic, 3);
      await producer.send({
        topic,
        messages: log.lines.map((line) => {
          let key: string | null = null;
          try {
            const m = (JSON.parse(line) as { market?: unknown }).market;
            if (typeof m === 'string') key = m;
          } catch {
            // a bad line: published without a key
          }
          return { key, value: line };
        }),
      });
      return kafkaTopicSource({ kafka, topic, metric: log.config.metric });
    });
  });
});
