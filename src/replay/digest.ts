/**
 * The run digest: what `pairflow report` draws, gathered while a replay (or a sweep
 * worker) runs, by a sink like the statistics one. Everything is summed into small
 * tables — by market and UTC hour, by map cell and hour of day, by supply id, and into
 * histograms — so a report never rereads a week of assignments.
 *
 * Sources, all records of the pipeline (nothing is recomputed):
 * - assignments and expiries give the online cost split (travel, waiting, abandoned)
 *   by the hour of the demand's arrival, the waits and travel times, and the work
 *   each supply id got (an occurrence ends in exactly one assignment or expiry);
 * - arrivals seen on the source give where demand and supply appeared;
 * - the engine's price records give the dual price of every supply unit in every
 *   solve: minus that price is what one more unit there would have saved (SPEC §5);
 * - the hindsight optimum adds its own split by hour, its waits and travel times, and
 *   the units of the minimum vertex cover behind the match ceiling (König).
 *
 * Cells are squares of {@link CELL_KM} km: under `euclidean` on x/y directly; under
 * `haversine` on a local equirectangular projection (km east = lon · cos φ0 · 111.195,
 * km north = lat · 111.195, φ0 the latitude of the log's first located event to 0.1°).
 * Hours are UTC. Pure: no I/O.
 */
import { RUN_FILES } from '../emit/run-dir.js';
import type { Metric, PairflowConfig, SourcedEvent } from '../model.js';
import type { AssignmentRecord, EpochRecord, ExpiryRecord, PriceRecord } from '../ports.js';
import type { RecordSink } from '../pipeline/drive.js';
import type { HindsightResult } from '../hindsight/hindsight.js';
import { EARTH_RADIUS_KM } from '../window/geo.js';
import { FloatList } from './stats.js';
import { quantileLinear } from './summary.js';

/** Side of a map cell, km. @default 0.5 */
export const CELL_KM = 0.5;
/** Width of a histogram bin, minutes. */
export const HISTOGRAM_BIN_MIN = 0.1;
/** The digest's file in a run directory. */
export const DIGEST_FILE = RUN_FILES.digest;
/** Version of the digest format; a report refuses other versions. */
export const DIGEST_VERSION = 1;

const HOUR_MS = 3_600_000;
/** km per degree of latitude (and of longitude at the equator) on the SPEC §2 sphere. */
export const KM_PER_DEGREE = (2 * Math.PI * EARTH_RADIUS_KM) / 360;

/** How places become cells; fixed for a log before any unit is counted. */
export interface CellGrid {
  metric: Metric;
  cellKm: number;
  /** φ0 of the projection (haversine); 0 under euclidean. */
  refLat: number;
}

/** The grid of a log: φ0 from its first event with a place (events in replay order). */
export function gridForEvents(events: Iterable<SourcedEvent>, metric: Metric, cellKm = CELL_KM): CellGrid {
  let refLat = 0;
  if (metric === 'haversine') {
    for (const { event } of events) {
      if (event.type !== 'withdraw' && Number.isFinite(event.lat)) {
        refLat = Math.round(event.lat! * 10) / 10;
        break;
      }
    }
  }
  return { metric, cellKm, refLat };
}

/** km east and north of a place under the grid's projection. */
export function projectKm(grid: CellGrid, a: number, b: number): [number, number] {
  if (grid.metric === 'euclidean') return [a, b];
  return [b * Math.cos((grid.refLat * Math.PI) / 180) * KM_PER_DEGREE, a * KM_PER_DEGREE];
}

/** The cell (column east, row north) of a place (a, b) = (lat, lon) or (x, y). */
export function cellOf(grid: CellGrid, a: number, b: number): [number, number] {
  const [east, north] = projectKm(grid, a, b);
  return [Math.floor(east / grid.cellKm), Math.floor(north / grid.cellKm)];
}

