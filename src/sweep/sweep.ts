/**
 * `pairflow sweep`: several window lengths replayed in parallel on worker threads,
 * over a log parsed once and one hindsight optimum shared by all of them, with a
 * paired bootstrap over days (hours for short logs) for the uncertainty of each
 * window's cost and of which window is best. Deterministic: the same inputs, windows
 * and seed give the same result, wall-clock figures (under `timings`) aside.
 */
import { existsSync } from 'node:fs';
import { mkdir, writeFile } from 'node:fs/promises';
import { availableParallelism } from 'node:os';
import { basename, join } from 'node:path';
import { fileURLToPath } from 'node:url';
import { Worker } from 'node:worker_threads';
import PQueue from 'p-queue';
import { loadLog } from '../consume/index.js';
import { buildManifest, csvRow } from '../emit/index.js';
import { pairflowError, PairflowError, type ErrorCode, type ErrorParams } from '../errors.js';
import type { PairflowConfig, Reject, SourcedEvent } from '../model.js';
import { bootstrapWindows, bucketPlan, bucketSums, type BucketPlan } from './bootstrap.js';
import { solveHindsight, type HindsightPhases, type HindsightResult } from '../hindsight/hindsight.js';
import { hindsightStats, replayEvents, type LoadedLog, type OnlineRun } from '../replay/run.js';
import { regretAndRatio, type EpochSolveTimes, type HindsightStats, type OnlineStats } from '../replay/summary.js';
import { packLog } from './packed-log.js';
import type { SweepJob, SweepWorkerData } from './worker.js';

/** Options of {@link runSweep}. */
export interface SweepOptions {
  /** Window lengths W in ms (duplicates are dropped, order kept). */
  windows: readonly number[];
  /** Worker threads for the windows (and the hindsight); 1 replays in this thread. @default os.availableParallelism() */
  threads?: number;
  /** Bootstrap resamples B; 0 skips the bootstrap. @default 1000 */
  bootstrap?: number;
  /** Seed of the bootstrap. @default 1 */
  seed?: number;
  /** The first reject ends the run. @default false */
  strict?: boolean;
  /** Carry dual prices between epochs. @default true */
  warm?: boolean;
  /** Reuse a hindsight optimum computed before for the same log and config. */
  hindsight?: HindsightResult;
  /** Wall clock for timings. @default performance.now */
  now?: () => number;
  /** Called as markets of the hindsight optimum, then windows, finish. */
  onProgress?: (done: number, total: number, phase: 'hindsight' | 'windows') => void;
  /**
   * Directory for sweep.json, sweep.csv and manifest.json (inputs by checksum, config,
   * windows, bootstrap seed), so the sweep can be reproduced. @default none
   */
  outDir?: string;
  /** The command line, recorded in manifest.json. @default ['runSweep'] */
  command?: string[];
  /** Non-fatal notes (e.g. the compiled worker is missing, running in-thread). */
  onWarn?: (message: string) => void;
  onReject?: (r: Reject) => void;
}

export interface SweepWindowResult {
  windowMs: number;
  online: OnlineStats;
  regret: number;
  ratio: number | null;
  /** Percentile bootstrap interval of the cost and the regret; null when the bootstrap is off. */
  interval: { level: number; cost: [number, number]; regret: [number, number] } | null;
  /** Share of resamples in which this window is best (lowest online cost). */
  bestShare: number | null;
  duplicates: number;
  ignoredWithdraws: number;
  epochs: { solved: number; warm: number; cold: number };
  timings: { ms: number; epochSolve: { warm: EpochSolveTimes; cold: EpochSolveTimes } };
}

