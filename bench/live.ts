/**
 * `npm run bench:live`: `pairflow live` end to end on this machine, broker included
 * (the one in KAFKA_BROKERS, else a private local broker from scripts/kafka.mjs), with
 * the built `bin/pairflow.js` in child processes as users run it:
 *
 *   - backlog throughput: a generated city log published first (`pairflow publish`),
 *     then `live` drains it; events per second from its first record to the commit of
 *     its last (from the processor's own `live: totals` log line), and per second of
 *     the whole process (start-up and group join included);
 *   - paced run: a city at scale 20 published in real time (bench/lib/paced-publish.mjs)
 *     for N minutes; every minute, from the processor's
 *     `live: stats` line: resident memory, consumer lag, and the epoch-close-to-commit
 *     latency (p50, p99) — the time from the watermark passing an epoch to that
 *     epoch's transaction being committed;
 *   - restore: 10,000 pooled units in the pool topic, a new process taking over the
 *     group: the time to restore them (the processor's `live: partition restored`).
 *
 * Writes its section of docs/benchmarks.md. `--quick` runs tiny sizes for a short
 * while (the smoke test), `--no-write` prints only, `--minutes N` sets the paced run
 * (default 30), `--speedup X` its event time per wall time (default 1: real time),
 * `--only throughput,paced,restore` picks parts.
 */
import { spawn, spawnSync, type ChildProcess } from 'node:child_process';
import { existsSync, mkdirSync, readFileSync, writeFileSync } from 'node:fs';
import { loadavg } from 'node:os';
import { join } from 'node:path';
import { fileURLToPath } from 'node:url';
import { startBroker, stopBroker } from '../scripts/kafka.mjs';
import { createKafka } from '../src/kafka/index.js';
import { PALETTE, THEME } from '../src/report/charts.js';
import { renderSvg } from '../src/report/svg.js';
import { machineInfo, splitParts, writeSection } from './lib/report.js';

const ROOT = fileURLToPath(new URL('..', import.meta.url));
const CHART = join(ROOT, 'docs', 'bench-live-paced.svg');
const BIN = join(ROOT, 'bin', 'pairflow.js');
const DOC = join(ROOT, 'docs', 'benchmarks.md');

/** Options of {@link runLiveBench}. */
export interface LiveBenchOptions {
  quick?: boolean;
  write?: boolean;
  minutes?: number;
  /** Event time per wall-clock time of the paced run. @default 1 (real time; quick: 60) */
  speedup?: number;
  only?: ReadonlyArray<'throughput' | 'paced' | 'restore'>;
  brokers?: string;
  outDir?: string;
  log?: (line: string) => void;
}

interface LogLine { msg: string; time: number; [k: string]: unknown }

/** Runs `pairflow ...args`, collecting its JSON log lines from stderr; `until` a line, then SIGTERM. */
function runLive(args: string[], opts: { onLine?: (l: LogLine) => void; until?: (l: LogLine) => boolean; child?: (c: ChildProcess) => void } = {}): Promise<{ code: number | null; lines: LogLine[]; wallMs: number }> {
  const t0 = performance.now();
  const child = spawn(process.execPath, [BIN, ...args], { stdio: ['ignore', 'pipe', 'pipe'] });
  opts.child?.(child);
  const lines: LogLine[] = [];
  let buf = '';
  child.stderr.on('data', (b: Buffer) => {
    buf += b.toString();
    let k: number;
    while ((k = buf.indexOf('\n')) >= 0) {
      const text = buf.slice(0, k);
      buf = buf.slice(k + 1);
      try {
        const l = JSON.parse(text) as LogLine;
        lines.push(l);
        opts.onLine?.(l);
        if (opts.until?.(l)) child.kill('SIGTERM');
      } catch {
        // not a log line
      }
    }
  });
  child.stdout.resume();
  return new Promise((resolve) => child.on('exit', (code) => resolve({ code, lines, wallMs: performance.now() - t0 })));
}

function pairflowSync(args: string[]): { stdout: string; ms: number } {
  const t0 = performance.now();
  const r = spawnSync(process.execPath, [BIN, ...args], { encoding: 'utf8', maxBuffer: 1 << 28 });
  if (r.status !== 0) throw new Error(`pairflow ${args.join(' ')} failed: ${r.stderr}`);
  return { stdout: r.stdout, ms: performance.now() - t0 };
}

