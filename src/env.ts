/**
 * Every environment variable pairflow reads is read here, once, with its default.
 * Nothing else in `src/` touches `process.env`.
 */

export interface PairflowEnv {
  /** Comma-separated broker list used when `--brokers` is not given. @default undefined */
  readonly kafkaBrokers: string | undefined;
  /** pino log level. @default 'warn' for the CLI */
  readonly logLevel: string;
  /** Set by CI systems; makes a missing test broker a failure instead of a skip. */
  readonly ci: boolean;
  /** Where the local broker's Maven artifacts and data live. @default ~/.cache/pairflow */
  readonly cacheDir: string | undefined;
  /**
   * Test-only fault injection for `pairflow live`: `POINT[:N]` kills the process
   * (SIGKILL) the N-th time (default 1st) it reaches POINT (see src/live/processor.ts
   * `FaultPoint`). @default undefined
   */
  readonly fault: string | undefined;
}

export function readEnv(env: NodeJS.ProcessEnv = process.env): PairflowEnv {
  return {
    kafkaBrokers: env.KAFKA_BROKERS || undefined,
    logLevel: env.PAIRFLOW_LOG_LEVEL || 'warn',
    ci: env.CI === 'true' || env.CI === '1',
    cacheDir: env.PAIRFLOW_CACHE_DIR || undefined,
    fault: env.PAIRFLOW_FAULT || undefined,
  };
}
