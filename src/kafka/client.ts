/**
 * The one place pairflow builds kafkajs clients: broker-list parsing, TLS and SASL
 * (docs/kafka.md "Security"), kafkajs' log lines routed into pino, and the partitioner
 * that keys records by market (SPEC §3: a market is the partition key).
 */
import kafkajs from 'kafkajs';
import type { KafkaConfig, LogEntry, RetryOptions, ICustomPartitioner, SASLOptions } from 'kafkajs';
import type { Logger } from 'pino';
import { pairflowError, PairflowError } from '../errors.js';

const { Kafka, Partitioners, logLevel: KafkaLogLevel } = kafkajs;

/** The SASL mechanisms pairflow offers (the ones kafkajs implements apart from OAUTHBEARER and AWS IAM). */
export const SASL_MECHANISMS = ['plain', 'scram-sha-256', 'scram-sha-512'] as const;
export type SaslMechanism = (typeof SASL_MECHANISMS)[number];

/** TLS to the brokers: PEM texts (not paths; src/ops/settings.ts reads the files). */
export interface KafkaTls {
  /** CA certificates that sign the brokers' certificates. @default Node's bundled public CAs */
  readonly ca?: string;
  /** Client certificate, for brokers that require one (`ssl.client.auth=required`). */
  readonly cert?: string;
  /** Private key of the client certificate. */
  readonly key?: string;
  /** Password of an encrypted `key`. */
  readonly keyPassword?: string;
}

/** How pairflow authenticates to and encrypts traffic with the brokers. */
export interface KafkaSecurity {
  /** TLS settings; absent = plaintext. */
  readonly tls?: KafkaTls;
  /** SASL login; absent = none. Over plaintext, PLAIN sends the password readable on the wire. */
  readonly sasl?: { readonly mechanism: SaslMechanism; readonly username: string; readonly password: string };
}

/** Options of {@link createKafka}. */
export interface CreateKafkaOptions {
  /** `host:port` list, as an array or one comma-separated string (the `--brokers` form). */
  readonly brokers: string | readonly string[];
  /** Client id the brokers see in their logs and quotas. @default 'pairflow' */
  readonly clientId?: string;
  /** Where kafkajs logs go; its level also sets kafkajs' level. @default no logging */
  readonly logger?: Logger;
  /** TCP connect timeout per broker, ms. @default 3000 */
  readonly connectionTimeout?: number;
  /** Request timeout, ms. @default 30000 */
  readonly requestTimeout?: number;
  /** kafkajs retry policy. @default kafkajs' own (5 retries, exponential backoff) */
  readonly retry?: RetryOptions;
  /** TLS and SASL. @default plaintext, no login */
  readonly security?: KafkaSecurity;
}

/**
 * Splits and checks a broker list. Throws PAIRFLOW_ERR_CLI_OPTION naming the entry when
 * one is not `host:port` with a port in 1..65535.
 * @example parseBrokers('127.0.0.1:9092, 127.0.0.1:9093') // ['127.0.0.1:9092', '127.0.0.1:9093']
 */
export function parseBrokers(brokers: string | readonly string[]): string[] {
  const list = (typeof brokers === 'string' ? brokers.split(',') : [...brokers]).map((b) => b.trim()).filter((b) => b !== '');
  if (list.length === 0) {
    throw pairflowError('PAIRFLOW_ERR_CLI_OPTION', { option: '--brokers', detail: 'expected HOST:PORT[,HOST:PORT…], got an empty list' });
  }
  for (const b of list) {
    // The last colon splits, so a bracketed IPv6 host ([::1]:9092) keeps its own colons.
    const at = b.lastIndexOf(':');
    const host = at > 0 ? b.slice(0, at) : '';
    const portText = at > 0 ? b.slice(at + 1) : '';
    const port = Number(portText);
    if (host === '' || !/^\d+$/.test(portText) || port < 1 || port > 65535) {
      throw pairflowError('PAIRFLOW_ERR_CLI_OPTION', { option: '--brokers', detail: `entry "${b}": expected HOST:PORT with a port in 1..65535` });
    }
  }
  return list;
}

