/**
 * `pairflow live --brokers HOST:PORT --in T --out PREFIX --group G [--window MS]
 * [--config FILE] [--exit-when-idle MS]` (SPEC §6, §7): the live processor. Logs are
 * JSON lines on stderr. SIGTERM or SIGINT stops it cleanly (the transaction under way
 * finishes, what is processed is committed, the group is left); a second signal exits
 * at once.
 */
import type { Command } from 'commander';
import { readEnv } from '../../env.js';
import { pairflowError } from '../../errors.js';
import { LiveProcessor, type FaultPoint } from '../../live/processor.js';
import { resolveConfig } from '../config-file.js';
import { brokersFrom, exitWhenDone, kafkaClient, stderrLogger } from '../kafka-options.js';
import { parseDuration, parseNumber } from '../parse.js';
import { parseFormat } from './publish.js';

interface LiveCliOptions {
  brokers?: string;
  in: string;
  out: string;
  group: string;
  window?: string;
  config?: string;
  format: string;
  exitWhenIdle?: string;
  maxRecordBytes?: string;
  sessionTimeout?: string;
  statsEvery?: string;
  warm: boolean;
  logLevel: string;
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
  program
    .command('live')
    .description('Run the windowed online policy on a Kafka topic, exactly once, with pool state on a compacted topic.')
    .option('--brokers <list>', 'HOST:PORT[,HOST:PORT…] (default: $KAFKA_BROKERS)')
    .requiredOption('--in <topic>', 'input topic of events, keyed by market')
    .requiredOption('--out <prefix>', 'output prefix: PREFIX.assignments, .expired, .windows, .rejects, .pool')
    .requiredOption('--group <id>', 'consumer group; processes that share it share the input partitions')
    .option('--window <ms>', 'window length W: 5000, 5s, 1.5m (overrides the config file; default 5s)')
    .option('--config <file>', 'JSON configuration, every field optional (see README, Configuration)')
    .option('--format <f>', 'output record values: json or avro (single-object encoding, schemas/)', 'json')
    .option('--exit-when-idle <ms>', 'once no input has arrived for this long, close every window, commit and exit 0')
    .option('--max-record-bytes <n>', 'larger input values are rejected as oversized (default 65536)')
    .option('--session-timeout <ms>', 'how soon the group notices a process that died and moves its partitions (default 30s)')
    .option('--stats-every <ms>', 'log a line of figures (records, transactions, close-to-commit latency, memory, lag) this often; 0 = never (default 1m)')
    .option('--no-warm', 'solve every epoch cold (no dual prices carried over)')
    .option('--log-level <level>', 'pino level for the JSON log lines on stderr', readEnv().logLevel === 'warn' ? 'info' : readEnv().logLevel)
    .action(async (o: LiveCliOptions) => {
      const windowMs = o.window !== undefined ? parseDuration(o.window, '--window') : undefined;
      const exitWhenIdleMs = o.exitWhenIdle !== undefined ? parseDuration(o.exitWhenIdle, '--exit-when-idle') : undefined;
      let maxRecordBytes: number | undefined;
      if (o.maxRecordBytes !== undefined) {
        maxRecordBytes = parseNumber(o.maxRecordBytes, '--max-record-bytes');
        if (!Number.isInteger(maxRecordBytes) || maxRecordBytes < 1) {
          throw pairflowError('PAIRFLOW_ERR_CLI_OPTION', { option: '--max-record-bytes', detail: `'${o.maxRecordBytes}' is not a whole number >= 1` });
        }
      }
      const sessionTimeoutMs = o.sessionTimeout !== undefined ? parseDuration(o.sessionTimeout, '--session-timeout') : undefined;
      const statsEveryMs = o.statsEvery === undefined ? undefined : o.statsEvery === '0' ? 0 : parseDuration(o.statsEvery, '--stats-every');
      const format = parseFormat(o.format);
      const config = await resolveConfig({ configFile: o.config, windowMs });
      const logger = stderrLogger(o.logLevel, 'pairflow-live');
      const kafka = kafkaClient(brokersFrom(o.brokers), `pairflow-live-${o.group}`, logger);
      const fault = faultHook(readEnv().fault);
      const processor = new LiveProcessor({
        kafka, input: o.in, prefix: o.out, group: o.group, config, format, logger, warm: o.warm,
        ...(exitWhenIdleMs !== undefined ? { exitWhenIdleMs } : {}),
        ...(maxRecordBytes !== undefined ? { maxRecordBytes } : {}),
        ...(sessionTimeoutMs !== undefined ? { sessionTimeoutMs } : {}),
        ...(statsEveryMs !== undefined ? { statsEveryMs } : {}),
        ...(fault ? { fault } : {}),
      });
      let signals = 0;
      const onSignal = (sig: NodeJS.Signals): void => {
        signals += 1;
        if (signals > 1) {
          logger.warn({ signal: sig }, 'live: second signal, exiting at once');
          process.exit(130);
        }
        logger.info({ signal: sig }, 'live: signal received, stopping');
        void processor.stop();
      };
      process.on('SIGTERM', onSignal);
      process.on('SIGINT', onSignal);
      try {
        await processor.run();
      } finally {
        process.off('SIGTERM', onSignal);
        process.off('SIGINT', onSignal);
        exitWhenDone(logger);
      }
    });
}
