/**
 * The report's figures, derived from the loaded directories: headline rows with their
 * sentences, the split of the regret, the hourly and daily tables, distributions,
 * work per supply unit, map cells, the match ceiling and its cover, the sweep and
 * the paired comparisons. Pure: plain data in, plain data out (charts and HTML are
 * drawn from these elsewhere).
 */
import { bucketOf, bucketPlan, type BucketPlan } from '../replay/buckets.js';
import { cellCentre, CELL_COLUMNS, HOUR_COLUMNS, SUPPLY_COLUMNS, type CellGrid, type RunDigest } from '../replay/digest.js';
import { formatWindow } from '../replay/summary.js';
import { pairedDifference, type PairedDifference } from '../sweep/bootstrap.js';
import type { SweepPolicy, SweepResult } from '../sweep/sweep.js';
import type { RunManifest } from '../emit/manifest.js';
import type { ReportInput, SweepInput } from './load.js';
import { gini, lorenz, topShare, type Bin } from './stats.js';
import { hourSpan, int, num, pct, plural } from './text.js';

const HOUR_MS = 3_600_000;
const DAY_MS = 24 * HOUR_MS;

/** One headline row: overall or one market. */
export interface Headline {
  /** null for the whole run. */
  market: string | null;
  demand: number;
  online: { cost: number; matched: number; abandoned: number; meanWaitMin: number | null; p95WaitMin: number | null };
  hindsight: { cost: number; matched: number; abandoned: number } | null;
  regret: number | null;
  ratio: number | null;
  sentence: string;
}

/** Cost split by cause. */
export interface CostSplit {
  travel: number;
  wait: number;
  abandon: number;
}

/** One row of the digest's hour table, by name. */
export interface HourRow {
  market: string;
  hour: number;
  demand: number;
  matched: number;
  abandoned: number;
  travelCost: number;
  waitCost: number;
  abandonCost: number;
  waitMin: number;
  hMatched: number;
  hAbandoned: number;
  hTravelCost: number;
  hWaitCost: number;
  hAbandonCost: number;
}

export interface CellRow {
  market: string;
  cx: number;
  cy: number;
  hourOfDay: number;
  demand: number;
  supply: number;
  abandoned: number;
  priceCount: number;
  priceSum: number;
  coverDemand: number;
  coverSupply: number;
}

export interface SupplyRow {
  market: string;
  id: string;
  occurrences: number;
  assignments: number;
  travelMin: number;
}

/** What the report shows for one run: a replay directory, or the recommended policy of a sweep. */
export interface RunView {
  /** Unique, safe in HTML ids and file names. */
  key: string;
  title: string;
  dir: string;
  kind: 'replay' | 'sweep';
  /** Where the headline numbers come from. */
  figuresFile: string;
  policy: SweepPolicy;
  headline: Headline[];
  hasHindsight: boolean;
  digest: RunDigest | null;
  manifest: RunManifest | null;
  /** sha256 of the inputs, sorted: runs with the same key replayed the same log. */
  inputsKey: string | null;
  ceiling: number | null;
  hours: HourRow[];
  cells: CellRow[];
  supply: SupplyRow[];
  /** For a sweep's policy: its cost per sweep bucket (same plan as its sweep). */
  sweepBuckets: { plan: BucketPlan; costs: number[] } | null;
}

function rows<T>(table: { columns: readonly string[]; rows: Array<Array<number | string>> }, expected: readonly string[]): T[] {
  const idx = expected.map((c) => table.columns.indexOf(c));
  return table.rows.map((r) => {
    const o: Record<string, number | string> = {};
    expected.forEach((c, i) => { o[c] = r[idx[i]!]!; });
    return o as T;
  });
}

const sum = <T>(xs: readonly T[], f: (x: T) => number): number => xs.reduce((s, x) => s + f(x), 0);

