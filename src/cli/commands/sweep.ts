/**
 * `pairflow sweep LOG... --windows 1s,5s,30s [--reserves P,5] [--commits all,due]
 * [--config FILE] [--json] [--csv FILE] [--out DIR] [--threads N] [--bootstrap N]
 * [--seed S]` (SPEC §6): a grid of policies replayed in parallel, each reported with
 * bootstrap intervals of its cost and of its difference to the cheapest, and one
 * recommended with its margin and how sure it is.
 */
import type { Command } from 'commander';
import { TextFileWriter } from '../../emit/index.js';
import { probeWritableFile } from '../../emit/probe.js';
import { pairflowError } from '../../errors.js';
import type { CommitMode } from '../../model.js';
import { textTable } from '../../replay/summary.js';
import { runSweep, sweepCsv, type SweepResult } from '../../sweep/sweep.js';
import { resolveConfig } from '../config-file.js';
import { sweepNextSteps } from '../next-steps.js';
import { parseDuration, parseNumber } from '../parse.js';
import { parseThreads, rejectReporter } from './replay.js';

/** A progress display: a bar for counted work, and a line when a phase starts. */
export interface ProgressLine {
  /** Redraws the bar (terminal only). */
  update: (done: number, total: number, note?: string) => void;
  /** A phase starts: in a terminal the bar's label says so; elsewhere one line is printed. */
  phase: (note: string) => void;
  /** Clears the bar. */
  done: () => void;
}

/**
 * A one-line progress bar on stderr, redrawn at most ten times a second, shown only
 * when stderr is a terminal (logs and pipes get one plain line per phase instead).
 */
