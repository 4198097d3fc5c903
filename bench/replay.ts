/**
 * `npm run bench:replay`: the replay pipeline end to end, as users run it (the built
 * `bin/pairflow.js` in child processes, so peak memory is a whole process's). On a
 * generated city log (`pairflow gen --days N`, about 43k demand and 43k supply
 * occurrences per day over 4 markets) it measures
 *   - replay at W = 10 s (online alone, then with the hindsight optimum alongside),
 *   - the exact hindsight optimum (alone, as the sweep computes it once, with where
 *     its time went: graph, candidate solve, pricing passes, re-solves, ceiling),
 *   - a six-window sweep, and warm versus cold epoch solves,
 *   - peak RSS of each child (/usr/bin/time -v, else the child's own maxRSS),
 * for 1, 2, 4 and 7 days, and writes the table between the bench:replay markers of
 * docs/benchmarks.md. Then the growth tables of density and length: one day at
 * `--scale` 1, 2, 4 and 8, and 1, 2, 4 and 7 days at scale 4 (replay with the
 * hindsight as users run it, and the hindsight alone in a child of its own,
 * bench/lib/hindsight-child.mjs, for where its time goes). The one-day rows up to
 * scale 4, which the time ratio compares, are replayed three times, the scales
 * alternating, and the median run stands for each.
 *
 *   tsx bench/replay.ts [--quick] [--no-write] [--no-growth] [--growth-cap SECONDS] [--root DIR] [--label TEXT]
 *                       [--json-out FILE] [--before FILE]
 *
 * `--quick` runs tiny logs (smoke test); `--no-write` prints only; `--root DIR`
 * measures another built checkout (its bin/ and dist/, e.g. the code before a
 * change); `--json-out FILE` keeps the figures; `--before FILE` (figures of an earlier
 * run) adds that run's growth tables above this one's, for comparison;
 * `--growth-cap SECONDS` (default 900) stops a growth row's replay there and reports
 * its time and memory as lower bounds; `--no-growth` skips the growth runs (about 30 of
 * the 36 minutes) and keeps the growth tables already in docs/benchmarks.md as their
 * run wrote them.
 */
import { spawnSync } from 'node:child_process';
import { existsSync, mkdirSync, readFileSync, statSync, writeFileSync } from 'node:fs';
import { cpus, loadavg, totalmem } from 'node:os';
import { join } from 'node:path';
import { fileURLToPath } from 'node:url';
import { splitParts } from './lib/report.js';

const ROOT = fileURLToPath(new URL('..', import.meta.url));
/** The checkout whose CLI is measured (`--root`). */
let target = ROOT;
const bin = (): string => join(target, 'bin', 'pairflow.js');
const DOC = join(ROOT, 'docs', 'benchmarks.md');
const START = '<!-- bench:replay:start -->';
const END = '<!-- bench:replay:end -->';

/** Options of {@link runReplayBench}. */
export interface ReplayBenchOptions {
  /** Tiny sizes, for the smoke test. @default false */
  quick?: boolean;
  /** Rewrite the section of docs/benchmarks.md. @default true */
  write?: boolean;
  /** Where generated logs are kept between runs. @default bench/out */
  outDir?: string;
  /** Day counts for the growth table. @default [1, 2, 4, 7] (quick: [1]) */
  days?: number[];
  /** Progress lines. @default stderr */
  log?: (line: string) => void;
  /** Also the growth tables of density and length. @default true */
  growth?: boolean;
  /** A growth row's replay is stopped after this many seconds (0: never). @default 900 */
  growthCapS?: number;
  /** A built checkout to measure instead of this one (its bin/ and dist/). @default this repository */
  root?: string;
  /** What the figures are of, e.g. a commit. @default the checkout's HEAD */
  label?: string;
  /** Growth figures of an earlier run (its `--json-out`), shown above this run's. */
  before?: GrowthResult | null;
}

/** One log of the growth tables. */
export interface GrowthRow {
  scale: number;
  days: number;
  demandUnits: number;
  supplyUnits: number;
  pairsPriced: number;
  pairsSolved: number;
  pricingRounds: number;
  /** `pairflow replay LOG --json`: the whole process, hindsight included (the median run where there were several). */
  replayWallMs: number;
  replayRssMb: number | null;
  /** Wall time of each run, in the order run, where the row was run more than once. */
  replayRunsMs?: number[];
  /** That process's CPU time, every thread (`timings.cpuMs`; NaN from a checkout that does not report it). */
  replayCpuMs?: number;
  /** The hindsight alone (bench/lib/hindsight-child.mjs), when measured. */
  alone: { ms: number; phases: Phases; rssMb: number } | null;
  onlineCost: number;
  hindsightCost: number;
  /** 1-minute load average right after the replay. */
  load: number;
  /** The replay was stopped at the growth cap (`--growth-cap`): wall time and memory are lower bounds. */
  capped?: boolean;
}

/** The growth tables' figures, kept by `--json-out` for a later `--before`. */
export interface GrowthResult {
  label: string;
  date: string;
  loadStart: number;
  loadEnd: number;
  byScale: GrowthRow[];
  byDays: GrowthRow[];
  /** The demo week's hindsight alone (the sweep's), scale 1. */
  demoWeekHindsightMs: number | null;
}

/** One child process run. */
export interface ChildRun {
  wallMs: number;
  peakRssMb: number | null;
  json: Record<string, unknown>;
  /** Stopped at its time cap (growth rows only): no figures but time and memory so far. */
  capped?: boolean;
}

export interface SizeRow {
  days: number;
  demandUnits: number;
  supplyUnits: number;
  logMb: number;
  onlineMs: number;
  onlineWallMs: number;
  onlineRssMb: number | null;
  replayWallMs: number;
  replayRssMb: number | null;
  hindsightMs: number;
  pairsPriced: number;
  pairsSolved: number;
  pricingRounds: number;
  onlineCost: number;
  hindsightCost: number;
  /** Epoch solves of the (warm) online run, split by whether the solver used a warm start. */
  solves: DueSolves;
  /** The hindsight figures come from the sweep (computed alone) rather than a replay. */
  hindsightAlone: boolean;
}