/** The online and hindsight cost split of some hour rows. */
export function splitOf(hours: readonly HourRow[]): { online: CostSplit; hindsight: CostSplit } {
  return {
    online: { travel: sum(hours, (h) => h.travelCost), wait: sum(hours, (h) => h.waitCost), abandon: sum(hours, (h) => h.abandonCost) },
    hindsight: { travel: sum(hours, (h) => h.hTravelCost), wait: sum(hours, (h) => h.hWaitCost), abandon: sum(hours, (h) => h.hAbandonCost) },
  };
}

const COMPONENT_WORDS: Record<keyof CostSplit, string> = { travel: 'longer travel', wait: 'longer waiting', abandon: 'abandoned orders' };

/** The sentence of a headline row. */
function sentenceFor(h: Omit<Headline, 'sentence'>, split: { online: CostSplit; hindsight: CostSplit } | null, where: string | null): string {
  const o = h.online;
  const served = h.demand > 0 ? `${plural(o.abandoned, 'order')} of ${int(h.demand)} (${pct(o.abandoned / h.demand)}) went unserved` : 'no orders arrived';
  const waits = o.meanWaitMin !== null ? `; orders waited ${num(o.meanWaitMin, 2)} min on average, 95 % within ${num(o.p95WaitMin, 2)} min` : '';
  if (h.market !== null) {
    if (h.hindsight === null || h.ratio === null) return `${h.market}: cost ${num(o.cost)}; ${served}${waits}.`;
    return `${h.market}: ${h.ratio >= 1 ? `${pct(h.ratio - 1)} above` : `${pct(1 - h.ratio)} below`} the hindsight optimum; ${served}${waits}.`;
  }
  if (h.hindsight === null || h.regret === null) {
    return `The online policy cost ${num(o.cost)} minutes-equivalent; ${served}. The hindsight optimum was not computed (replay without --no-hindsight to see the gap).`;
  }
  if (h.ratio === null) return `The online policy cost ${num(o.cost)} where the best possible in hindsight cost 0.`;
  if (h.regret <= Math.abs(h.hindsight.cost) * 1e-9) return `The online policy cost exactly what the best possible in hindsight cost (${num(o.cost)} minutes-equivalent).`;
  let gap = '';
  if (split) {
    const parts = (Object.keys(COMPONENT_WORDS) as Array<keyof CostSplit>).map((k) => ({ k, d: split.online[k] - split.hindsight[k] }));
    const top = parts.reduce((a, b) => (b.d > a.d ? b : a));
    if (top.d > 0) {
      const extra = top.k === 'abandon' ? ` (${int(o.abandoned - h.hindsight.abandoned)} more left unserved)` : '';
      gap = `; most of the gap is ${COMPONENT_WORDS[top.k]}${extra}, ${pct(top.d / h.regret)} of it${where ? `, above all in ${where}` : ''}`;
    }
  }
  return `The online policy cost ${pct(h.ratio - 1)} more than the best possible in hindsight (${num(o.cost)} against ${num(h.hindsight.cost)} minutes-equivalent)${gap}.`;
}

function inputsKeyOf(m: RunManifest | null): string | null {
  if (!m || !Array.isArray(m.inputs) || m.inputs.length === 0) return null;
  return m.inputs.map((i) => i.sha256).sort().join(',');
}

function safeKey(text: string, used: Set<string>): string {
  let k = text.toLowerCase().replace(/[^a-z0-9]+/g, '-').replace(/^-+|-+$/g, '') || 'run';
  const base = k;
  for (let i = 2; used.has(k); i++) k = `${base}-${i}`;
  used.add(k);
  return k;
}

/** Headline rows of a run from its overall figures and its digest's per-market tables. */
function headlines(
  overall: Omit<Headline, 'sentence' | 'market'>,
  markets: Array<Omit<Headline, 'sentence'>>,
  hours: readonly HourRow[],
): Headline[] {
  const split = hours.length > 0 ? splitOf(hours) : null;
  // Where the regret is largest, named when there are several markets.
  let where: string | null = null;
  if (markets.length > 1 && markets.every((m) => m.regret !== null)) {
    where = markets.reduce((a, b) => ((b.regret ?? 0) > (a.regret ?? 0) ? b : a)).market;
  }
  const all = { ...overall, market: null };
  return [
    { ...all, sentence: sentenceFor(all, split, where) },
    ...markets.map((m) => ({ ...m, sentence: sentenceFor(m, null, null) })),
  ];
}

