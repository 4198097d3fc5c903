/**
 * The one place pairflow builds kafkajs clients: broker-list parsing, kafkajs' log lines
 * routed into pino, and the partitioner that keys records by market (SPEC §3: a market
 * is the partition key).
 */
import kafkajs from 'kafkajs';
import type { KafkaConfig, LogEntry, RetryOptions, ICustomPartitioner } from 'kafkajs';
import type { Logger } from 'pino';
import { pairflowError } from '../errors.js';

const { Kafka, Partitioners, logLevel: KafkaLogLevel } = kafkajs;

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
  return new Kafka(config);
}