type Phases = { graphMs: number; setupMs: number; firstSolveMs: number; pricingMs: number; resolveMs: number; ceilingMs: number };

type Solves = { count: number; meanMs: number | null; p95Ms: number | null; totalMs: number };
type DueSolves = { warm: Solves; cold: Solves };

/** One log replayed with the warm start and with `--no-warm`: epoch solves, online loop time and cost of each. */
interface WarmCold { warm: DueSolves; cold: DueSolves; warmOnlineMs: number; coldOnlineMs: number; warmCost: number; coldCost: number }

/** Alternating warm/cold runs of the small-markets log. */
const SMALL_REPEATS = 7;

/** Epoch solve time of one run, warm and cold solves together. */
function solveTotalMs(run: ChildRun): number {
  const s = get(run.json, 'timings.epochSolve') as DueSolves;
  return s.warm.totalMs + s.cold.totalMs;
}

/** The run whose epoch solve total is the median of the runs (the lower middle one of an even count). */
function medianRun(runs: readonly ChildRun[]): ChildRun {
  const sorted = [...runs].sort((a, b) => solveTotalMs(a) - solveTotalMs(b));
  return sorted[(sorted.length - 1) >> 1]!;
}

function warmCold(warm: ChildRun, cold: ChildRun): WarmCold {
  return {
    warm: get(warm.json, 'timings.epochSolve') as DueSolves,
    cold: get(cold.json, 'timings.epochSolve') as DueSolves,
    warmOnlineMs: num(warm.json, 'timings.onlineMs'),
    coldOnlineMs: num(cold.json, 'timings.onlineMs'),
    warmCost: num(warm.json, 'online.cost'),
    coldCost: num(cold.json, 'online.cost'),
  };
}

export interface ReplayBenchResult {
  machine: { cpu: string; cores: number; memGb: number; node: string; date: string; loadStart: number; loadEnd: number };
  quick: boolean;
  sizes: SizeRow[];
  largest: {
    days: number;
    cold: DueSolves;
    coldOnlineMs: number;
    /** commit "due": epoch solves of the warm run (split by whether the solver used the warm start) and of the cold run. */
    due: WarmCold & { days: number };
    /** commit "due" on three small markets (bench/replay.ts makes the log). */
    small: WarmCold;
    sweep: { windows: string; wallMs: number; rssMb: number | null; hindsightMs: number | null; hindsightPhases: Phases | null; windowsMs: number; threads: number; best: number };
  };
  growth: GrowthResult | null;
  markdown: string;
}

const haveTimeV = ((): boolean => {
  if (!existsSync('/usr/bin/time')) return false;
  return spawnSync('/usr/bin/time', ['-v', 'true'], { encoding: 'utf8' }).status === 0;
})();

/**
 * Runs `pairflow ARGS` in a child; the JSON on its stdout, wall time, and peak RSS.
 * One retry: other work on a shared machine may be rebuilding dist/ at that moment.
 */
export function runChild(args: string[], parseJson = true): ChildRun {
  try {
    return runChildOnce(args, parseJson);
  } catch (err) {
    process.stderr.write(`bench:replay: retrying once after: ${(err as Error).message.slice(0, 300)}\n`);
    spawnSync('sleep', ['5']);
    return runChildOnce(args, parseJson);
  }
}

/** `pairflow ARGS` in a child, stopped after `capS` seconds (`capped` then, its time and memory so far). */
export function runChildCapped(args: string[], capS: number): ChildRun {
  return runChildOnce(args, true, capS);
}

function runChildOnce(args: string[], parseJson: boolean, capS = 0): ChildRun {
  const t0 = performance.now();
  // With a cap, coreutils' timeout stops pairflow itself (SIGTERM, then SIGKILL 10 s
  // later), so /usr/bin/time above it still reports the peak memory reached.
  const run = capS > 0 ? ['timeout', '-k', '10', String(capS), process.execPath, bin(), ...args] : [process.execPath, bin(), ...args];
  const cmd = haveTimeV ? '/usr/bin/time' : run[0]!;
  const argv = haveTimeV ? ['-v', ...run] : run.slice(1);
  const r = spawnSync(cmd, argv, { encoding: 'utf8', maxBuffer: 1 << 28 });
  const wallMs = performance.now() - t0;
  const rss = /Maximum resident set size \(kbytes\): (\d+)/.exec(r.stderr);
  const peakRssMb = rss ? Number(rss[1]) / 1024 : null;
  // timeout exits 124 (137 after its SIGKILL) when the cap was reached.
  if (capS > 0 && (r.status === 124 || r.status === 137)) return { wallMs, peakRssMb, json: {}, capped: true };
  if (r.status !== 0) throw new Error(`pairflow ${args.join(' ')} exited ${r.status}: ${r.stderr.slice(-2000)}`);
  const lines = r.stdout.trimEnd().split('\n');
  return { wallMs, peakRssMb, json: parseJson && lines[0] ? (JSON.parse(lines[lines.length - 1]!) as Record<string, unknown>) : {} };
}

const get = (o: unknown, path: string): unknown => path.split('.').reduce<unknown>((v, k) => (v as Record<string, unknown> | null)?.[k], o);
const num = (o: unknown, path: string): number => Number(get(o, path));

function ensureLog(outDir: string, days: number, scale: number): string {
  const file = join(outDir, `city-${days}d-s${scale}.jsonl.gz`);
  if (!existsSync(file)) runChild(['gen', '--days', String(days), '--seed', '1', '--scale', String(scale), '--out', file], false);
  return file;
}