function regretAndRatio(online: number, hindsight: number | null): { regret: number | null; ratio: number | null } {
  if (hindsight === null) return { regret: null, ratio: null };
  return { regret: online - hindsight, ratio: hindsight !== 0 ? online / hindsight : online === 0 ? 1 : null };
}

/** The views of the report: every replay directory, and the recommended policy of every sweep. */
export function runViews(inputs: readonly ReportInput[]): RunView[] {
  const used = new Set<string>();
  const out: RunView[] = [];
  for (const input of inputs) {
    if (input.kind === 'replay') {
      const s = input.summary;
      const d = input.digest;
      const hours = d ? rows<HourRow>(d.hours, HOUR_COLUMNS) : [];
      const waitsByMarket = new Map((d?.markets ?? []).map((m) => [m.market, m]));
      const markets = s.markets.map((m) => ({
        market: m.market,
        demand: m.online.matched + m.online.abandoned,
        online: {
          ...m.online,
          meanWaitMin: waitsByMarket.get(m.market)?.online.meanWaitMin ?? null,
          p95WaitMin: waitsByMarket.get(m.market)?.online.p95WaitMin ?? null,
        },
        hindsight: m.hindsight,
        ...regretAndRatio(m.online.cost, m.hindsight?.cost ?? null),
      }));
      out.push({
        key: safeKey(input.name, used),
        title: input.name,
        dir: input.dir,
        kind: 'replay',
        figuresFile: 'summary.json',
        policy: { windowMs: s.windowMs, reserve: input.manifest?.config?.reserve ?? null, commit: s.commit },
        headline: headlines({
          demand: s.demandUnits,
          online: { ...s.online },
          hindsight: s.hindsight ? { cost: s.hindsight.cost, matched: s.hindsight.matched, abandoned: s.hindsight.abandoned } : null,
          regret: s.regret,
          ratio: s.ratio,
        }, markets, hours),
        hasHindsight: s.hindsight !== null,
        digest: d,
        manifest: input.manifest,
        inputsKey: inputsKeyOf(input.manifest),
        ceiling: s.hindsight?.ceiling ?? null,
        hours,
        cells: d ? rows<CellRow>(d.cells, CELL_COLUMNS) : [],
        supply: d ? rows<SupplyRow>(d.supply, SUPPLY_COLUMNS) : [],
        sweepBuckets: null,
      });
    } else {
      out.push(sweepPolicyView(input, input.sweep.policies.findIndex((p) => p.label === input.sweep.recommendation.label), used));
    }
  }
  return out;
}