export interface SweepResult {
  demandUnits: number;
  supplyUnits: number;
  rejects: number;
  commit: 'all' | 'due';
  warm: boolean;
  hindsight: HindsightStats;
  windows: SweepWindowResult[];
  /** The window with the lowest online cost (ties: the one listed first). */
  best: { windowMs: number; cost: number; regret: number; bestShare: number | null };
  bootstrap: { resamples: number; seed: number; level: number; unit: 'day' | 'hour'; buckets: number } | null;
  inputs: string[];
  timings: {
    loadMs: number;
    hindsightMs: number | null;
    /** Where the hindsight's time went, summed over markets (thread time); null when reused. */
    hindsightPhases: HindsightPhases | null;
    windowsMs: number;
    totalMs: number;
    threads: number;
  };
}

const defaultNow = (): number => performance.now();

/** Where the compiled worker lives: `dist/sweep/` under the package root, from both `src/sweep` and `dist/sweep`. */
export function sweepWorkerUrl(): URL {
  return new URL('../../dist/sweep/worker.js', import.meta.url);
}

/** The bucket plan of a log: over the event times of its demand arrivals. */
export function planForEvents(events: readonly SourcedEvent[]): BucketPlan {
  let lo = Infinity;
  let hi = -Infinity;
  for (const { event } of events) {
    if (event.type !== 'demand') continue;
    if (event.t < lo) lo = event.t;
    if (event.t > hi) hi = event.t;
  }
  return bucketPlan(lo, hi);
}

interface WorkerReply {
  id: number;
  ok: boolean;
  run?: OnlineRun;
  error?: { message: string; code?: string; params?: ErrorParams; stack?: string };
}

function errorFromWorker(e: NonNullable<WorkerReply['error']>): Error {
  if (e.code && e.code.startsWith('PAIRFLOW_ERR_')) return new PairflowError(e.code as ErrorCode, e.params ?? { detail: e.message });
  return pairflowError('PAIRFLOW_ERR_INTERNAL_BUG', { detail: `sweep worker: ${e.message}` });
}

/** A fixed set of workers, each holding the log; jobs go to whichever is idle. */
class WorkerPool {
  private readonly idle: Worker[] = [];
  private readonly all: Worker[] = [];
  private readonly pending = new Map<number, { resolve: (r: OnlineRun) => void; reject: (e: Error) => void }>();
  private nextId = 0;

  constructor(size: number, data: SweepWorkerData) {
    for (let i = 0; i < size; i++) {
      const w = new Worker(sweepWorkerUrl(), { workerData: data });
      w.on('message', (msg: WorkerReply) => {
        const p = this.pending.get(msg.id);
        if (!p) return;
        this.pending.delete(msg.id);
        this.idle.push(w);
        if (msg.ok && msg.run) p.resolve(msg.run);
        else p.reject(errorFromWorker(msg.error ?? { message: 'no result' }));
      });
      w.on('error', (err) => this.failAll(pairflowError('PAIRFLOW_ERR_INTERNAL_BUG', { detail: `sweep worker crashed: ${err.message}` }, err)));
      w.on('exit', (code) => {
        if (code !== 0) this.failAll(pairflowError('PAIRFLOW_ERR_INTERNAL_BUG', { detail: `sweep worker exited with ${code}` }));
      });
      this.all.push(w);
      this.idle.push(w);
    }
  }

  private failAll(err: Error): void {
    for (const p of this.pending.values()) p.reject(err);
    this.pending.clear();
  }

  /** Runs one window on an idle worker (the queue never asks for more than the pool size). */
  run(windowMs: number): Promise<OnlineRun> {
    const w = this.idle.pop();
    if (!w) return Promise.reject(pairflowError('PAIRFLOW_ERR_INTERNAL_BUG', { detail: 'no idle sweep worker' }));
    const id = this.nextId++;
    return new Promise<OnlineRun>((resolve, reject) => {
      this.pending.set(id, { resolve, reject });
      w.postMessage({ id, windowMs } satisfies SweepJob);
    });
  }

  async close(): Promise<void> {
    await Promise.all(this.all.map((w) => w.terminate()));
  }
}

