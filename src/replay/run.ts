/**
 * The replay pipeline: the live pipeline's shape with a file source and file sinks.
 * Events are loaded and ordered by event time (stable by file order), fed to the
 * window engine exactly as live mode feeds it (`advanceTo(t)` then `ingest`), and the
 * records go to the run directory while a collector derives the summary of SPEC §6.
 * Deterministic: the same inputs and config give the same records and summary
 * (wall-clock measurements aside, which live under `timings`).
 */
import { basename } from 'node:path';
import { loadLog } from '../consume/index.js';
import { buildManifest, openRejectsFile, openRunDir, RUN_FILES, type RunDirSink } from '../emit/index.js';
import type { PairflowConfig, Reject, SourcedEvent } from '../model.js';
import type { AssignmentRecord, EngineSink, EpochRecord, EventSource, ExpiryRecord, OutputSink } from '../ports.js';
import { WindowEngine, type EngineTotals } from '../window/engine.js';
import { bucketOf, type BucketPlan } from './bootstrap.js';
import { solveHindsight, type HindsightResult } from './hindsight.js';
import {
  quantileLinear, regretAndRatio,
  type EpochSolveTimes, type HindsightStats, type MarketSummary, type OnlineStats, type ReplaySummary,
} from './summary.js';

export type { ReplaySummary } from './summary.js';

const defaultNow = (): number => performance.now();

/** Progress of a replay phase, for a progress bar or log line. */
export interface ReplayProgress {
  phase: 'online' | 'hindsight';
  done: number;
  total: number;
}

/** Options of {@link replayEvents}. */
export interface ReplayEventsOptions {
  /** Receives every record the engine emits. @default none */
  sink?: OutputSink;
  /** Carry dual prices from epoch to epoch. @default true */
  warm?: boolean;
  /** Clock for solve times. @default performance.now */
  now?: () => number;
  /** Check the SPEC §5 certificate of every epoch solve (slow; for tests). @default false */
  verify?: boolean;
  /** Also sum per-demand costs into these time buckets (for the sweep's bootstrap). */
  plan?: BucketPlan;
  onProgress?: (p: ReplayProgress) => void;
}

/** The outcome of one online replay over loaded events: plain data (it crosses worker threads). */
export interface OnlineRun {
  windowMs: number;
  totals: EngineTotals;
  online: OnlineStats;
  markets: { market: string; cost: number; matched: number; abandoned: number }[];
  epochs: { solved: number; warm: number; cold: number };
  epochSolve: { warm: EpochSolveTimes; cold: EpochSolveTimes };
  /** Per-bucket online cost (executed pair costs by the demand's t, plus P per abandoned demand by its t). */
  buckets: Float64Array | null;
  /** Sum of the records' costs; equals totals.cost when the engine's records and totals agree. */
  recordedCost: number;
  ms: number;
}

/** Growable Float64Array: waits of 300k assignments without 300k boxed numbers. */
class FloatList {
  data = new Float64Array(1024);
  length = 0;
  push(v: number): void {
    if (this.length === this.data.length) {
      const next = new Float64Array(this.data.length * 2);
      next.set(this.data);
      this.data = next;
    }
    this.data[this.length++] = v;
  }
  view(): Float64Array {
    return this.data.subarray(0, this.length);
  }
}

function solveTimes(list: FloatList): EpochSolveTimes {
  const v = list.view();
  let total = 0;
  for (let i = 0; i < v.length; i++) total += v[i]!;
  return {
    count: v.length,
    totalMs: total,
    meanMs: v.length > 0 ? total / v.length : null,
    p95Ms: quantileLinear(v.slice(), 0.95),
  };
}

/** Derives the summary figures from the engine's records as they stream past. */
class Collector implements EngineSink {
  readonly waits = new FloatList();
  readonly warmMs = new FloatList();
  readonly coldMs = new FloatList();
  readonly markets = new Map<string, { cost: number; matched: number; abandoned: number }>();
  readonly buckets: Float64Array | null;
  solved = 0;
  cost = 0;

  constructor(private readonly plan: BucketPlan | undefined) {
    this.buckets = plan ? new Float64Array(plan.count) : null;
  }

