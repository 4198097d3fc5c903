/**
 * Worker-thread entry of `pairflow sweep`: receives the log once (workerData), packed
 * in shared memory (see sweep-log.ts), then replays one window length per message
 * through the same pipeline composition (`replaySource`) a single replay uses, decoding events as it goes,
 * and posts the plain-data result back.
 */
import { parentPort, workerData } from 'node:worker_threads';
import type { PairflowConfig } from '../model.js';
import type { BucketPlan } from './bootstrap.js';
import { replaySource } from '../replay/run.js';
import { packedSource, type PackedLog } from './packed-log.js';

/** What the sweep hands each worker once. */
export interface SweepWorkerData {
  /** The log's events, in replay order, shared by every worker. */
  log: PackedLog;
  config: PairflowConfig;
  plan: BucketPlan;
  warm: boolean;
}

/** One job: replay with this window. */
export interface SweepJob {
  id: number;
  windowMs: number;
}

const data = workerData as SweepWorkerData | null;
if (parentPort && data) {
  const port = parentPort;
  port.on('message', (job: SweepJob) => {
    replaySource(packedSource(data.log), { ...data.config, windowMs: job.windowMs }, { warm: data.warm, plan: data.plan }).then(
      (run) => port.postMessage({ id: job.id, ok: true, run }),
      (err: unknown) => {
        const e = err as { message?: string; code?: string; params?: unknown; stack?: string };
        port.postMessage({ id: job.id, ok: false, error: { message: e?.message ?? String(err), code: e?.code, params: e?.params, stack: e?.stack } });
      },
    );
  });
}
