/**
 * The hindsight benchmark (SPEC §4): the exact minimum-cost matching of a whole log
 * with every event known in advance, per market, markets in parallel on worker
 * threads. See hindsight-solve.ts for the method and its proof of exactness.
 */

import { existsSync } from 'node:fs';
import { availableParallelism } from 'node:os';
import { fileURLToPath } from 'node:url';
import { Worker } from 'node:worker_threads';

import { ERROR_CODES, pairflowError, PairflowError, type ErrorCode, type ErrorParams } from '../errors.js';
import { solveSparse } from '../matching/index.js';
import type { PairflowConfig, SourcedEvent } from '../model.js';
import { buildOccurrences, type Occurrence } from '../window/occurrences.js';
import { packMarket, type PackedMarket } from './graph.js';
import {
  solvePackedMarket,
  type HindsightCover,
  type HindsightDemandCosts,
  type HindsightMarketDetail,
  type HindsightMarketOptions,
  type HindsightMarketResult,
  type HindsightPhases,
} from './solve.js';
import { BYTES_PER_HELD_PAIR, defaultMemoryBudget, heldPairs, nextMarket, presentPairs, workersBeside } from './schedule.js';
import type { WorkerReply, WorkerTask } from './worker.js';

export type { HindsightCover, HindsightMarketResult, HindsightDemandCosts, HindsightMarketOptions, HindsightMarketDetail, HindsightPhases };
export { DEFAULT_CANDIDATES_PER_DEMAND } from './solve.js';

/** The hindsight optimum of a whole log: totals over markets, then each market. */
export interface HindsightResult {
  cost: number;
  matched: number;
  abandoned: number;
  demandUnits: number;
  supplyUnits: number;
  /** Allowed pairs over all markets. */
  pairsPriced: number;
  /** Pairs in the final restricted solves over all markets. */
  pairsSolved: number;
  /** The most pricing rounds any market needed. */
  pricingRounds: number;
  /** Σ over markets of the maximum-cardinality matching of the allowed graph. */
  ceiling: number;
  /** Wall time of the whole solve. */
  ms: number;
  /** Time per phase summed over markets (CPU time on the workers, so it can exceed `ms`). */
  phases: HindsightPhases;
  /** Per market, in market order (markets sorted by their key, code-unit order). */
  markets: HindsightMarketResult[];
  /**
   * Per demand occurrence (in buildOccurrences order of that market, concatenated in
   * market order): its event time and its hindsight cost (matched cost or P). The
   * sweep's bootstrap over days buckets these.
   */
  demandT: Float64Array;
  demandCost: Float64Array;
  /** Minutes each of those demands waited in the optimum (NaN when unmatched). */
  demandWait: Float64Array;
}

/** Options of {@link solveHindsight}. */
export interface HindsightOptions extends HindsightMarketOptions {
  /**
   * Worker threads, one market at a time each. 0 or 1 solves in this thread.
   * @default min(markets, available cores)
   */
  threads?: number;
  /**
   * Bytes the workers' pairs may take at once (schedule.ts): a market starts beside
   * running ones only while their estimated pairs fit; the largest runs alone if it
   * must. Only the order and overlap of the markets depend on it, never a result.
   * @default an eighth of the machine's memory, at least 3 GiB
   */
  memoryBudget?: number;
  /**
   * Memory the caller holds beside the workers until `until` settles (the replay's
   * online pass over a loaded log): counted against `memoryBudget` until then, so
   * that the largest markets wait for it. With `core`, the caller also computes on a
   * core of its own until then: one worker fewer runs meanwhile where the workers and
   * the caller would outnumber the cores ({@link workersBeside}).
   */
  callerHolds?: { bytes: number; until: Promise<unknown>; core?: boolean };
  /** Called after each market is solved. */
  onProgress?: (done: number, total: number) => void;
  /** Where a warning goes (e.g. the compiled worker is missing). @default process.emitWarning */
  onWarning?: (message: string) => void;
  /** Clock for the per-market `ms`, in this thread only (workers use their own performance.now). */
  now?: () => number;
}

/**
 * The exact hindsight optimum of one market's occurrences, in this thread. Pure and
 * synchronous; `ms` is measured by `opts.now`.
 * @example
 * const { occurrences } = buildOccurrences(events, config);
 * const r = solveHindsightMarket(occurrences.filter((o) => o.market === 'nyc'), config);
 */
