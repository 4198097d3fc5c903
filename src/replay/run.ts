/**
 * The replay pipeline: the live pipeline's shape with a file source and file sinks.
 * Events are loaded and ordered by event time (stable by file order), fed to the
 * window engine exactly as live mode feeds it (`advanceTo(t)` then `ingest`), and the
 * records go to the run directory while a collector derives the summary of SPEC §6.
 * Deterministic: the same inputs and config give the same records and summary
 * (wall-clock measurements aside, which live under `timings`).
 */
import { basename, join } from 'node:path';
import { checkLoadedLog, loadLog, type LoadedLog as ConsumedLog, type LogInput, type RejectLimit } from '../consume/index.js';
import { buildManifest, checkOutputPath, openRejectsFile, openRunDir, RUN_FILES, type RunDirSink } from '../emit/index.js';
import { writeWholeFile } from '../emit/whole-file.js';
import { pairflowError } from '../errors.js';
import type { PairflowConfig, Reject, SourcedEvent } from '../model.js';
import { drive, fileSource, Pipeline, teeRecords, type RecordSink } from '../pipeline/drive.js';
import { teeSink, type EventSource, type OutputSink } from '../ports.js';
import type { BucketPlan } from './buckets.js';
import { ReplayStats, type OnlineRun } from './stats.js';
import { solveHindsight, type HindsightResult } from '../hindsight/hindsight.js';
import { collectGarbage } from '../ops/heap.js';
import { booksErrors, regretAndRatio, type Books, type FileSummary, type HindsightStats, type MarketSummary, type ReplaySummary } from './summary.js';
import { DIGEST_FILE, gridForEvents, RunTally, withHindsight, type RunDigest } from './digest.js';

export type { ReplaySummary } from './summary.js';
export type { OnlineRun } from './stats.js';
export { fileSource } from '../pipeline/drive.js';

const defaultNow = (): number => performance.now();
/** CPU time of the whole process so far, ms: user and system, summed over its threads (getrusage). */
const defaultCpuNow = (): number => {
  const { user, system } = process.cpuUsage();
  return (user + system) / 1000;
};

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
  /** Also gather the report's digest: this tally sees every record and every event. @default none */
  tally?: RunTally;
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

/** An online run with the counts the books need beyond the statistics. */
export type CountedRun = OnlineRun & {
  /** Occurrences that left unmatched, per side (the records of expired.jsonl). */
  expired: { demand: number; supply: number };
  /** Rejects that reached the pipeline (a loaded log's kept rejects, events the engine refused). */
  pipelineRejects: number;
};

/**
 * The replay composition: a source through the pipeline into the caller's sink, with
 * the statistics of the summary gathered by a sink of their own beside it.
 */
export async function replaySource(
  source: EventSource,
  config: PairflowConfig,
  opts: ReplayEventsOptions = {},
): Promise<CountedRun> {
  const now = opts.now ?? defaultNow;
  const start = now();
  const stats = new ReplayStats(opts.plan);
  const expired = { demand: 0, supply: 0 };
  const counter: RecordSink = {
    assignment: () => {},
    expiry: (e) => { expired[e.side]++; },
    epoch: () => {},
    reject: () => {},
  };
  const out = opts.sink;
  const tally = opts.tally;
  const sinks = [stats, counter, ...(tally ? [tally] : []), ...(out ? [out] : [])];
  const pipeline = new Pipeline(config, teeRecords(sinks), {
    warm: opts.warm ?? true, now, verify: opts.verify ?? false,
  });
  await drive(tally ? tapSource(source, (ev) => tally.observe(ev)) : source, pipeline, out ?? null, {
    ...(opts.onProgress ? { onProgress: (done: number, total: number) => opts.onProgress!({ phase: 'online', done, total }) } : {}),
  });
  return { ...stats.result(config.windowMs, pipeline.engine.totals(), now() - start), expired, pipelineRejects: stats.rejects };
}

