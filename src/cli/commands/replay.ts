/**
 * `pairflow replay LOG... [--window MS] [--config FILE] [--json] [--out DIR]
 * [--strict] [--no-warm] [--threads N]` (SPEC §6): the windowed online policy over
 * recorded logs, against the hindsight optimum. stdout holds only the result (one
 * JSON object with --json); rejects, progress and notes go to stderr.
 */
import type { Command } from 'commander';
import { configWarnings } from '../../config.js';
import { pairflowError } from '../../errors.js';
import type { Reject } from '../../model.js';
import { runReplay } from '../../replay/run.js';
import { formatReplaySummary } from '../../replay/summary.js';
import { resolveConfig } from '../config-file.js';
import { replayNextSteps } from '../next-steps.js';
import { parseDuration, parseNumber, parseRejectLimit } from '../parse.js';
import { phasedProgress } from '../progress.js';
import { writeOut } from '../stdout.js';

/** The phases of a replay as its progress line names them. */
export const ONLINE_PHASE = 'online replay';
export const HINDSIGHT_PHASE = 'hindsight optimum';

/** Rejects printed on stderr before the rest are only counted. */
export const REJECTS_SHOWN = 10;

/** Parses `--threads N`: a whole number ≥ 1. */
export function parseThreads(text: string, option = '--threads'): number {
  const n = parseNumber(text, option);
  if (!Number.isInteger(n) || n < 1) {
    throw pairflowError('PAIRFLOW_ERR_CLI_OPTION', { option, detail: `'${text}' is not a whole number >= 1` });
  }
  return n;
}

/** Formats where a reject came from: file:line, plus the Avro block/record when known. */
export function describeReject(r: Reject): string {
  const where = r.pos.block !== undefined ? ` (block ${r.pos.block}, record ${r.pos.record ?? '?'})` : '';
  return `${r.pos.file}:${r.pos.line}${where}: ${r.reason}`;
}

/**
 * Prints the first {@link REJECTS_SHOWN} rejects on stderr as they are found, and
 * returns a function that prints how many there were in all.
 */
export function rejectReporter(where: string): { onReject: (r: Reject) => void; finish: () => void } {
  let count = 0;
  return {
    onReject(r) {
      count += 1;
      if (count <= REJECTS_SHOWN) process.stderr.write(`pairflow: reject ${describeReject(r)}\n`);
    },
    finish() {
      if (count > REJECTS_SHOWN) {
        process.stderr.write(`pairflow: ${count} rejects in all (${count - REJECTS_SHOWN} not shown; ${where})\n`);
      }
    },
  };
}

interface ReplayCliOptions {
  maxRejects?: string;
  window?: string;
  config?: string;
  json?: boolean;
  out?: string;
  rejects?: string;
  strict?: boolean;
  warm: boolean;
  hindsight: boolean;
  threads?: string;
}

export function registerReplay(program: Command): void {
  program
    .command('replay')
    .description('Replay event logs through the windowed online policy and compare with the hindsight optimum.')
    .argument('<log...>', 'event log files (.jsonl, .jsonl.gz, .avro), read in the order given')
    .option('--window <ms>', 'window length W: 5000, 5s, 1.5m (overrides the config file; default 5s)')
    .option('--config <file>', 'JSON configuration, every field optional (see README, Configuration)')
    .option('--json', 'print one JSON object on stdout')
    .option('--out <dir>', 'write a run directory: assignments, expirations, epochs, rejects, summary, manifest')
    .option('--rejects <file>', 'write every reject as JSON Lines to this file (also with --out)')
    .option('--strict', 'stop at the first rejected line or record (exit 2)')
    .option('--max-rejects <n|p%>', 'exit 2 when more lines or records are rejected than this count or share (e.g. 100, 1%)')
    .option('--no-warm', 'solve every epoch cold (no dual prices carried over)')
    .option('--no-hindsight', 'skip the hindsight optimum (regret and ratio are then null)')
    .option('--threads <n>', 'worker threads for the hindsight optimum (default: one per market, up to the cores)')
    .addHelpText('after', `
Output: cost = executed pair costs + abandonPenalty per demand never matched;
regret = online - hindsight; ratio = online / hindsight (1 when both are 0).
Waits are (decidedAt - demand t) in minutes over matched pairs; p95 interpolates
linearly between order statistics (numpy's default); both are null with no match.
Rejected lines are counted in "rejects", the first ${REJECTS_SHOWN} printed on stderr; --out DIR
(rejects.jsonl) or --rejects FILE keeps them all. A log with no valid event is an
input error. Exit: 0 ok, 2 usage/input, 1 other.`)
    .action(async (logs: string[], o: ReplayCliOptions) => {
      const windowMs = o.window !== undefined ? parseDuration(o.window, '--window') : undefined;
      const threads = o.threads !== undefined ? parseThreads(o.threads) : undefined;
      const maxRejects = o.maxRejects !== undefined ? parseRejectLimit(o.maxRejects, '--max-rejects') : undefined;
      const config = await resolveConfig({ configFile: o.config, windowMs });
      for (const warning of configWarnings(config)) process.stderr.write(`pairflow: warning: ${warning}\n`);
      const kept = [o.out !== undefined ? `${o.out}/rejects.jsonl` : null, o.rejects ?? null].filter((x) => x !== null);
      const rejects = rejectReporter(kept.length > 0 ? `see ${kept.join(' and ')}` : 'use --out DIR or --rejects FILE to keep them');
      const progress = phasedProgress([ONLINE_PHASE, HINDSIGHT_PHASE]);
      let summary;
      try {
        summary = await runReplay(logs, config, {
          strict: o.strict ?? false,
          warm: o.warm,
          hindsight: o.hindsight,
          ...(o.out !== undefined ? { outDir: o.out } : {}),
          ...(o.rejects !== undefined ? { rejectsFile: o.rejects } : {}),
          ...(threads !== undefined ? { threads } : {}),
          ...(maxRejects !== undefined ? { maxRejects } : {}),
          command: ['pairflow', ...process.argv.slice(2)],
          onReject: rejects.onReject,
          // The hindsight runs alongside on worker threads: its bar takes over once the online replay is done.
          onProgress: (p) => {
            if (p.phase === 'online') progress.update(ONLINE_PHASE, p.done, p.total, 'events');
            else progress.update(HINDSIGHT_PHASE, p.done, p.total, 'markets');
          },
        });
      } finally {
        progress.done();
      }
      rejects.finish();
      await writeOut(o.json ? `${JSON.stringify(summary)}\n` : formatReplaySummary(summary) + replayNextSteps(summary, logs, o.out));
    });
}
