/**
 * The live composition (SPEC §3, §7): the pipeline with a Kafka consumer at its input
 * and one transactional producer per input partition at its output.
 *
 * Per input partition p the processor holds one {@link Pipeline} (an engine and the
 * partition's watermark) for the markets keyed to p, and one transactional producer
 * whose id is stable for (group, input topic, p): whoever owns p next fences whoever
 * owned it before. A batch of consumed records goes through the pipeline; once it has
 * closed epochs (or enough input is uncommitted), one transaction commits together
 * - the outputs: assignments, expired, windows, rejects — each to partition p of its topic;
 * - the pool state of every market the batch touched (its market record, and a unit
 *   record for each unit that came or went: see `pool-records.ts`), and the partition's
 *   position (next input offset, watermark) — to partition p of the compacted pool topic;
 * - the consumed offsets (last processed + 1) for the group.
 *
 * kafkajs 2.2.4 predates KIP-447 (the broker cannot make a new owner wait for the old
 * owner's pending offset commit, and kafkajs has no rebalance callbacks), so the
 * position that counts is the one stored with the pool state in the same transaction:
 * a new owner first initialises p's producer (which aborts or completes whatever the
 * previous owner left open), then reads p's pool partition up to a marker it has just
 * committed itself, restores the markets, and seeks the consumer to the stored offset.
 * Records below it are skipped; nothing is processed before the restore ends. Any
 * error inside a transaction throws the producer away and restores p afresh, so the
 * in-memory state never runs ahead of what is committed.
 */
import { randomUUID } from 'node:crypto';
import kafkajs from 'kafkajs';
import type { Consumer, EachBatchPayload, KafkaMessage, Message, Producer, TopicMessages } from 'kafkajs';
import type { Logger } from 'pino';
import { pairflowError } from '../errors.js';
import type { PairflowConfig, Reject } from '../model.js';
import { Pipeline, type RecordSink } from '../pipeline/drive.js';
import type { AssignmentRecord, Clock, EpochRecord, ExpiryRecord } from '../ports.js';
import { applyPersisted, PoolReader, poolRecords, POSITION_KEY, RESTORE_MARK_KEY, type PersistedUnits } from './pool-records.js';
import { readToEnd } from './read.js';
import { InputDecoder, OutputEncoder, type BusFormat, type RecordOrigin, type RejectCode } from './records.js';
import { ensureOutputTopics, liveTopics, type LiveTopics } from './topics.js';

type KafkaClient = InstanceType<typeof kafkajs.Kafka>;

export { POSITION_KEY, RESTORE_MARK_KEY };

/** What a partition's position record holds. */
export interface PartitionPosition {
  version: 1;
  /** Next input offset to process (last processed + 1); null before any record. */
  nextOffset: number | null;
  /** Largest event time seen on the partition (the watermark's base). */
  maxT: number | null;
  /** The watermark the engine was last advanced to. */
  watermark: number | null;
}

/**
 * Points where a test can stop the process on purpose (fault injection), named by
 * where they are: between them lie the states a crash can leave behind.
 */
export type FaultPoint = 'before-first-commit' | 'after-send' | 'after-commit' | 'during-restore' | 'during-rebalance';

/** What the processor reports as it works (metrics and logs hang on these). */
export interface LiveObserver {
  /** A consumed record: an event of this type, or a reject with its code. */
  recordIn?(partition: number, kind: 'supply' | 'demand' | 'withdraw' | 'reject', code?: RejectCode): void;
  /** Records the engine emitted for a partition, counted, once they are committed. */
  outputs?(partition: number, counts: OutputCounts): void;
  /** One record as the engine emits it (before it is committed): per-market figures hang on these. */
  assignment?(partition: number, a: AssignmentRecord): void;
  expired?(partition: number, e: ExpiryRecord): void;
  window?(partition: number, s: EpochRecord): void;
  /** A transaction committed: how long it took, and how long since the watermark closed its first epoch. */
  committed?(partition: number, info: { commitMs: number; closeToCommitMs: number | null; records: number }): void;
  /** A transaction failed and was aborted (the partition is restored afresh). */
  aborted?(partition: number, err: unknown): void;
  /** A partition was restored from the pool topic. */
  restored?(partition: number, info: { ms: number; markets: number; units: number; poolRecords: number }): void;
  /** A partition was given up (revoked, fenced, or shut down). */
  released?(partition: number, why: string): void;
  /** The group assigned these partitions to this process (after every rebalance). */
  assigned?(partitions: readonly number[]): void;
  /** Consumer lag of a partition after a batch (records behind the end of the partition). */
  lag?(partition: number, lag: number): void;
  /** Pool sizes of a partition's markets after a batch. */
  pools?(partition: number, sizes: Array<{ market: string; demand: number; supply: number }>): void;
}

