/**
 * `pairflow sweep LOG... --windows 1s,5s,30s [--config FILE] [--json] [--csv FILE]
 * [--threads N] [--bootstrap N] [--seed S]` (SPEC §6): several window lengths replayed
 * in parallel, each reported with a bootstrap interval, and the best one named.
 */
import type { Command } from 'commander';
import { TextFileWriter } from '../../emit/index.js';
import { pairflowError } from '../../errors.js';
import { formatWindow, textTable } from '../../replay/summary.js';
import { runSweep, sweepCsv, type SweepResult } from '../../sweep/sweep.js';
import { resolveConfig } from '../config-file.js';
import { parseDuration, parseNumber } from '../parse.js';
import { parseThreads, rejectReporter } from './replay.js';

/**
 * A one-line progress bar on stderr, redrawn at most ten times a second, shown only
 * when stderr is a terminal (logs and pipes stay clean).
 */
export function progressLine(label: string, stream: NodeJS.WriteStream = process.stderr): { update: (done: number, total: number, note?: string) => void; done: () => void } {
  if (!stream.isTTY) return { update: () => {}, done: () => {} };
  let last = -Infinity;
  let shown = false;
  const width = 30;
  return {
    update(done, total, note) {
      const t = performance.now();
      if (t - last < 100 && done < total) return;
      last = t;
      const frac = total > 0 ? Math.min(1, done / total) : 1;
      const filled = Math.round(frac * width);
      stream.write(`\r${label} [${'#'.repeat(filled)}${'.'.repeat(width - filled)}] ${(frac * 100).toFixed(0).padStart(3)}% ${note ?? ''}`.padEnd(70));
      shown = true;
    },
    done() {
      if (shown) stream.write(`\r${' '.repeat(70)}\r`);
      shown = false;
    },
  };
}

/** Parses `--windows 1s,5s,30s` into ms, in the order given. */
export function parseWindows(text: string): number[] {
  const parts = text.split(',').map((p) => p.trim()).filter((p) => p !== '');
  if (parts.length === 0) throw pairflowError('PAIRFLOW_ERR_CLI_OPTION', { option: '--windows', detail: `'${text}' names no window (expected e.g. 1s,5s,30s)` });
  return parts.map((p) => parseDuration(p, '--windows'));
}

const n2 = (v: number | null | undefined): string => (v === null || v === undefined ? '–' : v.toLocaleString('en-US', { minimumFractionDigits: 2, maximumFractionDigits: 2 }));
const n0 = (v: number | null | undefined): string => (v === null || v === undefined ? '–' : v.toLocaleString('en-US'));

/** The human table `pairflow sweep` prints without `--json`. */
export function formatSweep(r: SweepResult): string {
  const pct = r.bootstrap ? `${Math.round(r.bootstrap.level * 100)}% interval` : 'interval';
  const rows = [
    ['window', 'online cost', 'matched', 'abandoned', 'mean wait', 'p95 wait', 'regret', 'ratio', `cost ${pct}`, 'best in'],
    ...r.windows.map((w) => [
      `${formatWindow(w.windowMs)}${w.windowMs === r.best.windowMs ? ' *' : ''}`,
      n2(w.online.cost), n0(w.online.matched), n0(w.online.abandoned), n2(w.online.meanWaitMin), n2(w.online.p95WaitMin),
      n2(w.regret), w.ratio === null ? '–' : w.ratio.toFixed(4),
      w.interval ? `${n2(w.interval.cost[0])} – ${n2(w.interval.cost[1])}` : '–',
      w.bestShare === null ? '–' : `${(w.bestShare * 100).toFixed(1)}%`,
    ]),
  ];
  const lines = [
    `pairflow sweep: ${r.inputs.length === 1 ? r.inputs[0] : `${r.inputs.length} files`}, ${r.windows.length} windows, commit ${r.commit}` +
      `, demand ${n0(r.demandUnits)}, supply ${n0(r.supplyUnits)} occurrences, rejects ${n0(r.rejects)}`,
    '',
    textTable(rows),
    '',
    `hindsight optimum: cost ${n2(r.hindsight.cost)}, matched ${n0(r.hindsight.matched)}, abandoned ${n0(r.hindsight.abandoned)}, match ceiling ${n0(r.hindsight.ceiling)}`,
  ];
  const b = r.bootstrap;
  lines.push(
    `best window: ${formatWindow(r.best.windowMs)} (lowest online cost ${n2(r.best.cost)}, regret ${n2(r.best.regret)})` +
      (b && r.best.bestShare !== null
        ? `; best in ${(r.best.bestShare * 100).toFixed(1)}% of ${n0(b.resamples)} resamples of ${b.buckets} ${b.unit}${b.buckets === 1 ? '' : 's'} (seed ${b.seed})`
        : ''),
  );
  lines.push(`timings: load ${(r.timings.loadMs / 1000).toFixed(2)} s, hindsight ${r.timings.hindsightMs === null ? '–' : `${(r.timings.hindsightMs / 1000).toFixed(2)} s`}, ` +
    `windows ${(r.timings.windowsMs / 1000).toFixed(2)} s on ${r.timings.threads} thread${r.timings.threads === 1 ? '' : 's'}, total ${(r.timings.totalMs / 1000).toFixed(2)} s`);
  return lines.join('\n') + '\n';
}