const f1 = (v: number | null | undefined): string => (v === null || v === undefined || Number.isNaN(v) ? '–' : v.toFixed(1));
const f2 = (v: number | null | undefined): string => (v === null || v === undefined || Number.isNaN(v) ? '–' : v.toFixed(2));
const f3 = (v: number | null | undefined): string => (v === null || v === undefined || Number.isNaN(v) ? '–' : v.toFixed(3));
const s1 = (ms: number | null | undefined): string => (ms === null || ms === undefined || Number.isNaN(ms) ? '–' : (ms / 1000).toFixed(1));
/** A solve total in s, or in ms below 10 s, where tenths of a second would round it away. */
const fmtSolveTotal = (ms: number): string => (ms >= 10_000 ? `${s1(ms)} s` : `${ms.toFixed(ms >= 100 ? 0 : 1)} ms`);
const int = (v: number): string => (Number.isFinite(v) ? v.toLocaleString('en-US') : '–');

/** Runs the benchmark and returns its figures and the markdown section. */
export function runReplayBench(opts: ReplayBenchOptions = {}): ReplayBenchResult {
  const quick = opts.quick ?? false;
  const log = opts.log ?? ((line: string) => process.stderr.write(`${line}\n`));
  target = opts.root ?? ROOT;
  const outDir = opts.outDir ?? join(ROOT, 'bench', 'out');
  mkdirSync(outDir, { recursive: true });
  const scale = quick ? 0.01 : 1;
  const daysList = opts.days ?? (quick ? [1] : [1, 2, 4, 7]);
  const sizes: SizeRow[] = [];
  const loadStart = loadavg()[0]!;
  // The commit measured is the one built when the run starts (a commit made while it runs is not in dist/).
  const label = opts.label ?? headOf(target);
  for (const days of daysList) {
    log(`bench:replay: ${days} day(s): generating`);
    const file = ensureLog(outDir, days, scale);
    log(`bench:replay: ${days} day(s): online replay at W = 10 s`);
    const online = runChild(['replay', file, '--window', '10s', '--json', '--no-hindsight']);
    log(`bench:replay:   online ${JSON.stringify(get(online.json, 'timings'))} wall ${online.wallMs.toFixed(0)} ms rss ${online.peakRssMb} MB`);
    // Every size, the largest too: its peak memory (replay and hindsight side by side) is a target.
    log(`bench:replay: ${days} day(s): replay with the hindsight optimum`);
    const full = runChild(['replay', file, '--window', '10s', '--json']);
    if (full) log(`bench:replay:   full ${JSON.stringify({ h: full.json.hindsight, o: full.json.online, t: full.json.timings })} wall ${full.wallMs.toFixed(0)} ms rss ${full.peakRssMb} MB`);
    sizes.push({
      days,
      demandUnits: num(online.json, 'demandUnits'),
      supplyUnits: num(online.json, 'supplyUnits'),
      logMb: statSync(file).size / 1e6,
      onlineMs: num(online.json, 'timings.onlineMs'),
      onlineWallMs: online.wallMs,
      onlineRssMb: online.peakRssMb,
      replayWallMs: full ? full.wallMs : NaN,
      replayRssMb: full ? full.peakRssMb : null,
      hindsightMs: full ? num(full.json, 'timings.hindsightMs') : NaN,
      pairsPriced: full ? num(full.json, 'hindsight.pairsPriced') : NaN,
      pairsSolved: full ? num(full.json, 'hindsight.pairsSolved') : NaN,
      pricingRounds: full ? num(full.json, 'hindsight.pricingRounds') : NaN,
      onlineCost: num(online.json, 'online.cost'),
      hindsightCost: full ? num(full.json, 'hindsight.cost') : NaN,
      solves: get(online.json, 'timings.epochSolve') as DueSolves,
      hindsightAlone: false,
    });
  }
  const last = sizes[sizes.length - 1]!;
  const file = ensureLog(outDir, last.days, scale);
  log(`bench:replay: ${last.days} day(s): cold epoch solves`);
  const cold = runChild(['replay', file, '--window', '10s', '--json', '--no-hindsight', '--no-warm']);
  log(`bench:replay:   cold ${JSON.stringify(get(cold.json, 'timings'))} wall ${cold.wallMs.toFixed(0)} ms`);
  // Warm starts pay off when tentative pairs survive between epochs: commit "due" (SPEC §3).
  // Its pools hold every unit not yet at its last chance (supply for up to 30 min), so it is
  // far slower than "all"; it is measured on the smallest log to keep the bench in minutes.
  const dueDays = daysList[0]!;
  const dueFile = ensureLog(outDir, dueDays, scale);
  const dueConfig = join(outDir, 'commit-due.json');
  writeFileSync(dueConfig, '{"commit": "due"}\n');
  log(`bench:replay: ${dueDays} day(s): commit "due", warm then cold`);
  const dueWarm = runChild(['replay', dueFile, '--window', '10s', '--json', '--no-hindsight', '--config', dueConfig]);
  log(`bench:replay:   due warm ${JSON.stringify(get(dueWarm.json, 'timings'))} wall ${dueWarm.wallMs.toFixed(0)} ms`);
  const dueCold = runChild(['replay', dueFile, '--window', '10s', '--json', '--no-hindsight', '--config', dueConfig, '--no-warm']);
  log(`bench:replay:   due cold ${JSON.stringify(get(dueCold.json, 'timings'))} wall ${dueCold.wallMs.toFixed(0)} ms`);
  // Small markets (a few units per pool), where a warm start's fixed cost is largest
  // next to the solve: three districts at a thirtieth of the demo city's demand.
  const smallFile = join(outDir, 'small-markets-1d.jsonl.gz');
  if (!existsSync(smallFile)) runChild(['gen', '--days', '1', '--seed', '3', '--scale', quick ? '0.01' : '0.03', '--markets', '3', '--out', smallFile], false);
  log('bench:replay: small markets, commit "due", warm then cold');
  // Its solves take tens of ms in all, where one run's total swings by a third with the
  // JIT and GC timing: warm and cold alternate SMALL_REPEATS times and each side's run
  // with the median solve total is the one reported.
  const smallRuns: { warm: ChildRun[]; cold: ChildRun[] } = { warm: [], cold: [] };
  for (let i = 0; i < (quick ? 1 : SMALL_REPEATS); i++) {
    smallRuns.warm.push(runChild(['replay', smallFile, '--window', '10s', '--json', '--no-hindsight', '--config', dueConfig]));
    smallRuns.cold.push(runChild(['replay', smallFile, '--window', '10s', '--json', '--no-hindsight', '--config', dueConfig, '--no-warm']));
  }
  const smallWarm = medianRun(smallRuns.warm);
  const smallCold = medianRun(smallRuns.cold);
  const windows = quick ? '5s,30s' : '1s,2s,5s,10s,30s,60s';
  log(`bench:replay: ${last.days} day(s): sweep ${windows} (the hindsight optimum once, then the windows)`);
  const sweep = runChild(['sweep', file, '--windows', windows, '--json', '--bootstrap', quick ? '100' : '1000']);
  log(`bench:replay:   sweep ${JSON.stringify({ h: sweep.json.hindsight, t: sweep.json.timings, best: sweep.json.best })} wall ${sweep.wallMs.toFixed(0)} ms rss ${sweep.peakRssMb} MB`);
  const largestReplay = { hindsightMs: last.hindsightMs, wallMs: last.replayWallMs };
  Object.assign(last, {
    hindsightMs: num(sweep.json, 'timings.hindsightMs'),
    pairsPriced: num(sweep.json, 'hindsight.pairsPriced'),
    pairsSolved: num(sweep.json, 'hindsight.pairsSolved'),
    pricingRounds: num(sweep.json, 'hindsight.pricingRounds'),
    hindsightCost: num(sweep.json, 'hindsight.cost'),
    hindsightAlone: true,
  });

  const growth = opts.growth ?? true ? measureGrowth(quick, outDir, log, label, num(sweep.json, 'timings.hindsightMs'), opts.growthCapS ?? 900) : null;

  const machine = {
    cpu: cpus()[0]?.model.trim() ?? 'unknown',
    cores: cpus().length,
    memGb: Math.round(totalmem() / 2 ** 30),
    node: process.version,
    date: new Date().toISOString().slice(0, 16).replace('T', ' ') + ' UTC',
    loadStart,
    loadEnd: loadavg()[0]!,
  };
  const largest: ReplayBenchResult['largest'] = {
    days: last.days,
    cold: get(cold.json, 'timings.epochSolve') as DueSolves,
    coldOnlineMs: num(cold.json, 'timings.onlineMs'),
    due: { days: dueDays, ...warmCold(dueWarm, dueCold) },
    small: warmCold(smallWarm, smallCold),
    sweep: {
      windows,
      wallMs: sweep.wallMs,
      rssMb: sweep.peakRssMb,
      hindsightMs: get(sweep.json, 'timings.hindsightMs') as number | null,
      hindsightPhases: (get(sweep.json, 'timings.hindsightPhases') as Phases | undefined) ?? null,
      windowsMs: num(sweep.json, 'timings.windowsMs'),
      threads: num(sweep.json, 'timings.threads'),
      best: num(sweep.json, 'best.windowMs'),
    },
  };

  const md: string[] = [];
  md.push(START);
  md.push(`## Replay pipeline (\`npm run bench:replay\`${quick ? ' --quick' : ''})`);
  md.push('');
  md.push(`Generated by \`bench/replay.ts\` on ${machine.date}: ${machine.cpu}, ${machine.cores} cores, ${machine.memGb} GB, Node ${machine.node}. ` +
    'Each figure is one run of the built CLI in a child process (`pairflow gen --days N --seed 1`, 4 markets, default config, W = 10 s); ' +
    'peak memory is the child\'s maximum RSS. The machine is shared with other work, so figures carry noise of that kind ' +
    `(1-minute load average ${machine.loadStart.toFixed(1)} at the start, ${machine.loadEnd.toFixed(1)} at the end).`);
  md.push('');
  md.push('| days | demand | supply | log MB (gz) | online replay s | online peak MB | hindsight s | replay + hindsight wall s | peak MB | pairs priced | pairs solved | pricing rounds | online cost | hindsight cost | ratio |');
  md.push('|---:|---:|---:|---:|---:|---:|---:|---:|---:|---:|---:|---:|---:|---:|---:|');
  for (const r of sizes) {
    md.push(`| ${r.days} | ${int(r.demandUnits)} | ${int(r.supplyUnits)} | ${f1(r.logMb)} | ${s1(r.onlineMs)} | ${f1(r.onlineRssMb)} | ${s1(r.hindsightMs)}${r.hindsightAlone ? ' *' : ''} | ${s1(r.replayWallMs)} | ${f1(r.replayRssMb)} | ${int(r.pairsPriced)} | ${int(r.pairsSolved)} | ${int(r.pricingRounds)} | ${f2(r.onlineCost)} | ${f2(r.hindsightCost)} | ${f3(r.onlineCost / r.hindsightCost)} |`);
  }
  md.push('');
  md.push('"online replay s" is the engine loop alone (`timings.onlineMs`, log parsing excluded; the whole `--no-hindsight` process took ' +
    sizes.map((r) => `${s1(r.onlineWallMs)} s`).join(', ') + ' wall); "hindsight s" is the exact optimum\'s wall time while the online replay runs alongside on the same two cores, ' +
    `except * = alone, as the sweep computes it once before the windows (the replay with hindsight alongside took ${s1(largestReplay.hindsightMs)} s for it at that size); ` +
    '"replay + hindsight wall s" and its "peak MB" are the whole `pairflow replay` process, parsing included.');
  md.push('');
  const both = (x: DueSolves): Solves => {
    const count = x.warm.count + x.cold.count;
    const totalMs = x.warm.totalMs + x.cold.totalMs;
    return { count, totalMs, meanMs: count > 0 ? totalMs / count : null, p95Ms: null };
  };
  const describe = (x: DueSolves, onlineMs: number): string => {
    const t = both(x);
    return `${int(t.count)} solves (${int(x.warm.count)} used a warm start, mean ${f3(x.warm.meanMs)} ms; ${int(x.cold.count)} cold, mean ${f3(x.cold.meanMs)} ms, p95 ${f3(x.cold.p95Ms)} ms), ` +
      `solve total ${fmtSolveTotal(t.totalMs)}, online loop ${s1(onlineMs)} s`;
  };
  md.push(`Epoch solves, ${last.days} day(s), W = 10 s. Commit "all" (the default): warm run ${describe(last.solves, last.onlineMs)}; ` +
    `\`--no-warm\` ${describe(largest.cold, largest.coldOnlineMs)}.`);
  md.push('');
  const d = largest.due;
  const dw = both(d.warm);
  const dc = both(d.cold);
  md.push(`Commit "due", ${d.days} day(s), W = 10 s (tentative pairs re-optimised each epoch, the previous solution as warm start; its pools hold every unit not yet at its last chance, so it runs far slower than "all" and is measured on the smallest log): warm run ${describe(d.warm, d.warmOnlineMs)}; ` +
    `\`--no-warm\` ${describe(d.cold, d.coldOnlineMs)}; cold/warm solve time ${f2(dc.totalMs / dw.totalMs)}×; online cost warm ${f2(d.warmCost)}, cold ${f2(d.coldCost)}.`);
  md.push('');
  const sm = largest.small;
  const smw = both(sm.warm);
  const smc = both(sm.cold);
  md.push(`Commit "due" on small markets (\`pairflow gen --days 1 --seed 3 --scale ${quick ? '0.01' : '0.03'} --markets 3\`: a few units per pool, where a warm start's fixed cost weighs most; the solver ignores a hint below 512 pairs or offered to under a quarter of the rows): ` +
    `warm run ${describe(sm.warm, sm.warmOnlineMs)}; \`--no-warm\` ${describe(sm.cold, sm.coldOnlineMs)}; cold/warm solve time ${f2(smc.totalMs / smw.totalMs)}×; online cost warm ${f2(sm.warmCost)}, cold ${f2(sm.coldCost)}.`);
  md.push('');
  if (!quick) {
    // Warm never slower than cold in total, on every log measured here (timer noise of a
    // few percent aside: a 5 % margin), and ≥ 2× faster on the demo day under "due".
    const all = both(last.solves);
    const allCold = both(largest.cold);
    // A run where the solver took no warm start did the cold run's work: its gap is noise.
    const cmp = (name: string, w: Solves, c: Solves, warmUsed: number): string => {
      const fig = `${name} ${fmtSolveTotal(w.totalMs)} warm vs ${fmtSolveTotal(c.totalMs)} cold`;
      if (warmUsed === 0) return `${fig} (no solve took a warm start: the same work, the gap is run-to-run noise)`;
      return `${fig} (${w.totalMs <= 1.05 * c.totalMs ? 'met' : 'MISSED'})`;
    };
    md.push(`Warm start never slower than cold in total: ${cmp(`commit "all", ${last.days} day(s):`, all, allCold, last.solves.warm.count)}; ` +
      `${cmp(`commit "due", ${d.days} day(s):`, dw, dc, d.warm.warm.count)}; ${cmp(`small markets, "due" (median of ${SMALL_REPEATS} alternating runs each):`, smw, smc, sm.warm.warm.count)}. ` +
      `Warm ≥ 2× faster on the demo day under "due": ${f2(dc.totalMs / dw.totalMs)}× (${dc.totalMs >= 2 * dw.totalMs ? 'met' : 'MISSED'}).`);
  }
  md.push('');
  const sw = largest.sweep;
  md.push(`Sweep, ${last.days} day(s), windows ${sw.windows}, ${sw.threads} worker threads, bootstrap ${quick ? 100 : 1000} resamples: ${s1(sw.wallMs)} s wall ` +
    `(hindsight alone ${s1(sw.hindsightMs)} s, windows ${s1(sw.windowsMs)} s), peak ${f1(sw.rssMb)} MB; best window ${sw.best / 1000} s.`);
  md.push('');
  const ph = sw.hindsightPhases;
  if (ph !== null) {
    md.push(`Where the hindsight's time went (${last.days} day(s), thread time summed over markets, ${sw.threads} threads): ` +
      `allowed graph ${s1(ph.graphMs)} s, components and candidates ${s1(ph.setupMs)} s, first restricted solves ${s1(ph.firstSolveMs)} s, ` +
      `pricing passes ${s1(ph.pricingMs)} s, warm re-solves ${s1(ph.resolveMs)} s, match ceiling ${s1(ph.ceilingMs)} s; ` +
      `${int(last.pricingRounds)} pricing rounds, ${int(last.pairsSolved)} of ${int(last.pairsPriced)} allowed pairs in the final restricted solves.`);
    md.push('');
  }
  if (!quick) {
    const t = sizes.find((r) => r.days === 7) ?? last;
    const ok = (v: number | null, limit: number): string => (v === null ? 'not measured' : v <= limit ? 'met' : 'MISSED');
    md.push(`Targets (${t.days} days): replay at W = 10 s ≤ 60 s — ${s1(t.onlineWallMs)} s for the whole process (${ok(t.onlineWallMs, 60_000)}); ` +
      `exact hindsight ≤ 60 s — ${s1(sw.hindsightMs)} s alone (${ok(sw.hindsightMs, 60_000)}); six-window sweep ≤ 4 min — ${s1(sw.wallMs)} s (${ok(sw.wallMs, 240_000)}); ` +
      `peak memory ≤ 2 GB — ${f1(Math.max(t.replayRssMb ?? 0, sw.rssMb ?? 0))} MB (${ok(Math.max(t.replayRssMb ?? 0, sw.rssMb ?? 0), 2048)}).`);
    md.push('');
  }
  if (opts.before) md.push(...renderGrowth(opts.before, `Before: ${opts.before.label}`, null));
  if (growth !== null) md.push(...renderGrowth(growth, opts.before ? `After: ${growth.label}` : null, quick ? null : targetsOf(growth)));
  md.push(END);
  let markdown = md.join('\n');
  if (opts.write ?? true) markdown = writeSection(markdown, DOC, growth === null && !opts.before);
  return { machine, quick, sizes, largest, growth, markdown };
}