/** Output counts since the last report. */
export interface OutputCounts {
  assignments: number;
  expiredDemand: number;
  expiredSupply: number;
  windows: number;
  late: number;
  rejects: number;
}

/** Options of {@link LiveProcessor}. */
export interface LiveOptions {
  kafka: KafkaClient;
  /** Input topic (SPEC §6 `--in`). */
  input: string;
  /** Output prefix (`--out`): PREFIX.assignments, .expired, .windows, .rejects, .pool. */
  prefix: string;
  /** Consumer group (`--group`); also part of every transactional id. */
  group: string;
  config: PairflowConfig;
  /** Output value format. @default 'json' */
  format?: BusFormat;
  /** Stop once no input has arrived for this long (after the partitions are restored), closing every window. */
  exitWhenIdleMs?: number;
  logger: Logger;
  /** Wall clock for the idle rule and timings. @default performance.now */
  clock?: Clock;
  /** Carry dual prices between epochs. @default true */
  warm?: boolean;
  /** Largest input value taken. @default 65536 */
  maxRecordBytes?: number;
  /** How often partitions are looked at without a batch: idle watermarks, lingering output (ms). @default 25 */
  tickMs?: number;
  /** Commit at the latest after this many uncommitted input records, even without closed epochs. @default 20000 */
  commitEveryRecords?: number;
  /** ... or after this long (ms). @default 1000 */
  commitEveryMs?: number;
  /** How long the records of a closed window may wait for the next windows' to share a transaction (ms); worth it only when windows close faster than transactions commit (event time replayed faster than the clock). @default 0 */
  commitLingerMs?: number;
  /** Transaction timeout the broker enforces on an abandoned transaction (ms). @default 30000 */
  transactionTimeoutMs?: number;
  /** Consumer session timeout: how soon the group notices a process that died (ms). @default 30000 */
  sessionTimeoutMs?: number;
  observer?: LiveObserver;
  /** Write a `live: stats` log line this often (ms); 0 = never. @default 60000 */
  statsEveryMs?: number;
  /** Fault injection for tests: called at each {@link FaultPoint}. */
  fault?: (point: FaultPoint) => void;
}

type PartitionStatus = 'restoring' | 'ready' | 'fenced' | 'released';

/** The records of one partition waiting for the next transaction, and the counts for the observer. */
class PartitionOutput implements RecordSink {
  messages: Message[][] = [[], [], [], []];
  /** Wall time at which the first record waiting for the next transaction was made (an epoch closed). */
  firstAt: number | null = null;
  counts: OutputCounts = { assignments: 0, expiredDemand: 0, expiredSupply: 0, windows: 0, late: 0, rejects: 0 };

  constructor(
    private readonly partition: number,
    private readonly encoder: OutputEncoder,
    private readonly input: string,
    private readonly now: () => number,
    private readonly observer: LiveObserver | undefined,
  ) {}

  private first(): void {
    if (this.firstAt === null) this.firstAt = this.now();
  }

  get size(): number {
    return this.messages[0]!.length + this.messages[1]!.length + this.messages[2]!.length + this.messages[3]!.length;
  }

  assignment(a: AssignmentRecord): void {
    this.first();
    this.messages[0]!.push({ key: a.market, value: this.encoder.assignment(a), partition: this.partition });
    this.counts.assignments++;
    this.observer?.assignment?.(this.partition, a);
  }

  expiry(e: ExpiryRecord): void {
    this.first();
    this.messages[1]!.push({ key: e.market, value: this.encoder.expired(e), partition: this.partition });
    if (e.side === 'demand') this.counts.expiredDemand++;
    else this.counts.expiredSupply++;
    this.observer?.expired?.(this.partition, e);
  }

  epoch(s: EpochRecord): void {
    this.first();
    this.messages[2]!.push({ key: s.market, value: this.encoder.window(s), partition: this.partition });
    this.counts.windows++;
    this.counts.late += s.late;
    this.observer?.window?.(this.partition, s);
  }

  /** An event the engine refused (too late for the history it holds). */
  reject(r: Reject): void {
    const origin: RecordOrigin = { topic: this.input, partition: this.partition, offset: r.pos.offset ?? r.pos.line };
    this.rejectRecord(origin, 'too-late', r.reason, null, Buffer.from(r.raw));
  }

  rejectRecord(origin: RecordOrigin, code: RejectCode, reason: string, key: Buffer | null, value: Buffer | null): void {
    this.messages[3]!.push({
      key, value: this.encoder.reject(origin, code, reason, value), partition: this.partition,
      headers: { 'pairflow-reason': code },
    });
    this.counts.rejects++;
  }

  take(): { messages: Message[][]; counts: OutputCounts; firstAt: number | null } {
    const out = { messages: this.messages, counts: this.counts, firstAt: this.firstAt };
    this.firstAt = null;
    this.messages = [[], [], [], []];
    this.counts = { assignments: 0, expiredDemand: 0, expiredSupply: 0, windows: 0, late: 0, rejects: 0 };
    return out;
  }
}