  private market(name: string): { cost: number; matched: number; abandoned: number } {
    let m = this.markets.get(name);
    if (!m) {
      m = { cost: 0, matched: 0, abandoned: 0 };
      this.markets.set(name, m);
    }
    return m;
  }

  assignment(a: AssignmentRecord): void {
    this.waits.push((a.decidedAt - a.demandT) / 60_000);
    const m = this.market(a.market);
    m.cost += a.cost;
    m.matched += 1;
    this.cost += a.cost;
    if (this.buckets) this.buckets[bucketOf(this.plan!, a.demandT)]! += a.cost;
  }

  expiry(e: ExpiryRecord): void {
    if (e.side !== 'demand') return;
    const m = this.market(e.market);
    m.cost += e.cost;
    m.abandoned += 1;
    this.cost += e.cost;
    if (this.buckets) this.buckets[bucketOf(this.plan!, e.t)]! += e.cost;
  }

  epoch(s: EpochRecord): void {
    if (s.poolDemand === 0 || s.poolSupply === 0) return;
    this.solved += 1;
    (s.warm ? this.warmMs : this.coldMs).push(s.solveMs);
  }
}

/** How many events between checks of the sink's backpressure. */
const PRESSURE_CHECK_EVERY = 256;

/**
 * A file source over a loaded log: its rejects first (they were found while reading),
 * then its events in event-time order, stable by file order. Live mode puts a Kafka
 * source behind the same port.
 */
export function fileSource(loaded: { events: readonly SourcedEvent[]; rejects: readonly Reject[] }): EventSource {
  return {
    expected: loaded.events.length + loaded.rejects.length,
    async *items() {
      for (const reject of loaded.rejects) yield { kind: 'reject', reject };
      for (const ev of loaded.events) yield { kind: 'event', ev };
    },
    close: async () => {},
  };
}

/**
 * Replays loaded events (sorted by t, stable) through the window engine with
 * `config.windowMs`. The core of both `runReplay` and each sweep worker, so a sweep's
 * figures for a window equal a separate replay's.
 */
export async function replayEvents(
  events: readonly SourcedEvent[],
  config: PairflowConfig,
  opts: ReplayEventsOptions = {},
): Promise<OnlineRun> {
  return replaySource(fileSource({ events, rejects: [] }), config, opts);
}

/**
 * Drives the window engine from a source in delivery order — `advanceTo(t)` then
 * `ingest` for each event, rejects to the sink — then `finish()`, awaiting the sink
 * whenever it reports backpressure.
 */
export async function replaySource(
  source: EventSource,
  config: PairflowConfig,
  opts: ReplayEventsOptions = {},
): Promise<OnlineRun> {
  const now = opts.now ?? defaultNow;
  const start = now();
  const collector = new Collector(opts.plan);
  const out = opts.sink;
  const sink: EngineSink = out
    ? {
        assignment: (a) => { collector.assignment(a); out.assignment(a); },
        expiry: (e) => { collector.expiry(e); out.expiry(e); },
        epoch: (r) => { collector.epoch(r); out.epoch(r); },
      }
    : collector;
  const engine = new WindowEngine(config, sink, { warm: opts.warm ?? true, now, verify: opts.verify ?? false });
  const total = source.expected ?? 0;
  const progressEvery = Math.max(1, Math.floor(total / 200));
  let i = 0;
  try {
    for await (const item of source.items()) {
      if (item.kind === 'event') {
        engine.advanceTo(item.ev.event.t);
        engine.ingest(item.ev);
      } else if (out) out.reject(item.reject);
      if (out && i % PRESSURE_CHECK_EVERY === 0 && out.pressure) await out.drain();
      if (opts.onProgress && i % progressEvery === 0) opts.onProgress({ phase: 'online', done: i, total });
      i += 1;
    }
  } finally {
    await source.close();
  }
  engine.finish();
  if (out && out.pressure) await out.drain();
  opts.onProgress?.({ phase: 'online', done: i, total: Math.max(i, total) });

  const totals = engine.totals();
  const waits = collector.waits.view();
  let waitSum = 0;
  for (let i = 0; i < waits.length; i++) waitSum += waits[i]!;
  const online: OnlineStats = {
    cost: totals.cost,
    matched: totals.matched,
    abandoned: totals.abandoned,
    meanWaitMin: waits.length > 0 ? waitSum / waits.length : null,
    p95WaitMin: quantileLinear(waits, 0.95),
  };
  const warmTimes = solveTimes(collector.warmMs);
  const coldTimes = solveTimes(collector.coldMs);
  return {
    windowMs: config.windowMs,
    totals: { ...totals },
    online,
    markets: [...collector.markets.entries()]
      .sort((a, b) => (a[0] < b[0] ? -1 : a[0] > b[0] ? 1 : 0))
      .map(([market, m]) => ({ market, ...m })),
    epochs: { solved: collector.solved, warm: warmTimes.count, cold: coldTimes.count },
    epochSolve: { warm: warmTimes, cold: coldTimes },
    buckets: collector.buckets,
    recordedCost: collector.cost,
    ms: now() - start,
  };
}

