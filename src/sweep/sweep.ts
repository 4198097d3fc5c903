/**
 * `pairflow sweep`: a grid of policies — window lengths × reserves × commit modes —
 * replayed in parallel on worker threads, over a log parsed once and one hindsight
 * optimum shared by all of them (it depends on none of the three). A paired bootstrap
 * over days (hours for short logs) gives each policy's cost interval, the interval of
 * its difference to the cheapest policy, and how often each is cheapest; the
 * recommendation states its margin over the runner-up and whether the data can tell
 * the two apart. Deterministic: the same inputs, grid and seed give the same result,
 * wall-clock figures (under `timings`) aside.
 */
import { existsSync } from 'node:fs';
import { mkdir } from 'node:fs/promises';
import { availableParallelism } from 'node:os';
import { basename, join } from 'node:path';
import { fileURLToPath } from 'node:url';
import { Worker } from 'node:worker_threads';
import PQueue from 'p-queue';
import { loadLog } from '../consume/index.js';
import { buildManifest, csvRow } from '../emit/index.js';
import { probeWritableDir } from '../emit/probe.js';
import { writeWholeFile } from '../emit/whole-file.js';
import { pairflowError, PairflowError, type ErrorCode, type ErrorParams } from '../errors.js';
import { validateConfig } from '../config.js';
import type { CommitMode, PairflowConfig, Reject, SourcedEvent } from '../model.js';
import { bootstrapPolicies, bucketPlan, bucketSums, type BucketPlan } from './bootstrap.js';
import { solveHindsight, type HindsightPhases, type HindsightResult } from '../hindsight/hindsight.js';
import { gridForEvents, withHindsight, type OnlineDigest, type RunDigest } from '../replay/digest.js';
import { hindsightStats, type LoadedLog } from '../replay/run.js';
import { fileSource } from '../pipeline/drive.js';
import { collectGarbage } from '../ops/heap.js';
import { formatWindow, regretAndRatio, type EpochSolveTimes, type HindsightStats, type OnlineStats } from '../replay/summary.js';
import { packedSource, packLog } from './packed-log.js';
import { runPolicy, type SweepJob, type SweepJobResult, type SweepPolicy, type SweepWorkerData } from './worker.js';

export type { SweepPolicy } from './worker.js';

/** The phases of a sweep, in order, for progress lines. */
export type SweepPhase = 'load' | 'hindsight' | 'policies' | 'bootstrap' | 'write';

/** Options of {@link runSweep}. */
export interface SweepOptions {
  /** Window lengths W in ms (duplicates are dropped, order kept). */
  windows: readonly number[];
  /** Reserves R to try (null = P). @default [config.reserve] */
  reserves?: readonly (number | null)[];
  /** Commit modes to try. @default [config.commit] */
  commits?: readonly CommitMode[];
  /** Worker threads for the policies (and the hindsight); 1 replays in this thread. @default os.availableParallelism() */
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
  /** Called as markets of the hindsight optimum, then policies, finish. */
  onProgress?: (done: number, total: number, phase: 'hindsight' | 'policies') => void;
  /** Called as each phase starts, with a few words on what it does. */
  onPhase?: (phase: SweepPhase, note: string) => void;
  /**
   * Directory for sweep.json, sweep.csv, manifest.json (inputs by checksum, config,
   * grid, bootstrap seed) and one digest per policy under policies/, the input of
   * `pairflow report`. Checked before the work starts. @default none
   */
  outDir?: string;
  /** Gather each policy's digest even without outDir. @default true with outDir */
  digests?: boolean;
  /**
   * The log is this sweep's alone (runSweep loads it): once the hindsight has packed
   * its markets and the log is packed for the policies, the event objects are let go
   * (`loaded.events` is emptied) and the policies replay the packed log, so the
   * largest markets are not solved beside the loaded log. @default false
   */
  releaseEvents?: boolean;
  /** The command line, recorded in manifest.json. @default ['runSweep'] */
  command?: string[];
  /** Non-fatal notes (e.g. the compiled worker is missing, running in-thread). */
  onWarn?: (message: string) => void;
  onReject?: (r: Reject) => void;
}

