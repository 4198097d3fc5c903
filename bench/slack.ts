/**
 * `npm run bench:slack`: how far the allowed pairs of a dense market stand from pricing
 * out under the hindsight optimum's final prices, and how many of them a bound per
 * place-and-time bucket would still have to read. The question behind it: can an exact
 * hindsight avoid touching every allowed pair (whose number grows with the square of
 * density), by proving whole groups of pairs unable to price out at once?
 *
 *   tsx bench/slack.ts [--quick] [--no-write] [--scales 1,4]
 *
 * `--quick` (what `npm test` smoke-runs) measures a tiny city in a temporary folder and writes nothing.
 *
 * For each scale, the 1-day generated city (`pairflow gen --days 1 --seed 1 --scale S`,
 * kept in bench/out like bench:replay's logs), its market with the most occurrences,
 * solved exactly with its proof (the full allowed graph, the final prices u per demand
 * and v per supply). A pair's slack is its reduced cost `c − u_d − v_s` (≥ 0 for every
 * pair: that is the certificate). A bucket holds the supplies of one square cell of
 * side `cell` km that arrive within one time slice of `slice` minutes; for demand d
 * and bucket B every pair has `c ≥ travel(d, nearest point of B)` (the wait term is
 * ≥ 0) and `v_s ≤ max_B v`, so `travel − u_d − max_B v ≥ 0` proves all of d's pairs
 * into B at once. "Pairs to read" are the pairs in (demand, bucket) groups this bound
 * does not clear. Distances to a cell use a flat projection at the market's mean
 * latitude shrunk by 1 % (at city scale the projection is within a fraction of that
 * of the haversine distance), so the share is if anything too low — a measurement
 * of what such a bound could skip, not a proof used by the solve.
 */

import { existsSync, mkdirSync, mkdtempSync } from 'node:fs';
import { loadavg, tmpdir } from 'node:os';
import { join } from 'node:path';
import { fileURLToPath } from 'node:url';
import { spawnSync } from 'node:child_process';

import { loadLog } from '../src/consume/index.js';
import { solveSparse } from '../src/matching/index.js';
import { DEFAULT_CONFIG, type PairflowConfig } from '../src/model.js';
import { packMarket } from '../src/hindsight/graph.js';
import { occurrencesByMarket } from '../src/hindsight/hindsight.js';
import { solvePackedMarket } from '../src/hindsight/solve.js';
import { buildOccurrences } from '../src/window/occurrences.js';
import { machineInfo, writeSection } from './lib/report.js';

const ROOT = fileURLToPath(new URL('..', import.meta.url));
const DOC = join(ROOT, 'docs', 'benchmarks.md');

/** Slack bands (minutes): [0, 0.5), [0.5, 1), [1, 2), [2, 4), [4, 8), [8, ∞). */
export const BANDS = [0.5, 1, 2, 4, 8] as const;
/** Bucket shapes measured: cell side in km, time slice in minutes (each nested in the next, so a coarser one never clears more). */
export const BUCKETS = [
  { cellKm: 0.5, sliceMin: 10 },
  { cellKm: 1, sliceMin: 20 },
  { cellKm: 2, sliceMin: 40 },
] as const;

/** The final prices of one market's hindsight optimum, with its allowed pairs and places. */
export interface SlackInput {
  /** Pairs of demand d: `colIdx/cost[rowPtr[d] .. rowPtr[d + 1])`. */
  readonly rowPtr: Int32Array;
  readonly colIdx: Int32Array;
  readonly cost: Float64Array;
  readonly u: Float64Array;
  readonly v: Float64Array;
  /** Demand and supply places in km on a flat plane, and supply arrival times in ms. */
  readonly demandX: Float64Array;
  readonly demandY: Float64Array;
  readonly supplyX: Float64Array;
  readonly supplyY: Float64Array;
  readonly supplyT: Float64Array;
  /** km per minute of travel. */
  readonly kmPerMin: number;
}

export interface SlackFigures {
  readonly pairs: number;
  /** Share of pairs per slack band (BANDS, then the rest). */
  readonly bandShare: number[];
  /** Per bucket shape: share of pairs in groups the bound does not clear, and (demand, bucket) groups per pair. */
  readonly buckets: Array<{ cellKm: number; sliceMin: number; readShare: number; groupsPerPair: number }>;
}