/** One owned input partition. */
class PartitionState {
  status: PartitionStatus = 'restoring';
  producer: Producer | null = null;
  pipeline: Pipeline | null = null;
  output: PartitionOutput;
  /** Next input offset to process; null until the first record (or a stored position). */
  nextOffset: number | null = null;
  /** Input records taken since the last commit. */
  uncommitted = 0;
  lastCommitAt: number;
  /** Resolves when the restore is over (either way). */
  ready: Promise<void>;
  /** Serialises everything done to this partition (batches, ticks, commits, release). */
  lock: Promise<void> = Promise.resolve();
  /** Seeked back once to the stored position; a second gap is accepted (records gone to retention). */
  sought = false;
  lastInputAt: number;
  readonly token = randomUUID();
  /** Per market, the units whose unit record is committed: seq → record key. */
  persisted: PersistedUnits = new Map();

  constructor(readonly partition: number, encoder: OutputEncoder, input: string, clock: Clock, observer: LiveObserver | undefined) {
    const now = clock.now();
    this.output = new PartitionOutput(partition, encoder, input, () => clock.now(), observer);
    this.lastCommitAt = now;
    this.lastInputAt = now;
    this.ready = Promise.resolve();
  }

  /** Runs `fn` after everything queued on this partition. */
  run<T>(fn: () => Promise<T>): Promise<T> {
    const next = this.lock.then(fn);
    this.lock = next.then(() => {}, () => {});
    return next;
  }
}

const sleep = (ms: number): Promise<void> => new Promise((r) => setTimeout(r, ms));

/** Messages per produce request inside a transaction (see commit()). */
const SEND_SLICE = 1000;

/** Errors no restart can cure: refused credentials or permissions. */
function isFatal(err: unknown): boolean {
  const e = err as { name?: string; type?: string; originalError?: { name?: string; type?: string }; cause?: { name?: string; type?: string } } | null;
  const text = [e?.name, e?.type, e?.originalError?.name, e?.originalError?.type, e?.cause?.name, e?.cause?.type].join(' ');
  return /SASLAuthentication|AUTHORIZATION_FAILED/.test(text);
}

/** Errors that say another process now owns the transactional id. */
function isFenced(err: unknown): boolean {
  const e = err as { type?: string; name?: string; cause?: { type?: string } } | null;
  const type = e?.type ?? e?.cause?.type;
  return type === 'INVALID_PRODUCER_EPOCH' || type === 'PRODUCER_FENCED' || e?.name === 'KafkaJSProducerFenced';
}

/**
 * The live processor of `pairflow live`.
 * @example
 * const p = new LiveProcessor({ kafka, input: 'events', prefix: 'city', group: 'pf', config, logger });
 * await p.run();   // until stop(), or until idle with exitWhenIdleMs
 */
export class LiveProcessor {
  private readonly o: LiveOptions;
  private readonly topics: LiveTopics;
  private readonly decoder: InputDecoder;
  private readonly encoder: OutputEncoder;
  private readonly clock: Clock;
  private readonly log: Logger;
  private readonly parts = new Map<number, PartitionState>();
  private consumer: Consumer | null = null;
  private assigned: number[] = [];
  private joined = false;
  private stopping = false;
  private ticker: ReturnType<typeof setInterval> | null = null;
  private finished!: () => void;
  private failed!: (e: unknown) => void;
  private readonly done: Promise<void>;
  /** Resolves when run() has shut everything down. */
  private readonly stopped: Promise<void>;
  private down!: () => void;
  private idleSince: number | null = null;
  private finishing = false;
  private statsTimer: ReturnType<typeof setInterval> | null = null;
  /** Running counts for the stats log lines and the final one. */
  private readonly stats = {
    records: 0, rejects: 0, transactions: 0, aborted: 0, restores: 0, outputs: 0,
    firstRecordAt: null as number | null, lastCommitWithInputAt: null as number | null,
    closeToCommit: [] as number[], lag: new Map<number, number>(),
  };
  private firstCommitDone = false;
  private consumerRestarts = 0;

  constructor(opts: LiveOptions) {
    this.o = opts;
    this.topics = liveTopics(opts.prefix);
    this.decoder = new InputDecoder({ metric: opts.config.metric, ...(opts.maxRecordBytes !== undefined ? { maxRecordBytes: opts.maxRecordBytes } : {}) });
    this.encoder = new OutputEncoder(opts.format ?? 'json');
    this.clock = opts.clock ?? { now: () => performance.now() };
    this.log = opts.logger;
    this.done = new Promise<void>((res, rej) => { this.finished = res; this.failed = rej; });
    this.done.catch(() => {});
    this.stopped = new Promise<void>((res) => { this.down = res; });
  }