export function progressLine(label: string, stream: NodeJS.WriteStream = process.stderr): ProgressLine {
  if (!stream.isTTY) {
    return { update: () => {}, phase: (note) => { stream.write(`pairflow ${label}: ${note}\n`); }, done: () => {} };
  }
  let last = -Infinity;
  let shown = false;
  let current = '';
  const width = 30;
  const cols = (): number => Math.max(40, (stream.columns ?? 80) - 1);
  const draw = (text: string): void => {
    const clipped = text.length > cols() ? text.slice(0, cols()) : text;
    stream.write(`\r${clipped.padEnd(Math.min(cols(), Math.max(70, clipped.length)))}`);
    shown = true;
  };
  return {
    update(done, total, note) {
      const t = performance.now();
      if (t - last < 100 && done < total) return;
      last = t;
      const frac = total > 0 ? Math.min(1, done / total) : 1;
      const filled = Math.round(frac * width);
      draw(`${label}${current ? ` ${current}` : ''} [${'#'.repeat(filled)}${'.'.repeat(width - filled)}] ${(frac * 100).toFixed(0).padStart(3)}% ${note ?? ''}`);
    },
    phase(note) {
      current = `(${note})`;
      last = -Infinity;
      draw(`${label} ${current}…`);
    },
    done() {
      if (shown) stream.write(`\r${' '.repeat(Math.min(cols(), 70))}\r`);
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

/** Parses `--reserves P,5,10`: numbers (minutes-equivalent) or `P` for R = P. */
export function parseReserves(text: string): (number | null)[] {
  const parts = text.split(',').map((p) => p.trim()).filter((p) => p !== '');
  if (parts.length === 0) throw pairflowError('PAIRFLOW_ERR_CLI_OPTION', { option: '--reserves', detail: `'${text}' names no reserve (expected e.g. P,5,10)` });
  return parts.map((p) => (p === 'P' || p === 'p' ? null : parseNumber(p, '--reserves')));
}

/** Parses `--commits all,due`. */
export function parseCommits(text: string): CommitMode[] {
  const parts = text.split(',').map((p) => p.trim()).filter((p) => p !== '');
  if (parts.length === 0) throw pairflowError('PAIRFLOW_ERR_CLI_OPTION', { option: '--commits', detail: `'${text}' names no commit mode (expected all, due or all,due)` });
  return parts.map((p) => {
    if (p !== 'all' && p !== 'due') throw pairflowError('PAIRFLOW_ERR_CLI_OPTION', { option: '--commits', detail: `'${p}' is not a commit mode (expected all or due)` });
    return p;
  });
}

/** The human table `pairflow sweep` prints without `--json`. */
export function formatSweep(r: SweepResult): string {
  const level = r.bootstrap ? `${Math.round(r.bootstrap.level * 100)}%` : '';
  const rows = [
    ['policy', 'online cost', 'matched', 'abandoned', 'mean wait', 'p95 wait', 'regret', 'ratio', 'vs best', `${level} interval`, 'best in'],
    ...r.policies.map((p) => [
      `${p.label}${p.label === r.best.label ? ' *' : ''}`,
      n2(p.online.cost), n0(p.online.matched), n0(p.online.abandoned), n2(p.online.meanWaitMin), n2(p.online.p95WaitMin),
      n2(p.regret), p.ratio === null ? '–' : p.ratio.toFixed(4),
      p.label === r.best.label ? '–' : `+${n2(p.vsBest.diff)}`,
      p.label === r.best.label || !p.vsBest.interval ? '–' : `${n2(p.vsBest.interval[0])} – ${n2(p.vsBest.interval[1])}`,
      p.bestShare === null ? '–' : `${(p.bestShare * 100).toFixed(1)}%`,
    ]),
  ];
  const b = r.bootstrap;
  const lines = [
    `pairflow sweep: ${r.inputs.length === 1 ? r.inputs[0] : `${r.inputs.length} files`}, ${r.policies.length} polic${r.policies.length === 1 ? 'y' : 'ies'}` +
      ` (window / reserve / commit), demand ${n0(r.demandUnits)}, supply ${n0(r.supplyUnits)} occurrences, rejects ${n0(r.rejects)}`,
    '',
    textTable(rows),
    '',
    `"vs best" is the policy's cost minus the cheapest one's; its interval comes from resampling the same ${b ? `${b.unit}s` : 'days'} for both (paired).`,
    `hindsight optimum: cost ${n2(r.hindsight.cost)}, matched ${n0(r.hindsight.matched)}, abandoned ${n0(r.hindsight.abandoned)}, match ceiling ${n0(r.hindsight.ceiling)}`,
    b ? `bootstrap: ${n0(b.resamples)} resamples of ${b.buckets} ${b.unit}${b.buckets === 1 ? '' : 's'} (seed ${b.seed})` : 'bootstrap: off',
    '',
    `recommendation: ${r.recommendation.text}`,
    '',
    `timings: load ${(r.timings.loadMs / 1000).toFixed(2)} s, hindsight ${r.timings.hindsightMs === null ? '–' : `${(r.timings.hindsightMs / 1000).toFixed(2)} s`}, ` +
      `policies ${(r.timings.windowsMs / 1000).toFixed(2)} s on ${r.timings.threads} thread${r.timings.threads === 1 ? '' : 's'}, total ${(r.timings.totalMs / 1000).toFixed(2)} s`,
  ];
  return lines.join('\n') + '\n';
}

interface SweepCliOptions {
  windows: string;
  reserves?: string;
  commits?: string;
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

/** Parses a whole-number option ≥ `min`. */
export function wholeNumber(text: string, option: string, min: number): number {
  const n = parseNumber(text, option);
  if (!Number.isInteger(n) || n < min) throw pairflowError('PAIRFLOW_ERR_CLI_OPTION', { option, detail: `'${text}' is not a whole number >= ${min}` });
  return n;
}

export function registerSweep(program: Command): void {
  program
    .command('sweep')
    .description('Replay a grid of policies (windows x reserves x commit modes) in parallel and recommend one, with paired bootstrap intervals over days.')
    .argument('<log...>', 'event log files (.jsonl, .jsonl.gz, .avro)')
    .requiredOption('--windows <list>', 'window lengths, comma-separated: 1s,5s,30s')
    .option('--reserves <list>', 'reserves R to try, comma-separated minutes-equivalent or P (= abandonPenalty): P,5,10 (default: the config\'s)')
    .option('--commits <list>', 'commit modes to try: all, due or all,due (default: the config\'s)')
    .option('--config <file>', 'JSON configuration, every field optional (see README, Configuration); windowMs, and reserve/commit when swept, are ignored')
    .option('--json', 'print one JSON object on stdout')
    .option('--csv <file>', 'also write the table as CSV')
    .option('--out <dir>', 'write sweep.json, sweep.csv, manifest.json and one digest per policy (the input of pairflow report)')
    .option('--threads <n>', 'worker threads (default: the number of cores; 1 = in this thread)')
    .option('--bootstrap <n>', 'bootstrap resamples over days (hours for logs under 2 days); 0 = none', '1000')
    .option('--seed <s>', 'seed of the bootstrap', '1')
    .option('--strict', 'stop at the first rejected line or record (exit 2)')
    .option('--no-warm', 'solve every epoch cold')
    .action(async (logs: string[], o: SweepCliOptions) => {
      const windows = parseWindows(o.windows);
      const reserves = o.reserves !== undefined ? parseReserves(o.reserves) : undefined;
      const commits = o.commits !== undefined ? parseCommits(o.commits) : undefined;
      const threads = o.threads !== undefined ? parseThreads(o.threads) : undefined;
      const bootstrap = wholeNumber(o.bootstrap ?? '1000', '--bootstrap', 0);
      const seed = wholeNumber(o.seed ?? '1', '--seed', 0);
      const config = await resolveConfig({ configFile: o.config });
      // Outputs are checked before the work, so a typo costs seconds, not the sweep.
      if (o.csv !== undefined) await probeWritableFile(o.csv);
      const rejects = rejectReporter('use pairflow replay --out DIR to keep them');
      const progress = progressLine('sweep');
      const result = await runSweep(logs, config, {
        windows,
        ...(reserves ? { reserves } : {}),
        ...(commits ? { commits } : {}),
        bootstrap,
        seed,
        strict: o.strict ?? false,
        warm: o.warm,
        ...(threads !== undefined ? { threads } : {}),
        onReject: rejects.onReject,
        onPhase: (_phase, note) => progress.phase(note),
        onProgress: (done, total, phase) => progress.update(done, total, phase === 'hindsight' ? `${done}/${total} markets` : `${done}/${total} policies`),
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
      process.stdout.write(o.json ? `${JSON.stringify(result)}\n` : formatSweep(result) + sweepNextSteps(result, logs, o.out));
    });
}
