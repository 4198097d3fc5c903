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
 */

import { existsSync } from 'node:fs';
import { fileURLToPath } from 'node:url';
import { Worker } from 'node:worker_threads';

import { pairflowError } from '../errors.js';
import type { PairflowConfig } from '../model.js';
import type { CompactGraph, PackedMarket, PairCost, QuickTerms } from './graph.js';
import { columnPicks, Pricer, rowAdds, type ColumnPicks, type PricerTables, type PricingSplit, type RowAdds, type ScanCounts, type ScanParams } from './pricing.js';

/** Command words (Int32). */
export const CMD = 0;
export const DONE = 1;
export const READY = 2;
export const STOP = 3;
export const NEXT_CHUNK = 4;
export const EXHAUSTIVE = 5;
export const IN_TURNS = 6;
export const TURN = 7;
export const FAILED = 8;
const CTL_WORDS = 16;
/** Number words (Float64): the pass's largest |v|, then the helper's counts. */
export const MAX_ABS_V = 0;
export const VIOLATORS = 1;
export const RECHECKS = 2;
export const EXACT_RECHECKS = 3;
export const ROWS_PRICED = 4;
export const ADDED = 5;
const NUM_WORDS = 8;
/** Bytes for a helper's error message. */
export const ERROR_BYTES = 2048;

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

/** What a helper thread is sent for one segment. */
export interface HelperSetup {
  readonly ctl: Int32Array;
  readonly num: Float64Array;
  readonly error: Uint8Array;
  readonly u: Float64Array;
  readonly v: Float64Array;
  readonly graph: Pick<CompactGraph, 'nRows' | 'nCols' | 'rowPtr' | 'rowBase' | 'rowDemand' | 'cols' | 'codes' | 'step'>;
  readonly packed: PackedMarket;
  readonly config: PairflowConfig;
  readonly colLo: Int32Array;
  readonly colHi: Int32Array;
  readonly addPerRow: number;
  readonly P: number;
  readonly addPerColumn: number;
  readonly turns: number;
  readonly tables: PricerTables;
  readonly quick: QuickTerms | null;
  readonly picks: ColumnPicks;
  readonly adds: RowAdds;
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
}

const HELPER_URL = new URL('../../dist/hindsight/pricing-helper.js', import.meta.url);

/**
 * One helper thread for the segments of one worker, started with the first segment
 * that wants it. `close` ends it (it is unref'd: it never keeps a process alive).
 */
export class PricingHelper implements PricingSplitter {
  private worker: Worker | null = null;
  private broken = false;

  constructor(
    private readonly gauge: Gauge,
    private readonly minPairs = SPLIT_MIN_PAIRS,
    private readonly url: URL = HELPER_URL,
  ) {}

  wants(g: CompactGraph): boolean {
    return !this.broken && g.wide.size === 0 && g.cols.length >= this.minPairs && existsSync(fileURLToPath(this.url));
  }