/** The slack bands and bucket-bound shares of {@link SlackInput} (pure). */
export function slackFigures(inp: SlackInput, shrink = 0.99): SlackFigures {
  const { rowPtr, colIdx, cost, u, v } = inp;
  const nRows = rowPtr.length - 1;
  const pairs = rowPtr[nRows]!;
  const band = new Float64Array(BANDS.length + 1);
  for (let d = 0; d < nRows; d++) {
    for (let e = rowPtr[d]!; e < rowPtr[d + 1]!; e++) {
      const s = cost[e]! - u[d]! - v[colIdx[e]!]!;
      let b = 0;
      while (b < BANDS.length && s >= BANDS[b]!) b++;
      band[b]!++;
    }
  }
  let tMin = Infinity;
  for (let s = 0; s < inp.supplyT.length; s++) tMin = Math.min(tMin, inp.supplyT[s]!);
  const buckets = BUCKETS.map(({ cellKm, sliceMin }) => {
    const ix = (x: number): number => Math.floor(x / cellKm);
    const sliceMs = sliceMin * 60_000;
    // A bucket's key: cell column, cell row, time slice, each below 2^17.
    const keyOf = (s: number): number => ((ix(inp.supplyX[s]!) & 0x1ffff) * 131072 + (ix(inp.supplyY[s]!) & 0x1ffff)) * 131072 + Math.floor((inp.supplyT[s]! - tMin) / sliceMs);
    const maxV = new Map<number, number>();
    for (let s = 0; s < inp.supplyT.length; s++) {
      const k = keyOf(s);
      const cur = maxV.get(k);
      if (cur === undefined || v[s]! > cur) maxV.set(k, v[s]!);
    }
    let read = 0;
    let groups = 0;
    const seen = new Map<number, boolean>();
    for (let d = 0; d < nRows; d++) {
      seen.clear();
      const dx = inp.demandX[d]!;
      const dy = inp.demandY[d]!;
      for (let e = rowPtr[d]!; e < rowPtr[d + 1]!; e++) {
        const s = colIdx[e]!;
        const k = keyOf(s);
        let open = seen.get(k);
        if (open === undefined) {
          const cx = ix(inp.supplyX[s]!);
          const cy = ix(inp.supplyY[s]!);
          const gx = Math.max(0, cx * cellKm - dx, dx - (cx + 1) * cellKm);
          const gy = Math.max(0, cy * cellKm - dy, dy - (cy + 1) * cellKm);
          const travel = (Math.hypot(gx, gy) * shrink) / inp.kmPerMin;
          open = travel - u[d]! - maxV.get(k)! < 0;
          seen.set(k, open);
          groups++;
        }
        if (open) read++;
      }
    }
    return { cellKm, sliceMin, readShare: pairs > 0 ? read / pairs : 0, groupsPerPair: pairs > 0 ? groups / pairs : 0 };
  });
  return { pairs, bandShare: Array.from(band, (x) => (pairs > 0 ? x / pairs : 0)), buckets };
}

/** The largest market of a log, solved with its proof, as {@link SlackInput}. */
async function inputOf(file: string, config: PairflowConfig): Promise<{ market: string; demand: number; input: SlackInput }> {
  const { events } = await loadLog([file], { metric: config.metric });
  const byMarket = occurrencesByMarket(buildOccurrences(events, config).occurrences);
  const [market, list] = [...byMarket].sort((a, b) => b[1].length - a[1].length || (a[0] < b[0] ? -1 : 1))[0]!;
  const m = packMarket(list, config);
  const res = solvePackedMarket(market, m, config, solveSparse, {}, true);
  const { graph, rowDuals, colDuals } = res.detail!;
  let lat0 = 0;
  for (let d = 0; d < m.nDemand; d++) lat0 += m.demandA[d]!;
  lat0 /= Math.max(1, m.nDemand);
  // Flat projection (km) at the mean latitude: x east, y north.
  const kx = 111.32 * Math.cos((lat0 * Math.PI) / 180);
  const ky = 110.57;
  const flat = (a: Float64Array, k: number): Float64Array => a.map((x) => x * k);
  const euclid = config.metric === 'euclidean';
  return {
    market,
    demand: m.nDemand,
    input: {
      rowPtr: graph.rowPtr,
      colIdx: graph.colIdx,
      cost: graph.cost,
      u: rowDuals,
      v: colDuals,
      demandX: euclid ? m.demandA : flat(m.demandB, kx),
      demandY: euclid ? m.demandB : flat(m.demandA, ky),
      supplyX: euclid ? m.supplyA : flat(m.supplyB, kx),
      supplyY: euclid ? m.supplyB : flat(m.supplyA, ky),
      supplyT: m.supplyT,
      kmPerMin: config.speedKmh / 60,
    },
  };
}