function headOf(root: string): string {
  const r = spawnSync('git', ['-C', root, 'log', '-1', '--format=%h %s'], { encoding: 'utf8' });
  if (r.status !== 0) return root;
  const head = r.stdout.trim();
  return head.length > 80 ? `${head.slice(0, 79)}…` : head;
}

/** Runs of each one-day row up to scale 4 in the growth table (the median stands for the row). */
const DENSITY_REPEATS = 3;

/** The hindsight alone in a child process (bench/lib/hindsight-child.mjs) of the measured checkout. */
function hindsightAlone(file: string): { ms: number; phases: Phases; rssMb: number } {
  const script = fileURLToPath(new URL('./lib/hindsight-child.mjs', import.meta.url));
  const r = spawnSync(process.execPath, [script, target, file, '2'], { encoding: 'utf8', maxBuffer: 1 << 26 });
  if (r.status !== 0) throw new Error(`hindsight child failed on ${file}: ${r.stderr.slice(-2000)}`);
  const j = JSON.parse(r.stdout.trim().split('\n').pop()!) as { ms: number; phases: Phases; peakRssMb: number };
  return { ms: j.ms, phases: j.phases, rssMb: j.peakRssMb };
}

/**
 * One day at each density, then each length at scale 4: `pairflow replay` (hindsight
 * included) for time and peak memory as users see them, and the hindsight alone for
 * where its time went (every density; the longest log only).
 */