interface SweepCliOptions {
  windows: string;
  config?: string;
  json?: boolean;
  csv?: string;
  out?: string;
  threads?: string;
  bootstrap?: string;
  seed?: string;
  strict?: boolean;
  warm: boolean;
}

function wholeNumber(text: string, option: string, min: number): number {
  const n = parseNumber(text, option);
  if (!Number.isInteger(n) || n < min) throw pairflowError('PAIRFLOW_ERR_CLI_OPTION', { option, detail: `'${text}' is not a whole number >= ${min}` });
  return n;
}

export function registerSweep(program: Command): void {
  program
    .command('sweep')
    .description('Replay several window lengths in parallel and rank them, with a bootstrap interval over days.')
    .argument('<log...>', 'event log files (.jsonl, .jsonl.gz, .avro)')
    .requiredOption('--windows <list>', 'window lengths, comma-separated: 1s,5s,30s')
    .option('--config <file>', 'JSON configuration, every field optional (see README, Configuration); its windowMs is ignored')
    .option('--json', 'print one JSON object on stdout')
    .option('--csv <file>', 'also write the table as CSV')
    .option('--out <dir>', 'write sweep.json, sweep.csv and manifest.json (inputs by sha256, config, windows, seed)')
    .option('--threads <n>', 'worker threads (default: the number of cores; 1 = in this thread)')
    .option('--bootstrap <n>', 'bootstrap resamples over days (hours for logs under 2 days); 0 = none', '1000')
    .option('--seed <s>', 'seed of the bootstrap', '1')
    .option('--strict', 'stop at the first rejected line or record (exit 2)')
    .option('--no-warm', 'solve every epoch cold')
    .action(async (logs: string[], o: SweepCliOptions) => {
      const windows = parseWindows(o.windows);
      const threads = o.threads !== undefined ? parseThreads(o.threads) : undefined;
      const bootstrap = wholeNumber(o.bootstrap ?? '1000', '--bootstrap', 0);
      const seed = wholeNumber(o.seed ?? '1', '--seed', 0);
      const config = await resolveConfig({ configFile: o.config });
      const rejects = rejectReporter('use pairflow replay --out DIR to keep them');
      const progress = progressLine('sweep');
      const result = await runSweep(logs, config, {
        windows,
        bootstrap,
        seed,
        strict: o.strict ?? false,
        warm: o.warm,
        ...(threads !== undefined ? { threads } : {}),
        onReject: rejects.onReject,
        onProgress: (done, total, phase) => progress.update(done, total, phase === 'hindsight' ? `hindsight: ${done}/${total} markets` : `${done}/${total} windows`),
        ...(o.out !== undefined ? { outDir: o.out } : {}),
        command: ['pairflow', ...process.argv.slice(2)],
        onWarn: (msg) => process.stderr.write(`pairflow: ${msg}\n`),
      });
      progress.done();
      rejects.finish();
      if (o.csv !== undefined) {
        const w = new TextFileWriter(o.csv);
        w.write(sweepCsv(result));
        await w.close();
      }
      process.stdout.write(o.json ? `${JSON.stringify(result)}\n` : formatSweep(result));
    });
}
