/**
 * `pairflow live --brokers HOST:PORT --in T --out PREFIX --group G [--window MS]
 * [--config FILE] [--exit-when-idle MS]` (SPEC §6, §7): the live processor.
 *
 * Connection, security and operations settings come from flags, environment or a
 * settings file (src/ops/settings.ts, docs/operations.md); the cost model from
 * `--config`. Logs are JSON lines on stderr; with `--metrics-port` it serves
 * `/metrics`, `/healthz` and `/readyz`. SIGTERM or SIGINT stops it cleanly within
 * `--shutdown-grace` (the transaction under way finishes, what is processed is
 * committed, the group is left) and exits 0; a second signal exits at once.
 */
import type { Command } from 'commander';
import { readEnv } from '../../env.js';
import { pairflowError } from '../../errors.js';
import { createKafka, kafkaError, verifyConnection } from '../../kafka/client.js';
import { metricsObserver } from '../../live/observe.js';
import { LiveProcessor, type FaultPoint } from '../../live/processor.js';
import { startOpsServer } from '../../ops/http.js';
import { createLogger } from '../../ops/log.js';
import { createMetrics } from '../../ops/metrics.js';
import { addSettingsOptions, kafkaOptions, printConfig, resolveSettings, secretValues, type SettingsFlags } from '../../ops/settings.js';
import { installShutdown } from '../../ops/shutdown.js';
import { resolveConfig } from '../config-file.js';
import { exitWhenDone } from '../kafka-options.js';
import { packageVersion } from '../main.js';
import { parseDuration, parseNumber } from '../parse.js';
import { parseFormat } from './publish.js';

interface LiveCliOptions extends SettingsFlags {
  window?: string;
  config?: string;
  format: string;
  exitWhenIdle?: string;
  maxRecordBytes?: string;
  sessionTimeout?: string;
  statsEvery?: string;
  warm: boolean;
  printConfig?: boolean;
}

/** `PAIRFLOW_FAULT=POINT[:N]`: a hook that kills the process the N-th time it reaches POINT (tests only). */
export function faultHook(spec: string | undefined): ((p: FaultPoint) => void) | undefined {
  if (spec === undefined) return undefined;
  const [point, nth] = spec.split(':');
  let left = nth === undefined ? 1 : Number(nth);
  return (p) => {
    if (p !== point) return;
    left -= 1;
    if (left === 0) process.kill(process.pid, 'SIGKILL');
  };
}

export function registerLive(program: Command): void {
  const cmd = program
    .command('live')
    .description('Run the windowed online policy on a Kafka topic, exactly once, with pool state on a compacted topic.');
  addSettingsOptions(cmd, 'live');
  cmd
    .option('--window <ms>', 'window length W: 5000, 5s, 1.5m (overrides the config file; default 5s)')
    .option('--config <file>', 'JSON configuration of the cost model and policy, every field optional (see README, Configuration)')
    .option('--format <f>', 'output record values: json or avro (single-object encoding, schemas/)', 'json')
    .option('--exit-when-idle <ms>', 'once no input has arrived for this long, close every window, commit and exit 0')
    .option('--max-record-bytes <n>', 'larger input values are rejected as oversized (default 65536)')
    .option('--session-timeout <ms>', 'how soon the group notices a process that died and moves its partitions (default 30s)')
    .option('--stats-every <ms>', 'log a line of figures (records, transactions, close-to-commit latency, memory, lag) this often; 0 = never (default 1m)')
    .option('--no-warm', 'solve every epoch cold (no dual prices carried over)')
    .option('--print-config', 'print the effective settings (secrets masked) and the cost model, then exit')
    .action(async (o: LiveCliOptions) => {
      const windowMs = o.window !== undefined ? parseDuration(o.window, '--window') : undefined;
      const exitWhenIdleMs = o.exitWhenIdle !== undefined ? parseDuration(o.exitWhenIdle, '--exit-when-idle') : undefined;
      const sessionTimeoutMs = o.sessionTimeout !== undefined ? parseDuration(o.sessionTimeout, '--session-timeout') : undefined;
      const statsEveryMs = o.statsEvery === undefined ? undefined : o.statsEvery === '0' ? 0 : parseDuration(o.statsEvery, '--stats-every');
      let maxRecordBytes: number | undefined;
      if (o.maxRecordBytes !== undefined) {
        maxRecordBytes = parseNumber(o.maxRecordBytes, '--max-record-bytes');
        if (!Number.isInteger(maxRecordBytes) || maxRecordBytes < 1) {
          throw pairflowError('PAIRFLOW_ERR_CLI_OPTION', { option: '--max-record-bytes', detail: `'${o.maxRecordBytes}' is not a whole number >= 1` });
        }
      }
      const format = parseFormat(o.format);
      const config = await resolveConfig({ configFile: o.config, windowMs });
      const settings = await resolveSettings({ flags: o }, 'live');
      if (o.printConfig) {
        process.stdout.write(printConfig(settings));
        process.stdout.write(`${JSON.stringify({ config }, null, 2)}\n`);
        return;
      }
      const logger = createLogger({ level: settings.logLevel, secrets: secretValues(settings), base: { name: 'pairflow-live' } });
      for (const w of settings.warnings) logger.warn(w);
      // kafkajs logs every retried broker answer as an error; keep its lines for debug.
      const debug = logger.levelVal <= 20;
      const kafka = createKafka(kafkaOptions(settings, debug ? logger : undefined));
      const context = { brokers: settings.brokers, security: settings.security };
      await verifyConnection(kafka, context);
      const metrics = createMetrics({ version: packageVersion() });
      const fault = faultHook(readEnv().fault);
      const processor = new LiveProcessor({
        kafka, input: settings.in!, prefix: settings.out!, group: settings.group!, config, format, logger, warm: o.warm,
        observer: metricsObserver(metrics),
        ...(exitWhenIdleMs !== undefined ? { exitWhenIdleMs } : {}),
        ...(maxRecordBytes !== undefined ? { maxRecordBytes } : {}),
        ...(sessionTimeoutMs !== undefined ? { sessionTimeoutMs } : {}),
        ...(statsEveryMs !== undefined ? { statsEveryMs } : {}),
        ...(fault ? { fault } : {}),
      });
      const server = settings.metrics
        ? await startOpsServer({
            ...settings.metrics, registry: metrics.registry, logger,
            readiness: () => ({ ready: processor.isReady(), detail: { partitions: processor.partitions() } }),
          })
        : null;
      if (server) logger.info({ url: server.url }, 'live: serving /metrics, /healthz and /readyz');
      const shutdown = installShutdown({
        graceMs: settings.shutdownGraceMs,
        logger,
        stop: async () => {
          await processor.stop();
          await server?.close();
        },
      });
      try {
        await processor.run();
      } catch (err) {
        // A kafkajs failure gets a code an operator can act on; anything else stays as it is.
        throw String((err as { name?: unknown } | null)?.name ?? '').startsWith('KafkaJS') ? kafkaError(err, context) : err;
      } finally {
        shutdown.dispose();
        await server?.close();
        exitWhenDone(logger);
      }
    });
}