  /** The transactional id of an input partition: stable per group, topic and partition. */
  transactionalId(partition: number): string {
    return `pairflow.${this.o.group}.${this.o.input}.${partition}`;
  }

  /** True when every assigned partition is restored and being consumed (readiness). */
  isReady(): boolean {
    return this.joined && !this.stopping && this.assigned.every((p) => this.parts.get(p)?.status === 'ready');
  }

  /** Partitions this process owns now, and their state. */
  partitions(): Array<{ partition: number; status: PartitionStatus; nextOffset: number | null }> {
    return [...this.parts.values()].map((s) => ({ partition: s.partition, status: s.status, nextOffset: s.nextOffset }));
  }

  /**
   * Creates missing output topics, joins the group and processes until {@link stop} or,
   * with `exitWhenIdleMs`, until the input has been idle that long.
   */
  async run(): Promise<void> {
    try {
      const { kafka, input, group } = this.o;
      const partitionCount = await ensureOutputTopics(kafka, input, this.topics, this.log);
      this.log.info({ input, prefix: this.o.prefix, group, partitions: partitionCount, format: this.encoder.format }, 'live: starting');
      await this.startConsumer(partitionCount);
      this.ticker = setInterval(() => { void this.onTick(); }, this.o.tickMs ?? 25);
      const every = this.o.statsEveryMs ?? 60_000;
      if (every > 0) this.statsTimer = setInterval(() => this.logStats('live: stats'), every);
      await this.done;
    } finally {
      await this.shutdown();
      this.down();
    }
  }

  /**
   * Creates, connects and runs the group consumer. kafkajs restarts a consumer by
   * itself only after errors it classes as retriable; others (a group coordinator not
   * found while the broker restarts, say) stop it: then a new one is started here,
   * unless the error says the credentials or permissions were refused.
   */
  private async startConsumer(partitionCount: number): Promise<void> {
    const { kafka, input, group } = this.o;
    const consumer = kafka.consumer({
      groupId: group,
      readUncommitted: false,
      allowAutoTopicCreation: false,
      sessionTimeout: this.o.sessionTimeoutMs ?? 30_000,
      heartbeatInterval: Math.max(500, Math.floor((this.o.sessionTimeoutMs ?? 30_000) / 10)),
      maxWaitTimeInMs: 200,
      // Larger fetches: fewer, larger batches per transaction while draining a backlog.
      maxBytesPerPartition: 4 << 20,
      maxBytes: 32 << 20,
      retry: {
        retries: 10, initialRetryTime: 300, maxRetryTime: 10_000,
        // A broker away for longer than the retries last (a restart, a failover) must
        // not end the processor: kafkajs starts the consumer again. Refused
        // credentials or permissions stay fatal.
        restartOnFailure: async (err: Error) => {
          const e = err as Error & { type?: string; originalError?: { type?: string; name?: string } };
          const text = `${e.name} ${e.type ?? ''} ${e.originalError?.name ?? ''} ${e.originalError?.type ?? ''}`;
          const fatal = /SASLAuthentication|AUTHORIZATION_FAILED/.test(text);
          if (!fatal && !this.stopping) this.log.warn({ err }, 'live: consumer failed; starting it again');
          return !fatal && !this.stopping;
        },
      },
    });
    this.consumer = consumer;
    consumer.on(consumer.events.GROUP_JOIN, (e) => this.onJoin(e.payload.memberAssignment[input] ?? []));
    consumer.on(consumer.events.REBALANCING, () => {
      // Not ready (nor idle) until the group has given out its partitions again.
      this.joined = false;
      this.o.fault?.('during-rebalance');
      this.log.info({ group }, 'live: group rebalancing');
    });
    consumer.on(consumer.events.CRASH, (e) => {
      this.joined = false;
      if (e.payload.restart || this.stopping) return;
      const err = e.payload.error as Error & { type?: string };
      if (isFatal(err)) {
        this.log.error({ err }, 'live: consumer stopped after an error');
        this.failed(pairflowError('PAIRFLOW_ERR_KAFKA_CONSUMER', { detail: err.message }, err));
        return;
      }
      this.log.warn({ err }, 'live: consumer stopped after an error; starting a new one');
      this.consumerRestarts++;
      const wait = Math.min(10_000, 500 * 2 ** Math.min(this.consumerRestarts, 5));
      setTimeout(() => {
        if (this.stopping) return;
        this.startConsumer(partitionCount).catch((err2: unknown) => {
          this.log.error({ err: err2 }, 'live: could not start a new consumer');
          this.failed(pairflowError('PAIRFLOW_ERR_KAFKA_CONSUMER', { detail: (err2 as Error).message }, err2));
        });
      }, wait);
    });
    await consumer.connect();
    await consumer.subscribe({ topic: input, fromBeginning: true });
    await consumer.run({
      autoCommit: false,
      eachBatchAutoResolve: false,
      partitionsConsumedConcurrently: Math.max(1, partitionCount),
      eachBatch: (payload) => this.onBatch(payload),
    });
  }

