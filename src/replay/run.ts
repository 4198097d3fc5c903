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
import { drive, fileSource, Pipeline, teeRecords } from '../pipeline/drive.js';
import type { EventSource, OutputSink } from '../ports.js';
import type { BucketPlan } from './buckets.js';
import { ReplayStats, type OnlineRun } from './stats.js';
import { solveHindsight, type HindsightResult } from '../hindsight/hindsight.js';
import { regretAndRatio, type HindsightStats, type MarketSummary, type ReplaySummary } from './summary.js';

export type { ReplaySummary } from './summary.js';
export type { OnlineRun } from './stats.js';
export { fileSource } from '../pipeline/drive.js';

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
 * The replay composition: a source through the pipeline into the caller's sink, with
 * the statistics of the summary gathered by a sink of their own beside it.
 */
export async function replaySource(
  source: EventSource,
  config: PairflowConfig,
  opts: ReplayEventsOptions = {},
): Promise<OnlineRun> {
  const now = opts.now ?? defaultNow;
  const start = now();
  const stats = new ReplayStats(opts.plan);
  const out = opts.sink;
  const pipeline = new Pipeline(config, out ? teeRecords([stats, out]) : stats, {
    warm: opts.warm ?? true, now, verify: opts.verify ?? false,
  });
  await drive(source, pipeline, out ?? null, {
    ...(opts.onProgress ? { onProgress: (done: number, total: number) => opts.onProgress!({ phase: 'online', done, total }) } : {}),
  });
  return stats.result(config.windowMs, pipeline.engine.totals(), now() - start);
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
      await runDir.commit();
      runDir = null;
    }
    return summary;
  } finally {
    // On failure, still close what was opened and take back an unfinished run
    // directory; the first error is the one reported.
    if (runDir) await runDir.abort();
    else if (sink) await sink.close().catch(() => {});
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
