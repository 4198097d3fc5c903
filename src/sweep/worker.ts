/**
 * Worker-thread entry of `pairflow sweep`: receives the log once (workerData), packed
 * in shared memory (see packed-log.ts), then replays one policy per message through
 * the same pipeline composition (`replaySource`) a single replay uses, decoding events
 * as it goes, and posts the plain-data result back (with the report's digest when
 * asked for).
 */
import { parentPort, workerData } from 'node:worker_threads';
import type { PairflowConfig } from '../model.js';
import type { BucketPlan } from './bootstrap.js';
import { RunTally, type CellGrid, type OnlineDigest } from '../replay/digest.js';
import { replaySource, type OnlineRun } from '../replay/run.js';
import { packedSource, type PackedLog } from './packed-log.js';

/** What the sweep hands each worker once. */
export interface SweepWorkerData {
  /** The log's events, in replay order, shared by every worker. */
  log: PackedLog;
  config: PairflowConfig;
  plan: BucketPlan;
  warm: boolean;
  /** Gather each policy's digest on this grid (for `--out`); null = none. */
  grid: CellGrid | null;
}

/** A policy of the sweep: the fields of the config it changes. */
export interface SweepPolicy {
  windowMs: number;
  /** R; null = P. */
  reserve: number | null;
  commit: 'all' | 'due';
}

/** One job: replay with this policy. */
export interface SweepJob {
  id: number;
  policy: SweepPolicy;
}

/** What a job yields. */
export interface SweepJobResult {
  run: OnlineRun;
  digest: OnlineDigest | null;
}

/** Replays one policy over a source of the log: the body of a job, also run in-thread. */
export async function runPolicy(
  source: Parameters<typeof replaySource>[0],
  data: Omit<SweepWorkerData, 'log'>,
  policy: SweepPolicy,
): Promise<SweepJobResult> {
  const config: PairflowConfig = { ...data.config, ...policy };
  const tally = data.grid ? new RunTally(config, data.grid) : null;
  const run = await replaySource(source, config, { warm: data.warm, plan: data.plan, ...(tally ? { tally } : {}) });
  return { run, digest: tally ? tally.online() : null };
}

const data = workerData as SweepWorkerData | null;
if (parentPort && data) {
  const port = parentPort;
  port.on('message', (job: SweepJob) => {
    runPolicy(packedSource(data.log), data, job.policy).then(
      (result) => port.postMessage({ id: job.id, ok: true, result }),
      (err: unknown) => {
        const e = err as { message?: string; code?: string; params?: unknown; stack?: string };
        port.postMessage({ id: job.id, ok: false, error: { message: e?.message ?? String(err), code: e?.code, params: e?.params, stack: e?.stack } });
      },
    );
  });
}
