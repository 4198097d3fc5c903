/**
 * The live processor's Prometheus metrics (docs/operations.md "Metrics").
 *
 * {@link createMetrics} builds a fresh prom-client registry per call — no global
 * registry, so two processors in one test process never share counters — and returns
 * typed methods the live composition calls at each event. Names and units follow the
 * Prometheus naming conventions (prometheus.io/docs/practices/naming): one `pairflow_`
 * prefix, base units (seconds; callers pass milliseconds, pairflow's unit everywhere
 * else, and the methods convert), `_total` on counters, and labels only with bounded
 * values (market, side, partition, event type, a reject class — never an id or free
 * text).
 */
import client from 'prom-client';
import type { Registry } from 'prom-client';
import type { RejectCode } from '../live/records.js';

const { Counter, Gauge, Histogram, collectDefaultMetrics } = client;
const RegistryClass = client.Registry;

/** Event kinds of SPEC §1, the values of the `type` label. */
export type EventType = 'supply' | 'demand' | 'withdraw';
/** A unit's side, the values of the `side` label. */
export type SideLabel = 'supply' | 'demand';
/** How a transaction ended, the values of the `outcome` label. */
export type TransactionOutcome = 'committed' | 'aborted';

/**
 * The event fields of SPEC §1 a validation reason can name (src/consume/validate.ts
 * starts such a reason with `field '<name>'`): the values of the `field` label.
 */
export const EVENT_FIELDS = ['type', 'id', 'market', 't', 'lat', 'lon', 'x', 'y', 'until', 'has', 'needs', 'side'] as const;

/**
 * The bounded `field` label of an `invalid-event` reject, from the reason text that goes
 * to the rejects topic: the SPEC §1 field the validator names, `object` for a value that
 * is not an object, `other` for anything else. Free text never becomes a label value: it
 * would make a new time series per distinct message.
 * @example rejectField("field 'lat': got 95, expected a latitude in [-90, 90]") // 'lat'
 */
export function rejectField(reason: string): string {
  const m = /^field '([^']+)'/.exec(reason);
  if (m && (EVENT_FIELDS as readonly string[]).includes(m[1]!)) return m[1]!;
  if (reason.startsWith('expected a JSON object')) return 'object';
  return 'other';
}

/**
 * Histogram buckets, in seconds. Solve times run from well under a millisecond (small
 * pools) to seconds (thousands of units); close-to-commit spans a transaction round trip
 * (milliseconds) to a stalled broker (a minute); a restore reads a compacted topic
 * (tens of milliseconds to minutes).
 */
export const BUCKETS = {
  solveSeconds: [0.0005, 0.001, 0.0025, 0.005, 0.01, 0.025, 0.05, 0.1, 0.25, 0.5, 1, 2.5, 5, 10],
  closeToCommitSeconds: [0.005, 0.01, 0.025, 0.05, 0.1, 0.25, 0.5, 1, 2.5, 5, 10, 30, 60],
  restoreSeconds: [0.01, 0.05, 0.1, 0.25, 0.5, 1, 2.5, 5, 10, 30, 60, 120, 300],
} as const;

/** Options of {@link createMetrics}. */
export interface MetricsOptions {
  /** Also export prom-client's process and Node.js metrics (`process_resident_memory_bytes`, `nodejs_eventloop_lag_seconds`, …). @default true */
  readonly defaultMetrics?: boolean;
  /** pairflow's version, for `pairflow_build_info`. @default 'unknown' */
  readonly version?: string;
}

/**
 * The metrics of one live processor. Every method is cheap (a map look-up and an add)
 * and never throws on a valid argument.
 */