/**
 * Replays `paths` once per window length and ranks the windows.
 * @example const r = await runSweep(['week.jsonl.gz'], DEFAULT_CONFIG, { windows: [1000, 5000, 30_000] });
 */
export async function runSweep(paths: readonly string[], config: PairflowConfig, opts: SweepOptions): Promise<SweepResult> {
  const now = opts.now ?? defaultNow;
  const start = now();
  const loaded = await loadLog([...paths], { metric: config.metric, strict: opts.strict ?? false, onReject: opts.onReject });
  const result = await sweepLoaded(loaded, config, { ...opts, now }, { loadMs: now() - start, start });
  if (opts.outDir !== undefined) await writeSweepDir(opts.outDir, result, loaded, config, opts);
  return result;
}

/** Files of a sweep directory (`--out DIR`). */
export const SWEEP_FILES = { result: 'sweep.json', table: 'sweep.csv', manifest: 'manifest.json' } as const;

async function writeSweepDir(dir: string, result: SweepResult, loaded: LoadedLog, config: PairflowConfig, opts: SweepOptions): Promise<void> {
  try {
    await mkdir(dir, { recursive: true });
    await writeFile(join(dir, SWEEP_FILES.result), `${JSON.stringify(result, null, 2)}\n`);
    await writeFile(join(dir, SWEEP_FILES.table), sweepCsv(result));
    const manifest = buildManifest({
      command: opts.command ?? ['runSweep'],
      inputs: loaded.inputs,
      config,
      options: {
        windows: result.windows.map((w) => w.windowMs),
        bootstrap: result.bootstrap?.resamples ?? 0,
        seed: result.bootstrap?.seed ?? null,
        warm: result.warm,
        strict: opts.strict ?? false,
      },
      outputs: Object.values(SWEEP_FILES),
    });
    await writeFile(join(dir, SWEEP_FILES.manifest), `${JSON.stringify(manifest, null, 2)}\n`);
  } catch (err) {
    const code = (err as NodeJS.ErrnoException).code ?? String(err);
    throw pairflowError('PAIRFLOW_ERR_OUTPUT_WRITE', { file: dir, detail: code }, err);
  }
}

/** Header of the sweep CSV: one row per window. */
export const SWEEP_CSV_HEADER = [
  'window_ms', 'online_cost', 'matched', 'abandoned', 'mean_wait_min', 'p95_wait_min', 'regret', 'ratio',
  'cost_lo', 'cost_hi', 'regret_lo', 'regret_hi', 'best_share', 'best',
] as const;

/** The sweep as CSV text (RFC 4180). */
export function sweepCsv(r: SweepResult): string {
  let out = csvRow(SWEEP_CSV_HEADER);
  for (const w of r.windows) {
    out += csvRow([
      w.windowMs, w.online.cost, w.online.matched, w.online.abandoned, w.online.meanWaitMin, w.online.p95WaitMin,
      w.regret, w.ratio, w.interval?.cost[0], w.interval?.cost[1], w.interval?.regret[0], w.interval?.regret[1],
      w.bestShare, w.windowMs === r.best.windowMs ? 1 : 0,
    ]);
  }
  return out;
}

