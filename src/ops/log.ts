/**
 * The live processor's logger: pino JSON lines on stderr (stdout stays for what a command
 * prints, e.g. `--print-config`), level names instead of numbers, ISO times, and two
 * layers that keep secrets out of every line (docs/operations.md "Logs"):
 *
 * 1. field redaction — any field named like a secret (`password`, `passphrase`, `key`
 *    under `ssl`/`tls`, `authorization`, …) at the top or up to three levels down is
 *    replaced by `[redacted]` before the line is built (pino's `redact`);
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

// Field names that hold secrets wherever they appear. Paths are pino (fast-redact)
// paths: a name alone, then under one, two and three levels of wildcard.
const SECRET_FIELDS = ['password', 'passphrase', 'keyPassword', 'secret', 'token', 'authorization', 'sasl.password', 'ssl.key', 'tls.key', 'ssl.passphrase'];
const SECRET_PATHS = SECRET_FIELDS.flatMap((f) => [f, `*.${f}`, `*.*.${f}`, `*.*.*.${f}`]);

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
      formatters: { level: (label) => ({ level: label }) },
      redact: { paths: SECRET_PATHS, censor: REDACTED },
      hooks: { streamWrite: scrub },
    },
    options.destination ?? pino.destination({ fd: 2, sync: true }),
  );
}
