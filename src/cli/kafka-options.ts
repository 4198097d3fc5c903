/**
 * What the Kafka commands (`publish`, `live`, `summarize`) share beyond the settings
 * of src/ops/settings.ts: the connection from those settings, and a guard that ends
 * the process once a command is done.
 */
import type { Logger } from 'pino';
import { createKafka, verifyConnection } from '../kafka/client.js';
import { createLogger, type LogLevel } from '../ops/log.js';
import { kafkaOptions, resolveSettings, secretValues, type SettingsFlags } from '../ops/settings.js';

/**
 * The logger and a checked Kafka client of a short command (`publish`, `summarize`):
 * settings from flags, environment and settings file; a wrong password or certificate
 * is one clear error here, before any work.
 */
export async function connect(flags: SettingsFlags, level: string, name: string): Promise<{ logger: Logger; kafka: ReturnType<typeof createKafka> }> {
  const settings = await resolveSettings({ flags }, 'connection');
  const logger = createLogger({ level: level as LogLevel, secrets: secretValues(settings), base: { name } });
  for (const w of settings.warnings) logger.warn(w);
  // kafkajs logs every retried broker answer as an error; keep its lines for debug.
  const kafka = createKafka(kafkaOptions(settings, logger.levelVal <= 20 ? logger : undefined));
  await verifyConnection(kafka, { brokers: settings.brokers, security: settings.security });
  return { logger, kafka };
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
