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
  /** `PAIRFLOW_DEBUG`: print the whole stack of an internal error, not just its first line. @default false */
  readonly debug: boolean;
}

export function readEnv(env: NodeJS.ProcessEnv = process.env): PairflowEnv {
  return {
    kafkaBrokers: env.KAFKA_BROKERS || undefined,
    logLevel: env.PAIRFLOW_LOG_LEVEL || 'warn',
    ci: env.CI === 'true' || env.CI === '1',
    cacheDir: env.PAIRFLOW_CACHE_DIR || undefined,
    debug: Boolean(env.PAIRFLOW_DEBUG),
  };
}
