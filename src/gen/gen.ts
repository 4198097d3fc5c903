/**
 * The synthetic scenario of `pairflow gen`: days of courier shifts and orders in the
 * invented city of ./gen-city.ts. Deterministic: the same options give the same
 * events, in the same order. Pure: no I/O, no clock, no Math.random — the command in
 * src/cli/commands/gen.ts writes the files.
 *
 * What a day holds, per market (district):
 * - demand (orders) on a daily curve with morning, lunch and evening peaks, mostly at
 *   restaurant hotspots, some in neighbourhoods; a share with an explicit `until`,
 *   a share needing a capability (`cold-bag`, `large-box`), a share cancelled
 *   (a demand `withdraw` a few minutes later);
 * - supply (couriers) in shifts: an arrival at shift start with `until` at shift end,
 *   then re-arrivals of the same id every 12–30 minutes at a drop-off point (back
 *   after a job), a few shifts ending early with a supply `withdraw`.
 */
import { pairflowError } from '../errors.js';
import type { ArrivalEvent, PairflowEvent, WithdrawEvent } from '../model.js';
import { CITY_CENTRE, districtsFor, type District, type Spot } from './city.js';
import { mulberry32 } from '../random.js';

/** Options of the generator; every field has a default in {@link GEN_DEFAULTS}. */
export interface GenOptions {
  /** Number of consecutive days. @default 1 */
  readonly days: number;
  /** PRNG seed; the same seed gives the same events. @default 1 */
  readonly seed: number;
  /** 00:00 of the first day, ms since the epoch (UTC; Veloria keeps UTC). @default 2026-03-02T00:00:00Z */
  readonly startMs: number;
  /** Demand multiplier, in (0, 20]: about `43000 × scale` demand and as many supply occurrences per day. @default 1 */
  readonly scale: number;
  /** Number of markets (districts). @default 4 */
  readonly markets: number;
  /** Shuffle each day's events (seeded) instead of time order, to test sorting. @default false */
  readonly shuffle: boolean;
  /** Coordinates written: `latlon` (metric haversine) or `xy` km from the city centre (euclidean). @default 'latlon' */
  readonly coords: 'latlon' | 'xy';
}

/** Demand occurrences per day over all markets at scale 1 (and as many supply occurrences). */
export const DEMAND_PER_DAY = 43_000;

export const GEN_DEFAULTS: GenOptions = Object.freeze({
  days: 1,
  seed: 1,
  startMs: Date.UTC(2026, 2, 2),
  scale: 1,
  markets: 4,
  shuffle: false,
  coords: 'latlon',
});

const DAY_MS = 86_400_000;
/** Most days one run generates: ten years. */
export const MAX_DAYS = 3660;
const MIN_MS = 60_000;
/** Mean Earth radius (IUGG), the same sphere as the haversine metric (SPEC §2). */
const EARTH_KM = 6371.0088;


// Mixes integers into one 32-bit seed (a murmur3-style finaliser per step), so each
// (seed, day, market, stream) gets an independent PRNG and days can be made alone.
function mixSeed(...parts: number[]): number {
  let h = 0x9e3779b9;
  for (const p of parts) {
    h = Math.imul(h ^ (p >>> 0), 0x85ebca6b);
    h ^= h >>> 13;
    h = Math.imul(h, 0xc2b2ae35);
    h ^= h >>> 16;
  }
  return h >>> 0;
}

class Rng {
  private readonly next: () => number;
  private spare: number | null = null;
  constructor(seed: number) {
    this.next = mulberry32(seed);
  }
  uniform(): number {
    return this.next();
  }
  between(lo: number, hi: number): number {
    return lo + (hi - lo) * this.next();
  }
  /** Standard normal by Box–Muller. */
  normal(): number {
    if (this.spare !== null) {
      const s = this.spare;
      this.spare = null;
      return s;
    }
    const u = 1 - this.next();
    const v = this.next();
    const r = Math.sqrt(-2 * Math.log(u));
    this.spare = r * Math.sin(2 * Math.PI * v);
    return r * Math.cos(2 * Math.PI * v);
  }
  pick<T extends { readonly weight: number }>(items: readonly T[]): T {
    let total = 0;
    for (const it of items) total += it.weight;
    let x = this.next() * total;
    for (const it of items) {
      x -= it.weight;
      if (x < 0) return it;
    }
    return items[items.length - 1]!;
  }
}

