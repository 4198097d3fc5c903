/**
 * A pricing pass on two threads (pricing.ts): this thread and a helper thread read
 * the rows of a segment's graph in chunks, each taking the next chunk from a shared
 * counter as it finishes one (rows skipped by their bounds cost nothing, so halves
 * fixed in advance would not take the same time), over the same pairs and the same
 * per-row tables, held in SharedArrayBuffers. Each row is read by one thread, and
 * what the two found is put together in row order, so a split pass finds the same
 * pairs as one thread reading every row (tests/unit/hindsight/pricing-split.test.ts).
 *
 * What it is for: a market that runs alone. A week of a busy district is one time
 * segment of hundreds of millions of pairs, whose solve holds most of the memory
 * budget, so nothing runs beside it (schedule.ts) and the second core waits. A pass
 * is split only while a core is free ({@link Gauge}), pass by pass: as soon as a
 * second market or the online replay takes the core back, the passes run on one
 * thread again. The rest of a round (the restricted solve) stays on one thread.
 *
 * The handshake per pass is two Atomics words: this thread raises the command number,
 * the helper raises the done number to match. Between passes the helper waits in
 * Atomics.wait, off the CPU.
 *
 * The same helper runs ahead of a large market's graph build while a core is free,
 * making the pair store's next pages resident ({@link prefault}): the system's cost of
 * a fresh page is then paid on the free core. Measured on a week's busiest district
 * at scale 4 (797 M pairs, alone in a new process, alternating runs): the build took
 * 18.0–18.7 s against 25.0–25.5 s, the market 55.1–57.9 s against 62.6–63.9 s.
 */

import { existsSync } from 'node:fs';
import { fileURLToPath } from 'node:url';
import { Worker } from 'node:worker_threads';

import { pairflowError } from '../errors.js';
import type { PairflowConfig } from '../model.js';
import type { CompactGraph, GraphStore, PackedMarket, PairCost, QuickTerms } from './graph.js';
import type { KernelColumns } from './wasm/pricing-scan.js';
import { columnPicks, kernelPicks, Pricer, rowAdds, type ColumnPicks, type PricerTables, type PricingSplit, type RowAdds, type ScanCounts, type ScanParams } from './pricing.js';

/** The handshake's words: commands and flags (Int32), then numbers (Float64). */
const CTL = { cmd: 0, done: 1, ready: 2, stop: 3, nextChunk: 4, exhaustive: 5, inTurns: 6, turn: 7, failed: 8, words: 16 } as const;
/** The pass's largest |v|, then the helper's counts. */
const NUM = { maxAbsV: 0, violators: 1, rechecks: 2, exactRechecks: 3, rowsPriced: 4, added: 5, kernelRows: 6, words: 8 } as const;
/** Bytes for a helper's error message. */
const ERROR_BYTES = 2048;

/**
 * Segments with fewer pairs are priced on one thread: a pass over them takes a few
 * milliseconds, and a helper costs its start (a thread, its modules, its compiled
 * code) once per worker and its tables once per segment.
 */
export const SPLIT_MIN_PAIRS = 8_000_000;

/** How long a pass waits for a helper to set up for a segment (a thread starts in tens of milliseconds). */
const READY_WAIT_MS = 5000;

/** How long a pass may wait for the helper before the solve gives up (a helper that stopped answering). */
const WAIT_LIMIT_MS = 10 * 60_000;

/** Which cores are free: the pool's count of busy threads, against the cores. */
export interface Gauge {
  /** Whether a core is free for a helper now. */
  idle(): boolean;
  /** A helper starts a pass. */
  take(): void;
  /** A helper ends its pass. */
  give(): void;
}

/**
 * A gauge over shared counts of busy threads: `count[0]` the markets and the caller
 * computing (hindsight.ts keeps it), `count[1]` the helpers in a pass (they keep it).
 */
export function sharedGauge(count: Int32Array, cores: number): Gauge {
  return {
    idle: () => Atomics.load(count, 0) + Atomics.load(count, 1) < cores,
    take: () => void Atomics.add(count, 1, 1),
    give: () => void Atomics.sub(count, 1, 1),
  };
}

/** What a segment's pricer is built with. */
export interface SplitSegment {
  readonly g: CompactGraph;
  readonly m: PackedMarket;
  readonly config: PairflowConfig;
  readonly colLo: Int32Array;
  readonly colHi: Int32Array;
  readonly addPerRow: number;
  readonly P: number;
  readonly addPerColumn: number;
  readonly turns: number;
  /** The pricer's tables, in SharedArrayBuffers. */
  readonly tables: PricerTables;
  /** The terms of its quick costs (graph.ts quickTermsOf), in SharedArrayBuffers. */
  readonly quick: QuickTerms | null;
  /** The helper's kernel slot (graph.ts GraphStore.columns), where the pairs are in a kernel memory. */
  readonly columns: KernelColumns | null;
}