export interface SweepPolicyResult {
  policy: SweepPolicy;
  /** How the policy is written in tables: `5s / R=P / all`. */
  label: string;
  online: OnlineStats;
  regret: number;
  ratio: number | null;
  /** Percentile bootstrap interval of the cost and the regret; null when the bootstrap is off. */
  interval: { level: number; cost: [number, number]; regret: [number, number] } | null;
  /** Paired difference to the cheapest policy (cost − its cost) and its bootstrap interval. */
  vsBest: { diff: number; interval: [number, number] | null };
  /** Share of resamples in which this policy is cheapest. */
  bestShare: number | null;
  duplicates: number;
  ignoredWithdraws: number;
  epochs: { solved: number; warm: number; cold: number };
  /** Its digest in the sweep directory (policies/N.json), null when none was written. */
  digest: string | null;
  timings: { ms: number; epochSolve: { warm: EpochSolveTimes; cold: EpochSolveTimes } };
}

/** The sweep's advice: the cheapest policy, by how much, and how sure. */
export interface Recommendation {
  label: string;
  policy: SweepPolicy;
  /** The next cheapest policy; null when only one was swept. */
  runnerUp: string | null;
  /** Runner-up cost − recommended cost (≥ 0). */
  margin: number | null;
  /** Bootstrap interval of that margin (paired); null without bootstrap. */
  marginInterval: [number, number] | null;
  level: number | null;
  bestShare: number | null;
  /** The margin's interval lies wholly above 0: the log tells the two apart. */
  clear: boolean;
  /** The advice in one or two plain sentences. */
  text: string;
}