const gauss = (m: number, centre: number, width: number): number => Math.exp(-0.5 * ((m - centre) / width) ** 2);

/**
 * Relative order intensity at minute `m` of the day (0–1439): a night floor, and
 * morning (08:15), lunch (12:45) and evening (19:30) peaks, the evening the largest.
 */
export function demandIntensity(m: number): number {
  return 0.06 + 0.9 * gauss(m, 8.25 * 60, 50) + 1.8 * gauss(m, 12.75 * 60, 60) + 2.4 * gauss(m, 19.5 * 60, 90) + 0.3 * gauss(m, 23 * 60, 45);
}

/** Cumulative weights over the 1440 minutes of a day, for sampling by inverse CDF. */
function curveCdf(shiftMin: number): Float64Array {
  const cdf = new Float64Array(1440);
  let acc = 0;
  for (let m = 0; m < 1440; m += 1) {
    acc += demandIntensity((m + shiftMin + 1440) % 1440);
    cdf[m] = acc;
  }
  return cdf;
}

const DEMAND_CDF = curveCdf(0);
// Couriers log on ahead of the orders: shift starts follow the curve 100 minutes early.
const SHIFT_CDF = curveCdf(100);

/** A time in the day (ms from 00:00) drawn from a per-minute CDF. */
function sampleTime(rng: Rng, cdf: Float64Array): number {
  const x = rng.uniform() * cdf[cdf.length - 1]!;
  let lo = 0;
  let hi = cdf.length - 1;
  while (lo < hi) {
    const mid = (lo + hi) >>> 1;
    if (cdf[mid]! > x) hi = mid;
    else lo = mid + 1;
  }
  return lo * MIN_MS + Math.floor(rng.uniform() * MIN_MS);
}

/** Splits `total` among weights by largest remainder, so the parts sum exactly. */
function apportion(total: number, weights: readonly number[]): number[] {
  const sum = weights.reduce((a, b) => a + b, 0);
  const raw = weights.map((w) => (total * w) / sum);
  const out = raw.map(Math.floor);
  let left = total - out.reduce((a, b) => a + b, 0);
  const order = raw.map((r, i) => ({ i, frac: r - Math.floor(r) })).sort((a, b) => b.frac - a.frac || a.i - b.i);
  for (let k = 0; left > 0; k = (k + 1) % order.length, left -= 1) out[order[k]!.i]! += 1;
  return out;
}

interface Place {
  lat?: number;
  lon?: number;
  x?: number;
  y?: number;
}

const round = (v: number, digits: number): number => {
  const f = 10 ** digits;
  return Math.round(v * f) / f;
};

function placeNear(rng: Rng, d: District, s: Spot, coords: GenOptions['coords']): Place {
  const xKm = d.dx + s.dx + rng.normal() * s.spreadKm;
  const yKm = d.dy + s.dy + rng.normal() * s.spreadKm;
  if (coords === 'xy') return { x: round(xKm, 4), y: round(yKm, 4) };
  const degPerKm = 180 / (Math.PI * EARTH_KM);
  const lat = CITY_CENTRE.lat + yKm * degPerKm;
  const lon = CITY_CENTRE.lon + (xKm * degPerKm) / Math.cos((CITY_CENTRE.lat * Math.PI) / 180);
  return { lat: round(lat, 6), lon: round(lon, 6) };
}

function ymd(ms: number): string {
  return new Date(ms).toISOString().slice(0, 10).replaceAll('-', '');
}

// Shares of the scenario (fractions of units).
const DEMAND_AT_HOTSPOT = 0.82;
const DEMAND_EXPLICIT_UNTIL = 0.35;
const DEMAND_CANCELLED = 0.04;
const SHIFT_ENDS_EARLY = 0.03;
const DROPOFF_IN_NEIGHBOURHOOD = 0.7;
const SHIFT_HOURS = [2, 3, 3, 4, 4, 5, 6];