/** The same source, with every event shown to `see` as it is delivered. */
function tapSource(source: EventSource, see: (ev: SourcedEvent) => void): EventSource {
  return {
    ...(source.expected !== undefined ? { expected: source.expected } : {}),
    async *items() {
      for await (const item of source.items()) {
        if (item.kind === 'event') see(item.ev);
        yield item;
      }
    },
    close: () => source.close(),
  };
}

/** Options of {@link runReplay}. */
export interface ReplayOptions {
  /** The first rejected line/record ends the run with `PAIRFLOW_ERR_INPUT_REJECT`. @default false */
  strict?: boolean;
  /** Run directory for assignments, expirations, epochs, rejects, summary and manifest. @default none */
  outDir?: string;
  /** Also write every reject as JSON Lines here (beside a run directory's rejects.jsonl, or alone). @default none */
  rejectsFile?: string;
  /** Stop with `PAIRFLOW_ERR_INPUT_TOO_MANY_REJECTS` beyond this many rejects, or this share of the lines read. @default none */
  maxRejects?: RejectLimit;
  /** Carry dual prices between epochs. @default true */
  warm?: boolean;
  /** Worker threads for the hindsight optimum. @default the hindsight's own default */
  threads?: number;
  /** Compute the hindsight optimum (true), skip it (false), or reuse one computed before. @default true */
  hindsight?: boolean | HindsightResult;
  /** Wall clock for timings. @default performance.now */
  now?: () => number;
  /** The process's CPU time in ms, every thread (for `timings.cpuMs`). @default process.cpuUsage, user + system */
  cpuNow?: () => number;
  /** Check every epoch's certificate (tests). @default false */
  verify?: boolean;
  /** The command line, recorded in manifest.json. @default ['runReplay'] */
  command?: string[];
  /** Called for each reject as it is found (e.g. to print the first few). */
  onReject?: (r: Reject) => void;
  onProgress?: (p: ReplayProgress) => void;
  /** Gather the report's digest (digest.json in the run directory). @default true with outDir */
  digest?: boolean;
}

/** A loaded log, as returned by `loadLog` (src/consume). */
export type LoadedLog = ConsumedLog;

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

/** How much of each file was read, for the summary. */
export function fileSummaries(inputs: readonly LogInput[]): FileSummary[] {
  return inputs.map((i) => ({
    file: basename(i.file), bytes: i.bytes, lines: i.lines, blankLines: i.blankLines, events: i.events,
    rejectedLines: i.rejectedLines, lostRecords: i.lostRecords, damage: i.damage, complete: i.complete,
  }));
}

/** The books of a run (see {@link Books}) from what was read and what the pipeline counted. */
export function runBooks(inputs: readonly LogInput[], rejects: number, run: CountedRun): Books {
  const sum = (k: 'lines' | 'blankLines' | 'events' | 'rejectedLines' | 'lostRecords' | 'damage' | 'arrivals' | 'withdraws'): number =>
    inputs.reduce((a, i) => a + i[k], 0);
  const withdraws = sum('withdraws');
  return {
    lines: sum('lines'),
    blankLines: sum('blankLines'),
    events: sum('events'),
    rejectedLines: sum('rejectedLines'),
    lostRecords: sum('lostRecords'),
    damage: sum('damage'),
    rejects,
    arrivals: sum('arrivals'),
    withdraws,
    duplicates: run.totals.duplicates,
    demandOccurrences: run.totals.demandUnits,
    supplyOccurrences: run.totals.supplyUnits,
    appliedWithdraws: withdraws - run.totals.ignoredWithdraws,
    ignoredWithdraws: run.totals.ignoredWithdraws,
    matched: run.totals.matched,
    demandExpired: run.expired.demand,
    supplyExpired: run.expired.supply,
  };
}