/** What a helper thread is sent for one segment: the segment's pricer, less its graph's map of wide rows (it has none). */
export interface HelperSetup extends Omit<SplitSegment, 'g' | 'm'> {
  readonly job: 'price';
  readonly ctl: Int32Array;
  readonly num: Float64Array;
  readonly error: Uint8Array;
  readonly u: Float64Array;
  readonly v: Float64Array;
  readonly graph: Pick<CompactGraph, 'nRows' | 'nCols' | 'rowPtr' | 'rowBase' | 'rowDemand' | 'cols' | 'codes' | 'step'>;
  readonly packed: PackedMarket;
  readonly picks: ColumnPicks;
  readonly adds: RowAdds;
}

/** A split of one segment's passes; `close` when the segment's passes are over. */
export interface SegmentSplit extends PricingSplit {
  close(): void;
}

/** Hands out helper-thread splits, segment after segment. */
export interface PricingSplitter {
  /** Whether a segment's graph is worth a helper (its tables are then made shared). */
  wants(g: CompactGraph): boolean;
  /** The split for a segment that it wants, or null when no helper can be had. */
  open(seg: SplitSegment): SegmentSplit | null;
  /**
   * Has the helper make `store`'s pages resident ahead of a build, while a core is
   * free: the build publishes its progress in the words returned, and calls `done`
   * when it ends (null: no helper, no free core, or a market too small to matter).
   */
  prefault?(store: GraphStore): { progress: Int32Array; done(): void } | null;
}

/**
 * A first write to a page costs the system a fresh zeroed page: on some virtual
 * machines far more than the write (measured here: a week's busiest district, 2.4 GB of
 * pairs, built in 32.4 s in a new process and in 21.6 s over the same pages again,
 * 15.3 s of it system time, most in clearing pages). Below this many expected pairs
 * the build is not worth a helper's start for that.
 */
export const PREFAULT_MIN_PAIRS = 50_000_000;
/** How far ahead of the build (pairs) the helper makes pages resident: at most this much is touched beyond the last pair. */
const PREFAULT_AHEAD = 8_000_000;
/** Pairs per 4 KiB page of 16-bit columns (a page of cost bytes every second one). */
const PAGE_PAIRS = 2048;

/** A helper's job of making a store's pages resident ahead of a build. */
export interface PrefaultJob {
  readonly job: 'prefault';
  readonly cols: Uint16Array;
  readonly codes: Uint8Array;
  readonly progress: Int32Array;
}

/**
 * Makes the pages of a shared pair store resident ahead of a build that publishes its
 * progress (pairs written) in `progress[0]`, -1 when it ends. Each page gets an atomic
 * compare-and-swap of 0 for 0 in its first word: it never changes what the build
 * wrote there, before or after, and the system makes the page resident all the same.
 * Runs in the helper thread, and returns when the build ends.
 */
export function prefault(j: PrefaultJob): void {
  const words = (a: Uint16Array | Uint8Array): Int32Array => new Int32Array(a.buffer, a.byteOffset, a.byteLength >>> 2);
  const cols = words(j.cols);
  const codes = words(j.codes);
  const capacity = j.codes.length;
  let at = 0;
  for (;;) {
    const p = Atomics.load(j.progress, 0);
    if (p < 0) return;
    const upTo = Math.min(capacity, p + PREFAULT_AHEAD);
    for (; at < upTo; at += PAGE_PAIRS) {
      Atomics.compareExchange(cols, at >>> 1, 0, 0);
      if ((at & (2 * PAGE_PAIRS - 1)) === 0) Atomics.compareExchange(codes, at >>> 2, 0, 0);
    }
    if (at >= capacity) return;
    // Until the build moves on (it does not wake anyone: a row is too short for that).
    Atomics.wait(j.progress, 0, p, 2);
  }
}

const HELPER_URL = new URL('../../dist/hindsight/pricing-helper.js', import.meta.url);

/**
 * One helper thread for the segments of one worker, started with the first segment
 * that wants it. `close` ends it (it is unref'd: it never keeps a process alive).
 */
export class PricingHelper implements PricingSplitter {
  private worker: Worker | null = null;
  private broken = false;
  /** Whether the helper's compiled script exists (looked up once). */
  private script: boolean | null = null;
  /** The pairs the market being solved is expected to hold at once (the pool's estimate). */
  expectedPairs = 0;

  constructor(
    private readonly gauge: Gauge,
    private readonly minPairs = SPLIT_MIN_PAIRS,
    private readonly url: URL = HELPER_URL,
  ) {}

  wants(g: CompactGraph): boolean {
    // The helper marks its rows' candidates in the graph itself: only pairs in shared memory will do.
    const shared = g.codes.buffer instanceof SharedArrayBuffer && g.cols.buffer instanceof SharedArrayBuffer;
    return shared && !this.broken && g.wide.size === 0 && g.cols.length >= this.minPairs && this.hasScript();
  }