  /**
   * Stops: finishes the transaction under way, commits what is processed and not yet
   * committed (without closing windows early), leaves the group.
   */
  async stop(): Promise<void> {
    if (this.stopping) return this.stopped;
    this.stopping = true;
    this.log.info('live: stopping');
    await Promise.all([...this.parts.values()].map((st) => st.run(async () => {
      if (st.status === 'ready' && (st.uncommitted > 0 || st.output.size > 0)) await this.commit(st, 'stop').catch(() => {});
    })));
    this.finished();
    // Resolves once the group is left and every producer is closed (see run()).
    return this.stopped;
  }

  /**
   * One log line of figures: records and transactions so far, the epoch-close-to-commit
   * latency since the last line, memory, lag and pool sizes.
   */
  private logStats(msg: string): void {
    const s = this.stats;
    const lat = s.closeToCommit.sort((a, b) => a - b);
    const q = (p: number): number | null => (lat.length === 0 ? null : Math.round(lat[Math.min(lat.length - 1, Math.floor(p * lat.length))]! * 10) / 10);
    const mem = process.memoryUsage();
    let units = 0;
    for (const st of this.parts.values()) for (const ps of st.pipeline?.engine.poolSizes() ?? []) units += ps.demand + ps.supply + ps.pending;
    this.log.info({
      records: s.records, rejects: s.rejects, transactions: s.transactions, aborted: s.aborted, restores: s.restores, outputs: s.outputs,
      closeToCommitMs: { n: lat.length, p50: q(0.5), p99: q(0.99), max: lat.length ? Math.round(lat[lat.length - 1]! * 10) / 10 : null },
      rssMb: Math.round(mem.rss / 2 ** 20), heapMb: Math.round(mem.heapUsed / 2 ** 20),
      lag: [...s.lag.values()].reduce((a, b) => a + b, 0), poolUnits: units,
      busyMs: s.firstRecordAt !== null && s.lastCommitWithInputAt !== null ? Math.round(s.lastCommitWithInputAt - s.firstRecordAt) : null,
    }, msg);
    s.closeToCommit = [];
  }

  private async shutdown(): Promise<void> {
    if (this.ticker) clearInterval(this.ticker);
    this.ticker = null;
    if (this.statsTimer) clearInterval(this.statsTimer);
    this.statsTimer = null;
    this.logStats('live: totals');
    this.stopping = true;
    await this.consumer?.disconnect().catch(() => {});
    for (const st of this.parts.values()) await this.release(st, 'shutdown');
    this.log.info('live: stopped');
  }

  // ---------------------------------------------------------------- assignment

  private onJoin(assigned: number[]): void {
    const next = new Set(assigned);
    this.joined = true;
    this.o.observer?.assigned?.(assigned);
    this.assigned = [...assigned].sort((a, b) => a - b);
    this.log.info({ partitions: this.assigned }, 'live: partitions assigned');
    for (const st of [...this.parts.values()]) {
      if (!next.has(st.partition)) void st.run(() => this.release(st, 'revoked'));
    }
    for (const p of assigned) {
      const st = this.parts.get(p);
      if (!st || st.status === 'fenced' || st.status === 'released') this.claim(p);
    }
    this.idleSince = null;
  }

  private readonly paused = new Set<number>();

  private pause(p: number): void {
    if (this.paused.has(p)) return;
    this.paused.add(p);
    this.consumer?.pause([{ topic: this.o.input, partitions: [p] }]);
  }

  /** Takes partition p: fences the previous owner, restores its markets. */
  private claim(p: number): PartitionState {
    if (this.paused.delete(p)) this.consumer?.resume([{ topic: this.o.input, partitions: [p] }]);
    const st = new PartitionState(p, this.encoder, this.o.input, this.clock, this.o.observer);
    this.parts.set(p, st);
    st.ready = st.run(() => this.restore(st)).catch((err: unknown) => {
      this.log.error({ partition: p, err }, 'live: restore failed');
      st.status = 'fenced';
    });
    return st;
  }

  private async newProducer(p: number): Promise<Producer> {
    const producer = this.o.kafka.producer({
      transactionalId: this.transactionalId(p),
      idempotent: true,
      maxInFlightRequests: 1,
      transactionTimeout: this.o.transactionTimeoutMs ?? 30_000,
      allowAutoTopicCreation: false,
      // A transaction begun right after the last one's commit is often answered
      // CONCURRENT_TRANSACTIONS while the broker still writes the markers, and kafkajs
      // retries that after its first backoff (tulios/kafkajs#304; the Java client waits
      // 20 ms, KAFKA-5477). From 200 ms, one commit in four or five took 300 ms more
      // (measured on the local broker); from 20 ms, at most 40 ms in all.
      retry: { retries: 12, initialRetryTime: 20, maxRetryTime: 5000 },
    });
    await producer.connect();
    return producer;
  }