/** {@link runSweep} on a log already loaded. */
export async function sweepLoaded(
  loaded: LoadedLog,
  config: PairflowConfig,
  opts: SweepOptions,
  at: { loadMs: number; start: number } = { loadMs: 0, start: NaN },
): Promise<SweepResult> {
  const now = opts.now ?? defaultNow;
  const start = Number.isNaN(at.start) ? now() : at.start;
  const windows = [...new Set(opts.windows)];
  if (windows.length === 0) throw pairflowError('PAIRFLOW_ERR_CLI_USAGE', { detail: 'sweep needs at least one window length' });
  for (const w of windows) {
    if (!Number.isInteger(w) || w <= 0) throw pairflowError('PAIRFLOW_ERR_CLI_OPTION', { option: '--windows', detail: `${w} is not a whole number of ms > 0` });
  }
  const threads = Math.max(1, Math.floor(opts.threads ?? availableParallelism()));
  const warm = opts.warm ?? true;
  const events = loaded.events;
  const plan = planForEvents(events);

  // One hindsight optimum for every window: it does not depend on W.
  const hStart = now();
  const hindsight = opts.hindsight ?? (await solveHindsight(events, config, {
    threads,
    onProgress: (d, t) => opts.onProgress?.(d, t, 'hindsight'),
  }));
  const hindsightMs = opts.hindsight ? null : now() - hStart;

  const wStart = now();
  const runs = new Array<OnlineRun>(windows.length);
  let done = 0;
  const workerFile = sweepWorkerUrl();
  let useWorkers = threads > 1 && windows.length > 1;
  if (useWorkers && !existsSync(fileURLToPath(workerFile))) {
    opts.onWarn?.(`compiled sweep worker not found at ${fileURLToPath(workerFile)} (run npm run build); replaying windows in this thread`);
    useWorkers = false;
  }
  const poolSize = useWorkers ? Math.min(threads, windows.length) : 1;
  const queue = new PQueue({ concurrency: poolSize });
  // Workers read one shared copy of the log instead of a structured clone each.
  const pool = useWorkers ? new WorkerPool(poolSize, { log: packLog(events), config, plan, warm }) : null;
  try {
    await Promise.all(windows.map((windowMs, i) => queue.add(async () => {
      runs[i] = pool
        ? await pool.run(windowMs)
        : await replayEvents(events, { ...config, windowMs }, { warm, plan, now });
      done += 1;
      opts.onProgress?.(done, windows.length, 'windows');
    })));
  } finally {
    // After a failure, start no further window; then stop the workers either way.
    queue.clear();
    await pool?.close();
  }
  const windowsMs = now() - wStart;

  const B = opts.bootstrap ?? 1000;
  const hBuckets = bucketSums(plan, hindsight.demandT, hindsight.demandCost);
  const boot = B > 0 ? bootstrapWindows(runs.map((r) => r.buckets!), hBuckets, { resamples: B, seed: opts.seed ?? 1 }) : null;

  const results: SweepWindowResult[] = runs.map((r, i) => {
    const { regret, ratio } = regretAndRatio(r.online.cost, hindsight.cost);
    const b = boot?.windows[i];
    return {
      windowMs: r.windowMs,
      online: { ...r.online },
      regret: regret!,
      ratio,
      interval: b && boot ? { level: boot.level, cost: b.cost, regret: b.regret! } : null,
      bestShare: b ? b.bestShare : null,
      duplicates: r.totals.duplicates,
      ignoredWithdraws: r.totals.ignoredWithdraws,
      epochs: { ...r.epochs },
      timings: { ms: r.ms, epochSolve: r.epochSolve },
    };
  });
  let best = 0;
  for (let i = 1; i < results.length; i++) if (results[i]!.online.cost < results[best]!.online.cost) best = i;
  const bw = results[best]!;
  const first = runs[0]!;
  return {
    demandUnits: first.totals.demandUnits,
    supplyUnits: first.totals.supplyUnits,
    rejects: loaded.rejects.length,
    commit: config.commit,
    warm,
    hindsight: hindsightStats(hindsight),
    windows: results,
    best: { windowMs: bw.windowMs, cost: bw.online.cost, regret: bw.regret, bestShare: bw.bestShare },
    bootstrap: boot ? { resamples: boot.resamples, seed: boot.seed, level: boot.level, unit: plan.unit, buckets: plan.count } : null,
    inputs: loaded.inputs.map((i) => basename(i.file)),
    timings: { loadMs: at.loadMs, hindsightMs, hindsightPhases: opts.hindsight ? null : { ...hindsight.phases }, windowsMs, totalMs: now() - start, threads: poolSize },
  };
}
