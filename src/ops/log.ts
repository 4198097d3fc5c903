/**
 * The live processor's logger: pino JSON lines on stderr (stdout stays for what a command
 * prints, e.g. `--print-config`), level names instead of numbers, ISO times, and two
 * layers that keep secrets out of every line (docs/operations.md "Logs"):
 *
 * 1. field redaction — any field named like a secret (`password`, `passphrase`, `key`
 *    under `ssl`/`tls`, `authorization`, …) in the logged object, at any depth up to
 *    {@link REDACT_DEPTH}, is replaced by `[redacted]` before the line is built. Done by
 *    hand in pino's `formatters.log` rather than with pino's `redact` paths: those
 *    wildcard paths copy every object they pass, and a copied Buffer throws
 *    ("%TypedArray%.prototype.buffer called on incompatible receiver") — which broke
 *    kafkajs' SASL login at debug level, where it logs request buffers;
 * 2. value scrubbing — the secret values themselves (the SASL password, the TLS key
 *    password) are replaced wherever they appear in the finished line: in a message, in
 *    an error's text, in a field no path foresaw (pino's `streamWrite` hook).
 */
import pino, { type DestinationStream, type Logger } from 'pino';

/** pino's levels, most severe first, plus `silent`. */
export const LOG_LEVELS = ['fatal', 'error', 'warn', 'info', 'debug', 'trace', 'silent'] as const;
export type LogLevel = (typeof LOG_LEVELS)[number];

/** What replaces a secret in a log line. */
export const REDACTED = '[redacted]';

/**
 * Secrets shorter than this are redacted by field only, not scrubbed from whole lines:
 * replacing one or two characters everywhere would break the JSON escapes of the line.
 */
export const MIN_SCRUB_LENGTH = 4;

/** Field names (compared without case) whose values are secrets wherever they appear. */
const SECRET_NAMES = new Set(['password', 'passphrase', 'keypassword', 'secret', 'token', 'authorization', 'saslpassword']);
/** Parents under which `key` is a private key. */
const KEY_PARENTS = new Set(['ssl', 'tls', 'security']);
/** How deep field redaction looks into a logged object. */
export const REDACT_DEPTH = 6;

function isPlain(v: unknown): v is Record<string, unknown> {
  if (v === null || typeof v !== 'object') return false;
  const proto = Object.getPrototypeOf(v) as unknown;
  return proto === Object.prototype || proto === null;
}

/**
 * A copy of `value` with every secret-named field replaced by {@link REDACTED}. Only plain
 * objects and arrays are copied; anything else (Buffers, Errors, dates, class instances)
 * is passed as it is — pino's serializers and the value scrubber deal with those.
 */
export function redactFields(value: unknown, parent = '', depth = 0): unknown {
  if (depth > REDACT_DEPTH) return value;
  if (Array.isArray(value)) return value.map((v) => redactFields(v, parent, depth + 1));
  if (!isPlain(value)) return value;
  const out: Record<string, unknown> = {};
  for (const [k, v] of Object.entries(value)) {
    const name = k.toLowerCase();
    const secret = SECRET_NAMES.has(name) || (name === 'key' && KEY_PARENTS.has(parent));
    out[k] = secret && v !== undefined && v !== null ? REDACTED : redactFields(v, name, depth + 1);
  }
  return out;
}

/** Options of {@link createLogger}. */
export interface CreateLoggerOptions {
  /** Minimum level written. @default 'info' */
  readonly level?: LogLevel;
  /** Secret values to scrub from every line (the SASL password, the TLS key password). @default none */
  readonly secrets?: readonly (string | undefined)[];
  /** Where lines go. @default stderr (fd 2), written synchronously so nothing is lost at exit */
  readonly destination?: DestinationStream;
  /** Fields on every line. @default { name: 'pairflow' } */
  readonly base?: Readonly<Record<string, unknown>>;
}

function escapeForRegExp(text: string): string {
  return text.replace(/[.*+?^${}()|[\]\\]/g, '\\$&');
}

/**
 * A function replacing every occurrence of the given secrets — as they are, and as they
 * look inside a JSON string (quotes and backslashes escaped) — by {@link REDACTED}.
 * Exported for other writers of lines (the CLI's stderr notes) and for tests.
 */
export function secretScrubber(secrets: readonly (string | undefined)[]): (line: string) => string {
  const forms = new Set<string>();
  for (const s of secrets) {
    if (s === undefined || s.length < MIN_SCRUB_LENGTH) continue;
    forms.add(s);
    forms.add(JSON.stringify(s).slice(1, -1));
  }
  if (forms.size === 0) return (line) => line;
  // Longest first, so a secret that contains another is replaced whole.
  const re = new RegExp([...forms].sort((a, b) => b.length - a.length).map(escapeForRegExp).join('|'), 'g');
  return (line) => line.replace(re, REDACTED);
}

/**
 * Builds the process logger.
 * @example
 * const logger = createLogger({ level: settings.logLevel, secrets: secretValues(settings) });
 * logger.info({ partitions: [0, 1] }, 'partitions assigned');
 */
export function createLogger(options: CreateLoggerOptions = {}): Logger {
  const scrub = secretScrubber(options.secrets ?? []);
  return pino(
    {
      level: options.level ?? 'info',
      base: { name: 'pairflow', ...options.base },
      timestamp: pino.stdTimeFunctions.isoTime,
      formatters: {
        level: (label) => ({ level: label }),
        log: (object) => redactFields(object) as Record<string, unknown>,
        bindings: (bindings) => redactFields(bindings) as Record<string, unknown>,
      },
      hooks: { streamWrite: scrub },
    },
    options.destination ?? pino.destination({ fd: 2, sync: true }),
  );
}