  private async restore(st: PartitionState): Promise<void> {
    const p = st.partition;
    const t0 = this.clock.now();
    for (let attempt = 0; ; attempt++) {
      if (this.stopping) return;
      try {
        // InitProducerId: from here on the previous owner cannot commit, and whatever it
        // left open is aborted or completed before we read.
        st.producer = await this.newProducer(p);
        const tx = await st.producer.transaction();
        const [meta] = await tx.send({ topic: this.topics.pool, messages: [{ key: RESTORE_MARK_KEY, value: Buffer.from(st.token), partition: p }] });
        await tx.commit();
        const mark = Number(meta?.baseOffset ?? meta?.offset);
        if (!Number.isFinite(mark)) throw pairflowError('PAIRFLOW_ERR_INTERNAL_BUG', { detail: `no offset for the restore marker of partition ${p}` });
        const reader = new PoolReader();
        let position: PartitionPosition | null = null;
        let poolRecords = 0;
        await readToEnd({
          kafka: this.o.kafka,
          topic: this.topics.pool,
          partitions: [p],
          until: new Map([[p, mark + 1]]),
          onRecord: (_part, m: KafkaMessage) => {
            poolRecords++;
            if (poolRecords === 1) this.o.fault?.('during-restore');
            const key = m.key ?? Buffer.alloc(0);
            if (key.equals(RESTORE_MARK_KEY)) return;
            if (key.equals(POSITION_KEY)) {
              position = m.value === null ? null : (JSON.parse(m.value.toString('utf8')) as PartitionPosition);
              return;
            }
            reader.take(key, m.value);
          },
        });
        const pipeline = new Pipeline(this.o.config, st.output, { warm: this.o.warm ?? true, clock: this.clock, now: () => this.clock.now() });
        const { markets, units, persisted } = reader.restoreInto(pipeline.engine);
        st.persisted = persisted;
        const pos = position as PartitionPosition | null;
        if (pos) {
          pipeline.resume({ maxT: pos.maxT, watermark: pos.watermark });
          st.nextOffset = pos.nextOffset;
        }
        pipeline.engine.takeTouched();
        st.pipeline = pipeline;
        st.status = 'ready';
        st.lastCommitAt = this.clock.now();
        const ms = this.clock.now() - t0;
        this.stats.restores++;
        this.o.observer?.restored?.(p, { ms, markets, units, poolRecords });
        this.log.info({ partition: p, ms: Math.round(ms), markets, units, poolRecords, nextOffset: st.nextOffset }, 'live: partition restored');
        return;
      } catch (err) {
        await st.producer?.disconnect().catch(() => {});
        st.producer = null;
        if (this.stopping || !this.assigned.includes(p)) throw err;
        const wait = Math.min(10_000, 500 * 2 ** Math.min(attempt, 5));
        this.log.warn({ partition: p, err, retryInMs: wait }, 'live: restore failed, retrying');
        await sleep(wait);
      }
    }
  }

  private async release(st: PartitionState, why: string): Promise<void> {
    if (st.status === 'released') return;
    st.status = 'released';
    if (this.parts.get(st.partition) === st) this.parts.delete(st.partition);
    await st.producer?.disconnect().catch(() => {});
    st.producer = null;
    st.pipeline = null;
    this.stats.lag.delete(st.partition);
    this.o.observer?.released?.(st.partition, why);
    this.log.info({ partition: st.partition, why }, 'live: partition released');
  }

  // ---------------------------------------------------------------- processing

  private async onBatch({ batch, heartbeat, resolveOffset, isStale }: EachBatchPayload): Promise<void> {
    const p = batch.partition;
    let st = this.parts.get(p);
    if (!st || st.status === 'released') st = this.claim(p);
    // Keep the group membership alive while the restore runs.
    for (;;) {
      const settled = await Promise.race([st.ready.then(() => true), sleep(1000).then(() => false)]);
      if (settled) break;
      await heartbeat();
    }
    if (st.status === 'fenced') {
      // Another process owns it (a rebalance will say so); stop fetching it till then.
      this.pause(p);
      return;
    }
    if (st.status !== 'ready' || this.stopping || isStale()) return;
    const state = st;
    await state.run(async () => {
      if (state.status !== 'ready' || this.stopping) return;
      const fetched = Number((batch as unknown as { fetchedOffset?: string }).fetchedOffset ?? batch.firstOffset() ?? NaN);
      if (state.nextOffset !== null && fetched > state.nextOffset && !state.sought) {
        // The group's committed offset is ahead of the stored position (or was read
        // before the previous owner's last commit landed): go back to the position.
        state.sought = true;
        this.log.info({ partition: p, from: fetched, to: state.nextOffset }, 'live: seeking to the stored position');
        this.consumer!.seek({ topic: this.o.input, partition: p, offset: String(state.nextOffset) });
        return;
      }
      if (state.nextOffset !== null && fetched > state.nextOffset) {
        this.log.warn({ partition: p, expected: state.nextOffset, got: fetched }, 'live: input records before this offset are gone (retention); going on');
      }
      const pipeline = state.pipeline!;
      let last = -1;
      for (const m of batch.messages) {
        const offset = Number(m.offset);
        if (state.nextOffset !== null && offset < state.nextOffset) continue;
        this.take(state, pipeline, { topic: this.o.input, partition: p, offset }, m);
        state.nextOffset = offset + 1;
        state.uncommitted++;
        last = offset;
      }
      if (last >= 0) {
        state.lastInputAt = this.clock.now();
        this.idleSince = null;
      }
      const lag = Number(batch.offsetLag());
      this.stats.lag.set(p, lag);
      this.o.observer?.lag?.(p, lag);
      await this.maybeCommit(state, 'batch');
      if (last >= 0) resolveOffset(String(last));
    });
    await heartbeat();
  }

