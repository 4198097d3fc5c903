/**
 * `pairflow summarize --brokers HOST:PORT --out PREFIX [--config FILE] --json`
 * (SPEC §6): the committed outputs under PREFIX, summed as replay sums a run.
 */
import type { Command } from 'commander';
import { readOutputs, summarizeOutputs } from '../../live/summarize.js';
import { formatWindow, textTable } from '../../replay/summary.js';
import { resolveConfig } from '../config-file.js';
import { addSettingsOptions, type SettingsFlags } from '../../ops/settings.js';
import { connect, exitWhenDone } from '../kafka-options.js';

interface SummarizeCliOptions extends SettingsFlags {
  out: string;
  config?: string;
  json?: boolean;
  logLevel: string;
}

const n2 = (v: number | null): string => (v === null ? '–' : v.toLocaleString('en-US', { minimumFractionDigits: 2, maximumFractionDigits: 2 }));

export function registerSummarize(program: Command): void {
  const cmd = program
    .command('summarize')
    .description('Sum up the committed outputs of a live run (read_committed), as replay sums a run.');
  addSettingsOptions(cmd, 'connection');
  cmd
    .requiredOption('--out <prefix>', 'the output prefix the live run wrote under')
    .option('--config <file>', 'the configuration of the live run (names its window in the summary)')
    .option('--json', 'print one JSON object on stdout')
    .option('--log-level <level>', 'pino level for the log lines on stderr', 'warn')
    .action(async (o: SummarizeCliOptions) => {
      const config = await resolveConfig({ configFile: o.config });
      const { logger, kafka } = await connect(o, o.logLevel, 'pairflow-summarize');
      const summary = summarizeOutputs(o.out, await readOutputs(kafka, o.out, logger));
      exitWhenDone(logger);
      if (o.json) {
        process.stdout.write(`${JSON.stringify({ windowMs: config.windowMs, ...summary })}\n`);
        return;
      }
      const s = summary;
      process.stdout.write([
        `pairflow summarize: ${o.out} (committed outputs; window ${formatWindow(config.windowMs)} per the config given)`,
        '',
        textTable([
          ['cost', n2(s.online.cost)],
          ['matched', s.online.matched.toLocaleString('en-US')],
          ['abandoned', s.online.abandoned.toLocaleString('en-US')],
          ['mean wait (min)', n2(s.online.meanWaitMin)],
          ['p95 wait (min)', n2(s.online.p95WaitMin)],
          ['duplicates', `${s.duplicates}  (assignments naming an occurrence already assigned; must be 0)`],
          ['rejects', `${s.records.rejects}${s.records.rejects > 0 ? `  (${Object.entries(s.rejectsByReason).map(([k, v]) => `${k} ${v}`).join(', ')})` : ''}`],
          ['late events', String(s.late)],
          ['windows', s.records.windows.toLocaleString('en-US')],
        ]),
        '',
      ].join('\n'));
    });
}