const uid = (): string => `${Date.now().toString(36)}${Math.floor(Math.random() * 1e6).toString(36)}`;

export interface ThroughputResult { days: number; scale: number; events: number; publishMs: number; busyMs: number; wallMs: number; perSecBusy: number; perSecWall: number; transactions: number; partitions: number }
export interface PacedMinute { minute: number; rssMb: number; heapMb: number; lag: number; p50: number | null; p99: number | null; n: number; records: number; poolUnits: number; load: number }
export interface PacedResult { minutes: PacedMinute[]; speedup: number; scale: number; published: number; backlog: number; fromHour: number; backlogFromHour: number; memoryChange: number | null }
export interface RestoreResult { units: number; markets: number; partitions: number; restoreMs: number[]; readyMs: number; poolRecords: number }

async function throughput(brokers: string, dir: string, size: { days: number; scale: number }, log: (s: string) => void): Promise<ThroughputResult> {
  const { days, scale } = size;
  const file = join(dir, `throughput-${days}d-${scale}.jsonl`);
  pairflowSync(['gen', '--days', String(days), '--scale', String(scale), '--seed', '5', '--out', file]);
  const topic = `bench-live-in-${uid()}`;
  const pub = pairflowSync(['publish', file, '--brokers', brokers, '--topic', topic, '--partitions', '4', '--json']);
  const published = JSON.parse(pub.stdout) as { published: number };
  log(`live bench: published ${published.published} events in ${(pub.ms / 1000).toFixed(1)} s`);
  const r = await runLive(['live', '--brokers', brokers, '--in', topic, '--out', `bench-live-out-${uid()}`, '--group', `bench-${uid()}`, '--exit-when-idle', '2s', '--stats-every', '0']);
  const totals = r.lines.find((l) => l.msg === 'live: totals');
  if (r.code !== 0 || !totals) throw new Error(`live exited ${r.code} without totals`);
  const busyMs = Number(totals.busyMs);
  const res: ThroughputResult = {
    days, scale, events: published.published, publishMs: pub.ms, busyMs, wallMs: r.wallMs - 2000,
    perSecBusy: published.published / (busyMs / 1000), perSecWall: published.published / ((r.wallMs - 2000) / 1000),
    transactions: Number(totals.transactions), partitions: 4,
  };
  log(`live bench: drained ${res.events} events: ${Math.round(res.perSecBusy)} events/s busy, ${Math.round(res.perSecWall)} events/s whole process`);
  return res;
}