  open(seg: SplitSegment): SegmentSplit | null {
    return this.wants(seg.g) ? new ThreadSplit(seg, this.gauge, () => this.thread()) : null;
  }

  prefault(store: GraphStore): { progress: Int32Array; done(): void } | null {
    if (!store.shared || this.expectedPairs < PREFAULT_MIN_PAIRS || this.broken || !this.gauge.idle() || !this.hasScript()) return null;
    const w = this.thread();
    if (w === null) return null;
    this.gauge.take();
    const progress = new Int32Array(new SharedArrayBuffer(4));
    const job: PrefaultJob = { job: 'prefault', cols: store.cols, codes: store.codes, progress };
    w.postMessage(job);
    let ended = false;
    return {
      progress,
      done: () => {
        if (ended) return;
        ended = true;
        Atomics.store(progress, 0, -1);
        this.gauge.give();
      },
    };
  }

  private hasScript(): boolean {
    return (this.script ??= existsSync(fileURLToPath(this.url)));
  }

  /** The helper thread, started now if it is not running (null once it has failed). */
  private thread(): Worker | null {
    if (this.broken) return null;
    if (this.worker === null) {
      const w = new Worker(this.url);
      w.unref();
      // A helper that fails outside a pass is not used again (a pass's own failure is
      // reported through the shared words).
      w.on('error', () => (this.broken = true));
      w.on('exit', () => {
        this.broken = true;
        this.worker = null;
      });
      this.worker = w;
    }
    return this.worker;
  }

  /** Ends the helper thread. */
  async close(): Promise<void> {
    const w = this.worker;
    this.worker = null;
    if (w !== null) await w.terminate();
  }
}

/**
 * The helper's part in one segment. Nothing is sent to it until a pass finds a core
 * free: a segment solved while the cores are busy costs no thread and no copies
 * (the market, the row tables); the passes after that use it while a core is free.
 */
class ThreadSplit implements SegmentSplit {
  private seq = 0;
  private running = false;
  /** 0: not sent to the helper yet; 1: sent; -1: no helper to be had. */
  private engaged = 0;
  private waitReady = false;
  private readonly ctl = new Int32Array(new SharedArrayBuffer(4 * CTL.words));
  private readonly num = new Float64Array(new SharedArrayBuffer(8 * NUM.words));
  private readonly error = new Uint8Array(new SharedArrayBuffer(ERROR_BYTES));
  private u: Float64Array | null = null;
  private v: Float64Array | null = null;
  private picks: ColumnPicks | null = null;
  private adds: RowAdds | null = null;

  constructor(
    private readonly seg: SplitSegment,
    private readonly gauge: Gauge,
    private readonly thread: () => Worker | null,
  ) {}

  start(u: Float64Array, v: Float64Array, params: ScanParams): boolean {
    const { ctl } = this;
    if (this.engaged !== 1) {
      // The helper gets the segment the first time a core is free, and joins the passes once it has set up.
      if (this.engaged === 0 && this.gauge.idle()) this.engage();
      return false;
    }
    if (this.waitReady) {
      // The pass after the one that sent the segment waits for the helper to set up
      // (its first segment: its thread to start), within reason.
      this.waitReady = false;
      Atomics.wait(ctl, CTL.ready, 0, READY_WAIT_MS);
    }
    if (Atomics.load(ctl, CTL.ready) !== 1 || Atomics.load(ctl, CTL.stop) === 1 || !this.gauge.idle()) return false;
    this.gauge.take();
    this.running = true;
    const { nRows, nCols } = this.seg.g;
    this.u!.set(u.subarray(0, nRows));
    this.v!.set(v.subarray(0, nCols));
    Atomics.store(ctl, CTL.nextChunk, 0);
    ctl[CTL.exhaustive] = params.exhaustive ? 1 : 0;
    ctl[CTL.inTurns] = params.inTurns ? 1 : 0;
    ctl[CTL.turn] = params.turn;
    this.num[NUM.maxAbsV] = params.maxAbsV;
    Atomics.store(ctl, CTL.cmd, ++this.seq);
    Atomics.notify(ctl, CTL.cmd);
    return true;
  }