function measureGrowth(quick: boolean, outDir: string, log: (line: string) => void, label: string, demoWeekHindsightMs: number, capS: number): GrowthResult {
  const scales = quick ? [0.01, 0.02] : [1, 2, 4, 8];
  const daysScale = quick ? 0.02 : 4;
  const daysList = quick ? [1] : [1, 2, 4, 7];
  const loadStart = loadavg()[0]!;
  const replay = (scale: number, days: number): ChildRun & { load: number } => {
    const file = ensureLog(outDir, days, scale);
    log(`bench:replay: growth: ${days} day(s) at scale ${scale}: replay with the hindsight`);
    const full = runChildCapped(['replay', file, '--window', '10s', '--json'], capS);
    const load = loadavg()[0]!;
    log(`bench:replay:   wall ${full.wallMs.toFixed(0)} ms rss ${full.peakRssMb} MB load ${load.toFixed(2)}${full.capped ? ' (stopped at the cap)' : ''}`);
    return { ...full, load };
  };
  const row = (scale: number, days: number, alone: boolean, runs: Array<ChildRun & { load: number }> = [replay(scale, days)]): GrowthRow => {
    const file = ensureLog(outDir, days, scale);
    // The median run by wall time (the lower middle one of an even count) stands for the row.
    const full = [...runs].sort((x, y) => x.wallMs - y.wallMs)[(runs.length - 1) >> 1]!;
    const load = full.load;
    let a: GrowthRow['alone'] = null;
    if (full.capped) {
      return { scale, days, demandUnits: NaN, supplyUnits: NaN, pairsPriced: NaN, pairsSolved: NaN, pricingRounds: NaN, replayWallMs: full.wallMs,
        replayRssMb: full.peakRssMb, alone: null, onlineCost: NaN, hindsightCost: NaN, load, capped: true };
    }
    if (alone) {
      log(`bench:replay: growth: ${days} day(s) at scale ${scale}: the hindsight alone`);
      a = hindsightAlone(file);
      log(`bench:replay:   ${JSON.stringify(a)}`);
    }
    return {
      scale,
      days,
      demandUnits: num(full.json, 'demandUnits'),
      supplyUnits: num(full.json, 'supplyUnits'),
      pairsPriced: num(full.json, 'hindsight.pairsPriced'),
      pairsSolved: num(full.json, 'hindsight.pairsSolved'),
      pricingRounds: num(full.json, 'hindsight.pricingRounds'),
      replayWallMs: full.wallMs,
      replayRssMb: full.peakRssMb,
      ...(runs.length > 1 ? { replayRunsMs: runs.map((x) => x.wallMs) } : {}),
      replayCpuMs: num(full.json, 'timings.cpuMs'),
      alone: a,
      onlineCost: num(full.json, 'online.cost'),
      hindsightCost: num(full.json, 'hindsight.cost'),
      load,
    };
  };
  // The one-day rows up to scale 4 (the time ratio's) are run DENSITY_REPEATS times,
  // the scales alternating, so that a noisy run sways neither side of the ratio.
  const runs = new Map<number, Array<ChildRun & { load: number }>>(scales.map((scale) => [scale, []]));
  for (let k = 0; k < (quick ? 1 : DENSITY_REPEATS); k++) {
    for (const scale of scales) if (k === 0 || scale <= 4) runs.get(scale)!.push(replay(scale, 1));
  }
  const byScale = scales.map((scale) => row(scale, 1, true, runs.get(scale)!));
  const byDays = daysList.map((days, k) => (days === 1 ? byScale.find((r) => r.scale === daysScale) ?? row(daysScale, 1, false) : row(daysScale, days, k === daysList.length - 1)));
  return { label, date: new Date().toISOString().slice(0, 16).replace('T', ' ') + ' UTC', loadStart, loadEnd: loadavg()[0]!, byScale, byDays, demoWeekHindsightMs };
}