  open(seg: SplitSegment): SegmentSplit | null {
    return this.wants(seg.g) ? new ThreadSplit(seg, this.gauge, () => this.thread()) : null;
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
  private readonly ctl = new Int32Array(new SharedArrayBuffer(4 * CTL_WORDS));
  private readonly num = new Float64Array(new SharedArrayBuffer(8 * NUM_WORDS));
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
      Atomics.wait(ctl, READY, 0, READY_WAIT_MS);
    }
    if (Atomics.load(ctl, READY) !== 1 || Atomics.load(ctl, STOP) === 1 || !this.gauge.idle()) return false;
    this.gauge.take();
    this.running = true;
    const { nRows, nCols } = this.seg.g;
    this.u!.set(u.subarray(0, nRows));
    this.v!.set(v.subarray(0, nCols));
    Atomics.store(ctl, NEXT_CHUNK, 0);
    ctl[EXHAUSTIVE] = params.exhaustive ? 1 : 0;
    ctl[IN_TURNS] = params.inTurns ? 1 : 0;
    ctl[TURN] = params.turn;
    this.num[MAX_ABS_V] = params.maxAbsV;
    Atomics.store(ctl, CMD, ++this.seq);
    Atomics.notify(ctl, CMD);
    return true;
  }

  private engage(): void {
    const w = this.thread();
    if (w === null) {
      this.engaged = -1;
      return;
    }
    const { seg } = this;
    const { g } = seg;
    this.u = new Float64Array(new SharedArrayBuffer(8 * g.nRows));
    this.v = new Float64Array(new SharedArrayBuffer(8 * g.nCols));
    this.picks = columnPicks(g.nCols, seg.addPerColumn, true);
    this.adds = rowAdds(seg.addPerRow * g.nRows, true);
    const setup: HelperSetup = {
      ctl: this.ctl, num: this.num, error: this.error, u: this.u, v: this.v,
      graph: { nRows: g.nRows, nCols: g.nCols, rowPtr: g.rowPtr, rowBase: g.rowBase, rowDemand: g.rowDemand, cols: g.cols, codes: g.codes, step: g.step },
      packed: seg.m, config: seg.config, colLo: seg.colLo, colHi: seg.colHi,
      addPerRow: seg.addPerRow, P: seg.P, addPerColumn: seg.addPerColumn, turns: seg.turns,
      tables: seg.tables, quick: seg.quick, picks: this.picks, adds: this.adds,
    };
    w.postMessage(setup);
    this.engaged = 1;
    this.waitReady = true;
  }

  claim(): number {
    return Atomics.add(this.ctl, NEXT_CHUNK, 1);
  }

  finish(): { counts: ScanCounts; rows: Int32Array; cols: Int32Array; costs: Float64Array; picks: ColumnPicks } {
    const { ctl, num } = this;
    const t0 = Date.now();
    for (;;) {
      const done = Atomics.load(ctl, DONE);
      if (done === this.seq) break;
      if (Date.now() - t0 > WAIT_LIMIT_MS) {
        this.end();
        throw pairflowError('PAIRFLOW_ERR_INTERNAL_BUG', { detail: 'hindsight: the pricing helper thread stopped answering' });
      }
      Atomics.wait(ctl, DONE, done, 1000);
    }
    this.end();
    if (Atomics.load(ctl, FAILED) === 1) {
      const text = new TextDecoder().decode(this.error.slice().subarray(0, this.error.indexOf(0) < 0 ? ERROR_BYTES : this.error.indexOf(0)));
      throw pairflowError('PAIRFLOW_ERR_INTERNAL_BUG', { detail: `hindsight: the pricing helper failed: ${text}` });
    }
    const counts: ScanCounts = {
      violators: num[VIOLATORS]!,
      rechecks: num[RECHECKS]!,
      exactRechecks: num[EXACT_RECHECKS]!,
      rowsPriced: num[ROWS_PRICED]!,
      n: num[ADDED]!,
    };
    return { counts, rows: this.adds!.rows, cols: this.adds!.cols, costs: this.adds!.costs, picks: this.picks! };
  }

  close(): void {
    Atomics.store(this.ctl, STOP, 1);
    Atomics.store(this.ctl, CMD, ++this.seq);
    Atomics.notify(this.ctl, CMD);
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
  const pricer = new Pricer(g, exact, s.colLo, s.colHi, s.addPerRow, s.P, s.addPerColumn, quick, s.turns, s.tables, s.picks, s.adds);
  Atomics.store(ctl, READY, 1);
  Atomics.notify(ctl, READY);
  let seen = 0;
  for (;;) {
    if (Atomics.load(ctl, STOP) === 1) return;
    Atomics.wait(ctl, CMD, seen);
    seen = Atomics.load(ctl, CMD);
    if (Atomics.load(ctl, STOP) === 1) return;
    try {
      s.picks.count.fill(0);
      const params: ScanParams = { exhaustive: ctl[EXHAUSTIVE] === 1, maxAbsV: num[MAX_ABS_V]!, inTurns: ctl[IN_TURNS] === 1, turn: ctl[TURN]! };
      const c = pricer.scanChunks(() => Atomics.add(ctl, NEXT_CHUNK, 1), s.u, s.v, params);
      num[VIOLATORS] = c.violators;
      num[RECHECKS] = c.rechecks;
      num[EXACT_RECHECKS] = c.exactRechecks;
      num[ROWS_PRICED] = c.rowsPriced;
      num[ADDED] = c.n;
    } catch (err) {
      const text = new TextEncoder().encode(err instanceof Error ? (err.stack ?? err.message) : String(err)).subarray(0, ERROR_BYTES - 1);
      s.error.fill(0);
      s.error.set(text);
      Atomics.store(ctl, FAILED, 1);
    }
    Atomics.store(ctl, DONE, seen);
    Atomics.notify(ctl, DONE);
  }
}

/**
 * A split whose second share is read on this same thread, by a second pricer over the
 * same tables, when the pass ends: the first pricer takes the even chunks, the second
 * the odd ones. The same bookkeeping as a helper thread's, for tests of the merge.
 */
export class InlineSplit implements SegmentSplit {
  private readonly other: Pricer;
  private readonly picks: ColumnPicks;
  private readonly adds: RowAdds;
  private pending: { u: Float64Array; v: Float64Array; params: ScanParams } | null = null;
  private mine = 0;

  constructor(seg: SplitSegment, exact: PairCost, quick: PairCost) {
    const { g } = seg;
    this.picks = columnPicks(g.nCols, seg.addPerColumn);
    this.adds = rowAdds(seg.addPerRow * g.nRows, true);
    this.other = new Pricer(g, exact, seg.colLo, seg.colHi, seg.addPerRow, seg.P, seg.addPerColumn, quick, seg.turns, seg.tables, this.picks, this.adds);
  }

  start(u: Float64Array, v: Float64Array, params: ScanParams): boolean {
    this.pending = { u, v, params };
    this.mine = 0;
    return true;
  }

  claim(): number {
    return 2 * this.mine++;
  }

  finish(): { counts: ScanCounts; rows: Int32Array; cols: Int32Array; costs: Float64Array; picks: ColumnPicks } {
    const { u, v, params } = this.pending!;
    this.pending = null;
    this.picks.count.fill(0);
    let k = 0;
    const counts = this.other.scanChunks(() => 2 * k++ + 1, u, v, params);
    return { counts, rows: this.adds.rows, cols: this.adds.cols, costs: this.adds.costs, picks: this.picks };
  }

  close(): void {}
}