/** The centre of cell (cx, cy) as (a, b): lat/lon or x/y. */
export function cellCentre(grid: CellGrid, cx: number, cy: number): [number, number] {
  const east = (cx + 0.5) * grid.cellKm;
  const north = (cy + 0.5) * grid.cellKm;
  if (grid.metric === 'euclidean') return [east, north];
  return [north / KM_PER_DEGREE, east / (Math.cos((grid.refLat * Math.PI) / 180) * KM_PER_DEGREE)];
}

/** A table as column names and rows of values (compact in JSON). */
export interface DigestTable<C extends readonly string[]> {
  columns: C;
  rows: Array<Array<number | string>>;
}

export const HOUR_COLUMNS = [
  'market', 'hour', 'demand', 'matched', 'abandoned', 'travelCost', 'waitCost', 'abandonCost', 'waitMin',
  'hMatched', 'hAbandoned', 'hTravelCost', 'hWaitCost', 'hAbandonCost',
] as const;
export const CELL_COLUMNS = [
  'market', 'cx', 'cy', 'hourOfDay', 'demand', 'supply', 'abandoned', 'priceCount', 'priceSum', 'coverDemand', 'coverSupply',
] as const;
export const SUPPLY_COLUMNS = ['market', 'id', 'occurrences', 'assignments', 'travelMin'] as const;

/** Per market: waits and travel of the online policy and of the hindsight optimum, exact. */
export interface DigestMarket {
  market: string;
  online: { meanWaitMin: number | null; p95WaitMin: number | null; meanTravelMin: number | null };
  hindsight: { meanWaitMin: number | null; p95WaitMin: number | null; meanTravelMin: number | null } | null;
}

/** Histogram counts in bins of `binMin` minutes from 0 (the last bin holds its upper edge). */
export interface DigestHistograms {
  binMin: number;
  wait: number[];
  travel: number[];
  hindsightWait: number[] | null;
  hindsightTravel: number[] | null;
}

/** What the report draws for one run (digest.json in a run directory). */
export interface RunDigest {
  version: number;
  grid: CellGrid;
  /** Abandon penalty P and wait weight, to split costs. */
  abandonPenalty: number;
  waitWeight: number;
  markets: DigestMarket[];
  /**
   * By market and UTC hour of the demand's arrival (`hour` = the hour's start, ms):
   * online demand, matched, abandoned and cost split; the same for the hindsight (h…),
   * zero without it. Summed over rows they give the summary's totals.
   */
  hours: DigestTable<typeof HOUR_COLUMNS>;
  /**
   * By market, cell and UTC hour of day: arrivals of demand and supply, demand
   * abandoned online, supply price observations (count, and sum of −v: the minutes
   * one more unit there would have saved), and the covered units of the hindsight.
   */
  cells: DigestTable<typeof CELL_COLUMNS>;
  /** By supply id: occurrences, assignments and travel minutes driven (every id that appeared). */
  supply: DigestTable<typeof SUPPLY_COLUMNS>;
  histograms: DigestHistograms;
  /** True when the hindsight optimum (and its cover) is part of the digest. */
  hasHindsight: boolean;
}

/** The online half of a digest, as the tally returns it (plain data: it crosses threads). */
export type OnlineDigest = Omit<RunDigest, 'hasHindsight'>;

/** Growable counts per histogram bin. */
function binAdd(bins: number[], v: number): void {
  const i = Math.max(0, Math.floor(v / HISTOGRAM_BIN_MIN + 1e-9));
  while (bins.length <= i) bins.push(0);
  bins[i]! += 1;
}

function waitStats(waits: FloatList, travelSum: number): { meanWaitMin: number | null; p95WaitMin: number | null; meanTravelMin: number | null } {
  const v = waits.view().slice();
  let sum = 0;
  for (let i = 0; i < v.length; i++) sum += v[i]!;
  return {
    meanWaitMin: v.length > 0 ? sum / v.length : null,
    p95WaitMin: quantileLinear(v, 0.95),
    meanTravelMin: v.length > 0 ? travelSum / v.length : null,
  };
}

interface MarketTally {
  index: number;
  name: string;
  /** Row per hour: HOUR_COLUMNS from 'demand' on, by hour key. */
  hours: Map<number, Float64Array>;
  /** Row per cell × hour of day: CELL_COLUMNS from 'demand' on. */
  cells: Map<number, Float64Array>;
  waits: FloatList;
  travelSum: number;
}