/** The view of one policy of a sweep (the report details the recommended one). */
export function sweepPolicyView(input: SweepInput, index: number, used: Set<string> = new Set()): RunView {
  const sw = input.sweep;
  const p = sw.policies[index]!;
  const d = input.digests[index] ?? null;
  const hours = d ? rows<HourRow>(d.hours, HOUR_COLUMNS) : [];
  const byMarket = new Map<string, HourRow[]>();
  for (const h of hours) {
    let l = byMarket.get(h.market);
    if (!l) byMarket.set(h.market, (l = []));
    l.push(h);
  }
  const waitsByMarket = new Map((d?.markets ?? []).map((m) => [m.market, m]));
  const markets = [...byMarket.keys()].sort().map((market) => {
    const hs = byMarket.get(market)!;
    const sp = splitOf(hs);
    const online = sp.online.travel + sp.online.wait + sp.online.abandon;
    const hind = sp.hindsight.travel + sp.hindsight.wait + sp.hindsight.abandon;
    return {
      market,
      demand: sum(hs, (h) => h.demand),
      online: {
        cost: online, matched: sum(hs, (h) => h.matched), abandoned: sum(hs, (h) => h.abandoned),
        meanWaitMin: waitsByMarket.get(market)?.online.meanWaitMin ?? null, p95WaitMin: waitsByMarket.get(market)?.online.p95WaitMin ?? null,
      },
      hindsight: { cost: hind, matched: sum(hs, (h) => h.hMatched), abandoned: sum(hs, (h) => h.hAbandoned) },
      ...regretAndRatio(online, hind),
    };
  });
  const plan: BucketPlan = { unit: sw.buckets.unit, unitMs: sw.buckets.unitMs, origin: sw.buckets.origin, count: sw.buckets.hindsight.length };
  return {
    key: safeKey(`${input.name} ${p.label}`, used),
    title: `${input.name}: ${p.label}${p.label === sw.recommendation.label ? ' (recommended)' : ''}`,
    dir: input.dir,
    kind: 'sweep',
    figuresFile: 'sweep.json',
    policy: p.policy,
    headline: headlines({
      demand: sw.demandUnits,
      online: { ...p.online },
      hindsight: { cost: sw.hindsight.cost, matched: sw.hindsight.matched, abandoned: sw.hindsight.abandoned },
      regret: p.regret,
      ratio: p.ratio,
    }, markets, hours),
    hasHindsight: true,
    digest: d,
    manifest: input.manifest,
    inputsKey: inputsKeyOf(input.manifest),
    ceiling: sw.hindsight.ceiling,
    hours,
    cells: d ? rows<CellRow>(d.cells, CELL_COLUMNS) : [],
    supply: d ? rows<SupplyRow>(d.supply, SUPPLY_COLUMNS) : [],
    sweepBuckets: { plan, costs: sw.buckets.policies[index]! },
  };
}

/** How a policy reads in prose: `window 5s, reserve P, commit all`. */
export function policyWords(p: SweepPolicy): string {
  return `window ${formatWindow(p.windowMs)}, reserve ${p.reserve === null ? 'P (= abandon penalty)' : String(p.reserve)}, commit ${p.commit}`;
}

// ---------------------------------------------------------------- regret by time

/** Regret components of some hours: online minus hindsight, per cause. */
export interface RegretRow {
  /** Hour of day (0..23) or day start (ms), by the table. */
  at: number;
  travel: number;
  wait: number;
  abandon: number;
  online: number;
  hindsight: number;
}

function regretRows(hours: readonly HourRow[], keyOf: (h: HourRow) => number): RegretRow[] {
  const m = new Map<number, RegretRow>();
  for (const h of hours) {
    const k = keyOf(h);
    let r = m.get(k);
    if (!r) m.set(k, (r = { at: k, travel: 0, wait: 0, abandon: 0, online: 0, hindsight: 0 }));
    r.travel += h.travelCost - h.hTravelCost;
    r.wait += h.waitCost - h.hWaitCost;
    r.abandon += h.abandonCost - h.hAbandonCost;
    r.online += h.travelCost + h.waitCost + h.abandonCost;
    r.hindsight += h.hTravelCost + h.hWaitCost + h.hAbandonCost;
  }
  return [...m.values()].sort((a, b) => a.at - b.at);
}

/** Regret by UTC hour of day (summed over days). */
export function regretByHourOfDay(hours: readonly HourRow[]): RegretRow[] {
  return regretRows(hours, (h) => ((Math.floor(h.hour / HOUR_MS) % 24) + 24) % 24);
}

/** Regret by UTC day. */
export function regretByDay(hours: readonly HourRow[]): RegretRow[] {
  return regretRows(hours, (h) => Math.floor(h.hour / DAY_MS) * DAY_MS);
}