export function solveHindsightMarket(
  occurrences: readonly Occurrence[],
  config: PairflowConfig,
  opts: HindsightMarketOptions = {},
): HindsightMarketResult & HindsightDemandCosts {
  const { detail: _detail, ...result } = solveHindsightMarketDetailed(occurrences, config, opts);
  return result;
}

/**
 * {@link solveHindsightMarket} plus what proves it: the full allowed graph, the final
 * dual prices and the assignment (for certificate checks).
 */
export function solveHindsightMarketDetailed(
  occurrences: readonly Occurrence[],
  config: PairflowConfig,
  opts: HindsightMarketOptions = {},
): HindsightMarketResult & HindsightDemandCosts & { detail: HindsightMarketDetail } {
  const market = occurrences[0]?.market ?? '';
  const { detail, ...r } = solvePackedMarket(market, packMarket(occurrences, config), config, solveSparse, opts, true);
  return { ...r, detail: detail! };
}

/** The compiled worker entry: `dist/hindsight/` seen from both `src/hindsight/` and `dist/hindsight/`. */
const WORKER_URL = new URL('../../dist/hindsight/worker.js', import.meta.url);

/** Whether the compiled worker exists, so threads can be used. */
export function hindsightWorkerAvailable(): boolean {
  return existsSync(fileURLToPath(WORKER_URL));
}

/**
 * The exact hindsight optimum (SPEC §4) of a log: occurrences by SPEC §1, then each
 * market solved on its own, on worker threads when more than one is asked for.
 * Results do not depend on the number of threads.
 *
 * @param events sorted by `t`, stable by file order
 * @example
 * const h = await solveHindsight(events, DEFAULT_CONFIG, { threads: 2 });
 * console.log(h.cost, h.matched, h.ceiling);
 */
export function solveHindsight(
  events: readonly SourcedEvent[],
  config: PairflowConfig,
  opts: HindsightOptions = {},
): Promise<HindsightResult> {
  const t0 = performance.now();
  // Packed here, synchronously: the solve below holds the typed arrays only, so the
  // caller's events can be let go while it runs (the replay drops them once the
  // online replay has read them).
  let byMarket: { markets: string[]; packed: PackedMarket[] };
  try {
    byMarket = packByMarket(events, config);
  } catch (err) {
    return Promise.reject(err);
  }
  return solvePacked(byMarket.markets, byMarket.packed, config, opts, t0);
}

async function solvePacked(
  markets: string[],
  packed: Array<PackedMarket | null>,
  config: PairflowConfig,
  opts: HindsightOptions,
  t0: number,
): Promise<HindsightResult> {
  let threads = opts.threads ?? Math.min(markets.length, availableParallelism());
  threads = Math.max(0, Math.min(Math.floor(threads), markets.length));
  const marketOpts: HindsightMarketOptions = {};
  if (opts.candidatesPerDemand !== undefined) marketOpts.candidatesPerDemand = opts.candidatesPerDemand;
  if (opts.addPerRow !== undefined) marketOpts.addPerRow = opts.addPerRow;
  if (opts.addPerColumn !== undefined) marketOpts.addPerColumn = opts.addPerColumn;
  if (opts.pricingTurns !== undefined) marketOpts.pricingTurns = opts.pricingTurns;
  if (opts.cover) marketOpts.cover = true;
  if (threads > 1 && !hindsightWorkerAvailable()) {
    const warn = opts.onWarning ?? ((msg: string) => process.emitWarning(msg, 'PairflowWarning'));
    warn(`hindsight: ${fileURLToPath(WORKER_URL)} is missing (run \`npm run build\`); solving in this thread`);
    threads = 1;
  }

  const results: Array<HindsightMarketResult & HindsightDemandCosts> = new Array(markets.length);
  let done = 0;
  if (threads <= 1) {
    if (opts.now !== undefined) marketOpts.now = opts.now;
    for (let i = 0; i < markets.length; i++) {
      const { detail: _detail, ...r } = solvePackedMarket(markets[i]!, packed[i]!, config, solveSparse, marketOpts);
      packed[i] = null;
      results[i] = r;
      opts.onProgress?.(++done, markets.length);
    }
  } else {
    await runOnWorkers(threads, markets, packed, config, marketOpts, opts.memoryBudget ?? defaultMemoryBudget(), opts.callerHolds, (i, r) => {
      results[i] = r;
      opts.onProgress?.(++done, markets.length);
    });
  }

  let nDemand = 0;
  for (const r of results) nDemand += r.demandT.length;
  const demandT = new Float64Array(nDemand);
  const demandCost = new Float64Array(nDemand);
  const demandWait = new Float64Array(nDemand);
  const out: HindsightResult = {
    cost: 0,
    matched: 0,
    abandoned: 0,
    demandUnits: 0,
    supplyUnits: 0,
    pairsPriced: 0,
    pairsSolved: 0,
    pricingRounds: 0,
    ceiling: 0,
    ms: 0,
    phases: { graphMs: 0, setupMs: 0, firstSolveMs: 0, pricingMs: 0, resolveMs: 0, ceilingMs: 0 },
    markets: [],
    demandT,
    demandCost,
    demandWait,
  };
  let at = 0;
  for (const r of results) {
    const { demandT: dt, demandCost: dc, demandWait: dw, ...m } = r;
    demandT.set(dt, at);
    demandCost.set(dc, at);
    demandWait.set(dw, at);
    at += dt.length;
    out.cost += m.cost;
    out.matched += m.matched;
    out.abandoned += m.abandoned;
    out.demandUnits += m.demandUnits;
    out.supplyUnits += m.supplyUnits;
    out.pairsPriced += m.pairsPriced;
    out.pairsSolved += m.pairsSolved;
    out.pricingRounds = Math.max(out.pricingRounds, m.pricingRounds);
    out.ceiling += m.ceiling;
    for (const key of Object.keys(out.phases) as Array<keyof HindsightPhases>) out.phases[key] += m.phases[key];
    out.markets.push(m);
  }
  out.ms = performance.now() - t0;
  return out;
}