async function paced(brokers: string, dir: string, quick: boolean, minutes: number, speedup: number, log: (s: string) => void): Promise<PacedResult> {
  const seconds = quick ? 10 : minutes * 60;
  // The paced part starts at 15:30, where a generated city's pools hold steady for an
  // hour (a replay of the demo day: 419, 428, 416 occurrences at 15:30, 16:00, 16:30),
  // so memory at minute 10 and minute 30 compares like with like. The hours before
  // (from 06:00) are published at once first and drained, so the pools start as full
  // as a processor's that has been running all day.
  const fromHour = quick ? 10 : 15.5;
  const backlogFromHour = quick ? 10 : 6;
  const days = Math.max(1, Math.ceil((fromHour * 3600 + seconds * speedup) / 86_400));
  const scale = quick ? 0.5 : 20;
  const file = join(dir, `paced-${days}d-${scale}.jsonl`);
  pairflowSync(['gen', '--scale', String(scale), '--days', String(days), '--seed', '6', '--out', file]);
  const topic = `bench-live-paced-${uid()}`;
  const kafka = createKafka({ brokers, clientId: 'pairflow-bench' });
  const admin = kafka.admin();
  await admin.connect();
  await admin.createTopics({ topics: [{ topic, numPartitions: 4, configEntries: [{ name: 'retention.ms', value: '-1' }] }], waitForLeaders: true });
  await admin.disconnect();
  const minutesOut: PacedMinute[] = [];
  let minute = 0;
  let proc: ChildProcess | null = null;
  const liveRun = runLive(
    ['live', '--brokers', brokers, '--in', topic, '--out', `bench-live-paced-out-${uid()}`, '--group', `bench-${uid()}`, '--stats-every', quick ? '3s' : '1m'],
    {
      onLine: (l) => {
        if (l.msg !== 'live: stats') return;
        minute++;
        const c = l.closeToCommitMs as { n: number; p50: number | null; p99: number | null };
        const row: PacedMinute = {
          minute, rssMb: Number(l.rssMb), heapMb: Number(l.heapMb), lag: Number(l.lag), p50: c.p50, p99: c.p99, n: c.n,
          records: Number(l.records), poolUnits: Number(l.poolUnits), load: loadavg()[0] ?? 0,
        };
        minutesOut.push(row);
        log(`live bench: minute ${minute}: rss ${row.rssMb} MB, lag ${row.lag}, close→commit p50 ${row.p50} ms p99 ${row.p99} ms (n ${row.n}), load ${row.load.toFixed(1)}`);
      },
      child: (c) => { proc = c; },
    },
  );
  await new Promise((r) => setTimeout(r, 3000));
  // Asynchronously: the processor's log lines must keep being read while it runs.
  const pub = await new Promise<{ code: number | null; stdout: string; stderr: string }>((resolve) => {
    const child = spawn(process.execPath, [join(ROOT, 'bench', 'lib', 'paced-publish.mjs'), brokers, topic, file, String(speedup), String(seconds), String(fromHour), String(backlogFromHour)], { stdio: ['ignore', 'pipe', 'pipe'] });
    let out = '', err = '';
    child.stdout.on('data', (b: Buffer) => { out += b.toString(); });
    child.stderr.on('data', (b: Buffer) => { err += b.toString(); });
    child.on('exit', (code) => resolve({ code, stdout: out, stderr: err }));
  });
  if (pub.code !== 0) throw new Error(`paced publisher failed: ${pub.stderr}`);
  const { published, backlog } = JSON.parse(pub.stdout) as { published: number; backlog: number };
  // One more stats line after the publisher stops, then a clean stop.
  await new Promise((r) => setTimeout(r, quick ? 3500 : 65_000));
  (proc as ChildProcess | null)?.kill('SIGTERM');
  await liveRun;
  const at = (m: number): number | undefined => minutesOut.find((x) => x.minute === m)?.rssMb;
  const a = at(10), b = at(30);
  return { minutes: minutesOut, speedup, scale, published, backlog, fromHour, backlogFromHour, memoryChange: a !== undefined && b !== undefined ? (b - a) / a : null };
}

async function restore(brokers: string, dir: string, quick: boolean, log: (s: string) => void): Promise<RestoreResult> {
  const units = quick ? 1000 : 10_000;
  const markets = 4;
  const t0 = Date.UTC(2026, 2, 2);
  const lines: string[] = [];
  for (let i = 0; i < units; i++) {
    // Supply only, available for ten days: nothing matches, every unit stays in a pool.
    lines.push(JSON.stringify({ type: 'supply', id: `c${i}`, market: `district-${i % markets}`, t: t0 + i * 10, until: t0 + 10 * 86_400_000, lat: 48.1 + (i % 97) * 0.001, lon: 11.5 + (i % 89) * 0.001, has: i % 3 === 0 ? ['cold-bag'] : [] }));
  }
  const file = join(dir, `restore-${units}.jsonl`);
  writeFileSync(file, lines.join('\n') + '\n');
  const topic = `bench-live-restore-${uid()}`;
  pairflowSync(['publish', file, '--brokers', brokers, '--topic', topic, '--partitions', '4']);
  const prefix = `bench-live-restore-out-${uid()}`;
  const group = `bench-${uid()}`;
  // First run: take every unit into the pools, commit, stop cleanly (no window closed early).
  const first = await runLive(['live', '--brokers', brokers, '--in', topic, '--out', prefix, '--group', group, '--stats-every', '2s'], {
    until: (l) => l.msg === 'live: stats' && Number(l.records) >= units && Number(l.lag) === 0,
  });
  if (first.code !== 0) throw new Error(`first live run exited ${first.code}`);
  // Second run: a new process restores the pools.
  let readyAt = 0;
  const t = performance.now();
  let restoredParts = 0;
  const second = await runLive(['live', '--brokers', brokers, '--in', topic, '--out', prefix, '--group', group, '--stats-every', '0'], {
    until: (l) => {
      if (l.msg === 'live: partition restored') restoredParts++;
      if (restoredParts === 4 && readyAt === 0) readyAt = performance.now() - t;
      return restoredParts === 4;
    },
  });
  const restored = second.lines.filter((l) => l.msg === 'live: partition restored');
  const got = restored.reduce((n, l) => n + Number(l.units), 0);
  if (got !== units) throw new Error(`restored ${got} units, expected ${units}`);
  const res: RestoreResult = {
    units, markets, partitions: 4, restoreMs: restored.map((l) => Number(l.ms)), readyMs: readyAt,
    poolRecords: restored.reduce((n, l) => n + Number(l.poolRecords), 0),
  };
  log(`live bench: restored ${units} units in ${Math.max(...res.restoreMs)} ms (slowest partition); process ready after ${Math.round(readyAt)} ms`);
  return res;
}