/** kafkajs' level for a pino level, so kafkajs does not build lines pino would drop. */
export function kafkaLogLevelFor(level: string): number {
  switch (level) {
    case 'trace':
    case 'debug':
      return KafkaLogLevel.DEBUG;
    case 'info':
      return KafkaLogLevel.INFO;
    case 'warn':
      return KafkaLogLevel.WARN;
    case 'error':
    case 'fatal':
      return KafkaLogLevel.ERROR;
    default:
      return KafkaLogLevel.NOTHING;
  }
}

/**
 * A kafkajs `logCreator` writing into `logger`: one pino line per kafkajs entry, with
 * the kafkajs namespace (`Connection`, `Consumer`, …) as `kafka` and its extra fields kept.
 */
export function pinoLogCreator(logger: Logger): KafkaConfig['logCreator'] {
  return () => (entry: LogEntry) => {
    const { message, timestamp: _timestamp, ...extra } = entry.log;
    const fields = { kafka: entry.namespace, ...extra };
    switch (entry.level) {
      case KafkaLogLevel.ERROR:
        logger.error(fields, message);
        break;
      case KafkaLogLevel.WARN:
        logger.warn(fields, message);
        break;
      case KafkaLogLevel.INFO:
        logger.info(fields, message);
        break;
      default:
        logger.debug(fields, message);
    }
  };
}

/**
 * The partitioner pairflow producers use: murmur2 of the key modulo the partition count,
 * the same choice as the Java client's default, so every record of a market lands on
 * one partition whichever client wrote it.
 */
export const marketPartitioner: ICustomPartitioner = Partitioners.DefaultPartitioner;

/**
 * Builds a kafkajs client.
 * @example
 * const kafka = createKafka({ brokers: '127.0.0.1:9092', clientId: 'pairflow-live', logger });
 * const producer = kafka.producer({ createPartitioner: marketPartitioner });
 */
export function createKafka(options: CreateKafkaOptions): InstanceType<typeof Kafka> {
  const brokers = parseBrokers(options.brokers);
  const config: KafkaConfig = {
    clientId: options.clientId ?? 'pairflow',
    brokers,
    connectionTimeout: options.connectionTimeout ?? 3000,
    requestTimeout: options.requestTimeout ?? 30_000,
    logLevel: options.logger ? kafkaLogLevelFor(options.logger.level) : KafkaLogLevel.NOTHING,
  };
  if (options.logger) config.logCreator = pinoLogCreator(options.logger);
  if (options.retry) config.retry = options.retry;
  const tls = options.security?.tls;
  if (tls) {
    const ssl: NonNullable<Exclude<KafkaConfig['ssl'], boolean>> = {};
    if (tls.ca !== undefined) ssl.ca = [tls.ca];
    if (tls.cert !== undefined) ssl.cert = tls.cert;
    if (tls.key !== undefined) ssl.key = tls.key;
    if (tls.keyPassword !== undefined) ssl.passphrase = tls.keyPassword;
    config.ssl = Object.keys(ssl).length > 0 ? ssl : true;
  }
  const sasl = options.security?.sasl;
  if (sasl) config.sasl = { mechanism: sasl.mechanism, username: sasl.username, password: sasl.password } as SASLOptions;
  return new Kafka(config);
}

/** Where a connection failure happened, for {@link kafkaError}'s message. */
export interface KafkaErrorContext {
  readonly brokers: string | readonly string[];
  readonly security?: KafkaSecurity;
}

// Node's TLS verification codes (tls.TLSSocket authorizationError / err.code) and the
// OpenSSL alert texts a server sends when it refuses the client's certificate.
const TLS_CODES = /^(ERR_TLS_|ERR_SSL_|CERT_|UNABLE_TO_|SELF_SIGNED|DEPTH_ZERO|HOSTNAME_MISMATCH|ERR_OSSL_)/;
const TLS_TEXT = /certificate|self[- ]signed|SSL routines|ssl3_|tlsv1 alert|wrong version number|handshake|altnames|TLS/i;