function demandOf(rng: Rng, d: District, dayStart: number, n: number, opts: GenOptions, out: PairflowEvent[]): void {
  const times = new Float64Array(n);
  for (let j = 0; j < n; j += 1) times[j] = sampleTime(rng, DEMAND_CDF);
  times.sort();
  const prefix = `${d.code}-o${ymd(dayStart)}-`;
  for (let j = 0; j < n; j += 1) {
    const t = dayStart + times[j]!;
    const spot = rng.uniform() < DEMAND_AT_HOTSPOT ? rng.pick(d.hotspots) : rng.pick(d.neighbourhoods);
    const place = placeNear(rng, d, spot, opts.coords);
    const until = rng.uniform() < DEMAND_EXPLICIT_UNTIL ? t + Math.round(rng.between(6, 20) * 60) * 1000 : null;
    const r = rng.uniform();
    const needs = r < 0.07 ? ['cold-bag'] : r < 0.09 ? ['large-box'] : r < 0.095 ? ['cold-bag', 'large-box'] : undefined;
    const id = `${prefix}${String(j).padStart(5, '0')}`;
    const ev: ArrivalEvent = { type: 'demand', id, market: d.market, t, until, ...place, ...(needs ? { needs } : {}) };
    out.push(ev);
    if (rng.uniform() < DEMAND_CANCELLED) {
      // Cancelled before it would expire on its own (10 min default patience assumed).
      const limitMs = Math.min(8 * MIN_MS, (until ?? t + 10 * MIN_MS) - t - 1000);
      const w: WithdrawEvent = { type: 'withdraw', id, market: d.market, t: t + Math.round(rng.between(30_000, limitMs)), side: 'demand' };
      // Kept inside the day, so that days concatenate in time order.
      if (w.t < dayStart + DAY_MS) out.push(w);
    }
  }
}

interface Shift {
  readonly start: number;
  readonly end: number;
  readonly offline: number | null;
  readonly times: number[];
  readonly has: string[] | undefined;
}

function supplyOf(rng: Rng, d: District, dayStart: number, n: number, opts: GenOptions, out: PairflowEvent[]): void {
  const shifts: Shift[] = [];
  let occurrences = 0;
  const dayEnd = dayStart + DAY_MS - 1;
  while (occurrences < n) {
    const start = dayStart + sampleTime(rng, SHIFT_CDF);
    const hours = SHIFT_HOURS[Math.floor(rng.uniform() * SHIFT_HOURS.length)]!;
    const end = Math.min(start + hours * 3_600_000, dayEnd);
    if (end - start < 30 * MIN_MS) continue;
    const offline = rng.uniform() < SHIFT_ENDS_EARLY ? start + Math.round(rng.between(0.3, 0.9) * (end - start)) : null;
    const stop = offline ?? end;
    const times = [start];
    for (let t = start + Math.round(rng.between(12, 30) * MIN_MS); t < stop - 5 * MIN_MS; t += Math.round(rng.between(12, 30) * MIN_MS)) {
      times.push(t);
    }
    times.length = Math.min(times.length, n - occurrences);
    occurrences += times.length;
    const r = rng.uniform();
    const has = r < 0.28 ? ['cold-bag'] : r < 0.36 ? ['cold-bag', 'large-box'] : r < 0.4 ? ['large-box'] : undefined;
    shifts.push({ start, end, offline, times, has });
  }
  // Courier ids follow shift start, so the i-th shift of every day is the same courier.
  shifts.sort((a, b) => a.start - b.start);
  for (let i = 0; i < shifts.length; i += 1) {
    const s = shifts[i]!;
    const id = `${d.code}-c${String(i).padStart(4, '0')}`;
    for (let k = 0; k < s.times.length; k += 1) {
      const spot = k === 0 || rng.uniform() < DROPOFF_IN_NEIGHBOURHOOD ? rng.pick(d.neighbourhoods) : rng.pick(d.hotspots);
      const ev: ArrivalEvent = { type: 'supply', id, market: d.market, t: s.times[k]!, until: s.end, ...placeNear(rng, d, spot, opts.coords), ...(s.has ? { has: s.has } : {}) };
      out.push(ev);
    }
    if (s.offline !== null) out.push({ type: 'withdraw', id, market: d.market, t: s.offline, side: 'supply' });
  }
}

/**
 * Fills in defaults and checks ranges; throws `PAIRFLOW_ERR_CLI_OPTION` naming the
 * `pairflow gen` option that is out of range.
 */
