/**
 * Worker-thread entry of `pairflow sweep`: receives the parsed log once (workerData),
 * then replays one window length per message with the same `replayEvents` a single
 * replay uses, and posts the plain-data result back.
 */
import { parentPort, workerData } from 'node:worker_threads';
import type { PairflowConfig, SourcedEvent } from '../model.js';
import type { BucketPlan } from './bootstrap.js';
import { replayEvents } from './run.js';

/** What the sweep hands each worker once. */
export interface SweepWorkerData {
  events: SourcedEvent[];
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
    replayEvents(data.events, { ...data.config, windowMs: job.windowMs }, { warm: data.warm, plan: data.plan }).then(
      (run) => port.postMessage({ id: job.id, ok: true, run }),
      (err: unknown) => {
        const e = err as { message?: string; code?: string; params?: unknown; stack?: string };
        port.postMessage({ id: job.id, ok: false, error: { message: e?.message ?? String(err), code: e?.code, params: e?.params, stack: e?.stack } });
      },
    );
  });
}