/** The hindsight's thread time (alone, all phases) per allowed pair, in ns: NaN when not measured. */
const nsPerPair = (r: GrowthRow): number => {
  const ph = r.alone?.phases;
  if (!ph || !(r.pairsPriced > 0)) return NaN;
  return ((ph.graphMs + ph.setupMs + ph.firstSolveMs + ph.pricingMs + ph.resolveMs + ph.ceilingMs) * 1e6) / r.pairsPriced;
};

const phaseLine = (ph: Phases): string =>
  `graph ${s1(ph.graphMs)}, setup ${s1(ph.setupMs)}, first solves ${s1(ph.firstSolveMs)}, pricing ${s1(ph.pricingMs)}, re-solves ${s1(ph.resolveMs)}, ceiling ${s1(ph.ceilingMs)}`;

/** The two growth tables (and where the hindsight's time went) of one run. */
function renderGrowth(g: GrowthResult, title: string | null, targets: string[] | null): string[] {
  const md: string[] = [];
  md.push(`${GROWTH_TITLE}${title ? ` — ${title}` : ''}`);
  md.push('');
  md.push(`Run ${g.date} of ${g.label}; 1-minute load average ${g.loadStart.toFixed(1)} at the start, ${g.loadEnd.toFixed(1)} at the end (each row gives its own). ` +
    '"wall s" and "peak MB" are the whole `pairflow replay LOG --window 10s --json` process (parsing, online replay and the hindsight on 2 worker threads alongside); ' +
    '"CPU s" is that process\'s CPU time, every thread (`timings.cpuMs`: the online replay, the hindsight\'s workers and V8\'s own). ' +
    '"alone s" is the hindsight by itself in a process of its own (bench/lib/hindsight-child.mjs, 2 threads), and its phases are thread time summed over markets.' +
    (g.byScale.some((r) => r.replayRunsMs) ? ' A one-day row with several runs (the scales alternating) gives the median run\'s wall time, peak and load, each run\'s wall time in brackets in the order run.' : ''));
  md.push('');
  const base = g.byScale.find((r) => r.scale === 1) ?? g.byScale[0]!;
  md.push('One day, `pairflow gen --days 1 --seed 1 --scale S`:');
  md.push('');
  md.push('| scale | demand | supply | allowed pairs | pairs solved | pricing rounds | wall s | CPU s | peak MB | time ÷ scale 1 | CPU ÷ scale 1 | memory ÷ scale 1 | alone s | alone peak MB | alone ns a pair | load |');
  md.push('|---:|---:|---:|---:|---:|---:|---:|---:|---:|---:|---:|---:|---:|---:|---:|---:|');
  // A row stopped at the cap shows its time and memory so far as lower bounds.
  const wall = (r: GrowthRow): string =>
    r.capped ? `> ${s1(r.replayWallMs)} (stopped)` : r.replayRunsMs ? `${s1(r.replayWallMs)} (${r.replayRunsMs.map((ms) => s1(ms)).join(', ')})` : s1(r.replayWallMs);
  const peak = (r: GrowthRow): string => (r.capped ? `≥ ${f1(r.replayRssMb)}` : f1(r.replayRssMb));
  const ge = (r: GrowthRow): string => (r.capped ? '> ' : '');
  const cpu = (r: GrowthRow): string => (r.capped ? '–' : s1(r.replayCpuMs));
  for (const r of g.byScale) {
    md.push(`| ${r.scale} | ${int(r.demandUnits)} | ${int(r.supplyUnits)} | ${int(r.pairsPriced)} | ${int(r.pairsSolved)} | ${int(r.pricingRounds)} | ${wall(r)} | ${cpu(r)} | ${peak(r)} | ` +
      `${ge(r)}${f2(r.replayWallMs / base.replayWallMs)}× | ${r.capped ? '–' : `${f2((r.replayCpuMs ?? NaN) / (base.replayCpuMs ?? NaN))}×`} | ` +
      `${r.capped ? '≥ ' : ''}${f2((r.replayRssMb ?? NaN) / (base.replayRssMb ?? NaN))}× | ${s1(r.alone?.ms)} | ${f1(r.alone?.rssMb)} | ${Number.isFinite(nsPerPair(r)) ? Math.round(nsPerPair(r)) : '–'} | ${f1(r.load)} |`);
  }
  md.push('');
  md.push('"alone ns a pair": that run\'s thread time over its allowed pairs, all phases: what the exact hindsight costs a pair as the density grows (the pairs grow with the square of the units).');
  md.push('');
  md.push('Where the hindsight\'s time went (alone, s of thread time): ' + g.byScale.filter((r) => r.alone).map((r) => `scale ${r.scale}: ${phaseLine(r.alone!.phases)}`).join('; ') + '.');
  md.push('');
  md.push(`${g.byDays[0] ? `At scale ${g.byDays[0].scale}` : ''}, \`pairflow gen --days N --seed 1\`:`);
  md.push('');
  md.push('| days | demand | supply | allowed pairs | pairs solved | pricing rounds | wall s | CPU s | peak MB | alone s | load |');
  md.push('|---:|---:|---:|---:|---:|---:|---:|---:|---:|---:|---:|');
  for (const r of g.byDays) {
    md.push(`| ${r.days} | ${int(r.demandUnits)} | ${int(r.supplyUnits)} | ${int(r.pairsPriced)} | ${int(r.pairsSolved)} | ${int(r.pricingRounds)} | ${wall(r)} | ${cpu(r)} | ${peak(r)} | ${s1(r.alone?.ms)} | ${f1(r.load)} |`);
  }
  if ([...g.byScale, ...g.byDays].some((r) => r.capped)) {
    md.push('');
    md.push(`"(stopped)": the replay did not finish within the cap (\`--growth-cap\`) and was stopped there; its counts are unknown, its time and memory are lower bounds.`);
  }
  const last = g.byDays[g.byDays.length - 1];
  if (last?.alone) {
    md.push('');
    md.push(`Where the hindsight's time went (${last.days} days, alone): ${phaseLine(last.alone.phases)}.`);
  }
  if (targets) md.push('', ...targets);
  md.push('');
  return md;
}