/** Options of {@link runReplay}. */
export interface ReplayOptions {
  /** The first rejected line/record ends the run with `PAIRFLOW_ERR_INPUT_REJECT`. @default false */
  strict?: boolean;
  /** Run directory for assignments, expirations, epochs, rejects, summary and manifest. @default none */
  outDir?: string;
  /** Without a run directory, still write every reject as JSON Lines here. @default none */
  rejectsFile?: string;
  /** Carry dual prices between epochs. @default true */
  warm?: boolean;
  /** Worker threads for the hindsight optimum. @default the hindsight's own default */
  threads?: number;
  /** Compute the hindsight optimum (true), skip it (false), or reuse one computed before. @default true */
  hindsight?: boolean | HindsightResult;
  /** Wall clock for timings. @default performance.now */
  now?: () => number;
  /** Check every epoch's certificate (tests). @default false */
  verify?: boolean;
  /** The command line, recorded in manifest.json. @default ['runReplay'] */
  command?: string[];
  /** Called for each reject as it is found (e.g. to print the first few). */
  onReject?: (r: Reject) => void;
  onProgress?: (p: ReplayProgress) => void;
}

/** A loaded log, as returned by `loadLog` (src/consume). */
export type LoadedLog = Awaited<ReturnType<typeof loadLog>>;

/** Hindsight figures for the summary. */
export function hindsightStats(h: HindsightResult): HindsightStats {
  return {
    cost: h.cost,
    matched: h.matched,
    abandoned: h.abandoned,
    ceiling: h.ceiling,
    pairsPriced: h.pairsPriced,
    pairsSolved: h.pairsSolved,
    pricingRounds: h.pricingRounds,
  };
}

/** Puts an online run and (optionally) the hindsight optimum into the SPEC §6 summary. */
export function buildSummary(args: {
  config: PairflowConfig;
  run: OnlineRun;
  hindsight: HindsightResult | null;
  rejects: number;
  inputs: string[];
  warm: boolean;
  timings: { loadMs: number; hindsightMs: number | null; totalMs: number };
}): ReplaySummary {
  const { run, hindsight: h } = args;
  const { regret, ratio } = regretAndRatio(run.online.cost, h ? h.cost : null);
  const hMarkets = new Map((h?.markets ?? []).map((m) => [m.market, m]));
  const names = [...new Set([...run.markets.map((m) => m.market), ...hMarkets.keys()])].sort();
  const onlineByMarket = new Map(run.markets.map((m) => [m.market, m]));
  const markets: MarketSummary[] = names.map((market) => {
    const o = onlineByMarket.get(market);
    const hm = hMarkets.get(market);
    return {
      market,
      online: { cost: o?.cost ?? 0, matched: o?.matched ?? 0, abandoned: o?.abandoned ?? 0 },
      hindsight: h ? { cost: hm?.cost ?? 0, matched: hm?.matched ?? 0, abandoned: hm?.abandoned ?? 0 } : null,
    };
  });
  return {
    windowMs: args.config.windowMs,
    demandUnits: run.totals.demandUnits,
    supplyUnits: run.totals.supplyUnits,
    online: { ...run.online },
    hindsight: h ? hindsightStats(h) : null,
    regret,
    ratio,
    rejects: args.rejects,
    duplicates: run.totals.duplicates,
    ignoredWithdraws: run.totals.ignoredWithdraws,
    late: run.totals.late,
    commit: args.config.commit,
    warm: args.warm,
    epochs: { ...run.epochs },
    markets,
    inputs: args.inputs,
    timings: {
      loadMs: args.timings.loadMs,
      onlineMs: run.ms,
      hindsightMs: args.timings.hindsightMs,
      totalMs: args.timings.totalMs,
      epochSolve: run.epochSolve,
    },
  };
}