export interface LiveMetrics {
  /** The registry `/metrics` serves. */
  readonly registry: Registry;
  /** One input event of this type was read and validated (`pairflow_events_total`). */
  eventIn(type: EventType, count?: number): void;
  /**
   * One input record was rejected (`pairflow_rejects_total`): `code` is the live
   * processor's reject code; for `invalid-event`, `reason` (the reject's text) gives the
   * `field` label through {@link rejectField}.
   */
  reject(code: RejectCode, reason?: string): void;
  /** One event arrived before an epoch its partition had already closed (`pairflow_late_events_total`). */
  lateEvent(partition: number, count?: number): void;
  /** One epoch of a market was closed and solved (`pairflow_windows_closed_total` and `pairflow_epoch_solve_duration_seconds`). */
  windowClosed(market: string, solveMs: number): void;
  /** `count` pairs of a market were executed (`pairflow_assignments_total`). */
  assignment(market: string, count?: number): void;
  /** `count` occurrences of a market left unmatched (`pairflow_expirations_total`). */
  expiration(market: string, side: SideLabel, count?: number): void;
  /** The pool of a market now holds `supply` and `demand` waiting occurrences (`pairflow_pool_size`). */
  poolSize(market: string, supply: number, demand: number): void;
  /**
   * A transaction of a partition committed: counts it, and observes for every epoch it
   * carried the wall-clock time from the epoch's close to this commit
   * (`pairflow_transactions_total{outcome="committed"}`, `pairflow_epoch_close_to_commit_seconds`).
   */
  committed(partition: number, closeToCommitMs: readonly number[]): void;
  /** A transaction of a partition was aborted (`pairflow_transactions_total{outcome="aborted"}`). */
  aborted(partition: number): void;
  /** The consumer's lag on a partition: high watermark − next offset to read (`pairflow_consumer_lag_records`). */
  consumerLag(partition: number, records: number): void;
  /** An assigned partition's markets were restored from the pool topic in `ms` (`pairflow_restore_duration_seconds`). */
  restored(ms: number): void;
  /** The group assigned these partitions to this process (`pairflow_partitions_assigned`). */
  partitionsAssigned(count: number): void;
  /** Drops the per-partition series of a revoked partition, so its last lag does not linger. */
  forgetPartition(partition: number): void;
  /** Drops the per-market gauges of a market that moved to another process. */
  forgetMarket(market: string): void;
}

const seconds = (ms: number): number => ms / 1000;

/**
 * Builds a registry holding every metric of the live processor.
 * @example
 * const metrics = createMetrics({ version: '0.1.0' });
 * metrics.assignment('north', 3);
 * const text = await metrics.registry.metrics(); // Prometheus text format
 */