/** When a part ran, and the machine's load then. */
interface PartTime { at: string; loadStart: number; loadEnd: number }

/** Runs one part of the bench, noting when it ran. */
async function timed<T>(times: Partial<Record<'throughput' | 'paced' | 'restore', PartTime>>, part: 'throughput' | 'paced' | 'restore', run: () => Promise<T>): Promise<T> {
  const at = new Date().toISOString().slice(0, 16).replace('T', ' ');
  const loadStart = loadavg()[0] ?? 0;
  const out = await run();
  times[part] = { at, loadStart, loadEnd: loadavg()[0] ?? 0 };
  return out;
}

/**
 * The parts (### subsections) of the current bench:live section of `doc` that this run
 * did not measure, by title, so `--only` keeps them.
 */
export function keptParts(doc: string): Map<string, string> {
  const kept = new Map<string, string>();
  const a = doc.indexOf('<!-- bench:live:start -->');
  const b = doc.indexOf('<!-- bench:live:end -->');
  if (a < 0 || b < a) return kept;
  const { head, parts } = splitParts(doc.slice(a, b));
  // A section written before parts carried their own run line has one run line for all.
  const old = /Run (\d{4}-\d\d-\d\d \d\d:\d\d) UTC.*?1-minute load at start (\d+\.\d+), at end (\d+\.\d+)/.exec(head);
  for (const part of parts) {
    let text = part.trimEnd();
    if (!/\nRun \d{4}/.test(text) && old) {
      const nl = text.indexOf('\n');
      text = `${text.slice(0, nl)}\n\nRun ${old[1]} UTC with the other parts of that run, 1-minute load ${old[2]} at the run's start, ${old[3]} at its end.${text.slice(nl)}`;
    }
    kept.set(part.slice(0, part.indexOf('\n')), text);
  }
  return kept;
}