export interface SweepResult {
  demandUnits: number;
  supplyUnits: number;
  rejects: number;
  warm: boolean;
  hindsight: HindsightStats;
  policies: SweepPolicyResult[];
  /** The policy with the lowest online cost (ties: the one listed first). */
  best: { label: string; policy: SweepPolicy; windowMs: number; cost: number; regret: number; bestShare: number | null };
  recommendation: Recommendation;
  /** Cost per time bucket (the bootstrap's resampling units), for paired comparisons. */
  buckets: { unit: 'day' | 'hour'; origin: number; unitMs: number; hindsight: number[]; policies: number[][] };
  bootstrap: { resamples: number; seed: number; level: number; unit: 'day' | 'hour'; buckets: number } | null;
  inputs: string[];
  timings: {
    loadMs: number;
    hindsightMs: number | null;
    /** Where the hindsight's time went, summed over markets (thread time); null when reused. */
    hindsightPhases: HindsightPhases | null;
    /** Replaying the policies. */
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

/** How a policy is written: `5s / R=P / all`. */
export function policyLabel(p: SweepPolicy): string {
  return `${formatWindow(p.windowMs)} / R=${p.reserve === null ? 'P' : String(p.reserve)} / ${p.commit}`;
}

/**
 * The policy grid: every window × reserve × commit, windows outermost, duplicates
 * dropped, order kept. Each policy must make a valid config.
 */
export function policyGrid(config: PairflowConfig, opts: Pick<SweepOptions, 'windows' | 'reserves' | 'commits'>): SweepPolicy[] {
  const windows = [...new Set(opts.windows)];
  const reserves = [...new Set(opts.reserves ?? [config.reserve])];
  const commits = [...new Set(opts.commits ?? [config.commit])];
  if (windows.length === 0) throw pairflowError('PAIRFLOW_ERR_CLI_USAGE', { detail: 'sweep needs at least one window length' });
  for (const w of windows) {
    if (!Number.isInteger(w) || w <= 0) throw pairflowError('PAIRFLOW_ERR_CLI_OPTION', { option: '--windows', detail: `${w} is not a whole number of ms > 0` });
  }
  if (reserves.length === 0) throw pairflowError('PAIRFLOW_ERR_CLI_OPTION', { option: '--reserves', detail: 'names no reserve' });
  if (commits.length === 0) throw pairflowError('PAIRFLOW_ERR_CLI_OPTION', { option: '--commits', detail: 'names no commit mode' });
  const out: SweepPolicy[] = [];
  for (const windowMs of windows) {
    for (const reserve of reserves) {
      for (const commit of commits) {
        const checked = validateConfig({ ...config, windowMs, reserve, commit });
        if ('problems' in checked) throw pairflowError('PAIRFLOW_ERR_CLI_OPTION', { option: '--reserves/--commits', detail: checked.problems.join('; ') });
        out.push({ windowMs, reserve, commit });
      }
    }
  }
  return out;
}

interface WorkerReply {
  id: number;
  ok: boolean;
  result?: SweepJobResult;
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
  private readonly pending = new Map<number, { resolve: (r: SweepJobResult) => void; reject: (e: Error) => void }>();
  private nextId = 0;

  constructor(size: number, data: SweepWorkerData) {
    for (let i = 0; i < size; i++) {
      const w = new Worker(sweepWorkerUrl(), { workerData: data });
      w.on('message', (msg: WorkerReply) => {
        const p = this.pending.get(msg.id);
        if (!p) return;
        this.pending.delete(msg.id);
        this.idle.push(w);
        if (msg.ok && msg.result) p.resolve(msg.result);
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

  /** Runs one policy on an idle worker (the queue never asks for more than the pool size). */
  run(policy: SweepPolicy): Promise<SweepJobResult> {
    const w = this.idle.pop();
    if (!w) return Promise.reject(pairflowError('PAIRFLOW_ERR_INTERNAL_BUG', { detail: 'no idle sweep worker' }));
    const id = this.nextId++;
    return new Promise<SweepJobResult>((resolve, reject) => {
      this.pending.set(id, { resolve, reject });
      w.postMessage({ id, policy } satisfies SweepJob);
    });
  }

  async close(): Promise<void> {
    await Promise.all(this.all.map((w) => w.terminate()));
  }
}

/**
 * Replays `paths` once per policy of the grid and ranks the policies.
 * @example const r = await runSweep(['week.jsonl.gz'], DEFAULT_CONFIG, { windows: [5000, 30_000], reserves: [null, 5] });
 */
export async function runSweep(paths: readonly string[], config: PairflowConfig, opts: SweepOptions): Promise<SweepResult> {
  const now = opts.now ?? defaultNow;
  const start = now();
  // Fail on a bad grid or an unwritable output before reading anything.
  policyGrid(config, opts);
  if (opts.outDir !== undefined) await probeWritableDir(opts.outDir);
  opts.onPhase?.('load', `reading ${paths.length === 1 ? paths[0] : `${paths.length} files`}`);
  const loaded = await loadLog([...paths], { metric: config.metric, strict: opts.strict ?? false, onReject: opts.onReject });
  const { result, digests } = await sweepLoadedFull(loaded, config, { ...opts, now, digests: opts.digests ?? opts.outDir !== undefined, releaseEvents: true }, { loadMs: now() - start, start });
  if (opts.outDir !== undefined) {
    opts.onPhase?.('write', `writing ${opts.outDir}`);
    await writeSweepDir(opts.outDir, result, digests, loaded, config, opts);
  }
  return result;
}

/** Files of a sweep directory (`--out DIR`). */
export const SWEEP_FILES = { result: 'sweep.json', table: 'sweep.csv', manifest: 'manifest.json', policies: 'policies' } as const;


async function writeSweepDir(
  dir: string,
  result: SweepResult,
  digests: readonly (RunDigest | null)[],
  loaded: LoadedLog,
  config: PairflowConfig,
  opts: SweepOptions,
): Promise<void> {
  try {
    await mkdir(join(dir, SWEEP_FILES.policies), { recursive: true });
  } catch (err) {
    const code = (err as NodeJS.ErrnoException).code ?? String(err);
    throw pairflowError('PAIRFLOW_ERR_OUTPUT_WRITE', { file: join(dir, SWEEP_FILES.policies), detail: code }, err);
  }
  for (let i = 0; i < digests.length; i++) {
    const d = digests[i];
    if (d && result.policies[i]!.digest) await writeWholeFile(join(dir, result.policies[i]!.digest!), JSON.stringify(d));
  }
  await writeWholeFile(join(dir, SWEEP_FILES.table), sweepCsv(result));
  const manifest = buildManifest({
    command: opts.command ?? ['runSweep'],
    inputs: loaded.inputs,
    config,
    options: {
      windows: [...new Set(result.policies.map((p) => p.policy.windowMs))],
      reserves: [...new Set(result.policies.map((p) => p.policy.reserve))],
      commits: [...new Set(result.policies.map((p) => p.policy.commit))],
      bootstrap: result.bootstrap?.resamples ?? 0,
      seed: result.bootstrap?.seed ?? null,
      warm: result.warm,
      strict: opts.strict ?? false,
    },
    outputs: [SWEEP_FILES.result, SWEEP_FILES.table, SWEEP_FILES.manifest, ...result.policies.flatMap((p) => (p.digest ? [p.digest] : []))],
  });
  await writeWholeFile(join(dir, SWEEP_FILES.manifest), `${JSON.stringify(manifest, null, 2)}\n`);
  // The result last: a directory with sweep.json is complete.
  await writeWholeFile(join(dir, SWEEP_FILES.result), `${JSON.stringify(result, null, 2)}\n`);
}

/** Header of the sweep CSV: one row per policy. */
export const SWEEP_CSV_HEADER = [
  'policy', 'window_ms', 'reserve', 'commit', 'online_cost', 'matched', 'abandoned', 'mean_wait_min', 'p95_wait_min', 'regret', 'ratio',
  'cost_lo', 'cost_hi', 'regret_lo', 'regret_hi', 'diff_vs_best', 'diff_lo', 'diff_hi', 'best_share', 'best',
] as const;

/** The sweep as CSV text (RFC 4180). An empty reserve means R = P. */
export function sweepCsv(r: SweepResult): string {
  let out = csvRow(SWEEP_CSV_HEADER);
  for (const p of r.policies) {
    out += csvRow([
      p.label, p.policy.windowMs, p.policy.reserve, p.policy.commit,
      p.online.cost, p.online.matched, p.online.abandoned, p.online.meanWaitMin, p.online.p95WaitMin,
      p.regret, p.ratio, p.interval?.cost[0], p.interval?.cost[1], p.interval?.regret[0], p.interval?.regret[1],
      p.vsBest.diff, p.vsBest.interval?.[0], p.vsBest.interval?.[1],
      p.bestShare, p.label === r.best.label ? 1 : 0,
    ]);
  }
  return out;
}

const fmt = (v: number): string => v.toLocaleString('en-US', { minimumFractionDigits: 0, maximumFractionDigits: Math.abs(v) >= 100 ? 0 : 2 });
const pct = (v: number): string => `${(v * 100).toFixed(v > 0.995 && v < 1 ? 1 : 0)} %`;

/** The recommendation and its plain sentences, from the ranked results. */
export function recommend(policies: readonly SweepPolicyResult[], best: number, boot: SweepResult['bootstrap']): Recommendation {
  const b = policies[best]!;
  let runner = -1;
  for (let i = 0; i < policies.length; i++) {
    if (i === best) continue;
    if (runner < 0 || policies[i]!.online.cost < policies[runner]!.online.cost) runner = i;
  }
  const base = { label: b.label, policy: b.policy, bestShare: b.bestShare, level: boot?.level ?? null };
  if (runner < 0) {
    return { ...base, runnerUp: null, margin: null, marginInterval: null, clear: false, text: `Only one policy was swept (${b.label}); sweep more to compare.` };
  }
  const r = policies[runner]!;
  const margin = r.online.cost - b.online.cost;
  const iv = r.vsBest.interval;
  const clear = iv !== null && iv[0] > 0;
  const units = boot ? `${boot.buckets} ${boot.unit}${boot.buckets === 1 ? '' : 's'}` : '';
  let text: string;
  if (!boot || !iv) {
    text = `Use ${b.label}: it cost ${fmt(margin)} less than the next best, ${r.label}. Without a bootstrap (--bootstrap 0) there is no telling how sure that is.`;
  } else if (clear) {
    text = `Use ${b.label}: it cost ${fmt(margin)} less than the next best, ${r.label} ` +
      `(${Math.round(boot.level * 100)} % interval of the difference ${fmt(iv[0])} to ${fmt(iv[1])}, resampling ${units}); ` +
      `it was the cheapest in ${pct(b.bestShare ?? 0)} of ${boot.resamples.toLocaleString('en-US')} resamples.`;
  } else {
    text = `${b.label} cost least, but only ${fmt(margin)} less than ${r.label}, and the ${Math.round(boot.level * 100)} % interval of that difference ` +
      `(${fmt(iv[0])} to ${fmt(iv[1])}, resampling ${units}) includes 0: this log cannot tell the two apart. ` +
      `Choose between them on waits or simplicity, or replay more days.`;
  }
  return { ...base, runnerUp: r.label, margin, marginInterval: iv, clear, text };
}

/** {@link runSweep} on a log already loaded. */
export async function sweepLoaded(
  loaded: LoadedLog,
  config: PairflowConfig,
  opts: SweepOptions,
  at: { loadMs: number; start: number } = { loadMs: 0, start: NaN },
): Promise<SweepResult> {
  return (await sweepLoadedFull(loaded, config, opts, at)).result;
}

/** {@link sweepLoaded}, with each policy's digest when `opts.digests` is set. */
export async function sweepLoadedFull(
  loaded: LoadedLog,
  config: PairflowConfig,
  opts: SweepOptions,
  at: { loadMs: number; start: number } = { loadMs: 0, start: NaN },
): Promise<{ result: SweepResult; digests: (RunDigest | null)[] }> {
  const now = opts.now ?? defaultNow;
  const start = Number.isNaN(at.start) ? now() : at.start;
  const policies = policyGrid(config, opts);
  const threads = Math.max(1, Math.floor(opts.threads ?? availableParallelism()));
  const warm = opts.warm ?? true;
  const events = loaded.events;
  const plan = planForEvents(events);
  const wantDigests = opts.digests ?? false;
  const grid = wantDigests ? gridForEvents(events, config.metric) : null;

  const release = opts.releaseEvents === true;
  let useWorkers = threads > 1 && policies.length > 1;
  const workerFile = sweepWorkerUrl();
  if (useWorkers && !existsSync(fileURLToPath(workerFile))) {
    opts.onWarn?.(`compiled sweep worker not found at ${fileURLToPath(workerFile)} (run npm run build); replaying policies in this thread`);
    useWorkers = false;
  }
  // Workers read one shared copy of the log instead of a structured clone each; a
  // sweep that lets the events go replays that copy in this thread too.
  const log = useWorkers || release ? packLog(events) : null;

  // One hindsight optimum for every policy: it depends on none of W, R or commit.
  const hStart = now();
  if (!opts.hindsight) opts.onPhase?.('hindsight', 'the hindsight optimum, once for every policy');
  let letGo = (): void => {};
  const hindsightPromise = opts.hindsight ? Promise.resolve(opts.hindsight) : solveHindsight(events, config, {
    threads,
    ...(wantDigests ? { cover: true } : {}),
    // What this thread holds beside the workers until the events are let go (below),
    // or for the whole solve when they are not.
    callerHolds: { bytes: process.memoryUsage().heapUsed, until: new Promise<void>((resolve) => (letGo = resolve)) },
    onProgress: (d, t) => opts.onProgress?.(d, t, 'hindsight'),
  });
  // Without a handler now, a failure while the events are let go would be "unhandled".
  hindsightPromise.catch(() => {});
  if (release) {
    // The hindsight packed its markets when called and the policies have the packed
    // log: the events are read no more. The largest market is already running; the
    // next ones start once the memory is back (hindsight/schedule.ts).
    loaded.events.length = 0;
    collectGarbage();
    letGo();
  }
  let hindsight: HindsightResult;
  try {
    hindsight = await hindsightPromise;
  } finally {
    letGo();
  }
  const hindsightMs = opts.hindsight ? null : now() - hStart;

  const wStart = now();
  const jobs = new Array<SweepJobResult>(policies.length);
  let done = 0;
  const poolSize = useWorkers ? Math.min(threads, policies.length) : 1;
  opts.onPhase?.('policies', `${policies.length} polic${policies.length === 1 ? 'y' : 'ies'} on ${poolSize} thread${poolSize === 1 ? '' : 's'}`);
  opts.onProgress?.(0, policies.length, 'policies');
  const queue = new PQueue({ concurrency: poolSize });
  const jobData = { config, plan, warm, grid };
  const pool = useWorkers ? new WorkerPool(poolSize, { log: log!, ...jobData }) : null;
  try {
    await Promise.all(policies.map((policy, i) => queue.add(async () => {
      jobs[i] = pool ? await pool.run(policy) : await runPolicy(log ? packedSource(log) : fileSource({ events, rejects: [] }), jobData, policy);
      done += 1;
      opts.onProgress?.(done, policies.length, 'policies');
    })));
  } finally {
    // After a failure, start no further policy; then stop the workers either way.
    queue.clear();
    await pool?.close();
  }
  const windowsMs = now() - wStart;
  const runs = jobs.map((j) => j.run);

  const B = opts.bootstrap ?? 1000;
  const hBuckets = bucketSums(plan, hindsight.demandT, hindsight.demandCost);
  let best = 0;
  for (let i = 1; i < runs.length; i++) if (runs[i]!.online.cost < runs[best]!.online.cost) best = i;
  if (B > 0) opts.onPhase?.('bootstrap', `${B} resamples of ${plan.count} ${plan.unit}${plan.count === 1 ? '' : 's'}`);
  const boot = B > 0 ? bootstrapPolicies(runs.map((r) => r.buckets!), hBuckets, { resamples: B, seed: opts.seed ?? 1, reference: best }) : null;
  const bootInfo = boot ? { resamples: boot.resamples, seed: boot.seed, level: boot.level, unit: plan.unit, buckets: plan.count } : null;

  const results: SweepPolicyResult[] = runs.map((r, i) => {
    const { regret, ratio } = regretAndRatio(r.online.cost, hindsight.cost);
    const b = boot?.policies[i];
    return {
      policy: policies[i]!,
      label: policyLabel(policies[i]!),
      online: { ...r.online },
      regret: regret!,
      ratio,
      interval: b && boot ? { level: boot.level, cost: b.cost, regret: b.regret! } : null,
      vsBest: { diff: r.online.cost - runs[best]!.online.cost, interval: b ? b.diff : null },
      bestShare: b ? b.bestShare : null,
      duplicates: r.totals.duplicates,
      ignoredWithdraws: r.totals.ignoredWithdraws,
      epochs: { ...r.epochs },
      digest: wantDigests ? `${SWEEP_FILES.policies}/${i + 1}.json` : null,
      timings: { ms: r.ms, epochSolve: r.epochSolve },
    };
  });
  const bw = results[best]!;
  const first = runs[0]!;
  const result: SweepResult = {
    demandUnits: first.totals.demandUnits,
    supplyUnits: first.totals.supplyUnits,
    rejects: loaded.rejects.length,
    warm,
    hindsight: hindsightStats(hindsight),
    policies: results,
    best: { label: bw.label, policy: bw.policy, windowMs: bw.policy.windowMs, cost: bw.online.cost, regret: bw.regret, bestShare: bw.bestShare },
    recommendation: recommend(results, best, bootInfo),
    buckets: { unit: plan.unit, origin: plan.origin, unitMs: plan.unitMs, hindsight: [...hBuckets], policies: runs.map((r) => [...r.buckets!]) },
    bootstrap: bootInfo,
    inputs: loaded.inputs.map((i) => basename(i.file)),
    timings: { loadMs: at.loadMs, hindsightMs, hindsightPhases: opts.hindsight ? null : { ...hindsight.phases }, windowsMs, totalMs: now() - start, threads: poolSize },
  };
  const digests = jobs.map((j) => (j.digest ? withHindsight(j.digest as OnlineDigest, hindsight) : null));
  return { result, digests };
}