// Cell keys pack (cx, cy, hour of day) into one number: cells within ±2^20 of 0.
const CELL_SPAN = 1 << 21;
const CELL_HALF = 1 << 20;
const cellKey = (cx: number, cy: number, h: number): number => ((cx + CELL_HALF) * CELL_SPAN + (cy + CELL_HALF)) * 24 + h;
const hourOfDay = (t: number): number => ((Math.floor(t / HOUR_MS) % 24) + 24) % 24;

const H = { demand: 0, matched: 1, abandoned: 2, travelCost: 3, waitCost: 4, abandonCost: 5, waitMin: 6, hMatched: 7, hAbandoned: 8, hTravelCost: 9, hWaitCost: 10, hAbandonCost: 11 } as const;
const C = { demand: 0, supply: 1, abandoned: 2, priceCount: 3, priceSum: 4, coverDemand: 5, coverSupply: 6 } as const;

/**
 * The sink that gathers a run's digest. Plug it beside the other sinks of the
 * pipeline (it asks the engine for price records) and show it every event of the
 * source through {@link RunTally.observe}.
 * @example const tally = new RunTally(config, gridForEvents(events, config.metric));
 */
export class RunTally implements RecordSink {
  private readonly markets = new Map<string, MarketTally>();
  private readonly supply = new Map<string, { market: string; id: string; occurrences: number; assignments: number; travelMin: number }>();
  private readonly waitBins: number[] = [];
  private readonly travelBins: number[] = [];
  private readonly ww: number;

  constructor(private readonly config: PairflowConfig, readonly grid: CellGrid) {
    this.ww = config.waitWeight;
  }

  private market(name: string): MarketTally {
    let m = this.markets.get(name);
    if (!m) {
      m = { index: this.markets.size, name, hours: new Map(), cells: new Map(), waits: new FloatList(), travelSum: 0 };
      this.markets.set(name, m);
    }
    return m;
  }

  private hourRow(m: MarketTally, t: number): Float64Array {
    const key = Math.floor(t / HOUR_MS);
    let row = m.hours.get(key);
    if (!row) m.hours.set(key, (row = new Float64Array(12)));
    return row;
  }

  private cellRow(m: MarketTally, a: number | undefined, b: number | undefined, t: number): Float64Array | null {
    if (!(Number.isFinite(a) && Number.isFinite(b))) return null;
    const [cx, cy] = cellOf(this.grid, a!, b!);
    return this.cellRowAt(m, cx, cy, hourOfDay(t));
  }

  private cellRowAt(m: MarketTally, cx: number, cy: number, h: number): Float64Array | null {
    if (Math.abs(cx) >= CELL_HALF || Math.abs(cy) >= CELL_HALF) return null;
    const key = cellKey(cx, cy, h);
    let row = m.cells.get(key);
    if (!row) m.cells.set(key, (row = new Float64Array(7)));
    return row;
  }

  private supplyOf(market: string, id: string): { market: string; id: string; occurrences: number; assignments: number; travelMin: number } {
    const key = `${market}\u0000${id}`;
    let s = this.supply.get(key);
    if (!s) this.supply.set(key, (s = { market, id, occurrences: 0, assignments: 0, travelMin: 0 }));
    return s;
  }

  /** An event as the source delivers it: arrivals are counted where and when they appear. */
  observe(ev: SourcedEvent): void {
    const e = ev.event;
    if (e.type === 'withdraw') return;
    const m = this.market(e.market);
    const [a, b] = this.config.metric === 'euclidean' ? [e.x, e.y] : [e.lat, e.lon];
    const row = this.cellRow(m, a, b, e.t);
    if (row) row[e.type === 'demand' ? C.demand : C.supply]! += 1;
  }