export function resolveGenOptions(partial: Partial<GenOptions>): GenOptions {
  const o: GenOptions = { ...GEN_DEFAULTS, ...partial };
  if (!Number.isInteger(o.days) || o.days < 1 || o.days > MAX_DAYS) throw pairflowError('PAIRFLOW_ERR_CLI_OPTION', { option: '--days', detail: `got ${o.days}, expected a whole number in 1..${MAX_DAYS}` });
  if (!Number.isInteger(o.markets) || o.markets < 1 || o.markets > 64) throw pairflowError('PAIRFLOW_ERR_CLI_OPTION', { option: '--markets', detail: `got ${o.markets}, expected a whole number in 1..64` });
  // One day is held in memory (measured ~0.35 kB per event), so scale is capped at 20:
  // ~1.8M events a day, well under 1 GB.
  if (!Number.isFinite(o.scale) || o.scale <= 0 || o.scale > 20) throw pairflowError('PAIRFLOW_ERR_CLI_OPTION', { option: '--scale', detail: `got ${o.scale}, expected a number in (0, 20]` });
  // The seed is mixed as 32 bits: larger seeds would collide with smaller ones.
  if (!Number.isInteger(o.seed) || o.seed < 0 || o.seed > 0xffffffff) throw pairflowError('PAIRFLOW_ERR_CLI_OPTION', { option: '--seed', detail: `got ${o.seed}, expected a whole number in 0..4294967295` });
  if (!Number.isInteger(o.startMs)) throw pairflowError('PAIRFLOW_ERR_CLI_OPTION', { option: '--start', detail: `got ${o.startMs}, expected whole ms` });
  // Every event time (and its until) must be a time pairflow reads back (docs/events.md: within ±8.64e15 ms).
  if (Math.abs(o.startMs) > 8.64e15 - (o.days + 1) * DAY_MS) {
    throw pairflowError('PAIRFLOW_ERR_CLI_OPTION', { option: '--start', detail: `${new Date(o.startMs).toISOString()} plus ${o.days} days leaves the range of dates` });
  }
  return o;
}

/**
 * The events of day `day` (0-based) in time order (stable: generation order breaks
 * ties), or shuffled with a seeded PRNG when `opts.shuffle` is set.
 */
export function generateDay(options: Partial<GenOptions>, day: number): PairflowEvent[] {
  const opts = resolveGenOptions(options);
  const dayStart = opts.startMs + day * DAY_MS;
  const districts = districtsFor(opts.markets);
  const demandTotal = Math.round(DEMAND_PER_DAY * opts.scale);
  const perMarket = apportion(demandTotal, districts.map((d) => d.weight));
  const out: PairflowEvent[] = [];
  for (let m = 0; m < districts.length; m += 1) {
    const d = districts[m]!;
    demandOf(new Rng(mixSeed(opts.seed, day, m, 1)), d, dayStart, perMarket[m]!, opts, out);
    supplyOf(new Rng(mixSeed(opts.seed, day, m, 2)), d, dayStart, perMarket[m]!, opts, out);
  }
  if (opts.shuffle) {
    const rng = new Rng(mixSeed(opts.seed, day, 3));
    for (let i = out.length - 1; i > 0; i -= 1) {
      const j = Math.floor(rng.uniform() * (i + 1));
      const tmp = out[i]!;
      out[i] = out[j]!;
      out[j] = tmp;
    }
  } else {
    out.sort((a, b) => a.t - b.t);
  }
  return out;
}

/**
 * Every event of the scenario, day after day; memory holds one day at a time.
 * Each day's activity ends before the next day starts, so the whole stream is in
 * time order unless `shuffle` is set.
 * @example for (const ev of generateEvents({ days: 7, seed: 42 })) write(ev)
 */
export function* generateEvents(options: Partial<GenOptions> = {}): Generator<PairflowEvent> {
  const opts = resolveGenOptions(options);
  for (let day = 0; day < opts.days; day += 1) yield* generateDay(opts, day);
}

/**
 * 16 bytes derived from the seed, used as the Avro sync marker so that the same seed
 * writes the same `.avro` file (avsc would otherwise draw a random marker).
 */
export function syncMarkerFor(seed: number): Uint8Array {
  const next = mulberry32(mixSeed(seed, 0x61767230));
  const out = new Uint8Array(16);
  for (let i = 0; i < 16; i += 1) out[i] = Math.floor(next() * 256);
  return out;
}
