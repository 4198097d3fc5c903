/**
 * `pairflow live` against a real broker (tests/setup/kafka-global.ts): the committed
 * outputs equal a replay of the same log — uninterrupted, killed at chosen points and
 * restarted, with processes joining and leaving its group, through a broker restart,
 * with poison records in its input — and a Kafka client that is not kafkajs
 * (confluent-kafka / librdkafka) reads exactly what `summarize` reports.
 *
 * Kill points are made to land where they are named by fault injection: with
 * PAIRFLOW_FAULT=POINT[:N] the processor SIGKILLs itself the N-th time it reaches POINT
 * (src/live/processor.ts, FaultPoint). Input is published in parts while processors
 * run, so the kills fall mid-stream.
 */
import { spawnSync } from 'node:child_process';
import { mkdtempSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { fileURLToPath } from 'node:url';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import type { Producer } from 'kafkajs';
import { loadLog } from '../../src/consume/index.js';
import { toJsonLine } from '../../src/consume/schema.js';
import { generateEvents } from '../../src/gen/gen.js';
import { createEventSerde, createKafka, marketPartitioner } from '../../src/kafka/index.js';
import { eventValue, type BusFormat } from '../../src/live/records.js';
import { readOutputs, summarizeOutputs, type LiveOutputs } from '../../src/live/summarize.js';
import { DEFAULT_CONFIG, type PairflowConfig, type PairflowEvent } from '../../src/model.js';
import { drive, fileSource, Pipeline, type RecordSink } from '../../src/pipeline/drive.js';
import type { AssignmentRecord, EpochRecord, ExpiryRecord } from '../../src/ports.js';
import { BROKERS, uniqueName } from './helpers/kafka.js';
import { runCli, startCli, type CliProcess } from './helpers/cli.js';

const dir = mkdtempSync(join(tmpdir(), 'pairflow-live-it-'));

/** A seeded day of the demo city, small: ~2,600 events over four markets. */
function cityLog(seed: number, scale = 0.03): PairflowEvent[] {
  return [...generateEvents({ days: 1, seed, scale })];
}

function writeLog(name: string, events: readonly PairflowEvent[]): string {
  const file = join(dir, name);
  writeFileSync(file, events.map(toJsonLine).join('\n') + '\n');
  return file;
}

function writeConfig(name: string, config: Partial<PairflowConfig>): string {
  const file = join(dir, name);
  writeFileSync(file, JSON.stringify(config));
  return file;
}

/** The outputs of a run as sorted lines: what "the same assignments" means here. */
interface Outputs { assignments: string[]; expired: string[]; windows: string[] }

const aKey = (a: { market: string; epoch: number; demandId: string; demandT: number; supplyId: string; supplyT: number; cost: number; travelMin: number }): string =>
  `${a.market} ${a.epoch} ${a.demandId}@${a.demandT} ${a.supplyId}@${a.supplyT} ${a.travelMin} ${a.cost}`;
const eKey = (e: { market: string; epoch: number; side: string; id: string; t: number; end: number; cost: number }): string =>
  `${e.market} ${e.epoch} ${e.side} ${e.id}@${e.t} ${e.end} ${e.cost}`;
const wKey = (w: Record<string, unknown>): string =>
  ['market', 'epoch', 'poolDemand', 'poolSupply', 'candidatePairs', 'matched', 'tentative', 'primalCost', 'late'].map((k) => String(w[k])).join(' ');

class Tape implements RecordSink {
  readonly out: Outputs = { assignments: [], expired: [], windows: [] };
  assignment(a: AssignmentRecord): void { this.out.assignments.push(aKey(a)); }
  expiry(e: ExpiryRecord): void { this.out.expired.push(eKey(e)); }
  epoch(s: EpochRecord): void { this.out.windows.push(wKey(s as unknown as Record<string, unknown>)); }
  reject(): void {}
}

const sorted = (o: Outputs): Outputs => ({ assignments: [...o.assignments].sort(), expired: [...o.expired].sort(), windows: [...o.windows].sort() });

/** What `pairflow replay` decides on the log (the same pipeline, file source). */
async function replayOutputs(file: string, config: PairflowConfig): Promise<Outputs> {
  const tape = new Tape();
  const loaded = await loadLog([file], { metric: config.metric, strict: false });
  await drive(fileSource(loaded), new Pipeline(config, tape), null);
  return sorted(tape.out);
}

function busOutputs(o: LiveOutputs): Outputs {
  return sorted({
    assignments: o.assignments.map(aKey),
    expired: o.expired.map(eKey),
    windows: o.windows.map(wKey),
  });
}

describe.skipIf(!BROKERS)(`pairflow live (broker ${BROKERS || 'none'})`, () => {
  let kafka: ReturnType<typeof createKafka>;
  let producer: Producer;
  const running: CliProcess[] = [];

  beforeAll(async () => {
    kafka = createKafka({ brokers: BROKERS, clientId: 'pairflow-live-it' });
    producer = kafka.producer({ createPartitioner: marketPartitioner, idempotent: true, maxInFlightRequests: 1 });
    await producer.connect();
  });

  afterAll(async () => {
    for (const p of running) p.child.kill('SIGKILL');
    await producer?.disconnect();
  });

  /** Publishes events (in the order given) keyed by market, as `pairflow publish` does. */
  async function publish(topic: string, events: readonly PairflowEvent[], format: BusFormat = 'json'): Promise<void> {
    const serde = format === 'avro' ? createEventSerde() : null;
    for (let i = 0; i < events.length; i += 1000) {
      await producer.send({
        topic,
        messages: events.slice(i, i + 1000).map((ev) => ({ key: ev.market, value: eventValue(ev, format, serde), timestamp: String(ev.t) })),
      });
    }
  }

  async function createTopic(topic: string, partitions = 3): Promise<void> {
    const admin = kafka.admin();
    await admin.connect();
    await admin.createTopics({ topics: [{ topic, numPartitions: partitions, configEntries: [{ name: 'retention.ms', value: '-1' }] }], waitForLeaders: true });
    await admin.disconnect();
  }

  function live(args: { input: string; prefix: string; group: string; config: string; format?: BusFormat; idle?: string; fault?: string }): CliProcess {
    const p = startCli([
      'live', '--brokers', BROKERS, '--in', args.input, '--out', args.prefix, '--group', args.group, '--config', args.config,
      '--format', args.format ?? 'json', '--exit-when-idle', args.idle ?? '2s', '--session-timeout', '6s', '--log-level', 'info',
    ], args.fault ? { PAIRFLOW_FAULT: args.fault } : {});
    running.push(p);
    return p;
  }

  async function expectExit(p: CliProcess, want: 'ok' | 'killed'): Promise<void> {
    const r = await p.exited;
    if (want === 'ok') expect(r, p.stderr().slice(-3000)).toEqual({ code: 0, signal: null });
    else expect(r.signal, p.stderr().slice(-3000)).toBe('SIGKILL');
  }

  for (const commit of ['all', 'due'] as const) {
    for (const format of ['json', 'avro'] as const) {
      it(`live equals replay: same assignments, expiries and windows (commit "${commit}", ${format})`, async () => {
        const events = cityLog(commit === 'all' ? 7 : 8);
        const cfg: Partial<PairflowConfig> = { commit, idleMs: 60_000 };
        const file = writeLog(`eq-${commit}-${format}.jsonl`, events);
        const config = writeConfig(`eq-${commit}-${format}.json`, cfg);
        const input = uniqueName('in');
        const prefix = uniqueName('out');
        // pairflow publish itself (creates the topic with 3 partitions).
        const pub = await runCli(['publish', file, '--brokers', BROKERS, '--topic', input, '--partitions', '3', '--format', format, '--json']);
        expect(pub.code, pub.stderr).toBe(0);
        expect(JSON.parse(pub.stdout)).toMatchObject({ published: events.length, partitions: 3, created: true });
        const p = live({ input, prefix, group: uniqueName('g'), config, format });
        await expectExit(p, 'ok');
        const want = await replayOutputs(file, { ...DEFAULT_CONFIG, ...cfg });
        expect(want.assignments.length).toBeGreaterThan(300);
        const got = busOutputs(await readOutputs(kafka, prefix));
        expect(got.assignments).toEqual(want.assignments);
        expect(got.expired).toEqual(want.expired);
        expect(got.windows).toEqual(want.windows);
        // summarize (the command) reports the online figures of replay.
        const sum = await runCli(['summarize', '--brokers', BROKERS, '--out', prefix, '--config', config, '--json']);
        expect(sum.code, sum.stderr).toBe(0);
        const s = JSON.parse(sum.stdout) as { online: { matched: number; cost: number }; duplicates: number };
        const rep = await runCli(['replay', file, '--config', config, '--json', '--no-hindsight']);
        const r = JSON.parse(rep.stdout) as { online: { matched: number; abandoned: number; cost: number; meanWaitMin: number; p95WaitMin: number } };
        expect(s.duplicates).toBe(0);
        expect(s.online).toMatchObject({ matched: r.online.matched, abandoned: r.online.abandoned });
        expect(s.online.cost).toBeCloseTo(r.online.cost, 6);
      });
    }
  }

  interface CrashRun { outputs: LiveOutputs; prefix: string }

  /**
   * Publishes a log in three parts around a processor that dies at `fault`, then runs
   * processors until one exits cleanly; the committed outputs must equal the replay's.
   * `between` runs after the kill (e.g. another crash); `companion` starts a second
   * process while the doomed one runs (a rebalance).
   */
  async function crashAndRecover(fault: string, seed: number, opts: {
    between?: (ctx: { input: string; prefix: string; group: string; config: string }) => Promise<void>;
    companion?: boolean;
  } = {}): Promise<CrashRun> {
    const events = cityLog(seed);
    const cfg: Partial<PairflowConfig> = { commit: seed % 2 === 0 ? 'due' : 'all', idleMs: 60_000 };
    const file = writeLog(`crash-${seed}.jsonl`, events);
    const config = writeConfig(`crash-${seed}.json`, cfg);
    const input = uniqueName('in');
    const prefix = uniqueName('out');
    const group = uniqueName('g');
    await createTopic(input);
    const third = Math.floor(events.length / 3);
    await publish(input, events.slice(0, third));
    const doomed = live({ input, prefix, group, config, fault, idle: '60s' });
    await doomed.waitForLog('live: partition restored');
    await publish(input, events.slice(third, 2 * third));
    let survivor: CliProcess | null = null;
    if (opts.companion) {
      // Let the doomed one work on the second part a moment, then join it.
      await new Promise((r) => setTimeout(r, 1500));
      survivor = live({ input, prefix, group, config, idle: '4s' });
    }
    await expectExit(doomed, 'killed');
    await opts.between?.({ input, prefix, group, config });
    await publish(input, events.slice(2 * third));
    survivor ??= live({ input, prefix, group, config });
    await expectExit(survivor, 'ok');
    const want = await replayOutputs(file, { ...DEFAULT_CONFIG, ...cfg });
    const outputs = await readOutputs(kafka, prefix);
    const got = busOutputs(outputs);
    expect(got.assignments, `after a kill at ${fault}`).toEqual(want.assignments);
    expect(got.expired, `after a kill at ${fault}`).toEqual(want.expired);
    expect(got.windows, `after a kill at ${fault}`).toEqual(want.windows);
    expect(summarizeOutputs(prefix, outputs)).toMatchObject({ duplicates: 0, assignedAndExpired: 0 });
    return { outputs, prefix };
  }

  it('killed before its first commit, then restarted: nothing lost, nothing twice', async () => {
    await crashAndRecover('before-first-commit', 21);
  });

  it('killed between producing a batch and committing it, then restarted: the open transaction is aborted, nothing twice', async () => {
    await crashAndRecover('after-send:3', 22);
  });

  it('killed just after a commit, then restarted: it resumes from the committed state', async () => {
    await crashAndRecover('after-commit:4', 23);
  });

  it('killed during the restore of a partition, then restarted: the restore starts over', async () => {
    await crashAndRecover('after-commit:3', 24, {
      between: async (ctx) => {
        const again = live({ ...ctx, fault: 'during-restore' });
        await expectExit(again, 'killed');
      },
    });
  });

  it('killed during a rebalance (a second process joining): the second carries on, nothing lost, nothing twice', async () => {
    await crashAndRecover('during-rebalance', 25, { companion: true });
  });

  it('an outside client (confluent-kafka, read_committed) sees exactly what summarize reports; aborted batches stay hidden', async () => {
    const { outputs, prefix } = await crashAndRecover('after-send:2', 26);
    const script = fileURLToPath(new URL('../reference/read_committed.py', import.meta.url));
    const read = (isolation: string): { records: number; values: string[] } => {
      const r = spawnSync('python3', [script, BROKERS, `${prefix}.assignments`, isolation], { encoding: 'utf8', timeout: 150_000 });
      expect(r.status, r.stderr).toBe(0);
      return JSON.parse(r.stdout) as { records: number; values: string[] };
    };
    const committed = read('read_committed');
    const summary = summarizeOutputs(prefix, outputs);
    expect(committed.records).toBe(summary.online.matched);
    const theirs = committed.values.map((v) => aKey(JSON.parse(v) as Parameters<typeof aKey>[0])).sort();
    expect(theirs).toEqual(busOutputs(outputs).assignments);
    const cost = committed.values.reduce((c, v) => c + (JSON.parse(v) as { cost: number }).cost, 0);
    expect(cost).toBeCloseTo(outputs.assignments.reduce((c, a) => c + a.cost, 0), 6);
    // The kill left an aborted transaction behind: a read_uncommitted reader sees more.
    expect(read('read_uncommitted').records).toBeGreaterThan(committed.records);
  });
});