function markdown(m: ReturnType<typeof machineInfo>, quick: boolean, t: ThroughputResult[] | null, p: PacedResult | null, r: RestoreResult | null, times: Partial<Record<'throughput' | 'paced' | 'restore', PartTime>>, kept: Map<string, string>): string {
  const out: string[] = ['## Live mode on Kafka (`npm run bench:live`)', ''];
  out.push(`On ${m.cpu} (${m.cores} cores, ${m.memoryGb} GB), Node ${m.node}${quick ? ', quick mode (smoke sizes)' : ''}; the Kafka broker (local, KRaft, scripts/kafka.mjs) on the same machine. Targets from the live-mode issue: ≥ 20,000 events/s backlog, p99 close-to-commit ≤ 250 ms paced, restore of 10,000 units ≤ 10 s, memory at 30 minutes within 10 % of 10 minutes. Each part says when it ran and the machine's 1-minute load average then (the machine is shared); \`--only PART\` reruns one part and keeps the others as they were.`);
  out.push('');
  const when = (at: PartTime): string => `Run ${at.at} UTC, 1-minute load ${at.loadStart.toFixed(2)} at its start, ${at.loadEnd.toFixed(2)} at its end.`;
  if (t) {
    out.push('### Backlog throughput', '', when(times.throughput!), '');
    out.push('A generated city log (`pairflow gen`) published first (4 partitions, `pairflow publish`), then one `pairflow live` process drains it (commit "all", W = 5 s, JSON values). "busy" runs from the first record taken to the commit of the last one; "whole process" adds start-up, topic checks and the group join. Scale multiplies the units per day of each market: at scale 5 the pools are five times as full, and the engine\'s own work per event (candidate pairs, solves) grows with them — `bench:replay` times the engine alone.');
    out.push('');
    out.push('| log | events | publish | drain, busy | events/s busy | events/s whole process | transactions |');
    out.push('|---|---|---|---|---|---|---|');
    for (const x of t) out.push(`| ${x.days} day${x.days > 1 ? 's' : ''}, scale ${x.scale} | ${x.events.toLocaleString('en-US')} | ${(x.publishMs / 1000).toFixed(1)} s | ${(x.busyMs / 1000).toFixed(1)} s | ${Math.round(x.perSecBusy).toLocaleString('en-US')} | ${Math.round(x.perSecWall).toLocaleString('en-US')} | ${x.transactions} |`);
    out.push('');
  }
  if (p) {
    out.push('### Paced run', '', when(times.paced!), '');
    const hhmm = (h: number): string => `${String(Math.floor(h)).padStart(2, '0')}:${String(Math.round((h % 1) * 60)).padStart(2, '0')}`;
    const backlogText = p.backlog > 0 ? `First its hours from ${hhmm(p.backlogFromHour)} to ${hhmm(p.fromHour)} (${p.backlog.toLocaleString('en-US')} events) are published at once and drained, so the pools are as full as those of a processor that has run all day; then ` : '';
    out.push(`The log: a city at scale ${p.scale}. ${backlogText}it is published as time passes, ${p.speedup === 1 ? 'in real time' : `event time running ${p.speedup}× the wall clock`}, from ${hhmm(p.fromHour)} of its first day (${p.published.toLocaleString('en-US')} events) — an hour of the generated day where the pools hold steady, so the memory of minute 10 and minute 30 compare like with like. Each row is the processor's own figures for one minute: resident memory, records behind the end of the input (lag, summed over partitions), and the epoch-close-to-commit latency: from the watermark passing an epoch to the commit of the transaction holding that epoch's records.`);
    out.push('');
    out.push('| minute | RSS MB | heap MB | lag | close→commit p50 ms | p99 ms | epochs | pool units | load |');
    out.push('|---|---|---|---|---|---|---|---|---|');
    for (const x of p.minutes) out.push(`| ${x.minute} | ${x.rssMb} | ${x.heapMb} | ${x.lag} | ${x.p50 ?? '–'} | ${x.p99 ?? '–'} | ${x.n} | ${x.poolUnits} | ${x.load.toFixed(2)} |`);
    out.push('');
    if (p.memoryChange !== null) out.push(`Resident memory at minute 30 against minute 10: ${(p.memoryChange * 100).toFixed(1)} %.`, '');
    if (!quick) out.push('![Resident memory, consumer lag and close-to-commit p99 per minute of the paced run](bench-live-paced.svg)', '');
  }
  if (r) {
    out.push('### Restore', '', when(times.restore!), '');
    out.push(`${r.units.toLocaleString('en-US')} supply units held in the pools of ${r.markets} markets on ${r.partitions} partitions (nothing to match them), committed; then a new process takes the group over and restores them from the pool topic (${r.poolRecords} pool records read): producer fenced and initialised, a marker committed, the partition read back to it, the markets rebuilt.`);
    out.push('');
    out.push(`| units | slowest partition | per partition (ms) | process ready after |`);
    out.push('|---|---|---|---|');
    out.push(`| ${r.units.toLocaleString('en-US')} | ${Math.max(...r.restoreMs)} ms | ${r.restoreMs.join(', ')} | ${(r.readyMs / 1000).toFixed(1)} s |`);
    out.push('');
  }
  // Parts not measured this time stay as they were, in their usual order.
  const order = ['### Backlog throughput', '### Paced run', '### Restore'];
  const measured = new Set([t ? order[0] : '', p ? order[1] : '', r ? order[2] : '']);
  if (!quick) {
    const { head, parts } = splitParts(out.join('\n'));
    const sections = new Map<string, string>();
    for (const part of parts) sections.set(part.slice(0, part.indexOf('\n')), part.trimEnd());
    const body = order.map((title) => (measured.has(title) ? sections.get(title) : kept.get(title))).filter((x): x is string => x !== undefined);
    return `<!-- bench:live:start -->\n${[head.trimEnd(), ...body].join('\n\n')}\n<!-- bench:live:end -->`;
  }
  return `<!-- bench:live:start -->\n${out.join('\n').trimEnd()}\n<!-- bench:live:end -->`;
}