  assignment(a: AssignmentRecord): void {
    const m = this.market(a.market);
    const row = this.hourRow(m, a.demandT);
    row[H.demand]! += 1;
    row[H.matched]! += 1;
    row[H.travelCost]! += a.travelMin;
    row[H.waitCost]! += a.cost - a.travelMin;
    row[H.waitMin]! += a.waitMin;
    m.waits.push(a.waitMin);
    m.travelSum += a.travelMin;
    binAdd(this.waitBins, a.waitMin);
    binAdd(this.travelBins, a.travelMin);
    const s = this.supplyOf(a.market, a.supplyId);
    s.occurrences += 1;
    s.assignments += 1;
    s.travelMin += a.travelMin;
  }

  expiry(e: ExpiryRecord): void {
    const m = this.market(e.market);
    if (e.side === 'supply') {
      this.supplyOf(e.market, e.id).occurrences += 1;
      return;
    }
    const row = this.hourRow(m, e.t);
    row[H.demand]! += 1;
    row[H.abandoned]! += 1;
    row[H.abandonCost]! += e.cost;
    const [a, b] = this.config.metric === 'euclidean' ? [e.x, e.y] : [e.lat, e.lon];
    const cell = this.cellRow(m, a, b, e.t);
    if (cell) cell[C.abandoned]! += 1;
  }

  epoch(_s: EpochRecord): void {}

  reject(): void {}

  prices(p: PriceRecord): void {
    if (p.side !== 'supply' || p.n === 0) return;
    const m = this.market(p.market);
    const h = hourOfDay(p.epoch);
    const grid = this.grid;
    for (let k = 0; k < p.n; k++) {
      const a = p.a[k]!;
      const b = p.b[k]!;
      if (!(Number.isFinite(a) && Number.isFinite(b))) continue;
      const [cx, cy] = cellOf(grid, a, b);
      const row = this.cellRowAt(m, cx, cy, h);
      if (!row) continue;
      row[C.priceCount]! += 1;
      // v ≤ 0: −v is the value of the unit to this solve (0 for a unit nobody needed).
      row[C.priceSum]! += -p.price[k]!;
    }
  }

  /** The online half of the digest, once the source is drained. */
  online(): OnlineDigest {
    const markets = [...this.markets.values()].sort((x, y) => (x.name < y.name ? -1 : x.name > y.name ? 1 : 0));
    const hours: Array<Array<number | string>> = [];
    const cells: Array<Array<number | string>> = [];
    for (const m of markets) {
      for (const key of [...m.hours.keys()].sort((x, y) => x - y)) hours.push([m.name, key * HOUR_MS, ...m.hours.get(key)!]);
      for (const key of [...m.cells.keys()].sort((x, y) => x - y)) {
        const h = key % 24;
        const rest = (key - h) / 24;
        const cy = (rest % CELL_SPAN) - CELL_HALF;
        const cx = Math.round((rest - (cy + CELL_HALF)) / CELL_SPAN) - CELL_HALF;
        cells.push([m.name, cx, cy, h, ...m.cells.get(key)!]);
      }
    }
    const supply = [...this.supply.values()]
      .sort((x, y) => (x.market < y.market ? -1 : x.market > y.market ? 1 : x.id < y.id ? -1 : x.id > y.id ? 1 : 0))
      .map((s) => [s.market, s.id, s.occurrences, s.assignments, s.travelMin]);
    return {
      version: DIGEST_VERSION,
      grid: { ...this.grid },
      abandonPenalty: this.config.abandonPenalty,
      waitWeight: this.config.waitWeight,
      markets: markets.map((m) => ({ market: m.name, online: waitStats(m.waits, m.travelSum), hindsight: null })),
      hours: { columns: HOUR_COLUMNS, rows: hours },
      cells: { columns: CELL_COLUMNS, rows: cells },
      supply: { columns: SUPPLY_COLUMNS, rows: supply },
      histograms: { binMin: HISTOGRAM_BIN_MIN, wait: [...this.waitBins], travel: [...this.travelBins], hindsightWait: null, hindsightTravel: null },
    };
  }
}

/**
 * Adds the hindsight optimum to an online digest: its split by hour (by the demand's
 * arrival, like the online one), its waits and travel times, and its cover by cell
 * and hour. The online digest is not changed; a new one is returned.
 */