/** The sentence under the regret charts: the split and the worst hour. */
export function regretSentence(view: RunView): string {
  const sp = splitOf(view.hours);
  const d = { travel: sp.online.travel - sp.hindsight.travel, wait: sp.online.wait - sp.hindsight.wait, abandon: sp.online.abandon - sp.hindsight.abandon };
  const total = d.travel + d.wait + d.abandon;
  if (!(Math.abs(total) > 0)) return 'There is no regret to split.';
  const byHour = regretByHourOfDay(view.hours);
  const worst = byHour.reduce((a, b) => (b.travel + b.wait + b.abandon > a.travel + a.wait + a.abandon ? b : a));
  const worstTotal = worst.travel + worst.wait + worst.abandon;
  const o = view.headline[0]!;
  const more = o.hindsight ? o.online.abandoned - o.hindsight.abandoned : 0;
  return `Of the regret of ${num(total)}, abandoned orders make ${pct(d.abandon / total)} (${int(more)} more unserved than in hindsight), ` +
    `travel ${pct(d.travel / total)} and waiting ${pct(d.wait / total)}. The costliest hour of the day was ${hourSpan(worst.at)}, with ${pct(worstTotal / total)} of the regret.`;
}

// ---------------------------------------------------------------- distributions

export interface Distribution {
  measure: 'wait' | 'travel';
  source: 'online' | 'hindsight';
  bins: Bin[];
}

/** Waits and travel times, online and in hindsight, merged into about 40 bins of one width per measure (so their bars line up). */
export function distributions(d: RunDigest, target = 40): Distribution[] {
  const h = d.histograms;
  const out: Distribution[] = [];
  const span = (c: readonly number[] | null): number => {
    if (!c) return 0;
    let i = c.length - 1;
    while (i >= 0 && c[i] === 0) i--;
    return i + 1;
  };
  for (const measure of ['wait', 'travel'] as const) {
    const online = measure === 'wait' ? h.wait : h.travel;
    const hind = measure === 'wait' ? h.hindsightWait : h.hindsightTravel;
    const n = Math.max(span(online), span(hind));
    const f = Math.max(1, Math.ceil(n / target));
    const merged = (c: readonly number[]): Bin[] => {
      const res: Bin[] = [];
      for (let i = 0; i < n; i += f) {
        let k = 0;
        for (let j = i; j < Math.min(i + f, c.length); j++) k += c[j]!;
        res.push({ lo: i * h.binMin, hi: (i + f) * h.binMin, count: k });
      }
      return res;
    };
    out.push({ measure, source: 'online', bins: merged(online) });
    if (hind) out.push({ measure, source: 'hindsight', bins: merged(hind) });
  }
  return out;
}

// ---------------------------------------------------------------- work per supply unit

export interface WorkSpread {
  units: number;
  assignments: number;
  gini: number | null;
  /** Share of assignments done by the busiest tenth of supply units. */
  top10: number | null;
  /** Supply units with no assignment. */
  idle: number;
  /** Supply units by number of assignments (bars). */
  counts: Array<{ lo: number; hi: number; units: number }>;
  lorenz: Array<{ units: number; share: number }>;
  byMarket: Array<{ market: string; units: number; assignments: number; gini: number | null; top10: number | null; idle: number }>;
}

export function workSpread(supply: readonly SupplyRow[]): WorkSpread {
  const a = supply.map((s) => s.assignments);
  const max = a.reduce((m, x) => Math.max(m, x), 0);
  const width = Math.max(1, Math.ceil((max + 1) / 40));
  const counts: WorkSpread['counts'] = [];
  for (let lo = 0; lo <= max; lo += width) counts.push({ lo, hi: lo + width, units: 0 });
  for (const x of a) counts[Math.floor(x / width)]!.units += 1;
  const markets = [...new Set(supply.map((s) => s.market))].sort();
  return {
    units: a.length,
    assignments: sum(a, (x) => x),
    gini: gini(a),
    top10: topShare(a, 0.1),
    idle: a.filter((x) => x === 0).length,
    counts,
    lorenz: lorenz(a),
    byMarket: markets.map((market) => {
      const m = supply.filter((s) => s.market === market).map((s) => s.assignments);
      return { market, units: m.length, assignments: sum(m, (x) => x), gini: gini(m), top10: topShare(m, 0.1), idle: m.filter((x) => x === 0).length };
    }),
  };
}