  /** One consumed record into the pipeline (or the rejects). */
  private take(st: PartitionState, pipeline: Pipeline, origin: RecordOrigin, m: KafkaMessage): void {
    const d = this.decoder.decode(origin, m.key, m.value);
    this.stats.records++;
    this.stats.firstRecordAt ??= this.clock.now();
    if (!d.ok) {
      this.stats.rejects++;
      pipeline.watermark.observe(null);
      st.output.rejectRecord(origin, d.code, d.reason, m.key, m.value);
      this.o.observer?.recordIn?.(st.partition, 'reject', d.code);
      return;
    }
    this.o.observer?.recordIn?.(st.partition, d.ev.event.type);
    pipeline.offerEvent(d.ev);
  }

  private async maybeCommit(st: PartitionState, why: string): Promise<void> {
    const now = this.clock.now();
    const firstAt = st.output.firstAt;
    // Closed windows wait up to the linger for the windows closing right after them, so
    // one transaction (and one pool snapshot per market) carries several: a transaction
    // per window would spend the processor and the broker on snapshots and markers.
    const lingered = firstAt !== null && now - firstAt >= (this.o.commitLingerMs ?? 0);
    const due = lingered
      || st.output.size >= 5000
      || (firstAt === null && st.output.size > 0)
      || st.uncommitted >= (this.o.commitEveryRecords ?? 20_000)
      || (st.uncommitted > 0 && now - st.lastCommitAt >= (this.o.commitEveryMs ?? 1000));
    if (due) await this.commit(st, why);
  }

  /** One transaction: outputs, pool state of the touched markets, position, offsets. */
  private async commit(st: PartitionState, why: string): Promise<void> {
    const p = st.partition;
    const pipeline = st.pipeline!;
    const producer = st.producer!;
    const t0 = this.clock.now();
    const { messages, counts, firstAt } = st.output.take();
    const touched = pipeline.engine.takeTouched();
    const written = poolRecords(pipeline.engine, touched, st.persisted);
    const pool: Message[] = written.records.map((r) => ({ key: r.key, value: r.value, partition: p }));
    const position: PartitionPosition = {
      version: 1,
      nextOffset: st.nextOffset,
      maxT: pipeline.watermark.state().maxT,
      watermark: Number.isFinite(pipeline.advancedTo) ? pipeline.advancedTo : null,
    };
    pool.push({ key: POSITION_KEY, value: JSON.stringify(position), partition: p });
    const topicMessages: TopicMessages[] = [
      { topic: this.topics.assignments, messages: messages[0]! },
      { topic: this.topics.expired, messages: messages[1]! },
      { topic: this.topics.windows, messages: messages[2]! },
      { topic: this.topics.rejects, messages: messages[3]! },
    ].filter((t) => t.messages.length > 0);
    if (!this.firstCommitDone) this.o.fault?.('before-first-commit');
    let tx: Awaited<ReturnType<Producer['transaction']>> | null = null;
    try {
      tx = await producer.transaction();
      // kafkajs groups a request's messages per partition by copying the list for each
      // message (quadratic in the messages of one partition): send in slices.
      for (const t of topicMessages) {
        for (let i = 0; i < t.messages.length; i += SEND_SLICE) {
          await tx.sendBatch({ topicMessages: [{ topic: t.topic, messages: t.messages.slice(i, i + SEND_SLICE) }] });
        }
      }
      // Uncompressed: a transaction per window in real time makes gzip's CPU the larger cost.
      for (let i = 0; i < pool.length; i += SEND_SLICE) {
        await tx.sendBatch({ topicMessages: [{ topic: this.topics.pool, messages: pool.slice(i, i + SEND_SLICE) }] });
      }
      this.o.fault?.('after-send');
      if (st.nextOffset !== null) {
        await tx.sendOffsets({
          consumerGroupId: this.o.group,
          topics: [{ topic: this.o.input, partitions: [{ partition: p, offset: String(st.nextOffset) }] }],
        });
      }
      await tx.commit();
    } catch (err) {
      if (tx) await tx.abort().catch(() => {});
      this.stats.aborted++;
      this.o.observer?.aborted?.(p, err);
      await this.recover(st, err);
      return;
    }
    applyPersisted(st.persisted, written.after);
    this.firstCommitDone = true;
    this.o.fault?.('after-commit');
    const done = this.clock.now();
    const records = topicMessages.reduce((n, t) => n + t.messages.length, 0);
    this.stats.transactions++;
    this.stats.outputs += records;
    if (st.uncommitted > 0) this.stats.lastCommitWithInputAt = done;
    if (firstAt !== null) this.stats.closeToCommit.push(done - firstAt);
    this.o.observer?.outputs?.(p, counts);
    this.o.observer?.committed?.(p, { commitMs: done - t0, closeToCommitMs: firstAt === null ? null : done - firstAt, records });
    this.o.observer?.pools?.(p, pipeline.engine.poolSizes());
    this.log.debug({ partition: p, why, records, markets: touched.length, nextOffset: st.nextOffset, ms: Math.round(done - t0) }, 'live: batch committed');
    st.uncommitted = 0;
    st.lastCommitAt = done;
  }

