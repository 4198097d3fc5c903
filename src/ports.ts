/**
 * The edges of the pipeline, as interfaces only. Replay plugs a file source and a
 * run-directory sink into these ports; live mode plugs Kafka adapters into the same
 * ones, so both drive the one engine the same way (docs/principles.md).
 */
import type { Reject, SourcedEvent } from './model.js';
import type { AssignmentRecord, EngineSink, EpochRecord, ExpiryRecord, PriceRecord } from './window/engine.js';

export type { AssignmentRecord, EngineSink, EpochRecord, ExpiryRecord, PriceRecord };

/** One item from a source: a valid event, or a line/record that was rejected. */
export type SourceItem = { kind: 'event'; ev: SourcedEvent } | { kind: 'reject'; reject: Reject };

/**
 * Where events come from. A file source yields a whole log in event-time order; a
 * Kafka source yields records as they arrive (possibly late).
 */
export interface EventSource {
  /** How many items the source expects to deliver, when it knows (for progress). */
  readonly expected?: number;
  /** Items in delivery order. The iterator ends when the input is exhausted. */
  items(): AsyncIterable<SourceItem>;
  /** Releases what the source holds (files, consumers). Safe to call twice. */
  close(): Promise<void>;
}

/**
 * Where results go. The engine calls the three {@link EngineSink} methods
 * synchronously; a sink that buffers raises `pressure` and the driver awaits
 * `drain()` before feeding more events, so memory stays bounded.
 */
export interface OutputSink extends EngineSink {
  reject(r: Reject): void;
  /** True while buffered output exceeds what the sink wants to hold. */
  readonly pressure: boolean;
  /** Resolves once buffered output has been handed on (and pressure is false). */
  drain(): Promise<void>;
  /** Flushes and closes every output; rejects with the first write error, if any. */
  close(): Promise<void>;
}

/** Pool state per market, so a restarted live processor resumes where it stopped. */
export interface StateStore {
  load(market: string): Promise<unknown>;
  save(market: string, state: unknown): Promise<void>;
}

/**
 * Wall-clock time for what is measured or timed out, never for event time: the
 * engine's epochs come from the events alone.
 */
export interface Clock {
  /** Milliseconds, monotonic within a run (e.g. `performance.now`). */
  now(): number;
}

/** An {@link OutputSink} that keeps nothing: replay without `--out`. */
export function nullSink(): OutputSink {
  return {
    assignment: () => {},
    expiry: () => {},
    epoch: () => {},
    reject: () => {},
    pressure: false,
    drain: async () => {},
    close: async () => {},
  };
}

/** Fans one stream of records out to several sinks (the first is awaited first). */
export function teeSink(sinks: readonly OutputSink[]): OutputSink {
  const priced = sinks.filter((s) => s.prices !== undefined);
  return {
    ...(priced.length > 0 ? { prices: (p: PriceRecord) => { for (const s of priced) s.prices!(p); } } : {}),
    assignment: (a) => { for (const s of sinks) s.assignment(a); },
    expiry: (e) => { for (const s of sinks) s.expiry(e); },
    epoch: (r) => { for (const s of sinks) s.epoch(r); },
    reject: (r) => { for (const s of sinks) s.reject(r); },
    get pressure() { return sinks.some((s) => s.pressure); },
    drain: async () => { for (const s of sinks) await s.drain(); },
    close: async () => { for (const s of sinks) await s.close(); },
  };
}