/** The density and length targets of the growth tables. */
function targetsOf(g: GrowthResult): string[] {
  const ok = (pass: boolean | null): string => (pass === null ? 'not measured' : pass ? 'met' : 'MISSED');
  const s1r = g.byScale.find((r) => r.scale === 1);
  const s4r = g.byScale.find((r) => r.scale === 4);
  const week = g.byDays.find((r) => r.days === 7);
  const time = s1r && s4r ? s4r.replayWallMs / s1r.replayWallMs : null;
  // Run k of scale 4 over run k of scale 1 (they ran in the same round): how far one run's noise moves the ratio.
  const paired = s1r?.replayRunsMs && s4r?.replayRunsMs && s1r.replayRunsMs.length === s4r.replayRunsMs.length
    ? s4r.replayRunsMs.map((ms, k) => ms / s1r.replayRunsMs![k]!).sort((x, y) => x - y)
    : null;
  const spread = paired ? `, round by round ${f2(paired[0]!)}–${f2(paired[paired.length - 1]!)}×` : '';
  const mem = s1r && s4r && s1r.replayRssMb && s4r.replayRssMb ? s4r.replayRssMb / s1r.replayRssMb : null;
  // The same in CPU time (every thread): what the scale-4 day costs beside scale 1 whatever the cores.
  const cpuRatio = s1r && s4r ? (s4r.replayCpuMs ?? NaN) / (s1r.replayCpuMs ?? NaN) : NaN;
  const inCpu = Number.isFinite(cpuRatio) ? `; in CPU time ${f2(cpuRatio)}×` : '';
  // And per allowed pair (the hindsight alone): the units grow 4×, the pairs about 16×.
  const perPair = s1r && s4r ? nsPerPair(s4r) / nsPerPair(s1r) : NaN;
  const inPairs = Number.isFinite(perPair) ? `; the hindsight's thread time per allowed pair ${f2(perPair)}× scale 1's, for ${f1(s4r!.pairsPriced / s1r!.pairsPriced)}× the pairs` : '';
  return [
    `Targets: one day at scale 4 ≤ 5× the time of scale 1 — ${f2(time)}× (${ok(time === null ? null : time <= 5)}${spread}${inCpu}${inPairs}), ≤ 4× the memory — ${f2(mem)}× (${ok(mem === null ? null : mem <= 4)}); ` +
      `7 days at scale 4, replay with the exact hindsight ≤ 4 min — ${week?.capped ? '> ' : ''}${s1(week?.replayWallMs)} s (${ok(week ? week.replayWallMs <= 240_000 && !week.capped : null)}) and ≤ 4 GB — ${week?.capped ? '≥ ' : ''}${f1(week?.replayRssMb)} MB (${ok(week?.replayRssMb ? week.replayRssMb <= 4096 : null)}); ` +
      `the demo week's hindsight (scale 1, alone, as the sweep computes it) ≤ 20 s — ${s1(g.demoWeekHindsightMs)} s (${ok(Number.isFinite(g.demoWeekHindsightMs) ? g.demoWeekHindsightMs! <= 20_000 : null)}).`,
  ];
}