  /**
   * A transaction failed: the producer is thrown away and the partition's state, now
   * ahead of what is committed, with it. Fenced: another process owns the partition
   * (a rebalance is on its way). Otherwise the partition is restored afresh and the
   * consumer goes back to the restored position.
   */
  private async recover(st: PartitionState, err: unknown): Promise<void> {
    const p = st.partition;
    await st.producer?.disconnect().catch(() => {});
    st.producer = null;
    st.pipeline = null;
    st.output.take();
    if (isFenced(err)) {
      st.status = 'fenced';
      this.log.warn({ partition: p, err }, 'live: fenced by a newer owner of the partition; giving it up');
      this.o.observer?.released?.(p, 'fenced');
      return;
    }
    this.log.warn({ partition: p, err }, 'live: transaction failed; restoring the partition from the committed state');
    st.status = 'restoring';
    st.sought = false;
    await this.restore(st).catch((e: unknown) => {
      this.log.error({ partition: p, err: e }, 'live: restore failed');
      st.status = 'fenced';
    });
    if ((st.status as PartitionStatus) === 'ready' && st.nextOffset !== null) {
      this.consumer?.seek({ topic: this.o.input, partition: p, offset: String(st.nextOffset) });
    }
  }

  // ---------------------------------------------------------------- idle

  private async onTick(): Promise<void> {
    if (this.stopping) return;
    const now = this.clock.now();
    await Promise.all([...this.parts.values()].map((st) => {
      if (st.status !== 'ready') return undefined;
      return st.run(async () => {
        if (st.status !== 'ready' || this.stopping) return;
        st.pipeline!.tick();
        await this.maybeCommit(st, 'idle');
      });
    }));
    const limit = this.o.exitWhenIdleMs;
    if (limit === undefined || this.finishing) return;
    if (!this.isReady()) {
      // Idleness counts only while every assigned partition is restored and consuming:
      // a restore (a rebalance, a broker that went away) starts the count over.
      this.idleSince = null;
      return;
    }
    // Records waiting on a partition (its lag after the last batch) are not idleness,
    // however long the batches take.
    if ([...this.stats.lag.values()].some((l) => l > 0)) {
      this.idleSince = null;
      return;
    }
    const lastInput = Math.max(...[...this.parts.values()].map((s) => s.lastInputAt), -Infinity);
    if (this.idleSince === null) this.idleSince = now;
    const quiet = now - Math.max(this.idleSince, lastInput === -Infinity ? this.idleSince : lastInput);
    if (quiet >= limit) await this.finishIdle();
  }

  /**
   * `--exit-when-idle`: close every window as if the log had ended, commit, stop. If a
   * commit fails (the broker is away), the partition goes back to its committed state
   * and the processor carries on as before; the idle clock starts over.
   */
  private async finishIdle(): Promise<void> {
    if (this.stopping || this.finishing) return;
    this.finishing = true;
    this.log.info({ idleMs: this.o.exitWhenIdleMs }, 'live: input idle; closing every window');
    const results = await Promise.all([...this.parts.values()].map((st) => st.run(async () => {
      if (st.status !== 'ready') return false;
      st.pipeline!.finish();
      await this.commit(st, 'finish');
      return (st.status as PartitionStatus) === 'ready';
    })));
    this.finishing = false;
    if (results.every(Boolean) && this.isReady()) {
      this.stopping = true;
      this.log.info('live: every window closed and committed; exiting');
      this.finished();
      return;
    }
    this.idleSince = null;
    this.log.warn('live: the final commit did not go through; carrying on from the committed state');
  }
}
