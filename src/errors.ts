/**
 * The one registry of pairflow's error codes (`PAIRFLOW_ERR_<AREA>_<WHAT>`).
 *
 * Every error pairflow raises on purpose is built here, so that code, the CLI's exit
 * status and `docs/errors.md` agree. A test fails when this registry and the doc
 * disagree. Retired codes are never reused: move them to {@link RETIRED_CODES}.
 */

/** How the CLI maps an error to an exit status (SPEC §6): 2 usage or input, 1 anything else. */
export type ErrorKind = 'usage' | 'input' | 'runtime';

interface CodeSpec {
  readonly kind: ErrorKind;
  /** Message template; `{name}` placeholders are filled from the error's params. */
  readonly template: string;
  /** Whether retrying the same operation may succeed (I/O and broker errors). */
  readonly retriable?: boolean;
}

export const ERROR_CODES = {
  PAIRFLOW_ERR_CLI_USAGE: { kind: 'usage', template: '{detail}' },
  PAIRFLOW_ERR_CLI_OPTION: { kind: 'usage', template: 'option {option}: {detail}' },
  PAIRFLOW_ERR_CONFIG_INVALID: { kind: 'input', template: '{file}: {detail}' },
  PAIRFLOW_ERR_INPUT_NOT_FOUND: { kind: 'input', template: '{file}: no such file' },
  PAIRFLOW_ERR_INPUT_FORMAT: { kind: 'input', template: '{file}:{line}: {detail}' },
  PAIRFLOW_ERR_INPUT_EMPTY: { kind: 'input', template: '{file}: {detail}' },
  PAIRFLOW_ERR_INPUT_REJECT: { kind: 'input', template: '{file}:{line}: {detail}' },
  PAIRFLOW_ERR_INPUT_UNSUPPORTED: { kind: 'input', template: '{file}: {detail}' },
  PAIRFLOW_ERR_INPUT_UNREADABLE: { kind: 'input', template: '{file}: {detail}' },
  PAIRFLOW_ERR_INPUT_LIMIT: { kind: 'input', template: '{file}: {detail}' },
  PAIRFLOW_ERR_INPUT_NO_EVENTS: { kind: 'input', template: '{detail}' },
  PAIRFLOW_ERR_INPUT_TOO_MANY_REJECTS: { kind: 'input', template: '{detail}' },
  PAIRFLOW_ERR_SOLVER_INFEASIBLE: { kind: 'input', template: '{detail}' },
  PAIRFLOW_ERR_SOLVER_INPUT: { kind: 'input', template: '{detail}' },
  PAIRFLOW_ERR_KAFKA_CONNECT: { kind: 'runtime', template: 'cannot reach Kafka at {brokers}: {detail}', retriable: true },
  PAIRFLOW_ERR_KAFKA_BROKER_SETUP: { kind: 'runtime', template: '{detail}', retriable: true },
  PAIRFLOW_ERR_KAFKA_AVRO: { kind: 'input', template: '{where}: {detail}' },
  PAIRFLOW_ERR_KAFKA_TOPIC: { kind: 'input', template: 'topic {topic}: {detail}' },
  PAIRFLOW_ERR_KAFKA_TIMEOUT: { kind: 'runtime', template: 'gave up {what} after {ms} ms', retriable: true },
  PAIRFLOW_ERR_KAFKA_CONSUMER: { kind: 'runtime', template: 'the Kafka consumer stopped: {detail}', retriable: true },
  PAIRFLOW_ERR_OUTPUT_WRITE: { kind: 'runtime', template: '{file}: cannot write output: {detail}', retriable: true },
  PAIRFLOW_ERR_REPORT_INPUT: { kind: 'input', template: '{dir}: {detail}' },
  PAIRFLOW_ERR_STATE_INVALID: { kind: 'input', template: 'pool state of market {market}: {detail}' },
  PAIRFLOW_ERR_SETTINGS_INVALID: { kind: 'input', template: '{source}: {detail}' },
  PAIRFLOW_ERR_KAFKA_AUTH: { kind: 'runtime', template: 'Kafka at {brokers} refused the SASL {mechanism} login of user "{username}": {detail}' },
  PAIRFLOW_ERR_KAFKA_TLS: { kind: 'runtime', template: 'TLS connection to Kafka at {brokers} failed: {detail}' },
  PAIRFLOW_ERR_METRICS_LISTEN: { kind: 'runtime', template: 'cannot serve metrics on {host}:{port}: {detail}', retriable: true },
  PAIRFLOW_ERR_SHUTDOWN_TIMEOUT: { kind: 'runtime', template: 'shutdown did not finish within {graceMs} ms: {detail}' },
  PAIRFLOW_ERR_INTERNAL_BUG: { kind: 'runtime', template: '{detail}' },
} as const satisfies Record<string, CodeSpec>;

export type ErrorCode = keyof typeof ERROR_CODES;

/** Codes that existed once and must never be given a new meaning. */
export const RETIRED_CODES: readonly string[] = [];

export type ErrorParams = Record<string, string | number>;

function fill(template: string, params: ErrorParams): string {
  return template.replace(/\{(\w+)\}/g, (_, name: string) =>
    name in params ? String(params[name]) : `{${name}}`,
  );
}

/** Base class of every error pairflow raises on purpose. Tests assert on `code`. */
export class PairflowError extends Error {
  readonly code: ErrorCode;
  readonly kind: ErrorKind;
  readonly retriable: boolean;
  readonly params: ErrorParams;

  constructor(code: ErrorCode, params: ErrorParams, options?: { cause?: unknown }) {
    const spec: CodeSpec = ERROR_CODES[code];
    super(fill(spec.template, params), options);
    this.name = 'PairflowError';
    this.code = code;
    this.kind = spec.kind;
    this.retriable = spec.retriable ?? false;
    this.params = params;
  }
}

/**
 * Builds a {@link PairflowError}.
 * @example throw pairflowError('PAIRFLOW_ERR_INPUT_FORMAT', { file, line: 3, detail: 'expected a number' })
 */
export function pairflowError(code: ErrorCode, params: ErrorParams, cause?: unknown): PairflowError {
  return new PairflowError(code, params, cause === undefined ? undefined : { cause });
}

/** Exit status for an error (SPEC §6): 2 for usage or input errors, 1 for anything else. */
export function exitCodeFor(err: unknown): number {
  if (err instanceof PairflowError) return err.kind === 'runtime' ? 1 : 2;
  return 1;
}