export function workSentence(w: WorkSpread): string {
  if (w.units === 0) return 'No supply unit appeared.';
  return `Across ${plural(w.units, 'courier')}, the busiest tenth did ${pct(w.top10)} of the ${plural(w.assignments, 'job')} and ` +
    `${plural(w.idle, 'courier')} (${pct(w.idle / w.units)}) got none; the Gini coefficient is ${num(w.gini, 2)} ` +
    `(0 when everyone gets the same, near 1 when one courier gets everything).`;
}

// ---------------------------------------------------------------- maps

/** One square of a map, in km from the map's south-west corner. */
export interface MapCell {
  x0: number;
  x1: number;
  y0: number;
  y1: number;
  /** Centre as lat/lon or x/y (the log's own coordinates). */
  a: number;
  b: number;
  value: number;
  /** Small-multiple panel, e.g. `04:00–08:00`. */
  panel: string;
}

export interface MapLayer {
  cells: MapCell[];
  /** Extent of every layer of the run, so maps line up: km. */
  width: number;
  height: number;
  /** Cells of the digest merged per side into one drawn square. */
  merge: number;
  cellKm: number;
}

/** Hour blocks of the small multiples. */
export const HOUR_BLOCKS = [0, 4, 8, 12, 16, 20].map((h) => ({ from: h, to: h + 4, label: `${String(h).padStart(2, '0')}–${String(h + 4).padStart(2, '0')} h` }));

/** What a map shows, from a cell row's sums. */
export type MapMeasure = 'abandoned' | 'supplyValue' | 'coverSupply' | 'coverDemand' | 'demand';

/**
 * Map cells of a run: the digest's cells merged over markets (a cell is a place) and,
 * where a city has more than `maxSide` cells across, merged into larger squares.
 * With `byBlock`, one panel per 4-hour block of the day.
 */
export function mapLayer(view: RunView, measure: MapMeasure, byBlock = false, maxSide = 60): MapLayer | null {
  const d = view.digest;
  if (!d || view.cells.length === 0) return null;
  const grid: CellGrid = d.grid;
  let minX = Infinity, maxX = -Infinity, minY = Infinity, maxY = -Infinity;
  for (const c of view.cells) {
    minX = Math.min(minX, c.cx);
    maxX = Math.max(maxX, c.cx);
    minY = Math.min(minY, c.cy);
    maxY = Math.max(maxY, c.cy);
  }
  const merge = Math.max(1, Math.ceil(Math.max(maxX - minX + 1, maxY - minY + 1) / maxSide));
  const acc = new Map<string, { gx: number; gy: number; panel: string; n: number; s: number }>();
  for (const c of view.cells) {
    const gx = Math.floor((c.cx - minX) / merge);
    const gy = Math.floor((c.cy - minY) / merge);
    const panel = byBlock ? HOUR_BLOCKS[Math.floor(c.hourOfDay / 4)]!.label : 'all';
    const key = `${gx}|${gy}|${panel}`;
    let a = acc.get(key);
    if (!a) acc.set(key, (a = { gx, gy, panel, n: 0, s: 0 }));
    if (measure === 'supplyValue') {
      a.n += c.priceCount;
      a.s += c.priceSum;
    } else {
      a.n += 1;
      a.s += c[measure];
    }
  }
  const km = grid.cellKm * merge;
  const cells: MapCell[] = [];
  for (const a of acc.values()) {
    const value = measure === 'supplyValue' ? (a.n > 0 ? a.s / a.n : NaN) : a.s;
    if (!Number.isFinite(value) || (measure !== 'supplyValue' && value === 0)) continue;
    const [ca, cb] = cellCentre(grid, minX + a.gx * merge + (merge - 1) / 2, minY + a.gy * merge + (merge - 1) / 2);
    cells.push({ x0: a.gx * km, x1: (a.gx + 1) * km, y0: a.gy * km, y1: (a.gy + 1) * km, a: ca, b: cb, value, panel: a.panel });
  }
  cells.sort((p, q) => (p.panel < q.panel ? -1 : p.panel > q.panel ? 1 : p.y0 - q.y0 || p.x0 - q.x0));
  return {
    cells,
    width: (Math.floor((maxX - minX) / merge) + 1) * km,
    height: (Math.floor((maxY - minY) / merge) + 1) * km,
    merge,
    cellKm: grid.cellKm,
  };
}

