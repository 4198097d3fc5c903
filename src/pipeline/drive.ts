/**
 * The one pipeline every composition runs: source → watermark → window engine → sink.
 *
 * A {@link Pipeline} owns one engine and one watermark: replay runs one over the whole
 * (sorted) log, live mode one per input partition, and a sweep worker one per window.
 * Records go to the sink synchronously as the engine emits them; the composition around
 * it decides when output is handed on — a run directory streams it, live mode commits
 * it in a Kafka transaction with the pool state at each checkpoint.
 */
import type { PairflowConfig, Reject, SourcedEvent } from '../model.js';
import type { Clock, EngineSink, EventSource, OutputSink, SourceItem } from '../ports.js';
import { WindowEngine, type EngineOptions } from '../window/engine.js';
import { Watermark } from './watermark.js';

/** Where a pipeline's records go: the engine's three kinds plus rejects. */
export interface RecordSink extends EngineSink {
  reject(r: Reject): void;
}

/** Options of {@link Pipeline}. */
export interface PipelineOptions extends EngineOptions {
  /** Wall clock for the idle rule of the watermark; none in replay. */
  clock?: Clock;
}

/**
 * One engine behind one watermark.
 * @example
 * const p = new Pipeline(config, sink);
 * for (const item of items) p.offer(item);
 * p.finish();
 */
export class Pipeline {
  readonly engine: WindowEngine;
  readonly watermark: Watermark;
  private readonly sink: RecordSink;
  /** Items offered so far (events and rejects). */
  offered = 0;
  /** The watermark the engine was last advanced to (-Infinity before any). */
  advancedTo = -Infinity;

  constructor(config: PairflowConfig, sink: RecordSink, opts: PipelineOptions = {}) {
    this.sink = sink;
    this.engine = new WindowEngine(config, sink, opts);
    this.watermark = new Watermark({
      allowedLatenessMs: config.allowedLatenessMs,
      idleMs: config.idleMs,
      ...(opts.clock ? { clock: opts.clock } : {}),
    });
  }

  /**
   * Takes one item in delivery order. An event moves the watermark, the engine closes
   * every epoch the watermark has passed, then the event is ingested — so an event at
   * exactly an epoch τ is never known at τ. An event too late for the state the engine
   * still holds becomes a reject (see `WindowEngine.ingest`).
   */
  offer(item: SourceItem): void {
    this.offered++;
    if (item.kind === 'reject') {
      this.watermark.observe(null);
      this.sink.reject(item.reject);
      return;
    }
    this.offerEvent(item.ev);
  }

  /** {@link offer} for an event. */
  offerEvent(ev: SourcedEvent): void {
    this.watermark.observe(ev.event.t);
    this.advance(this.watermark.value());
    const refused = this.engine.ingest(ev);
    if (refused !== null) this.sink.reject({ pos: ev.pos, reason: refused, raw: JSON.stringify(ev.event).slice(0, 2048) });
  }

  /**
   * Closes what the watermark allows without a new event (the idle rule). Returns the
   * watermark the engine was advanced to.
   */
  tick(): number {
    const wm = this.watermark.value();
    this.advance(wm);
    return wm;
  }

  /** Advances the engine (never backwards). */
  advance(wm: number): void {
    if (wm > this.advancedTo) {
      this.advancedTo = wm;
      this.engine.advanceTo(wm);
    }
  }

  /** Resumes a restored engine's watermark (live mode, after the markets are restored). */
  resume(s: { maxT: number | null; watermark: number | null }): void {
    this.watermark.resume(s);
    if (s.watermark !== null) this.advance(s.watermark);
  }

  /** The input has ended: closes epochs until every pool is empty. */
  finish(): void {
    this.engine.finish();
  }
}

/** How many items between checks of the sink's backpressure. */
const PRESSURE_CHECK_EVERY = 256;

/** Options of {@link drive}. */
export interface DriveOptions {
  /** Called about 200 times over a source that knows its size. */
  onProgress?: (done: number, total: number) => void;
  /** Close every window when the source ends. @default true */
  finish?: boolean;
}

