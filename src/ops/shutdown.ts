/**
 * Clean stop on SIGTERM and SIGINT (docs/operations.md "Shutdown").
 *
 * The first signal runs the live processor's stop callback (finish the current
 * transaction, leave the consumer group, close the metrics server) and exits 0 when it
 * returns. The callback gets `graceMs` (`--shutdown-grace`, default 20 s): past that the
 * process logs PAIRFLOW_ERR_SHUTDOWN_TIMEOUT and exits 1 — the broker then aborts the open
 * transaction, and the partition's next owner resumes from the last commit, so nothing
 * committed is lost or repeated. A second signal exits at once with 128 + the signal
 * number (130 for SIGINT, 143 for SIGTERM), the shell's convention for "killed by".
 */
import { constants } from 'node:os';
import type { Logger } from 'pino';
import { pairflowError } from '../errors.js';

/** The bound on a clean stop when none is configured: below the 30 s that Kubernetes (terminationGracePeriodSeconds) waits before SIGKILL. */
export const DEFAULT_SHUTDOWN_GRACE_MS = 20_000;

/** Options of {@link installShutdown}. */
export interface ShutdownOptions {
  /** The clean stop. Receives the signal (or the reason given to `begin`). */
  readonly stop: (reason: string) => Promise<void>;
  /** How long the stop may take before the process exits 1 anyway. @default {@link DEFAULT_SHUTDOWN_GRACE_MS} */
  readonly graceMs?: number;
  /** Where the shutdown is logged (info on begin and end, error on timeout or failure). @default none */
  readonly logger?: Logger;
  /** Signals handled. @default ['SIGTERM', 'SIGINT'] */
  readonly signals?: readonly NodeJS.Signals[];
  /** How the process ends; injected by tests. @default process.exit */
  readonly exit?: (code: number) => void;
  /** The wall clock for the duration logged; injected by tests. @default Date.now */
  readonly now?: () => number;
}

/** The handle {@link installShutdown} returns. */
export interface Shutdown {
  /** True from the first signal (or `begin`) on; the live loop stops taking new batches. */
  readonly stopping: boolean;
  /**
   * Starts the same clean stop without a signal (the `--exit-when-idle` end, a fatal
   * consumer error). Resolves with the exit status once the process is about to exit.
   */
  begin(reason: string): Promise<number>;
  /** Removes the signal handlers (tests; a process that exits by itself). */
  dispose(): void;
}

/**
 * Installs the SIGTERM/SIGINT handlers.
 * @example
 * const shutdown = installShutdown({
 *   graceMs: settings.shutdownGraceMs,
 *   logger,
 *   stop: async () => { await live.stop(); await server.close(); },
 * });
 */
export function installShutdown(options: ShutdownOptions): Shutdown {
  const graceMs = options.graceMs ?? DEFAULT_SHUTDOWN_GRACE_MS;
  const signals = options.signals ?? ['SIGTERM', 'SIGINT'];
  const exit = options.exit ?? ((code: number) => process.exit(code));
  const now = options.now ?? Date.now;
  const logger = options.logger;
  let running: Promise<number> | undefined;

  const finish = (code: number): number => {
    exit(code);
    return code;
  };

  const begin = (reason: string): Promise<number> => {
    if (running) return running;
    const t0 = now();
    logger?.info({ reason, graceMs }, 'shutdown begun: finishing the current transaction and leaving the group');
    let timer: NodeJS.Timeout | undefined;
    const timeout = new Promise<'timeout'>((resolve) => {
      timer = setTimeout(() => resolve('timeout'), graceMs);
    });
    running = Promise.race([options.stop(reason).then(() => 'done' as const), timeout]).then(
      (outcome) => {
        clearTimeout(timer);
        if (outcome === 'timeout') {
          const err = pairflowError('PAIRFLOW_ERR_SHUTDOWN_TIMEOUT', { graceMs, detail: 'exiting without a clean stop; the broker aborts the open transaction' });
          logger?.error({ err, reason }, err.message);
          return finish(1);
        }
        logger?.info({ reason, ms: now() - t0 }, 'shutdown complete');
        return finish(0);
      },
      (err: unknown) => {
        clearTimeout(timer);
        logger?.error({ err, reason }, 'shutdown failed');
        return finish(1);
      },
    );
    return running;
  };

  const onSignal = (signal: NodeJS.Signals): void => {
    if (running) {
      const code = 128 + (constants.signals[signal] ?? 0);
      logger?.warn({ signal, code }, 'second signal: exiting at once');
      exit(code);
      return;
    }
    void begin(signal);
  };
  for (const s of signals) process.on(s, onSignal);
  return {
    get stopping() {
      return running !== undefined;
    },
    begin,
    dispose() {
      for (const s of signals) process.off(s, onSignal);
    },
  };
}