/** Occurrences by market, each market's in their order (the hindsight solves markets apart). */
export function occurrencesByMarket(occurrences: readonly Occurrence[]): Map<string, Occurrence[]> {
  const byMarket = new Map<string, Occurrence[]>();
  for (const o of occurrences) {
    let list = byMarket.get(o.market);
    if (list === undefined) byMarket.set(o.market, (list = []));
    list.push(o);
  }
  return byMarket;
}

/** Occurrences (SPEC §1) packed per market, markets in key order; the objects are dropped on return. */
function packByMarket(events: readonly SourcedEvent[], config: PairflowConfig): { markets: string[]; packed: PackedMarket[] } {
  const byMarket = occurrencesByMarket(buildOccurrences(events, config).occurrences);
  const markets = [...byMarket.keys()].sort();
  return { markets, packed: markets.map((mk) => packMarket(byMarket.get(mk)!, config)) };
}

function transferables(p: PackedMarket): ArrayBuffer[] {
  return [
    p.demandT, p.demandEnd, p.demandA, p.demandB, p.supplyT, p.supplyEnd, p.supplyA, p.supplyB,
    p.demandNeeds, p.supplyHas,
  ].map((a) => a.buffer as ArrayBuffer);
}

function errorFromWorker(reply: Extract<WorkerReply, { ok: false }>): Error {
  if (reply.code !== undefined && reply.code in ERROR_CODES) {
    return pairflowError(reply.code as ErrorCode, (reply.params ?? {}) as ErrorParams);
  }
  return pairflowError('PAIRFLOW_ERR_INTERNAL_BUG', { detail: `hindsight worker failed: ${reply.message}` });
}

/**
 * Hands markets to at most `threads` workers, largest first, within the memory
 * budget (schedule.ts): a free worker takes the first queued market that fits beside
 * the running ones, or waits. A worker is ended as soon as nothing is left for it,
 * and after a market that held a large share of the budget (its pair store stays
 * resident for as long as the worker lives); a fresh one takes the next market.
 */