/**
 * Feeds a finite source through a pipeline, awaiting the sink whenever it reports
 * backpressure, then finishes the engine. Returns the number of items delivered.
 */
export async function drive(source: EventSource, pipeline: Pipeline, sink: OutputSink | null, opts: DriveOptions = {}): Promise<number> {
  const total = source.expected ?? 0;
  const progressEvery = Math.max(1, Math.floor(total / 200));
  let i = 0;
  try {
    for await (const item of source.items()) {
      pipeline.offer(item);
      if (sink && i % PRESSURE_CHECK_EVERY === 0 && sink.pressure) await sink.drain();
      if (opts.onProgress && i % progressEvery === 0) opts.onProgress(i, total);
      i += 1;
    }
  } finally {
    await source.close();
  }
  if (opts.finish ?? true) pipeline.finish();
  if (sink && sink.pressure) await sink.drain();
  opts.onProgress?.(i, Math.max(i, total));
  return i;
}

/**
 * Feeds a finite source whose items come from several partitions (a Kafka topic read
 * to its end) through one pipeline per partition — the per-partition watermark of
 * SPEC §3, as live mode keeps it — then finishes them all. Items without a partition
 * (a file) go to partition 0.
 */
export async function drivePartitioned(
  source: EventSource,
  makePipeline: (partition: number) => Pipeline,
  sink: OutputSink | null,
): Promise<Map<number, Pipeline>> {
  const pipelines = new Map<number, Pipeline>();
  let i = 0;
  try {
    for await (const item of source.items()) {
      const part = (item.kind === 'event' ? item.ev.pos.partition : item.reject.pos.partition) ?? 0;
      let p = pipelines.get(part);
      if (!p) pipelines.set(part, (p = makePipeline(part)));
      p.offer(item);
      if (sink && ++i % PRESSURE_CHECK_EVERY === 0 && sink.pressure) await sink.drain();
    }
  } finally {
    await source.close();
  }
  for (const p of pipelines.values()) p.finish();
  if (sink && sink.pressure) await sink.drain();
  return pipelines;
}

/**
 * A source over a loaded log: its rejects first (they were found while reading), then
 * its events in event-time order, stable by file order. With `drain`, each event's
 * slot in `loaded.events` (which must then be the caller's own, mutable array) is
 * emptied as it is read, and the array is left empty: a log replayed once (the
 * `replay` command) is let go as the replay goes instead of held whole until it ends.
 */
export function fileSource(loaded: { events: readonly SourcedEvent[]; rejects: readonly Reject[] }, opts: { drain?: boolean } = {}): EventSource {
  return {
    expected: loaded.events.length + loaded.rejects.length,
    async *items() {
      for (const reject of loaded.rejects) yield { kind: 'reject', reject };
      const { events } = loaded;
      if (opts.drain !== true) {
        for (const ev of events) yield { kind: 'event', ev };
        return;
      }
      const slots = events as Array<SourcedEvent | undefined>;
      for (let i = 0; i < slots.length; i++) {
        const ev = slots[i]!;
        slots[i] = undefined;
        yield { kind: 'event', ev };
      }
      slots.length = 0;
    },
    close: async () => {},
  };
}

/** Fans records out to several sinks, in order. */
export function teeRecords(sinks: readonly RecordSink[]): RecordSink {
  const tee: RecordSink = {
    assignment: (a) => { for (const s of sinks) s.assignment(a); },
    expiry: (e) => { for (const s of sinks) s.expiry(e); },
    epoch: (r) => { for (const s of sinks) s.epoch(r); },
    reject: (r) => { for (const s of sinks) s.reject(r); },
  };
  // Only when someone listens: the engine skips building price records otherwise.
  const priced = sinks.filter((s) => s.prices !== undefined);
  if (priced.length > 0) tee.prices = (p) => { for (const s of priced) s.prices!(p); };
  return tee;
}
