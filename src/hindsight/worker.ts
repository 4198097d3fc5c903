/**
 * Worker-thread entry of the hindsight optimum: solves one packed market per message.
 * Loaded from the compiled `dist/hindsight/worker.js` by hindsight.ts; only
 * plain data (typed arrays, the config object) crosses the thread boundary.
 */

import { parentPort } from 'node:worker_threads';

import { PairflowError } from '../errors.js';
import { solveSparse } from '../matching/index.js';
import type { PairflowConfig } from '../model.js';
import { GraphStore, type PackedMarket } from './graph.js';
import { PricingHelper, sharedGauge } from './pricing-split.js';
import {
  solvePackedMarket,
  type HindsightDemandCosts,
  type HindsightMarketOptions,
  type HindsightMarketResult,
} from './solve.js';

/** One market to solve. */
export interface WorkerTask {
  readonly index: number;
  readonly market: string;
  readonly packed: PackedMarket;
  readonly config: PairflowConfig;
  readonly opts: HindsightMarketOptions;
  /** The pool's counts of busy threads (pricing-split.ts sharedGauge), and the cores they share. */
  readonly busy: Int32Array;
  readonly cores: number;
  /** The pool's estimate (or bound) of the pairs the market holds at once (schedule.ts), 0 when the log was small enough to need none. */
  readonly pairs: number;
}

/** The answer to a {@link WorkerTask}. */
export type WorkerReply =
  | { readonly ok: true; readonly index: number; readonly result: HindsightMarketResult & HindsightDemandCosts }
  | { readonly ok: false; readonly index: number; readonly message: string; readonly code?: string; readonly params?: unknown };

const port = parentPort;
// One pair store for every market this worker solves (one at a time), shared with
// the pricing helper, which starts with the first market large enough for it; its
// pairs live in a WebAssembly memory where the pricing kernel reads them.
const store = new GraphStore(true, true);
let helper: PricingHelper | null = null;
if (port !== null) {
  port.on('message', (task: WorkerTask) => {
    try {
      helper ??= new PricingHelper(sharedGauge(task.busy, task.cores));
      helper.expectedPairs = task.pairs;
      const { detail: _detail, ...result } = solvePackedMarket(task.market, task.packed, task.config, solveSparse, task.opts, false, store, helper);
      const reply: WorkerReply = { ok: true, index: task.index, result };
      port.postMessage(reply, [result.demandT.buffer as ArrayBuffer, result.demandCost.buffer as ArrayBuffer, result.demandWait.buffer as ArrayBuffer]);
    } catch (err) {
      const reply: WorkerReply =
        err instanceof PairflowError
          ? { ok: false, index: task.index, message: err.message, code: err.code, params: err.params }
          : { ok: false, index: task.index, message: err instanceof Error ? (err.stack ?? err.message) : String(err) };
      port.postMessage(reply);
    }
  });
}