function chain(err: unknown): Record<string, unknown>[] {
  const out: Record<string, unknown>[] = [];
  const seen = new Set<unknown>();
  let e: unknown = err;
  while (e !== null && typeof e === 'object' && !seen.has(e) && out.length < 8) {
    seen.add(e);
    const rec = e as Record<string, unknown>;
    out.push(rec);
    e = rec.originalError ?? rec.cause ?? rec.retriableError;
  }
  return out;
}

/**
 * Turns a kafkajs failure into a pairflow error with a code an operator can act on:
 * PAIRFLOW_ERR_KAFKA_AUTH for a refused SASL login (never retried: the same password
 * fails again), PAIRFLOW_ERR_KAFKA_TLS for a failed TLS handshake (untrusted or
 * mismatched certificate, a client certificate the broker wants, TLS against a
 * plaintext port), PAIRFLOW_ERR_KAFKA_CONNECT for anything else. A PairflowError passes
 * through unchanged. The message never contains the password.
 * @example
 * try { await admin.connect(); } catch (err) { throw kafkaError(err, { brokers, security }); }
 */
export function kafkaError(err: unknown, context: KafkaErrorContext): PairflowError {
  if (err instanceof PairflowError) return err;
  const brokers = typeof context.brokers === 'string' ? context.brokers : context.brokers.join(',');
  const links = chain(err);
  const text = (e: Record<string, unknown>): string => (typeof e.message === 'string' ? e.message : '');
  const sasl = context.security?.sasl;
  const auth = links.find((e) => e.name === 'KafkaJSSASLAuthenticationError');
  if (auth) {
    return pairflowError('PAIRFLOW_ERR_KAFKA_AUTH', {
      brokers,
      mechanism: sasl?.mechanism.toUpperCase() ?? 'SASL',
      username: sasl?.username ?? '',
      detail: text(auth),
    }, err);
  }
  // A listener without SASL, or without this mechanism, answers the handshake with a protocol error.
  const saslState = links.find((e) => e.type === 'ILLEGAL_SASL_STATE' || e.type === 'UNSUPPORTED_SASL_MECHANISM');
  if (saslState && sasl) {
    return pairflowError('PAIRFLOW_ERR_KAFKA_AUTH', {
      brokers,
      mechanism: sasl.mechanism.toUpperCase(),
      username: sasl.username,
      detail: `${text(saslState)} (is this port a SASL listener that enables ${sasl.mechanism.toUpperCase()}?)`,
    }, err);
  }
  if (context.security?.tls) {
    const tlsFailure = links.find((e) => (typeof e.code === 'string' && TLS_CODES.test(e.code)) || TLS_TEXT.test(text(e)));
    if (tlsFailure) {
      const code = typeof tlsFailure.code === 'string' ? ` (${tlsFailure.code})` : '';
      return pairflowError('PAIRFLOW_ERR_KAFKA_TLS', { brokers, detail: `${text(tlsFailure)}${code}` }, err);
    }
  }
  let detail = [...new Set(links.map(text).filter((m) => m !== ''))].join(': ') || String(err);
  // A TLS or SASL listener closes a plaintext client's connection without a word.
  if (!context.security?.tls && !sasl && /Closed connection/i.test(detail)) detail += ' (if this port is a TLS or SASL listener, give --tls/--tls-ca and the --sasl-* settings)';
  return pairflowError('PAIRFLOW_ERR_KAFKA_CONNECT', { brokers, detail }, err);
}

/**
 * Connects an admin client, asks for the cluster's metadata and disconnects: the first
 * thing a command that talks to Kafka does, so a wrong password or certificate is one
 * clear error at start (see {@link kafkaError}) instead of retries deep in a consumer.
 * Retries connection failures twice (a broker that is just starting), not more.
 * @returns the number of brokers in the cluster
 */
export async function verifyConnection(kafka: InstanceType<typeof Kafka>, context: KafkaErrorContext): Promise<number> {
  const admin = kafka.admin({ retry: { retries: 2, initialRetryTime: 300 } });
  try {
    await admin.connect();
    const cluster = await admin.describeCluster();
    return cluster.brokers.length;
  } catch (err) {
    throw kafkaError(err, context);
  } finally {
    await admin.disconnect().catch(() => {});
  }
}