// ---------------------------------------------------------------- ceiling and cover

export interface CeilingView {
  demand: number;
  ceiling: number;
  online: number;
  hindsight: number | null;
  coverDemand: number;
  coverSupply: number;
  /** Orders that could reach only the covered couriers (a Hall set): demand − coverDemand. */
  competing: number;
  byHour: Array<{ hour: number; side: 'couriers' | 'orders'; units: number }>;
  sentence: string;
}

export function ceilingView(view: RunView): CeilingView | null {
  if (view.ceiling === null) return null;
  const o = view.headline[0]!;
  const coverDemand = sum(view.cells, (c) => c.coverDemand);
  const coverSupply = sum(view.cells, (c) => c.coverSupply);
  const hasCover = coverDemand + coverSupply > 0 || view.ceiling === 0;
  const byHourMap = new Map<string, { hour: number; side: 'couriers' | 'orders'; units: number }>();
  for (const c of view.cells) {
    for (const [side, units] of [['couriers', c.coverSupply], ['orders', c.coverDemand]] as const) {
      if (units === 0) continue;
      const key = `${c.hourOfDay}|${side}`;
      let r = byHourMap.get(key);
      if (!r) byHourMap.set(key, (r = { hour: c.hourOfDay, side, units: 0 }));
      r.units += units;
    }
  }
  const never = o.demand - view.ceiling;
  const competing = o.demand - coverDemand;
  let sentence = `No policy could have matched more than ${int(view.ceiling)} of the ${plural(o.demand, 'order')}: ` +
    `${int(never)} (${pct(o.demand > 0 ? never / o.demand : 0)}) had no courier left to reach them whatever was done. ` +
    `The online policy matched ${int(o.online.matched)} (${pct(view.ceiling > 0 ? o.online.matched / view.ceiling : 0)} of that ceiling)` +
    `${o.hindsight ? `, the hindsight optimum ${int(o.hindsight.matched)}` : ''}.`;
  if (hasCover) {
    sentence += ` The proof (König's theorem) is a set of ${int(coverSupply + coverDemand)} units that touches every allowed pair: ` +
      `between them, ${plural(competing, 'order')} could reach only ${plural(coverSupply, 'courier')}, ${int(competing - coverSupply)} too few — ` +
      `more couriers where and when those were is what would raise the ceiling — while ${plural(coverDemand, 'order')} had couriers to spare.`;
  }
  return {
    demand: o.demand,
    ceiling: view.ceiling,
    online: o.online.matched,
    hindsight: o.hindsight?.matched ?? null,
    coverDemand,
    coverSupply,
    competing,
    byHour: [...byHourMap.values()].sort((a, b) => a.hour - b.hour || (a.side < b.side ? -1 : 1)),
    sentence,
  };
}

// ---------------------------------------------------------------- sweeps

export interface SweepView {
  input: SweepInput;
  key: string;
  policies: Array<{
    label: string;
    cost: number;
    lo: number | null;
    hi: number | null;
    diff: number;
    diffLo: number | null;
    diffHi: number | null;
    bestShare: number | null;
    recommended: boolean;
  }>;
  hindsightCost: number;
  recommendation: SweepResult['recommendation'];
  /** Runner-up minus recommended, by bucket (the paired difference behind the margin). */
  paired: { unit: 'day' | 'hour'; rows: Array<{ at: number; diff: number }> } | null;
}