async function runOnWorkers(
  threads: number,
  markets: readonly string[],
  packed: Array<PackedMarket | null>,
  config: PairflowConfig,
  marketOpts: HindsightMarketOptions,
  budgetBytes: number,
  callerHolds: HindsightOptions['callerHolds'],
  onResult: (index: number, r: HindsightMarketResult & HindsightDemandCosts) => void,
): Promise<void> {
  const units = (i: number): number => packed[i]!.nDemand + packed[i]!.nSupply;
  const queue = markets.map((_, i) => i).sort((a, b) => units(b) - units(a) || a - b);
  const budget = budgetBytes / BYTES_PER_HELD_PAIR;
  const workers = new Set<Worker>();
  const idle: Worker[] = [];
  let pairs: Float64Array | null = null;
  // Whether `pairs` holds estimates (present bounds or sampled builds) rather than the bounds nDemand·nSupply.
  let estimated = false;
  let held = 0;
  let running = 0;
  let caller = callerHolds === undefined ? 0 : callerHolds.bytes / BYTES_PER_HELD_PAIR;
  let callerBusy = callerHolds?.core === true;
  const cores = availableParallelism();
  // Busy threads for the workers' pricing helpers (pricing-split.ts): [0] markets
  // running and the caller computing, kept here; [1] helpers in a pass, kept by them.
  const busy = new Int32Array(new SharedArrayBuffer(8));
  const count = (): void => void Atomics.store(busy, 0, running + (callerBusy ? 1 : 0));
  try {
    await new Promise<void>((resolve, reject) => {
      let settled = false;
      const fail = (err: unknown): void => {
        settled = true;
        reject(err);
      };
      const end = (w: Worker): void => {
        workers.delete(w);
        void w.terminate();
      };
      const spawn = (): Worker => {
        const w = new Worker(WORKER_URL);
        workers.add(w);
        w.on('message', (reply: WorkerReply) => {
          if (!reply.ok) {
            fail(errorFromWorker(reply));
            return;
          }
          try {
            onResult(reply.index, reply.result);
          } catch (err) {
            fail(err);
            return;
          }
          running--;
          count();
          const mine = pairs![reply.index]!;
          held -= mine;
          // Its pair store would stay resident for the next market: a fresh worker starts empty.
          if (queue.length === 0 || mine > budget / 4) end(w);
          else idle.push(w);
          dispatch();
        });
        w.on('error', (err) => fail(err instanceof PairflowError ? err : pairflowError('PAIRFLOW_ERR_INTERNAL_BUG', { detail: `hindsight worker failed: ${String(err)}` }, err)));
        w.on('exit', (code) => {
          if (workers.has(w) && code !== 0) fail(pairflowError('PAIRFLOW_ERR_INTERNAL_BUG', { detail: `hindsight worker exited with code ${code}` }));
        });
        return w;
      };
      const start = (at: number): void => {
        const i = queue.splice(at, 1)[0]!;
        const p = packed[i]!;
        // The buffers move to the worker; nothing here needs them again.
        packed[i] = null;
        held += pairs![i]!;
        running++;
        count();
        const task: WorkerTask = { index: i, market: markets[i]!, packed: p, config, opts: marketOpts, busy, cores, pairs: estimated ? pairs![i]! : 0 };
        (idle.pop() ?? spawn()).postMessage(task, transferables(p));
      };
      const fill = (): void => {
        while (running < workersBeside(threads, cores, callerBusy)) {
          const at = nextMarket(queue, pairs!, held, running, budget, caller);
          if (at < 0) break;
          start(at);
        }
      };
      const dispatch = (): void => {
        // After a failure nothing more starts (the workers are being ended).
        if (settled) return;
        try {
          schedule();
        } catch (err) {
          fail(err);
        }
      };
      const schedule = (): void => {
        if (pairs === null) {
          pairs = new Float64Array(markets.length);
          let bounds = 0;
          for (const i of queue) bounds += (pairs[i] = packed[i]!.nDemand * packed[i]!.nSupply);
          // Over the budget by nDemand·nSupply: the pairs present together bound them
          // closer, and where those fit no market need be estimated by a sampled build
          // (largest first, given up once they are over the budget all the same).
          let present: Float64Array | null = null;
          if (bounds + caller > budget) {
            estimated = true;
            present = new Float64Array(markets.length).fill(Infinity);
            let sum = 0;
            for (const i of queue) {
              present[i] = presentPairs(packed[i]!);
              sum += Math.min(pairs[i]!, present[i]!);
              if (sum + caller > budget) break;
            }
            if (sum + caller <= budget) {
              for (const i of queue) pairs[i] = Math.min(pairs[i]!, present[i]!);
              bounds = sum;
            }
          }
          if (bounds + caller > budget) {
            // Estimated largest first, each market free to start as soon as its own
            // estimate is in: the largest starts at once, the next while the rest are
            // estimated.
            for (const i of queue.slice()) {
              if (packed[i] === null) continue;
              pairs[i] = heldPairs(packed[i]!, config, budget, present![i]!);
              fill();
            }
          }
        }
        fill();
        // Nothing left to hand out: idle workers go now, with their pair stores.
        if (queue.length === 0) for (const w of idle.splice(0)) end(w);
        if (running === 0 && queue.length === 0) {
          settled = true;
          resolve();
        }
      };
      if (callerHolds !== undefined) {
        const release = (): void => {
          caller = 0;
          callerBusy = false;
          count();
          dispatch();
        };
        callerHolds.until.then(release, release);
      }
      dispatch();
    });
  } finally {
    await Promise.all([...workers].map((w) => w.terminate()));
  }
}