  private engage(): void {
    const w = this.thread();
    if (w === null) {
      this.engaged = -1;
      return;
    }
    const { g, m, ...pricer } = this.seg;
    this.u = new Float64Array(new SharedArrayBuffer(8 * g.nRows));
    this.v = new Float64Array(new SharedArrayBuffer(8 * g.nCols));
    this.picks = pricer.columns !== null ? kernelPicks(pricer.columns, g.nCols, pricer.addPerColumn, true) : columnPicks(g.nCols, pricer.addPerColumn, true);
    this.adds = rowAdds(pricer.addPerRow * g.nRows, true);
    const setup: HelperSetup = {
      ...pricer,
      job: 'price',
      ctl: this.ctl, num: this.num, error: this.error, u: this.u, v: this.v,
      graph: { nRows: g.nRows, nCols: g.nCols, rowPtr: g.rowPtr, rowBase: g.rowBase, rowDemand: g.rowDemand, cols: g.cols, codes: g.codes, step: g.step },
      packed: m, picks: this.picks, adds: this.adds,
    };
    w.postMessage(setup);
    this.engaged = 1;
    this.waitReady = true;
  }

  claim(): number {
    return Atomics.add(this.ctl, CTL.nextChunk, 1);
  }

  finish(): { counts: ScanCounts; rows: Int32Array; cols: Int32Array; costs: Float64Array; picks: ColumnPicks } {
    const { ctl, num } = this;
    const t0 = Date.now();
    for (;;) {
      const done = Atomics.load(ctl, CTL.done);
      if (done === this.seq) break;
      if (Date.now() - t0 > WAIT_LIMIT_MS) {
        this.end();
        throw pairflowError('PAIRFLOW_ERR_INTERNAL_BUG', { detail: 'hindsight: the pricing helper thread stopped answering' });
      }
      Atomics.wait(ctl, CTL.done, done, 1000);
    }
    this.end();
    if (Atomics.load(ctl, CTL.failed) === 1) {
      // (A copy: TextDecoder reads no shared memory.)
      const end = this.error.indexOf(0);
      const text = new TextDecoder().decode(this.error.slice(0, end < 0 ? ERROR_BYTES : end));
      throw pairflowError('PAIRFLOW_ERR_INTERNAL_BUG', { detail: `hindsight: the pricing helper failed: ${text}` });
    }
    const counts: ScanCounts = {
      violators: num[NUM.violators]!,
      rechecks: num[NUM.rechecks]!,
      exactRechecks: num[NUM.exactRechecks]!,
      rowsPriced: num[NUM.rowsPriced]!,
      kernelRows: num[NUM.kernelRows]!,
      n: num[NUM.added]!,
    };
    return { counts, rows: this.adds!.rows, cols: this.adds!.cols, costs: this.adds!.costs, picks: this.picks! };
  }

  close(): void {
    Atomics.store(this.ctl, CTL.stop, 1);
    Atomics.store(this.ctl, CTL.cmd, ++this.seq);
    Atomics.notify(this.ctl, CTL.cmd);
  }

  private end(): void {
    if (!this.running) return;
    this.running = false;
    this.gauge.give();
  }
}

/**
 * The helper's side for one segment: reads its chunks of rows at each command until
 * told to stop. Runs in the helper thread (pricing-helper.ts).
 */
export function serveSegment(s: HelperSetup, exact: PairCost, quick: PairCost): void {
  const { ctl, num } = s;
  const g: CompactGraph = {
    ...s.graph,
    demandRow: new Int32Array(0),
    wide: new Map(),
  };
  const pricer = new Pricer(g, exact, s.colLo, s.colHi, s.addPerRow, s.P, s.addPerColumn, quick, s.turns, s.tables, s.picks, s.adds, s.columns);
  Atomics.store(ctl, CTL.ready, 1);
  Atomics.notify(ctl, CTL.ready);
  let seen = 0;
  for (;;) {
    if (Atomics.load(ctl, CTL.stop) === 1) return;
    Atomics.wait(ctl, CTL.cmd, seen);
    seen = Atomics.load(ctl, CTL.cmd);
    if (Atomics.load(ctl, CTL.stop) === 1) return;
    try {
      s.picks.count.fill(0);
      pricer.beginScan(s.v);
      const params: ScanParams = { exhaustive: ctl[CTL.exhaustive] === 1, maxAbsV: num[NUM.maxAbsV]!, inTurns: ctl[CTL.inTurns] === 1, turn: ctl[CTL.turn]! };
      const c = pricer.scanChunks(() => Atomics.add(ctl, CTL.nextChunk, 1), s.u, s.v, params);
      num[NUM.violators] = c.violators;
      num[NUM.rechecks] = c.rechecks;
      num[NUM.exactRechecks] = c.exactRechecks;
      num[NUM.rowsPriced] = c.rowsPriced;
      num[NUM.kernelRows] = c.kernelRows;
      num[NUM.added] = c.n;
    } catch (err) {
      const text = new TextEncoder().encode(err instanceof Error ? (err.stack ?? err.message) : String(err)).subarray(0, ERROR_BYTES - 1);
      s.error.fill(0);
      s.error.set(text);
      Atomics.store(ctl, CTL.failed, 1);
    }
    Atomics.store(ctl, CTL.done, seen);
    Atomics.notify(ctl, CTL.done);
  }
}