export function sweepView(input: SweepInput, key: string): SweepView {
  const sw = input.sweep;
  const rec = sw.recommendation;
  let paired: SweepView['paired'] = null;
  const bi = sw.policies.findIndex((p) => p.label === rec.label);
  const ri = rec.runnerUp === null ? -1 : sw.policies.findIndex((p) => p.label === rec.runnerUp);
  if (bi >= 0 && ri >= 0) {
    const b = sw.buckets.policies[bi]!;
    const r = sw.buckets.policies[ri]!;
    paired = { unit: sw.buckets.unit, rows: b.map((x, k) => ({ at: sw.buckets.origin + k * sw.buckets.unitMs, diff: r[k]! - x })) };
  }
  return {
    input,
    key,
    policies: sw.policies.map((p) => ({
      label: p.label,
      cost: p.online.cost,
      lo: p.interval?.cost[0] ?? null,
      hi: p.interval?.cost[1] ?? null,
      diff: p.vsBest.diff,
      diffLo: p.vsBest.interval?.[0] ?? null,
      diffHi: p.vsBest.interval?.[1] ?? null,
      bestShare: p.bestShare,
      recommended: p.label === rec.label,
    })),
    hindsightCost: sw.hindsight.cost,
    recommendation: rec,
    paired,
  };
}

// ---------------------------------------------------------------- paired runs

export interface PairedRuns {
  a: RunView;
  b: RunView;
  unit: 'day' | 'hour';
  rows: Array<{ at: number; a: number; b: number; diff: number }>;
  result: PairedDifference;
  sentence: string;
}

/** Online cost per bucket of a run under `plan`, from its hour table (by the demand's arrival). */
export function bucketCosts(view: RunView, plan: BucketPlan): Float64Array {
  const out = new Float64Array(plan.count);
  for (const h of view.hours) out[bucketOf(plan, h.hour)]! += h.travelCost + h.waitCost + h.abandonCost;
  return out;
}

/**
 * The paired comparison of run `b` against run `a` on the same log: cost per day (per
 * hour under two days), their difference b − a per bucket, and a bootstrap interval
 * of the total difference.
 */
export function pairRuns(a: RunView, b: RunView, opts: { resamples: number; seed: number }): PairedRuns | null {
  if (a.hours.length === 0 || b.hours.length === 0) return null;
  let lo = Infinity;
  let hi = -Infinity;
  for (const h of [...a.hours, ...b.hours]) {
    lo = Math.min(lo, h.hour);
    hi = Math.max(hi, h.hour + HOUR_MS - 1);
  }
  const plan = bucketPlan(lo, hi);
  const ca = bucketCosts(a, plan);
  const cb = bucketCosts(b, plan);
  const result = pairedDifference(cb, ca, { resamples: opts.resamples, seed: opts.seed });
  const iv = result.interval;
  const units = `${plan.count} ${plan.unit}${plan.count === 1 ? '' : 's'}`;
  const dir = result.diff <= 0 ? 'less' : 'more';
  let sentence = `${b.title} cost ${num(Math.abs(result.diff))} ${dir} than ${a.title} on the same log`;
  if (iv) {
    const clear = iv[0] > 0 || iv[1] < 0;
    sentence += ` (${Math.round(result.level * 100)} % interval of the difference ${num(iv[0])} to ${num(iv[1])}, resampling ${units} in pairs)` +
      (clear ? '; the difference is clear of zero.' : '; the interval includes zero, so this log cannot tell the two apart.');
  } else sentence += '.';
  return {
    a, b, unit: plan.unit,
    rows: Array.from({ length: plan.count }, (_, k) => ({ at: plan.origin + k * plan.unitMs, a: ca[k]!, b: cb[k]!, diff: cb[k]! - ca[k]! })),
    result,
    sentence,
  };
}
