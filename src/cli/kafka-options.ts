/**
 * What the Kafka commands (`publish`, `live`, `summarize`) share: the broker list,
 * the logger on stderr, the Kafka client.
 */
import pino, { type Logger } from 'pino';
import { readEnv } from '../env.js';
import { pairflowError } from '../errors.js';
import { createKafka } from '../kafka/index.js';

/** `--brokers`, else KAFKA_BROKERS, else a usage error. */
export function brokersFrom(option: string | undefined): string {
  const brokers = option ?? readEnv().kafkaBrokers;
  if (brokers === undefined || brokers.trim() === '') {
    throw pairflowError('PAIRFLOW_ERR_CLI_OPTION', { option: '--brokers', detail: 'required (HOST:PORT[,HOST:PORT…]), or set KAFKA_BROKERS' });
  }
  return brokers;
}

/** JSON lines on stderr (stdout stays for results). */
export function stderrLogger(level: string, name: string): Logger {
  return pino({ name, level, base: { pid: process.pid } }, pino.destination({ fd: 2, sync: true }));
}

/**
 * A kafkajs client. kafkajs logs every retriable broker answer (a coordinator still
 * loading, a leader moving) as an error line although it retries them itself; pairflow
 * reports what fails in its own words, so kafkajs' lines are kept for `debug` only.
 */
export function kafkaClient(brokers: string, clientId: string, logger: Logger): ReturnType<typeof createKafka> {
  const debug = logger.levelVal <= 20;
  return createKafka({ brokers, clientId, ...(debug ? { logger: logger.child({}) } : {}) });
}

/**
 * After a Kafka command has finished, a kafkajs client whose broker went away and came
 * back can keep a retry timer or socket alive; the process then would not end. This
 * ends it once the command is done if nothing else does within `graceMs`.
 */
export function exitWhenDone(logger: Logger, graceMs = 2000): void {
  setTimeout(() => {
    logger.debug({ graceMs }, 'handles left open after the command finished; exiting');
    process.exit(process.exitCode ?? 0);
  }, graceMs).unref();
}
