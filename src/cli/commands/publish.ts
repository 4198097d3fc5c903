/**
 * `pairflow publish LOG... --brokers HOST:PORT --topic T [--partitions N]
 * [--format json|avro] [--raw]` (SPEC §6).
 */
import type { Command } from 'commander';
import { pairflowError } from '../../errors.js';
import { publishLog } from '../../live/publish.js';
import type { BusFormat } from '../../live/records.js';
import { resolveConfig } from '../config-file.js';
import { addSettingsOptions, type SettingsFlags } from '../../ops/settings.js';
import { connect, exitWhenDone } from '../kafka-options.js';
import { rejectReporter } from './replay.js';
import { progressLine } from './sweep.js';

interface PublishCliOptions extends SettingsFlags {
  topic: string;
  partitions?: string;
  format: string;
  raw?: boolean;
  config?: string;
  json?: boolean;
  logLevel: string;
}

/** Parses `--format json|avro`. */
export function parseFormat(text: string): BusFormat {
  if (text !== 'json' && text !== 'avro') throw pairflowError('PAIRFLOW_ERR_CLI_OPTION', { option: '--format', detail: `'${text}': expected json or avro` });
  return text;
}

export function registerPublish(program: Command): void {
  const cmd = program
    .command('publish')
    .description('Write a log\'s events to a Kafka topic in event-time order, keyed by market.')
    .argument('<log...>', 'event log files (.jsonl, .jsonl.gz, .avro)');
  addSettingsOptions(cmd, 'connection');
  cmd
    .requiredOption('--topic <name>', 'topic to write (created if missing)')
    .option('--partitions <n>', 'partitions of the topic when it is created (default 4)')
    .option('--format <f>', 'record values: json or avro (single-object encoding of schemas/event.avsc)', 'json')
    .option('--raw', 'publish every line as it is, in file order, bad ones included (JSON Lines only)')
    .option('--config <file>', 'configuration: its metric decides which coordinates an event needs')
    .option('--json', 'print one JSON object on stdout')
    .option('--log-level <level>', 'pino level for the log lines on stderr', 'warn')
    .action(async (logs: string[], o: PublishCliOptions) => {
      const format = parseFormat(o.format);
      let partitions: number | undefined;
      if (o.partitions !== undefined) {
        partitions = Number(o.partitions);
        if (!Number.isInteger(partitions) || partitions < 1 || partitions > 10_000) {
          throw pairflowError('PAIRFLOW_ERR_CLI_OPTION', { option: '--partitions', detail: `'${o.partitions}' is not a whole number in 1..10000` });
        }
      }
      const config = await resolveConfig({ configFile: o.config });
      const { logger, kafka } = await connect(o, o.logLevel, 'pairflow-publish');
      const rejects = rejectReporter('they were not published');
      const progress = progressLine('publish');
      const result = await publishLog({
        kafka, topic: o.topic, paths: logs, format, raw: o.raw ?? false, metric: config.metric, logger,
        ...(partitions !== undefined ? { partitions } : {}),
        onReject: rejects.onReject,
        onProgress: (done, total) => progress.update(done, total),
      });
      progress.done();
      rejects.finish();
      exitWhenDone(logger);
      if (o.json) process.stdout.write(`${JSON.stringify(result)}\n`);
      else {
        process.stdout.write(
          `pairflow publish: ${result.published.toLocaleString('en-US')} records to ${result.topic} ` +
          `(${result.partitions} partitions${result.created ? ', created' : ''}; per partition ${result.perPartition.join(', ')})` +
          `${result.rejects > 0 ? `; ${result.rejects} rejected lines not published` : ''}\n`,
        );
      }
    });
}