export function createMetrics(options: MetricsOptions = {}): LiveMetrics {
  const registry = new RegistryClass();
  const registers = [registry];
  if (options.defaultMetrics ?? true) collectDefaultMetrics({ register: registry });

  const buildInfo = new Gauge({
    name: 'pairflow_build_info',
    help: 'Always 1; labels name the pairflow and Node.js versions of this process.',
    labelNames: ['version', 'nodejs'] as const,
    registers,
  });
  buildInfo.set({ version: options.version ?? 'unknown', nodejs: process.versions.node }, 1);

  const events = new Counter({
    name: 'pairflow_events_total',
    help: 'Input events read and validated, by event type.',
    labelNames: ['type'] as const,
    registers,
  });
  const rejects = new Counter({
    name: 'pairflow_rejects_total',
    help: 'Input records rejected (written to PREFIX.rejects), by reject code and, for invalid events, the field at fault.',
    labelNames: ['reason', 'field'] as const,
    registers,
  });
  const late = new Counter({
    name: 'pairflow_late_events_total',
    help: 'Events whose time was before an epoch their partition had already closed.',
    labelNames: ['partition'] as const,
    registers,
  });
  const windows = new Counter({
    name: 'pairflow_windows_closed_total',
    help: 'Epochs closed and solved, by market.',
    labelNames: ['market'] as const,
    registers,
  });
  const assignments = new Counter({
    name: 'pairflow_assignments_total',
    help: 'Executed pairs (records written to PREFIX.assignments), by market.',
    labelNames: ['market'] as const,
    registers,
  });
  const expirations = new Counter({
    name: 'pairflow_expirations_total',
    help: 'Unit occurrences that left unmatched (records written to PREFIX.expired), by market and side.',
    labelNames: ['market', 'side'] as const,
    registers,
  });
  const pool = new Gauge({
    name: 'pairflow_pool_size',
    help: 'Unit occurrences waiting in the pool after the last closed epoch, by market and side.',
    labelNames: ['market', 'side'] as const,
    registers,
  });
  const solve = new Histogram({
    name: 'pairflow_epoch_solve_duration_seconds',
    help: 'Time to solve one epoch of one market (the exact assignment), in seconds.',
    buckets: [...BUCKETS.solveSeconds],
    registers,
  });
  const closeToCommit = new Histogram({
    name: 'pairflow_epoch_close_to_commit_seconds',
    help: 'Wall-clock time from the close of an epoch to the commit of the transaction that carried its outputs, in seconds.',
    buckets: [...BUCKETS.closeToCommitSeconds],
    registers,
  });
  const lag = new Gauge({
    name: 'pairflow_consumer_lag_records',
    help: 'Records of an assigned input partition not yet read: high watermark minus the next offset to read.',
    labelNames: ['partition'] as const,
    registers,
  });
  const transactions = new Counter({
    name: 'pairflow_transactions_total',
    help: 'Kafka transactions ended, by input partition and outcome (committed or aborted).',
    labelNames: ['partition', 'outcome'] as const,
    registers,
  });
  const restore = new Histogram({
    name: 'pairflow_restore_duration_seconds',
    help: 'Time to restore the pool state of an assigned partition from PREFIX.pool, in seconds.',
    buckets: [...BUCKETS.restoreSeconds],
    registers,
  });
  const assigned = new Gauge({
    name: 'pairflow_partitions_assigned',
    help: 'Input partitions the consumer group assigned to this process.',
    registers,
  });
  assigned.set(0);

  const markets = new Set<string>();
  return {
    registry,
    eventIn(type, count = 1) {
      events.inc({ type }, count);
    },
    reject(code, reason) {
      if (code === 'invalid-event') rejects.inc({ reason: code, field: rejectField(reason ?? '') });
      else rejects.inc({ reason: code });
    },
    lateEvent(partition, count = 1) {
      late.inc({ partition: String(partition) }, count);
    },
    windowClosed(market, solveMs) {
      markets.add(market);
      windows.inc({ market });
      solve.observe(seconds(solveMs));
    },
    assignment(market, count = 1) {
      markets.add(market);
      assignments.inc({ market }, count);
    },
    expiration(market, side, count = 1) {
      markets.add(market);
      expirations.inc({ market, side }, count);
    },
    poolSize(market, supply, demand) {
      markets.add(market);
      pool.set({ market, side: 'supply' }, supply);
      pool.set({ market, side: 'demand' }, demand);
    },
    committed(partition, closeToCommitMs) {
      transactions.inc({ partition: String(partition), outcome: 'committed' });
      for (const ms of closeToCommitMs) closeToCommit.observe(seconds(ms));
    },
    aborted(partition) {
      transactions.inc({ partition: String(partition), outcome: 'aborted' });
    },
    consumerLag(partition, records) {
      lag.set({ partition: String(partition) }, records);
    },
    restored(ms) {
      restore.observe(seconds(ms));
    },
    partitionsAssigned(count) {
      assigned.set(count);
    },
    forgetPartition(partition) {
      // Counters keep their series (a counter that vanishes and returns looks like a
      // reset to rate()); only the gauge, whose last value would be a lie, goes.
      lag.remove({ partition: String(partition) });
    },
    forgetMarket(market) {
      if (!markets.delete(market)) return;
      pool.remove({ market, side: 'supply' });
      pool.remove({ market, side: 'demand' });
    },
  };
}