function ensureLog(scale: number, dir: string): string {
  mkdirSync(dir, { recursive: true });
  const file = join(dir, `city-1d-s${scale}.jsonl.gz`);
  if (!existsSync(file)) {
    const r = spawnSync(process.execPath, [join(ROOT, 'bin', 'pairflow.js'), 'gen', '--days', '1', '--seed', '1', '--scale', String(scale), '--out', file], { encoding: 'utf8' });
    if (r.status !== 0) throw new Error(`pairflow gen exited ${r.status}: ${r.stderr}`);
  }
  return file;
}

const pct = (x: number): string => `${(100 * x).toFixed(1)} %`;

/** Runs the bench over `scales` (logs kept in `outDir`, default bench/out) and returns its markdown. */
export async function runSlackBench(opts: { scales: number[]; write: boolean; outDir?: string }): Promise<string> {
  const config: PairflowConfig = { ...DEFAULT_CONFIG, windowMs: 10_000 };
  const machine = machineInfo();
  const rows: string[] = [];
  const near: string[] = [];
  for (const scale of opts.scales) {
    const { market, demand, input } = await inputOf(ensureLog(scale, opts.outDir ?? join(ROOT, 'bench', 'out')), config);
    const f = slackFigures(input);
    near.push(`scale ${scale}: ${pct(f.bandShare[0]! + f.bandShare[1]!)} within 1 min, ${f.buckets.map((b) => `${pct(b.readShare)} read at ${b.cellKm} km × ${b.sliceMin} min`).join(', ')}`);
    rows.push(`| ${scale} | ${market} | ${demand} | ${f.pairs} | ${f.bandShare.map(pct).join(' | ')} | ${f.buckets.map((b) => `${pct(b.readShare)} (${b.groupsPerPair.toFixed(2)})`).join(' | ')} |`);
    process.stderr.write(`bench:slack: scale ${scale} done\n`);
  }
  const md = [
    '## Slack of the allowed pairs under the hindsight prices (`npm run bench:slack`)',
    '',
    `Run ${new Date().toISOString().slice(0, 16).replace('T', ' ')} UTC on ${machine.cpu} (${machine.cores} cores), Node ${machine.node}; 1-minute load ${machine.loadAtStart.toFixed(2)} at the start, ${(loadavg()[0] ?? 0).toFixed(2)} at the end. ` +
      'One day of the generated city at each scale (`pairflow gen --days 1 --seed 1 --scale S`), its market with the most occurrences, default config. ' +
      'Slack = `c − u_d − v_s` under the exact optimum\'s final prices (every pair ≥ 0: the certificate), as a share of the allowed pairs per band (minutes). ' +
      '"read" = share of pairs a bound per bucket (a square cell of the given side × a time slice of supply arrivals: nearest-point travel − u_d − the bucket\'s highest v) does not clear, with (demand, bucket) groups per pair in brackets — see bench/slack.ts.',
    '',
    `| scale | market | demand | allowed pairs | < 0.5 | 0.5–1 | 1–2 | 2–4 | 4–8 | ≥ 8 | ${BUCKETS.map((b) => `read, ${b.cellKm} km × ${b.sliceMin} min`).join(' | ')} |`,
    `|---|---|---|---|---|---|---|---|---|---|${BUCKETS.map(() => '---').join('|')}|`,
    ...rows,
    '',
    `In short — ${near.join('; ')}. The shares do not fall as the market gets denser: the pairs such a bound leaves to read grow as the allowed pairs do (with the square of density), so it would cut the work by a constant factor, not its growth.`,
  ].join('\n');
  if (opts.write) writeSection(DOC, 'slack', md);
  return md;
}

const isMain = process.argv[1] !== undefined && fileURLToPath(import.meta.url) === process.argv[1];
if (isMain) {
  const args = process.argv.slice(2);
  const at = args.indexOf('--scales');
  const quick = args.includes('--quick');
  const scales = at >= 0 ? args[at + 1]!.split(',').map(Number) : quick ? [0.02] : [1, 4];
  const md = await runSlackBench({ scales, write: !quick && !args.includes('--no-write'), ...(quick ? { outDir: mkdtempSync(join(tmpdir(), 'pairflow-slack-')) } : {}) });
  process.stdout.write(`${md}\n`);
}