/** Title line that starts each growth part of the section (`### …`, with a suffix when a run is compared with another). */
const GROWTH_TITLE = '### Growth with density and with length';

/**
 * Replaces the bench:replay section of docs/benchmarks.md (creating the file or the
 * section) and returns what was written. With `keepGrowth` (a run without the growth
 * tables, `--no-growth`), the growth parts already in the section are kept as that
 * earlier run wrote them, each still carrying its own run line, after the new tables.
 */
export function writeSection(markdown: string, doc = DOC, keepGrowth = false): string {
  let text = existsSync(doc) ? readFileSync(doc, 'utf8') : '# Benchmarks\n\nTables below are written by the benchmarks themselves (`npm run bench:*`); nobody types them in.\n';
  const a = text.indexOf(START);
  const b = text.indexOf(END);
  if (keepGrowth && a >= 0 && b > a) {
    const kept = splitParts(text.slice(a + START.length, b)).parts.filter((p) => p.startsWith(GROWTH_TITLE));
    if (kept.length > 0 && markdown.endsWith(END)) {
      markdown = `${markdown.slice(0, markdown.length - END.length).trimEnd()}\n\n${kept.map((p) => p.trimEnd()).join('\n\n')}\n${END}`;
    }
  }
  if (a >= 0 && b > a) text = text.slice(0, a) + markdown + text.slice(b + END.length);
  else text = `${text.trimEnd()}\n\n<!-- bench:replay -->\n${markdown}\n`;
  writeFileSync(doc, text);
  return markdown;
}

const isMain = process.argv[1] !== undefined && fileURLToPath(import.meta.url) === process.argv[1];
if (isMain) {
  const args = process.argv.slice(2);
  const value = (flag: string): string | undefined => {
    const i = args.indexOf(flag);
    return i >= 0 ? args[i + 1] : undefined;
  };
  const beforeFile = value('--before');
  const root = value('--root');
  const label = value('--label');
  const result = runReplayBench({
    quick: args.includes('--quick'),
    write: !args.includes('--no-write'),
    growth: !args.includes('--no-growth'),
    ...(value('--growth-cap') !== undefined ? { growthCapS: Number(value('--growth-cap')) } : {}),
    before: beforeFile ? (JSON.parse(readFileSync(beforeFile, 'utf8')) as GrowthResult) : null,
    ...(root ? { root } : {}),
    ...(label ? { label } : {}),
  });
  const out = value('--json-out');
  if (out && result.growth) writeFileSync(out, `${JSON.stringify(result.growth, null, 1)}\n`);
  process.stdout.write(`${result.markdown}\n`);
}