/** Puts an online run and (optionally) the hindsight optimum into the SPEC §6 summary. */
export function buildSummary(args: {
  config: PairflowConfig;
  run: CountedRun;
  hindsight: HindsightResult | null;
  rejects: number;
  inputs: readonly LogInput[];
  warm: boolean;
  timings: { loadMs: number; hindsightMs: number | null; totalMs: number; cpuMs: number };
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
    inputs: args.inputs.map((i) => basename(i.file)),
    files: fileSummaries(args.inputs),
    books: runBooks(args.inputs, args.rejects, run),
    timings: {
      loadMs: args.timings.loadMs,
      onlineMs: run.ms,
      hindsightMs: args.timings.hindsightMs,
      totalMs: args.timings.totalMs,
      cpuMs: args.timings.cpuMs,
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
  const cpuStart = (opts.cpuNow ?? defaultCpuNow)();
  let runDir: RunDirSink | null = null;
  const sinks: OutputSink[] = [];
  let sink: OutputSink | null = null;
  try {
    if (opts.outDir !== undefined) sinks.push(runDir = await openRunDir(opts.outDir));
    if (opts.rejectsFile !== undefined) {
      await checkOutputPath(opts.rejectsFile);
      sinks.push(openRejectsFile(opts.rejectsFile));
    }
    sink = sinks.length === 0 ? null : sinks.length === 1 ? sinks[0]! : teeSink(sinks);
    const out = sink;
    // Rejects go straight to the outputs as they are found, and are only counted here:
    // a log of a million bad lines must not hold them all (issue #10).
    const loaded = await loadLog([...paths], {
      metric: config.metric,
      strict: opts.strict ?? false,
      keepRejects: false,
      onReject: (r) => {
        out?.reject(r);
        opts.onReject?.(r);
      },
      ...(out ? { backpressure: out } : {}),
      ...(opts.maxRejects ? { maxRejects: opts.maxRejects } : {}),
    });
    checkLoadedLog(loaded, opts.maxRejects);
    const loadMs = now() - start;
    const { summary, digest } = await replayLoadedFull(loaded, config, {
      ...opts, now, ...(out ? { sink: out } : {}), loadMs, start, cpuStart, digest: opts.digest ?? runDir !== null, releaseEvents: true,
    });
    sink = null;
    // Close every output even when one fails, then report the first failure.
    const closed = await Promise.allSettled(sinks.map((x) => x.close()));
    const failed = closed.find((r): r is PromiseRejectedResult => r.status === 'rejected');
    if (failed) throw failed.reason;
    if (runDir) {
      // Compact: its tables are long and only the report reads them.
      if (digest) await writeWholeFile(join(runDir.workDir, DIGEST_FILE), JSON.stringify(digest));
      await runDir.writeJson(RUN_FILES.summary, summary);
      await runDir.writeJson(RUN_FILES.manifest, buildManifest({
        command: opts.command ?? ['runReplay', ...paths],
        inputs: loaded.inputs,
        config,
        options: {
          warm: opts.warm ?? true,
          strict: opts.strict ?? false,
          hindsight: opts.hindsight !== false,
          ...(opts.maxRejects ? { maxRejects: opts.maxRejects } : {}),
        },
        outputs: Object.values(RUN_FILES).filter((f) => f !== DIGEST_FILE || digest !== null),
      }));
      await runDir.commit();
      runDir = null;
    }
    return summary;
  } finally {
    // On failure, still close what was opened and take back an unfinished run
    // directory; the first error is the one reported.
    if (sink) await Promise.allSettled(sinks.map((x) => x.close()));
    if (runDir) await runDir.abort();
  }
}

/** {@link runReplay} on a log that is already loaded (the sweep and tests reuse it). */
export async function replayLoaded(
  loaded: LoadedLog,
  config: PairflowConfig,
  opts: ReplayOptions & { sink?: OutputSink; loadMs?: number; start?: number } = {},
): Promise<ReplaySummary> {
  return (await replayLoadedFull(loaded, config, opts)).summary;
}

/** {@link replayLoaded}, with the run's digest when `opts.digest` is set. */
export async function replayLoadedFull(
  loaded: LoadedLog,
  config: PairflowConfig,
  opts: ReplayOptions & { sink?: OutputSink; loadMs?: number; start?: number; cpuStart?: number; releaseEvents?: boolean } = {},
): Promise<{ summary: ReplaySummary; digest: RunDigest | null }> {
  const now = opts.now ?? defaultNow;
  const start = opts.start ?? now();
  const cpuNow = opts.cpuNow ?? defaultCpuNow;
  const cpuStart = opts.cpuStart ?? cpuNow();
  const warm = opts.warm ?? true;
  // The hindsight runs on worker threads: start it first so it overlaps the online replay.
  let hindsightPromise: Promise<HindsightResult | null>;
  const reused = typeof opts.hindsight === 'object';
  let onlineDone = (): void => {};
  if (opts.hindsight === false) hindsightPromise = Promise.resolve(null);
  else if (opts.hindsight && opts.hindsight !== true) hindsightPromise = Promise.resolve(opts.hindsight);
  else {
    // While the online replay runs, this thread holds the log and what the replay
    // makes of it: V8 lets that grow to about twice what was live after its last
    // full collection (here, the loaded log) before collecting again (from memory;
    // the online replay of a week at scale 4 alone grew from 1.0 to 1.6 GB). The
    // largest markets wait for it (hindsight/schedule.ts), and while it runs it takes
    // a core of its own from the workers where they would outnumber the cores.
    const until = new Promise<void>((resolve) => (onlineDone = resolve));
    hindsightPromise = solveHindsight(loaded.events, config, {
      callerHolds: { bytes: 2 * process.memoryUsage().heapUsed, until, core: true },
      ...(opts.threads !== undefined ? { threads: opts.threads } : {}),
      ...(opts.digest ? { cover: true } : {}),
      onProgress: (done: number, total: number) => opts.onProgress?.({ phase: 'hindsight', done, total }),
    });
  }
  // Without a handler now, a hindsight failure during the online replay would be "unhandled".
  hindsightPromise.catch(() => {});
  const tally = opts.digest ? new RunTally(config, gridForEvents(loaded.events, config.metric)) : null;
  // A log loaded for this run alone (runReplay) is not read again: its events are let
  // go as the online replay reads them, while the hindsight's largest markets are
  // still being solved (the hindsight packed its own typed arrays before this).
  let run: Awaited<ReturnType<typeof replaySource>>;
  try {
    run = await replaySource(fileSource(loaded, { drain: opts.releaseEvents === true }), config, {
      ...(opts.sink ? { sink: opts.sink } : {}),
      ...(tally ? { tally } : {}),
      warm,
      now,
      verify: opts.verify ?? false,
      ...(opts.onProgress ? { onProgress: opts.onProgress } : {}),
    });
  } finally {
    // The log and the replay's garbage go back to the system before the largest
    // markets start (nothing here would allocate enough to set off a collection).
    if (opts.releaseEvents === true) collectGarbage();
    onlineDone();
  }
  const hindsight = await hindsightPromise;
  const summary = buildSummary({
    config,
    run,
    hindsight,
    rejects: loaded.rejectCount,
    inputs: loaded.inputs,
    warm,
    timings: {
      loadMs: opts.loadMs ?? 0,
      // A reused hindsight result was not computed by this run.
      hindsightMs: hindsight && !reused ? hindsight.ms : null,
      totalMs: now() - start,
      cpuMs: cpuNow() - cpuStart,
    },
  });
  // Nothing is lost (docs/principles.md rule 4): books that do not close are a bug.
  // Rejects handed to the pipeline (kept by the loader) are in the books already.
  const broken = run.pipelineRejects > loaded.rejects.length ? ['the engine refused events'] : booksErrors(summary.books);
  if (broken.length > 0) throw pairflowError('PAIRFLOW_ERR_INTERNAL_BUG', { detail: `the books of the run do not close: ${broken.join('; ')}` });
  return { summary, digest: tally ? withHindsight(tally.online(), hindsight) : null };
}