/**
 * Replays log files through the windowed online policy and compares with the
 * hindsight optimum (SPEC §3–4, §6).
 * @example const s = await runReplay(['day.jsonl.gz'], { ...DEFAULT_CONFIG, windowMs: 10_000 }, { outDir: 'runs/w10s' });
 */
export async function runReplay(paths: readonly string[], config: PairflowConfig, opts: ReplayOptions = {}): Promise<ReplaySummary> {
  const now = opts.now ?? defaultNow;
  const start = now();
  let runDir: RunDirSink | null = null;
  let sink: OutputSink | null = null;
  try {
    if (opts.outDir !== undefined) sink = runDir = await openRunDir(opts.outDir);
    else if (opts.rejectsFile !== undefined) sink = openRejectsFile(opts.rejectsFile);
    const loaded = await loadLog([...paths], { metric: config.metric, strict: opts.strict ?? false, onReject: opts.onReject });
    const loadMs = now() - start;
    const summary = await replayLoaded(loaded, config, { ...opts, now, ...(sink ? { sink } : {}), loadMs, start });
    const closing = sink;
    sink = null;
    await closing?.close();
    if (runDir) {
      await runDir.writeJson(RUN_FILES.summary, summary);
      await runDir.writeJson(RUN_FILES.manifest, buildManifest({
        command: opts.command ?? ['runReplay', ...paths],
        inputs: loaded.inputs,
        config,
        options: {
          warm: opts.warm ?? true,
          strict: opts.strict ?? false,
          hindsight: opts.hindsight !== false,
        },
        outputs: Object.values(RUN_FILES),
      }));
    }
    return summary;
  } finally {
    // On failure, still close what was opened; the first error is the one reported.
    if (sink) await sink.close().catch(() => {});
  }
}

/** {@link runReplay} on a log that is already loaded (the sweep and tests reuse it). */
export async function replayLoaded(
  loaded: LoadedLog,
  config: PairflowConfig,
  opts: ReplayOptions & { sink?: OutputSink; loadMs?: number; start?: number } = {},
): Promise<ReplaySummary> {
  const now = opts.now ?? defaultNow;
  const start = opts.start ?? now();
  const warm = opts.warm ?? true;
  // The hindsight runs on worker threads: start it first so it overlaps the online replay.
  let hindsightPromise: Promise<HindsightResult | null>;
  const reused = typeof opts.hindsight === 'object';
  if (opts.hindsight === false) hindsightPromise = Promise.resolve(null);
  else if (opts.hindsight && opts.hindsight !== true) hindsightPromise = Promise.resolve(opts.hindsight);
  else {
    hindsightPromise = solveHindsight(loaded.events, config, {
      ...(opts.threads !== undefined ? { threads: opts.threads } : {}),
      onProgress: (done: number, total: number) => opts.onProgress?.({ phase: 'hindsight', done, total }),
    });
  }
  // Without a handler now, a hindsight failure during the online replay would be "unhandled".
  hindsightPromise.catch(() => {});
  const run = await replaySource(fileSource(loaded), config, {
    ...(opts.sink ? { sink: opts.sink } : {}),
    warm,
    now,
    verify: opts.verify ?? false,
    ...(opts.onProgress ? { onProgress: opts.onProgress } : {}),
  });
  const hindsight = await hindsightPromise;
  return buildSummary({
    config,
    run,
    hindsight,
    rejects: loaded.rejects.length,
    inputs: loaded.inputs.map((i) => basename(i.file)),
    warm,
    timings: {
      loadMs: opts.loadMs ?? 0,
      // A reused hindsight result was not computed by this run.
      hindsightMs: hindsight && !reused ? hindsight.ms : null,
      totalMs: now() - start,
    },
  });
}