/** The paced run per minute as one SVG (Vega-Lite, rendered in Node by the report's renderer). */
export async function pacedChart(p: PacedResult): Promise<string> {
  const rows = p.minutes.flatMap((x) => [
    { minute: x.minute, measure: 'resident memory (MB)', value: x.rssMb },
    { minute: x.minute, measure: 'lag (records)', value: x.lag },
    { minute: x.minute, measure: 'close→commit p99 (ms)', value: x.p99 },
  ]).filter((r) => r.value !== null);
  return renderSvg({
    id: 'live-paced',
    title: 'Paced run, per minute',
    caption: '',
    spec: {
      $schema: 'https://vega.github.io/schema/vega-lite/v6.json',
      config: THEME,
      data: { values: rows },
      facet: { row: { field: 'measure', type: 'nominal', title: null, sort: ['resident memory (MB)', 'lag (records)', 'close→commit p99 (ms)'] } },
      resolve: { scale: { y: 'independent' } },
      spec: {
        width: 560,
        height: 110,
        mark: { type: 'line', point: true, color: PALETTE.blue },
        encoding: {
          x: { field: 'minute', type: 'quantitative', title: 'minute of the run' },
          y: { field: 'value', type: 'quantitative', title: null, scale: { zero: true } },
        },
      },
    },
  });
}

/** Runs the live benchmark; returns its figures and the markdown section. */
export async function runLiveBench(opts: LiveBenchOptions = {}): Promise<{ throughput: ThroughputResult[] | null; paced: PacedResult | null; restore: RestoreResult | null; markdown: string }> {
  const log = opts.log ?? ((s: string) => process.stderr.write(`${s}\n`));
  const quick = opts.quick ?? false;
  const only = new Set(opts.only ?? ['throughput', 'paced', 'restore']);
  const dir = opts.outDir ?? join(ROOT, 'bench', 'out', 'live');
  mkdirSync(dir, { recursive: true });
  const m = machineInfo();
  let brokers = opts.brokers ?? process.env.KAFKA_BROKERS ?? '';
  const instance = `bench-live-${process.pid}`;
  let own = false;
  if (brokers === '') {
    brokers = (await startBroker({ instance, ownerPid: process.pid })).brokers;
    own = true;
  }
  try {
    const times: Partial<Record<'throughput' | 'paced' | 'restore', PartTime>> = {};
    const sizes = quick ? [{ days: 1, scale: 0.05 }] : [{ days: 5, scale: 1 }, { days: 1, scale: 5 }];
    let t: ThroughputResult[] | null = null;
    if (only.has('throughput')) {
      t = [];
      await timed(times, 'throughput', async () => {
        for (const size of sizes) t!.push(await throughput(brokers, dir, size, log));
      });
    }
    const r = only.has('restore') ? await timed(times, 'restore', () => restore(brokers, dir, quick, log)) : null;
    const p = only.has('paced') ? await timed(times, 'paced', () => paced(brokers, dir, quick, opts.minutes ?? 30, opts.speedup ?? (quick ? 60 : 1), log)) : null;
    const md = markdown(m, quick, t, p, r, times, keptParts(existsSync(DOC) ? readFileSync(DOC, 'utf8') : ''));
    if ((opts.write ?? true) && p && !quick) writeFileSync(CHART, `${await pacedChart(p)}\n`);
    if (opts.write ?? true) writeSection(DOC, 'live', md.replace(/^<!-- bench:live:start -->\n/, '').replace(/\n<!-- bench:live:end -->$/, ''));
    return { throughput: t, paced: p, restore: r, markdown: md };
  } finally {
    if (own) await stopBroker({ instance });
  }
}

const isMain = process.argv[1] !== undefined && fileURLToPath(import.meta.url) === process.argv[1];
if (isMain) {
  const argv = process.argv.slice(2);
  const arg = (name: string): string | undefined => {
    const k = argv.indexOf(name);
    return k >= 0 ? argv[k + 1] : undefined;
  };
  const only = arg('--only')?.split(',') as LiveBenchOptions['only'];
  runLiveBench({
    quick: argv.includes('--quick'),
    write: !argv.includes('--no-write'),
    ...(arg('--minutes') ? { minutes: Number(arg('--minutes')) } : {}),
    ...(arg('--speedup') ? { speedup: Number(arg('--speedup')) } : {}),
    ...(only ? { only } : {}),
  }).then((r) => process.stdout.write(`${r.markdown}\n`), (err: unknown) => {
    process.stderr.write(`bench:live failed: ${(err as Error).stack ?? String(err)}\n`);
    process.exit(1);
  });
}
