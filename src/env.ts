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
  /**
   * Test-only fault injection for `pairflow live`: `POINT[:N]` kills the process
   * (SIGKILL) the N-th time (default 1st) it reaches POINT (see src/live/processor.ts
   * `FaultPoint`). @default undefined
   */
  readonly fault: string | undefined;
  /**
   * The Kafka-process settings given in the environment, as raw text (undefined when
   * unset or empty). src/ops/settings.ts validates them and ranks them between the flags
   * and the settings file; docs/operations.md "Settings" lists them.
   */
  readonly settings: SettingsEnv;
}

/** Raw values of the settings variables (see {@link SETTINGS_ENV_VARS}). */
export type SettingsEnv = { readonly [K in keyof typeof SETTINGS_ENV_VARS]: string | undefined };

/**
 * Each process setting and the variable that gives it. `KAFKA_BROKERS` keeps its
 * established name; the rest are `PAIRFLOW_*`.
 */
export const SETTINGS_ENV_VARS = {
  settingsFile: 'PAIRFLOW_SETTINGS',
  brokers: 'KAFKA_BROKERS',
  clientId: 'PAIRFLOW_CLIENT_ID',
  group: 'PAIRFLOW_GROUP',
  in: 'PAIRFLOW_IN',
  out: 'PAIRFLOW_OUT',
  tls: 'PAIRFLOW_TLS',
  tlsCa: 'PAIRFLOW_TLS_CA',
  tlsCert: 'PAIRFLOW_TLS_CERT',
  tlsKey: 'PAIRFLOW_TLS_KEY',
  tlsKeyPassword: 'PAIRFLOW_TLS_KEY_PASSWORD',
  saslMechanism: 'PAIRFLOW_SASL_MECHANISM',
  saslUsername: 'PAIRFLOW_SASL_USERNAME',
  saslPassword: 'PAIRFLOW_SASL_PASSWORD',
  saslPasswordFile: 'PAIRFLOW_SASL_PASSWORD_FILE',
  metricsPort: 'PAIRFLOW_METRICS_PORT',
  metricsHost: 'PAIRFLOW_METRICS_HOST',
  logLevel: 'PAIRFLOW_LOG_LEVEL',
  shutdownGrace: 'PAIRFLOW_SHUTDOWN_GRACE',
} as const;

/** The settings variables of `env`, raw; an empty value counts as unset. */
export function readSettingsEnv(env: NodeJS.ProcessEnv = process.env): SettingsEnv {
  const out: Record<string, string | undefined> = {};
  for (const [key, name] of Object.entries(SETTINGS_ENV_VARS)) out[key] = env[name] || undefined;
  return out as SettingsEnv;
}

export function readEnv(env: NodeJS.ProcessEnv = process.env): PairflowEnv {
  return {
    kafkaBrokers: env.KAFKA_BROKERS || undefined,
    logLevel: env.PAIRFLOW_LOG_LEVEL || 'warn',
    ci: env.CI === 'true' || env.CI === '1',
    cacheDir: env.PAIRFLOW_CACHE_DIR || undefined,
    debug: Boolean(env.PAIRFLOW_DEBUG),
    fault: env.PAIRFLOW_FAULT || undefined,
    settings: readSettingsEnv(env),
  };
}