export function withHindsight(online: OnlineDigest, h: HindsightResult | null): RunDigest {
  if (!h) return { ...online, hasHindsight: false };
  const d: RunDigest = structuredClone({ ...online, hasHindsight: true });
  const ww = d.waitWeight;
  const P = d.abandonPenalty;
  const hourIndex = new Map<string, Array<number | string>>();
  for (const row of d.hours.rows) hourIndex.set(`${row[0]}|${row[1]}`, row);
  const cellIndex = new Map<string, Array<number | string>>();
  for (const row of d.cells.rows) cellIndex.set(`${row[0]}|${row[1]}|${row[2]}|${row[3]}`, row);
  const col = (name: (typeof HOUR_COLUMNS)[number]): number => HOUR_COLUMNS.indexOf(name);
  const ccol = (name: (typeof CELL_COLUMNS)[number]): number => CELL_COLUMNS.indexOf(name);
  const waitBins: number[] = [];
  const travelBins: number[] = [];
  let at = 0;
  for (const m of h.markets) {
    const waits = new FloatList();
    let travelSum = 0;
    for (let i = at; i < at + m.demandUnits; i++) {
      const t = h.demandT[i]!;
      const hour = Math.floor(t / HOUR_MS) * HOUR_MS;
      const key = `${m.market}|${hour}`;
      let row = hourIndex.get(key);
      if (!row) {
        row = [m.market, hour, ...new Array<number>(HOUR_COLUMNS.length - 2).fill(0)];
        hourIndex.set(key, row);
        d.hours.rows.push(row);
      }
      const w = h.demandWait[i]!;
      if (Number.isNaN(w)) {
        (row[col('hAbandoned')] as number)++;
        (row[col('hAbandonCost')] as number) += P;
      } else {
        const travel = h.demandCost[i]! - ww * w;
        (row[col('hMatched')] as number)++;
        (row[col('hTravelCost')] as number) += travel;
        (row[col('hWaitCost')] as number) += ww * w;
        waits.push(w);
        travelSum += travel;
        binAdd(waitBins, w);
        binAdd(travelBins, travel);
      }
    }
    at += m.demandUnits;
    let dm = d.markets.find((x) => x.market === m.market);
    if (!dm) {
      dm = { market: m.market, online: { meanWaitMin: null, p95WaitMin: null, meanTravelMin: null }, hindsight: null };
      d.markets.push(dm);
    }
    dm.hindsight = waitStats(waits, travelSum);
    const cover = m.cover;
    if (!cover) continue;
    for (const [side, triples] of [['coverDemand', cover.demand], ['coverSupply', cover.supply]] as const) {
      for (let k = 0; k < triples.length; k += 3) {
        const a = triples[k + 1]!;
        const b = triples[k + 2]!;
        if (!(Number.isFinite(a) && Number.isFinite(b))) continue;
        const [cx, cy] = cellOf(d.grid, a, b);
        const hd = hourOfDay(triples[k]!);
        const key = `${m.market}|${cx}|${cy}|${hd}`;
        let row = cellIndex.get(key);
        if (!row) {
          row = [m.market, cx, cy, hd, ...new Array<number>(CELL_COLUMNS.length - 4).fill(0)];
          cellIndex.set(key, row);
          d.cells.rows.push(row);
        }
        (row[ccol(side)] as number)++;
      }
    }
  }
  // Rows the hindsight added go in the same order as the rest.
  const cmp = (x: Array<number | string>, y: Array<number | string>, n: number): number => {
    for (let i = 0; i < n; i++) {
      if (x[i]! < y[i]!) return -1;
      if (x[i]! > y[i]!) return 1;
    }
    return 0;
  };
  d.hours.rows.sort((x, y) => cmp(x, y, 2));
  d.cells.rows.sort((x, y) => cmp(x, y, 4));
  d.markets.sort((x, y) => (x.market < y.market ? -1 : x.market > y.market ? 1 : 0));
  d.histograms.hindsightWait = waitBins;
  d.histograms.hindsightTravel = travelBins;
  return d;
}
