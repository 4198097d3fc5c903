/**
 * The allowed-pair graph of one market for the hindsight optimum (SPEC §4), built
 * from packed unit occurrences. Pure: no I/O, plain typed arrays in and out, so the
 * same code runs in a worker thread.
 *
 * A pair (supply s, demand d) may be matched iff it is allowed (`travel ≤
 * maxTravelMin`, `needs ⊆ has`) and the two are present together at some instant:
 * `max(s.t, d.t) ≤ min(end_s, end_d)`. Its cost is
 * `travel + waitWeight · max(0, s.t − d.t) / 60000`.
 *
 * Pairs are enumerated by a time sweep with a spatial grid of the supplies present:
 * when a demand leaves, every supply it could meet has arrived, and its row is read
 * from the grid cells around it (see {@link buildCompactGraph}). Each pair is found
 * exactly once, and never by comparing all pairs.
 *
 * A week of a busy market has hundreds of millions of pairs, so the solve keeps them
 * compact (see {@link CompactGraph}): three bytes a pair, written once, in place.
 */

import { EARTH_RADIUS_KM, euclideanKm, haversineKm, travelMin } from '../window/geo.js';
import type { PairflowConfig, UnitPlace } from '../model.js';
import { orderBy } from './segments.js';
import { KernelRows, type KernelVisitor, type ScratchSpace } from './wasm/graph-rows.js';
import type { KernelColumns } from './wasm/pricing-scan.js';
import { holdBytes, KernelArena, kernelMemory, PAGE_BYTES, type KernelMemory } from '../matching/wasm/shared-memory.js';

/** The fields of a unit occurrence the hindsight needs (a window `Occurrence` fits). */
export interface HindsightUnit extends UnitPlace {
  readonly side: 'supply' | 'demand';
  readonly t: number;
  readonly end: number;
}

/**
 * One market's occurrences as plain typed arrays (structured-clone and transfer
 * friendly). Demand and supply keep the order they had in the occurrence list.
 * Locations are `lat`/`lon` in degrees or `x`/`y` in km, by the config's metric;
 * a missing coordinate is NaN (such a unit can match nothing).
 */
export interface PackedMarket {
  readonly nDemand: number;
  readonly nSupply: number;
  readonly demandT: Float64Array;
  readonly demandEnd: Float64Array;
  /** lat or x per demand. */
  readonly demandA: Float64Array;
  /** lon or y per demand. */
  readonly demandB: Float64Array;
  readonly supplyT: Float64Array;
  readonly supplyEnd: Float64Array;
  readonly supplyA: Float64Array;
  readonly supplyB: Float64Array;
  /** 32-bit words per unit in the capability bitsets (0 when no unit names any). */
  readonly capWords: number;
  /** nDemand × capWords bits of `needs`. */
  readonly demandNeeds: Uint32Array;
  /** nSupply × capWords bits of `has`. */
  readonly supplyHas: Uint32Array;
}

/** The allowed pairs in CSR form, rows = demand, columns = supply, with their costs. */
export interface AllowedGraph {
  readonly nRows: number;
  readonly nCols: number;
  readonly rowPtr: Int32Array;
  readonly colIdx: Int32Array;
  readonly cost: Float64Array;
}

/**
 * Packs one market's occurrences (any order; demand and supply keep their relative
 * order) into typed arrays. Capability names become bits of a per-market bitset.
 */
export function packMarket(units: readonly HindsightUnit[], config: PairflowConfig): PackedMarket {
  const euclid = config.metric === 'euclidean';
  const caps = new Map<string, number>();
  let nDemand = 0;
  let nSupply = 0;
  for (const u of units) {
    if (u.side === 'demand') {
      nDemand++;
      for (const c of u.needs ?? []) if (!caps.has(c)) caps.set(c, caps.size);
    } else {
      nSupply++;
      for (const c of u.has ?? []) if (!caps.has(c)) caps.set(c, caps.size);
    }
  }
  const capWords = (caps.size + 31) >>> 5;
  const p = {
    nDemand,
    nSupply,
    demandT: new Float64Array(nDemand),
    demandEnd: new Float64Array(nDemand),
    demandA: new Float64Array(nDemand),
    demandB: new Float64Array(nDemand),
    supplyT: new Float64Array(nSupply),
    supplyEnd: new Float64Array(nSupply),
    supplyA: new Float64Array(nSupply),
    supplyB: new Float64Array(nSupply),
    capWords,
    demandNeeds: new Uint32Array(nDemand * capWords),
    supplyHas: new Uint32Array(nSupply * capWords),
  };
  let d = 0;
  let s = 0;
  for (const u of units) {
    const a = (euclid ? u.x : u.lat) ?? NaN;
    const b = (euclid ? u.y : u.lon) ?? NaN;
    if (u.side === 'demand') {
      p.demandT[d] = u.t;
      p.demandEnd[d] = u.end;
      p.demandA[d] = a;
      p.demandB[d] = b;
      for (const c of u.needs ?? []) {
        const bit = caps.get(c)!;
        p.demandNeeds[d * capWords + (bit >>> 5)]! |= 1 << (bit & 31);
      }
      d++;
    } else {
      p.supplyT[s] = u.t;
      p.supplyEnd[s] = u.end;
      p.supplyA[s] = a;
      p.supplyB[s] = b;
      for (const c of u.has ?? []) {
        const bit = caps.get(c)!;
        p.supplyHas[s * capWords + (bit >>> 5)]! |= 1 << (bit & 31);
      }
      s++;
    }
  }
  return p;
}

const DEG = Math.PI / 180;

/**
 * haversineKm of window/geo.ts with each point's cos(latitude) passed in: the same
 * operations in the same order, so the same result bit for bit (the graph tests
 * compare against haversineKm exactly).
 */
function haversineCosKm(lat1: number, lon1: number, cos1: number, lat2: number, lon2: number, cos2: number): number {
  const sLat = Math.sin(((lat2 - lat1) * DEG) / 2);
  const sLon = Math.sin(((lon2 - lon1) * DEG) / 2);
  const h = sLat * sLat + cos1 * cos2 * sLon * sLon;
  const hc = Math.min(1, h);
  return 2 * EARTH_RADIUS_KM * Math.atan2(Math.sqrt(hc), Math.sqrt(1 - hc));
}

/** The largest distance in km of an allowed pair: `maxTravelMin` at `speedKmh`. */
export function maxDistanceKm(config: PairflowConfig): number {
  return (config.maxTravelMin * config.speedKmh) / 60;
}

/**
 * Integer grid cells per unit, sized so that an allowed pair is at most
 * {@link CELL_SPAN} cells apart on each axis.
 */
interface Cells {
  readonly demandCell: Float64Array;
  readonly supplyCell: Float64Array;
  /** Cells on the second axis; the cell key is `cx · ny + cy`. */
  readonly ny: number;
  /** Whether the second axis wraps around (longitude). */
  readonly wrap: boolean;
}

// Keeps cell keys exact in a double (2^24 cells per axis at most): a coarser cell is
// still a correct filter, only a less selective one.
const MAX_CELLS_PER_AXIS = 1 << 24;
// Head-room over the pair-distance bound against rounding in the distance formulas.
const SLACK = 1 + 1e-9;
// Cells per reach on each axis: an arrival looks at the (2·CELL_SPAN + 1)² cells
// around its own. Half-reach cells cover 6.25 reach² instead of 9 for reach-sized
// ones, so about 30 % fewer distances are computed for the same pairs (measured
// to pay; finer cells add more cell visits than they save).
const CELL_SPAN = 2;

function assignCells(m: PackedMarket, config: PairflowConfig): Cells {
  const reach = (maxDistanceKm(config) * SLACK) / CELL_SPAN;
  const demandCell = new Float64Array(m.nDemand).fill(NaN);
  const supplyCell = new Float64Array(m.nSupply).fill(NaN);
  if (config.metric === 'euclidean') {
    let lo = Infinity;
    let hi = -Infinity;
    for (const arr of [m.demandA, m.demandB, m.supplyA, m.supplyB]) {
      for (let i = 0; i < arr.length; i++) {
        const v = arr[i]!;
        if (v < lo) lo = v;
        if (v > hi) hi = v;
      }
    }
    if (!(hi >= lo)) return { demandCell, supplyCell, ny: 1, wrap: false };
    const cell = Math.max(reach, (hi - lo) / (MAX_CELLS_PER_AXIS - 2 * CELL_SPAN), 1e-12);
    const ny = Math.floor((hi - lo) / cell) + 1;
    const put = (xs: Float64Array, ys: Float64Array, out: Float64Array): void => {
      for (let i = 0; i < xs.length; i++) {
        const x = xs[i]!;
        const y = ys[i]!;
        if (Number.isFinite(x) && Number.isFinite(y)) {
          out[i] = Math.floor((x - lo) / cell) * ny + Math.floor((y - lo) / cell);
        }
      }
    };
    put(m.demandA, m.demandB, demandCell);
    put(m.supplyA, m.supplyB, supplyCell);
    return { demandCell, supplyCell, ny, wrap: false };
  }
  // Sphere: a great circle of length d spans at most d/R radians of latitude, and,
  // since hav(d/R) ≥ cos φ1 · cos φ2 · hav(Δλ), at most 2·asin(sin(d/2R) / cos φmax)
  // of longitude, φmax being the market's largest |latitude|.
  const full = (maxDistanceKm(config) * SLACK) / EARTH_RADIUS_KM;
  let cosMin = 1;
  for (const arr of [m.demandA, m.supplyA]) {
    for (let i = 0; i < arr.length; i++) {
      const c = Math.cos((arr[i]! * Math.PI) / 180);
      if (c < cosMin) cosMin = c;
    }
  }
  const cellLat = Math.max(full / CELL_SPAN, Math.PI / (MAX_CELLS_PER_AXIS - 2 * CELL_SPAN));
  const nx = Math.floor(Math.PI / cellLat) + 1;
  const sinHalf = Math.sin(full / 2) / Math.max(cosMin, 1e-300);
  const lonSpan = sinHalf >= 1 ? 2 * Math.PI : (2 * Math.asin(sinHalf) * SLACK) / CELL_SPAN;
  // Columns of equal width ≥ lonSpan around the whole circle; too few to keep the
  // (2·CELL_SPAN + 1) columns an arrival looks at distinct means one column.
  let ny = Math.floor((2 * Math.PI) / Math.max(lonSpan, (2 * Math.PI) / MAX_CELLS_PER_AXIS));
  if (ny < 2 * CELL_SPAN + 1) ny = 1;
  const cellLon = (2 * Math.PI) / ny;
  const put = (lats: Float64Array, lons: Float64Array, out: Float64Array): void => {
    for (let i = 0; i < lats.length; i++) {
      const la = lats[i]!;
      const lo = lons[i]!;
      if (Number.isFinite(la) && Number.isFinite(lo)) {
        const cx = Math.min(nx - 1, Math.floor(((la * Math.PI) / 180 + Math.PI / 2) / cellLat));
        const cy = Math.floor(((lo * Math.PI) / 180 + Math.PI) / cellLon) % ny;
        out[i] = cx * ny + cy;
      }
    }
  };
  put(m.demandA, m.demandB, demandCell);
  put(m.supplyA, m.supplyB, supplyCell);
  return { demandCell, supplyCell, ny, wrap: ny > 1 };
}

/**
 * The exact hindsight cost of pair (demand d, supply s) of a packed market, or NaN
 * when the pair is not allowed (too far, `needs ⊄ has`, or a coordinate missing).
 * Time overlap is not checked. The graph builder computes costs with the same
 * operations, so a cost recomputed here equals the one it found, bit for bit.
 */
export type PairCost = (d: number, s: number) => number;

/** {@link PairCost} of one packed market under `config`. */
export function pairCostOf(m: PackedMarket, config: PairflowConfig): PairCost {
  const euclid = config.metric === 'euclidean';
  const speed = config.speedKmh;
  const maxTravel = config.maxTravelMin;
  const waitWeight = config.waitWeight;
  const w = m.capWords;
  const { demandNeeds, supplyHas, demandA, demandB, supplyA, supplyB, demandT, supplyT } = m;
  return (d: number, s: number): number => {
    for (let q = 0; q < w; q++) if ((demandNeeds[d * w + q]! & ~supplyHas[s * w + q]!) !== 0) return NaN;
    const dist = euclid
      ? euclideanKm(supplyA[s]!, supplyB[s]!, demandA[d]!, demandB[d]!)
      : haversineKm(supplyA[s]!, supplyB[s]!, demandA[d]!, demandB[d]!);
    const travel = travelMin(dist, speed);
    if (!(travel <= maxTravel)) return NaN;
    const wait = supplyT[s]! - demandT[d]!;
    // Same operation order as SPEC §2's `waitWeight * (τ − d.t) / 60000`.
    return travel + (wait > 0 ? (waitWeight * wait) / 60_000 : 0);
  };
}

/**
 * The allowed pairs of one market in CSR form, stored for size: three bytes a pair.
 * Rows are graph rows, one per demand, numbered in the order their demands leave (by
 * `end`, then index), so no row's pairs ever need moving. A pair holds its column
 * less its row's lowest column (`cols`, 16 bits) and a byte (`codes`): a code of its
 * cost (a cost step of P/254, so the code bounds the cost within about an eighth of
 * a minute at P = 30, and the top code says "≥ P"), or the candidate mark, which
 * takes the code's place (a candidate's cost is exact in the restricted solve, and
 * no pass over the graph needs its code again). A decision the code cannot make (a pricing decision within a
 * step of zero) takes the cost the graph build computed ({@link quickPairCostOf}),
 * and whatever must be exact (the restricted solves, the certificate, a decision
 * within rounding of zero) recomputes it with {@link pairCostOf}. A row whose
 * columns span more than 65 535 keeps its columns apart (`wide`); a week of a busy
 * city has none.
 *
 * Why so small: the graph is most of the hindsight's memory (a busy district's day
 * holds a hundred million pairs, a week's eight hundred million), two markets are
 * solved at once, and a pricing pass streams through all of it. A 15-bit code in a
 * 32-bit word (the layout before) needed no second look at 99.9 % of the pairs a
 * pricing pass reads in full; the byte sends about 1 in 100 of them to the build's
 * cost, which the pass can afford (measured below, at {@link CODE_TOP}).
 */
export interface CompactGraph {
  readonly nRows: number;
  readonly nCols: number;
  /** Demand of each graph row. */
  readonly rowDemand: Int32Array;
  /** Graph row of each demand. */
  readonly demandRow: Int32Array;
  /** Length nRows + 1: graph row r's pairs are `rowPtr[r] .. rowPtr[r + 1]` of `cols` and `codes`, in sweep order. */
  readonly rowPtr: Int32Array;
  /** The lowest column of each row's pairs (what `cols` adds to). */
  readonly rowBase: Int32Array;
  /** Per pair, its column less its row's base (0 in a wide row). */
  readonly cols: Uint16Array;
  /** Per pair, its cost code under the candidate mark (see {@link codeOf}, {@link isMarked}). */
  readonly codes: Uint8Array;
  /** The columns of each wide row (span over 65 535), by row. */
  readonly wide: ReadonlyMap<number, Int32Array>;
  /** Cost of one code step: code q means a cost in [q·step, (q + 1)·step); {@link CODE_TOP} means ≥ P. */
  readonly step: number;
  /** Whether the rows were scanned by the WebAssembly row kernel (wasm/graph-rows.ts); the same graph either way. */
  readonly byKernel?: boolean;
}

/**
 * The code of a cost of P or more (a pair that can never price out or be worth
 * matching). Measured on a busy district's day (`gen --scale 4`, 114 M pairs, one
 * thread): with codes of 7 bits the pricing passes took the build's cost 21 M times
 * over 12 rounds and took 5.2 s against 4.0 s with 15 bits (13 rounds, 0.17 M);
 * 8 bits halve those second looks.
 */
export const CODE_TOP = 0xfe;
/** A candidate's byte in place of its code: above every code, so a pass skips it with the top code. */
export const MARK = 0xff;
/** Largest column span a row's 16 column bits can hold. */
const SPAN = 0xffff;

/** The cost code of an unmarked pair's byte. */
export const codeOf = (b: number): number => b;
/** Whether a pair's byte is the candidate mark. */
export const isMarked = (b: number): boolean => b === MARK;

/**
 * The cost code of cost c ≥ 0, P being the unmatched cost and `perStep` = 1 / step
 * (254 / P). A multiplication by the reciprocal, truncated, instead of a division
 * and a floor (the graph build computes one for each of its hundred million pairs):
 * c · perStep is within an ulp or two of c / step, so the code can differ from
 * ⌊c / step⌋ only for a cost within about 2^-51 (relative) of a step's edge, far
 * inside the allowance the pricing passes give a code (BOUND_SLACK in pricing.ts).
 */
export function costCode(c: number, P: number, perStep: number): number {
  // Below P a code never reaches the top one, whatever the rounding of c · perStep.
  if (!(c < P)) return CODE_TOP;
  const q = (c * perStep) | 0;
  return q < CODE_TOP ? q : CODE_TOP - 1;
}

/** The code step of a segment whose unmatched cost is P. */
export function codeStep(P: number): number {
  return P > 0 ? P / CODE_TOP : 1;
}

/** The column of pair e of row r (any row, wide or not). */
export function columnOf(g: CompactGraph, r: number, e: number): number {
  const wide = g.wide.get(r);
  return wide === undefined ? g.rowBase[r]! + g.cols[e]! : wide[e - g.rowPtr[r]!]!;
}

/**
 * The graph's pairs as plain columns, in a new array (4 bytes a pair): for a match
 * ceiling over a graph with wide rows, and for tests.
 */
export function plainColumns(g: CompactGraph): Int32Array {
  const out = new Int32Array(g.cols.length);
  for (let r = 0; r < g.nRows; r++) {
    const wide = g.wide.get(r);
    const start = g.rowPtr[r]!;
    if (wide !== undefined) {
      out.set(wide, start);
      continue;
    }
    const base = g.rowBase[r]!;
    for (let e = start; e < g.rowPtr[r + 1]!; e++) out[e] = base + g.cols[e]!;
  }
  return out;
}

// Pairs the first buffers are sized for. Pages of a typed array that are never
// written are never made resident (the zeroed memory comes from the system as it is
// touched), so a roomy first reservation costs address space, not memory, and spares
// the copies of growing: growing a week's graph of a busy district (800 M pairs) from
// 2^27 took three copies, the last holding 2 GB of old pairs beside the new ones.
const RESERVE_PAIRS = 1 << 30;

/** The pairs a build of market `m` first makes room for (without a `reserve`). */
export function firstReserve(m: PackedMarket): number {
  return Math.max(1024, Math.min(RESERVE_PAIRS, m.nDemand * m.nSupply));
}

/**
 * Buffers for the pairs of one build after another (the time segments of a market):
 * a new build overwrites the previous graph, so only callers done with one graph
 * before the next may share a store.
 */
export class GraphStore {
  cols = new Uint16Array(0);
  codes = new Uint8Array(0);
  /**
   * The shared WebAssembly memory the pairs live in, columns from byte 0 and codes
   * after them, where the pricing kernel reads them in place (wasm/pricing-scan.ts);
   * null: plain buffers, priced in JavaScript.
   */
  memory: KernelMemory | null = null;
  /** Where the pairs end in {@link memory}: the pricers' column slots follow. */
  private slotsAt = 0;

  /**
   * @param shared keep the pairs in SharedArrayBuffers, so that a second thread can
   *   read a pricing pass's share of the rows (pricing-split.ts); their pages too are
   *   made resident only as they are written
   * @param kernel keep them in a shared WebAssembly memory where one can be had (a
   *   store of more than about 1.4 G pairs cannot be: 32-bit addresses)
   */
  constructor(
    readonly shared = false,
    private readonly kernel = false,
  ) {}

  /** Room for at least `n` pairs, keeping the first `keep`. */
  ensure(n: number, keep: number): void {
    if (n <= this.cols.length) return;
    let cap = Math.max(n, Math.min(RESERVE_PAIRS, 2 * n), 2 * this.cols.length);
    let cols: Uint16Array<ArrayBuffer> | null = null;
    let codes: Uint8Array<ArrayBuffer> | null = null;
    let memory: KernelMemory | null = null;
    // A system that will not promise that much address space gets a smaller reservation.
    while (codes === null) {
      try {
        memory = this.kernel && this.shared ? kernelMemory(pageAligned(3 * cap) + SLOT_ROOM) : null;
        if (memory !== null) {
          cols = new Uint16Array(memory.buffer, 0, cap) as unknown as Uint16Array<ArrayBuffer>;
          codes = new Uint8Array(memory.buffer, 2 * cap, cap) as unknown as Uint8Array<ArrayBuffer>;
        } else {
          cols = this.shared ? (new Uint16Array(new SharedArrayBuffer(2 * cap)) as unknown as Uint16Array<ArrayBuffer>) : new Uint16Array(cap);
          codes = this.shared ? (new Uint8Array(new SharedArrayBuffer(cap)) as unknown as Uint8Array<ArrayBuffer>) : new Uint8Array(cap);
        }
      } catch (err) {
        cols = null;
        if (!(err instanceof RangeError) || cap <= n) throw err;
        cap = Math.max(n, Math.floor(cap / 2));
      }
    }
    cols!.set(this.cols.subarray(0, keep));
    codes.set(this.codes.subarray(0, keep));
    this.cols = cols!;
    this.codes = codes;
    this.memory = memory;
    this.slotsAt = memory === null ? 0 : pageAligned(3 * cap);
  }

  /**
   * The room past the pairs of the memory the store now has, for a build's kernel
   * (wasm/graph-rows.ts); it keeps to that memory should the store move to a larger
   * one meanwhile. Null without a kernel memory.
   */
  scratchSpace(): ScratchSpace | null {
    const memory = this.memory;
    if (memory === null) return null;
    const at = this.slotsAt;
    return { memory, scratch: (bytes) => roomIn(memory, at, bytes) };
  }

  /**
   * The byte offset past the pairs in {@link memory} from which at least `bytes` are
   * free for a build's or a pricer's working arrays (the memory grows to hold them),
   * or -1 when they cannot be had. What is there is overwritten by the next user.
   */
  scratch(bytes: number): number {
    return this.memory === null ? -1 : roomIn(this.memory, this.slotsAt, bytes);
  }

  /**
   * Slot `k` of the column numbers a pricing kernel reads (one slot per thread that
   * prices the same graph: 0 its worker, 1 its helper), for a graph of `nCols` columns
   * and `perCol` picks a column; null when the pairs are not in a kernel memory or
   * there is no room for the slot. Its picks' arrays start cleared.
   */
  columns(k: number, nCols: number, perCol: number): KernelColumns | null {
    const memory = this.memory;
    if (memory === null) return null;
    const duals = 8 * nCols;
    const counts = 8 * Math.ceil(nCols / 2);
    const size = OUT_BYTES + duals + counts + 8 * nCols * perCol;
    const base = this.scratch((k + 1) * size);
    if (base < 0) return null;
    const at = base + k * size;
    const buf = memory.buffer;
    const slot: KernelColumns = {
      memory,
      out: new Float64Array(buf, at, 2),
      duals: new Float64Array(buf, at + OUT_BYTES, nCols),
      count: new Int32Array(buf, at + OUT_BYTES + duals, nCols),
      red: new Float64Array(buf, at + OUT_BYTES + duals + counts, nCols * perCol),
    };
    slot.count.fill(0);
    return slot;
  }

  /**
   * An arena past the pairs in {@link memory}, for work on a graph once its pricing is
   * over (the match ceiling's depth-first passes, matching/wasm/depth-first.wat): what
   * was there is overwritten. Null without a kernel memory.
   */
  arena(): KernelArena | null {
    return this.memory === null ? null : KernelArena.within(this.memory, this.slotsAt);
  }

  /** Whether graph `g`'s pairs are this store's, in its kernel memory. */
  holds(g: Pick<CompactGraph, 'cols' | 'codes'>): boolean {
    return this.memory !== null && g.cols.buffer === this.cols.buffer && g.codes.buffer === this.codes.buffer;
  }
}

/** Room past the pairs a kernel memory starts with, for the pricers' column slots (it grows for larger markets). */
const SLOT_ROOM = 1 << 24;
/** A slot's first bytes: where a kernel call leaves its results (a cache line of its own). */
const OUT_BYTES = 64;

/** `at` once `memory` holds `bytes` from there (grown if need be), else -1. */
function roomIn(memory: KernelMemory, at: number, bytes: number): number {
  return holdBytes(memory, at + bytes) ? at : -1;
}

function pageAligned(bytes: number): number {
  return Math.ceil(bytes / PAGE_BYTES) * PAGE_BYTES;
}

/**
 * Sees each graph row once, as its pairs are written: their columns and cost codes
 * are `cols` / `codes` over `[0, n)`, and pair i of them is pair `start + i` of the
 * graph, whose byte in `marks` (the graph's `codes`) is where a candidate is marked;
 * `lo` and `hi` are the lowest and highest of the columns (lo > hi when there are none).
 * What must look at every pair (the first candidates) does it here, while the row is
 * in cache, instead of in a pass of its own over the whole graph.
 */
export interface RowVisitor {
  row(r: number, demand: number, cols: Int32Array, codes: Uint8Array, n: number, start: number, marks: Uint8Array, lo: number, hi: number): void;
  /** Where the row kernel builds the graph, it looks at each row for the visitor through this (wasm/graph-rows.ts). */
  readonly kernelVisitor?: KernelVisitor;
}

/**
 * Per-unit terms of the distance prefilter, interleaved (stride {@link STRIDE}) so
 * one cache line holds all a pair test reads of a unit. On the sphere a pair's
 * haversine term `h = sin²(Δφ/2) + cos φ1 cos φ2 sin²(Δλ/2)` is found from each
 * point's sine and cosine of its half angles (sin(a − b) = sin a cos b − cos a sin b)
 * instead of two sines per pair; on the plane from `Δx² + Δy²`.
 * Slots: sphere [sin φ/2, cos φ/2, sin λ/2, cos λ/2, cos φ, end, t, caps];
 * plane [x, y, –, –, –, end, t, caps], caps being the unit's one capability word
 * (needs or has) when a market names at most 32 capabilities.
 */
const STRIDE = 8;
const T_END = 5;
const T_T = 6;
const T_CAPS = 7;

function termsOf(lat: Float64Array, lon: Float64Array, t: Float64Array, end: Float64Array, caps: Uint32Array, capWords: number, sphere: boolean, shared = false): Float64Array {
  const n = lat.length;
  const out = shared ? new Float64Array(new SharedArrayBuffer(8 * n * STRIDE)) : new Float64Array(n * STRIDE);
  for (let i = 0; i < n; i++) {
    const o = i * STRIDE;
    if (sphere) {
      const ha = (lat[i]! * DEG) / 2;
      const hb = (lon[i]! * DEG) / 2;
      out[o] = Math.sin(ha);
      out[o + 1] = Math.cos(ha);
      out[o + 2] = Math.sin(hb);
      out[o + 3] = Math.cos(hb);
      // The same cos(latitude) haversineKm computes, so the exact path matches it bit for bit.
      out[o + 4] = Math.cos(lat[i]! * DEG);
    } else {
      out[o] = lat[i]!;
      out[o + 1] = lon[i]!;
    }
    out[o + T_END] = end[i]!;
    out[o + T_T] = t[i]!;
    if (capWords === 1) out[o + T_CAPS] = caps[i]!;
  }
  return out;
}

// Above this h (pairs farther than ~127 km) the short-distance series below is not
// used: every accepted pair then takes the exact formula.
const SERIES_MAX_H = 1e-4;
const SIXTH = 1 / 6;

/** Great-circle km of haversine term h ≤ SERIES_MAX_H: 2R·asin(√h) by its series. */
function seriesKm(h: number): number {
  return 2 * EARTH_RADIUS_KM * Math.sqrt(h) * (1 + h * SIXTH + 0.075 * h * h);
}
// A fast distance this close (relative) to the limit is decided by the exact formula.
const EDGE = 1e-9;

/**
 * Every allowed, time-overlapping pair of one market with its hindsight cost. Rows
 * are written one at a time, each at once and whole: a time sweep takes the events
 * "supply arrives" (its unit joins the supply grid) and "demand leaves" (its row is
 * written) in time order, an arrival before a departure at the same instant. When
 * demand d leaves, every supply it can ever meet has arrived, so its row is the
 * supplies of the 5×5 half-reach cells around it still present at some instant
 * of d's stay: one scan of the grid, its pairs written in sequence straight into the
 * graph. (Building each pair from the side that arrived later, as a first version
 * did, wrote the pairs of an arriving supply into a thousand rows at once, each
 * held aside in a pool until its demand left: a cache miss a pair, and the pool's
 * memory besides; measured on a busy district's day, 114 M pairs, the sweep took
 * 10 s that way.)
 *
 * A supply leaves the grid once it ended before the oldest arrival among the
 * demands still to be written: no row after that can meet it.
 *
 * The cost code is that of a fast distance: on the plane `√(Δx² + Δy²)`, on the
 * sphere `2R·asin(√h)` by its series (h ≤ 1e-4, so the series' error is below 1e-14
 * relative) with h from the half-angle terms above (error ~1e-12 of a minute). So a
 * code is that of the exact cost ({@link pairCostOf}) but for a cost within about
 * that of a step's edge, which the pricing passes allow for. Which pairs are allowed
 * is decided exactly: a fast distance within 1e-9 of the limit is recomputed with
 * the exact formula (the same operations as pairCostOf).
 *
 * @param reserve expected pairs, to size the buffers (a hint; they grow if needed)
 * @param visitor sees each row once its pairs are written
 * @param progress where the pairs written so far are published after each row
 *   (`progress[0]`), for a thread that makes the store's next pages resident ahead
 *   of the build (pricing-split.ts); -1 once the build is done
 */
export function buildCompactGraph(
  m: PackedMarket,
  config: PairflowConfig,
  store: GraphStore = new GraphStore(),
  reserve = 0,
  visitor: RowVisitor | null = null,
  progress: Int32Array | null = null,
): CompactGraph {
  const { nDemand, nSupply, capWords } = m;
  const { demandCell, supplyCell, ny, wrap } = assignCells(m, config);
  const euclid = config.metric === 'euclidean';
  const speed = config.speedKmh;
  const maxTravel = config.maxTravelMin;
  const waitWeight = config.waitWeight;
  const exact = pairCostOf(m, config);
  const { demandNeeds, supplyHas, demandA, demandB, supplyA, supplyB, demandT, demandEnd, supplyT } = m;

  // Supplies by arrival, demands by departure (rows are written in that order), and
  // demands by arrival (for the oldest one not written yet).
  const supplyOrder = orderBy(supplyT);
  const leaveOrder = orderBy(demandEnd);
  const demandOrder = orderBy(demandT);
  const written = new Uint8Array(nDemand);
  let oldest = 0;

  const supplyGrid = new Map<number, number[]>();
  const neighbours: number[] = [];
  const dTerms = termsOf(demandA, demandB, demandT, demandEnd, demandNeeds, capWords, !euclid);
  const sTerms = termsOf(supplyA, supplyB, supplyT, m.supplyEnd, supplyHas, capWords, !euclid);
  // The prefilter's limit: h (sphere) or squared km (plane) of the farthest allowed pair.
  const maxKm = maxDistanceKm(config);
  // (No prefilter on the sphere once the limit reaches half way round it.)
  const limit = euclid ? maxKm * maxKm : maxKm >= Math.PI * EARTH_RADIUS_KM ? Infinity : Math.sin(maxKm / EARTH_RADIUS_KM / 2) ** 2;
  const useSeries = !euclid && limit <= SERIES_MAX_H;
  // Reciprocals, so the pair loop multiplies: a division there cost about a tenth of
  // the build (measured on a busy district's 114 M pairs). Each changes a cost by an
  // ulp or so, far inside the fast distance's own error; the allowed set is still
  // decided by the exact formula near the limit.
  const minPerKm = 60 / speed;
  const waitMinPerMs = waitWeight / 60_000;
  const cut = limit * SLACK_SQ;
  // Below this a travel is farther than EDGE from the limit, with room for rounding.
  const edgeBelow = ((maxTravel * (1 - EDGE)) / (1 + EDGE)) * (1 - 1e-12);

  const rowDemand = new Int32Array(nDemand);
  const demandRow = new Int32Array(nDemand);
  const rowPtr = new Int32Array(nDemand + 1);
  const rowBase = new Int32Array(nDemand);
  const wide = new Map<number, Int32Array>();
  const P = config.abandonPenalty;
  const step = codeStep(P);
  const perStep = 1 / step;
  let nnz = 0;
  store.ensure(reserve > 0 ? reserve : firstReserve(m), 0);
  // One row's pairs while it is scanned (its lowest column, the row's base, is known only after).
  let rowCols: Int32Array = new Int32Array(1024);
  let rowCodes: Uint8Array = new Uint8Array(1024);
  // Where the pairs live in a kernel memory, its row kernel scans the cells (the same
  // pairs, codes and order: wasm/graph-rows.wat); not for several capability words, or
  // distances past the series' range (their exact formula stays in JavaScript).
  const space = capWords <= 1 && (euclid || useSeries) ? store.scratchSpace() : null;
  const kernel = space === null ? null : KernelRows.open(space, nSupply, sTerms, {
    euclid, oneCapWord: capWords === 1, cut, twoR: 2 * EARTH_RADIUS_KM, sixth: SIXTH, minPerKm, waitPerMs: waitMinPerMs,
    edgeBelow, maxTravel, edge: EDGE, P, perStep, top: CODE_TOP,
  }, visitor?.kernelVisitor ?? null);
  if (kernel !== null) {
    rowCols = kernel.cols;
    rowCodes = kernel.codes;
  }

  let next = 0;
  for (let r = 0; r < nDemand; r++) {
    const d = leaveOrder[r]!;
    const t = demandT[d]!;
    const end = demandEnd[d]!;
    // Every supply that arrives while d is here joins the grid first.
    for (; next < nSupply && supplyT[supplyOrder[next]!]! <= end; next++) {
      const s = supplyOrder[next]!;
      const key = supplyCell[s]!;
      // A unit with no location, or ended before it began, can meet nobody.
      if (Number.isNaN(key) || m.supplyEnd[s]! < supplyT[s]!) continue;
      if (kernel !== null) {
        kernel.add(s, key);
        continue;
      }
      const bucket = supplyGrid.get(key);
      if (bucket === undefined) supplyGrid.set(key, [s]);
      else bucket.push(s);
    }
    written[d] = 1;
    while (oldest < nDemand && written[demandOrder[oldest]!] === 1) oldest++;
    // Supplies that ended before this are of no use to any row still to come.
    const gone = oldest < nDemand ? Math.min(t, demandT[demandOrder[oldest]!]!) : t;
    let len = 0;
    const key = demandCell[d]!;
    if (!Number.isNaN(key) && end >= t) {
      const cx = Math.floor(key / ny);
      const cy = key - cx * ny;
      neighbours.length = 0;
      for (let dx = -CELL_SPAN; dx <= CELL_SPAN; dx++) {
        if (ny === 1) {
          neighbours.push(cx + dx);
          continue;
        }
        for (let dy = -CELL_SPAN; dy <= CELL_SPAN; dy++) {
          let y = cy + dy;
          if (wrap) y = (y + ny) % ny;
          else if (y < 0 || y >= ny) continue;
          neighbours.push((cx + dx) * ny + y);
        }
      }
      // This demand's own terms, hoisted out of the pair loop; the supplies', interleaved.
      const uo = d * STRIDE;
      const u0 = dTerms[uo]!;
      const u1 = dTerms[uo + 1]!;
      const u2 = dTerms[uo + 2]!;
      const u3 = dTerms[uo + 3]!;
      const u4 = dTerms[uo + 4]!;
      const needs1 = dTerms[uo + T_CAPS]!;
      if (kernel !== null) {
        len = kernel.scan(neighbours, needs1, u0, u1, u2, u3, u4, t, gone);
        len = settleDeferred(kernel, len, d, exact, P, perStep);
      }
      for (let q = 0; kernel === null && q < neighbours.length; q++) {
        const bucket = supplyGrid.get(neighbours[q]!);
        if (bucket === undefined) continue;
        let keep = 0;
        for (let b = 0; b < bucket.length; b++) {
          const j = bucket[b]!;
          const o = j * STRIDE;
          const sEnd = sTerms[o + T_END]!;
          if (sEnd < gone) continue;
          bucket[keep++] = j;
          // Present together: every supply here arrived by `end`; it must not leave before t.
          if (sEnd < t) continue;
          // Prefilter on the distance terms alone (symmetric in the two points).
          let km: number;
          if (euclid) {
            const dx = sTerms[o]! - u0;
            const dy = sTerms[o + 1]! - u1;
            const sq = dx * dx + dy * dy;
            if (!(sq <= cut)) continue;
            km = Math.sqrt(sq);
          } else {
            const x = sTerms[o]! * u1 - sTerms[o + 1]! * u0;
            const y = sTerms[o + 2]! * u3 - sTerms[o + 3]! * u2;
            const h = x * x + sTerms[o + 4]! * u4 * y * y;
            if (!(h <= cut)) continue;
            km = useSeries ? seriesKm(h) : haversineCosKm(supplyA[j]!, supplyB[j]!, sTerms[o + 4]!, demandA[d]!, demandB[d]!, u4);
          }
          if (capWords === 1) {
            if ((needs1 & ~sTerms[o + T_CAPS]!) !== 0) continue;
          } else if (capWords > 1) {
            let ok = true;
            for (let w = 0; w < capWords; w++) {
              if ((demandNeeds[d * capWords + w]! & ~supplyHas[j * capWords + w]!) !== 0) {
                ok = false;
                break;
              }
            }
            if (!ok) continue;
          }
          const travel = km * minPerKm;
          let c: number;
          if (travel < edgeBelow) {
            // Clear of the limit (the test below, answered at once for most pairs).
            const wait = sTerms[o + T_T]! - t;
            c = travel + (wait > 0 ? waitMinPerMs * wait : 0);
          } else if (Math.abs(travel - maxTravel) <= EDGE * (maxTravel + travel) || travel !== travel) {
            // Near the limit the exact formula decides (and gives the cost).
            c = exact(d, j);
            if (c !== c) continue;
          } else {
            if (!(travel <= maxTravel)) continue;
            const wait = sTerms[o + T_T]! - t;
            c = travel + (wait > 0 ? waitMinPerMs * wait : 0);
          }
          if (len === rowCols.length) {
            const cols = new Int32Array(2 * len);
            cols.set(rowCols);
            rowCols = cols;
            const codes = new Uint8Array(2 * len);
            codes.set(rowCodes);
            rowCodes = codes;
          }
          rowCols[len] = j;
          rowCodes[len++] = costCode(c, P, perStep);
        }
        bucket.length = keep;
      }
    }
    // Write the row: columns less the row's lowest, and the cost codes.
    const start = nnz;
    let lo = nSupply;
    let hi = -1;
    if (len > 0) store.ensure(nnz + len, nnz);
    if (len > 0 && kernel !== null && kernel.writes(store.memory)) {
      // The row kernel writes it where it stands (same numbers as below).
      if (kernel.place(len, store.cols.byteOffset + 2 * start, store.codes.byteOffset + start, SPAN)) wide.set(r, rowCols.slice(0, len));
      lo = kernel.lo();
      hi = kernel.hi();
      rowBase[r] = lo;
    } else if (len > 0) {
      const { cols, codes } = store;
      lo = rowCols[0]!;
      hi = lo;
      for (let i = 1; i < len; i++) {
        const c = rowCols[i]!;
        if (c < lo) lo = c;
        if (c > hi) hi = c;
      }
      rowBase[r] = lo;
      if (hi - lo <= SPAN) {
        for (let i = 0; i < len; i++) cols[start + i] = rowCols[i]! - lo;
      } else {
        wide.set(r, rowCols.slice(0, len));
        cols.fill(0, start, start + len);
      }
      codes.set(rowCodes.subarray(0, len), start);
    }
    visitor?.row(r, d, rowCols, rowCodes, len, start, store.codes, lo, hi);
    nnz += len;
    rowDemand[r] = d;
    demandRow[d] = r;
    rowPtr[r + 1] = nnz;
    if (progress !== null) Atomics.store(progress, 0, nnz);
  }
  if (progress !== null) Atomics.store(progress, 0, -1);
  return {
    nRows: nDemand,
    nCols: nSupply,
    rowDemand,
    demandRow,
    rowPtr,
    rowBase,
    cols: store.cols.subarray(0, nnz),
    codes: store.codes.subarray(0, nnz),
    wide,
    step,
    byKernel: kernel !== null,
  };
}

/**
 * The row kernel's pairs near the limit (code 255 until now), decided by the exact
 * formula as the JavaScript loop decides them: a pair it does not allow leaves the
 * row, the others keep their order. Returns the row's length.
 */
function settleDeferred(kernel: KernelRows, len: number, d: number, exact: PairCost, P: number, perStep: number): number {
  const n = kernel.deferred();
  if (n === 0) return len;
  const { cols, codes, defer } = kernel;
  let gone = 0;
  for (let q = 0; q < n; q++) {
    const at = defer[q]!;
    const c = exact(d, cols[at]!);
    if (c !== c) gone++;
    else codes[at] = costCode(c, P, perStep);
  }
  if (gone === 0) return len;
  let w = 0;
  for (let i = 0; i < len; i++) {
    if (codes[i] === MARK) continue;
    cols[w] = cols[i]!;
    codes[w++] = codes[i]!;
  }
  return w;
}

// The prefilter passes pairs a hair beyond the limit; the travel test then decides.
const SLACK_SQ = 1 + 4e-9;

/**
 * How far the cost {@link quickPairCostOf} gives may stand from the exact one, as a
 * share of `1 + cost`: far above the fast distance's error (about 1e-12 of a minute,
 * see {@link buildCompactGraph}; the graph tests check every pair within it).
 */
export const QUICK_COST_SLACK = 2 ** -22;

/** The per-unit terms {@link quickPairCostOf} reads. */
export interface QuickTerms {
  readonly demand: Float64Array;
  readonly supply: Float64Array;
}

/**
 * The terms of {@link quickPairCostOf} for market `m`, in SharedArrayBuffers when
 * `shared`; null where it takes the exact cost (distances off the series' range,
 * where the build took the exact formula too).
 */
export function quickTermsOf(m: PackedMarket, config: PairflowConfig, shared = false): QuickTerms | null {
  const euclid = config.metric === 'euclidean';
  const limit = euclid ? Infinity : Math.sin(maxDistanceKm(config) / EARTH_RADIUS_KM / 2) ** 2;
  if (!euclid && !(limit <= SERIES_MAX_H)) return null;
  const none = new Uint32Array(0);
  return {
    demand: termsOf(m.demandA, m.demandB, m.demandT, m.demandEnd, none, 0, !euclid, shared),
    supply: termsOf(m.supplyA, m.supplyB, m.supplyT, m.supplyEnd, none, 0, !euclid, shared),
  };
}

/**
 * The cost of an allowed pair (demand d, supply s) as the graph build computed it:
 * the fast distance, and the same wait term. Within {@link QUICK_COST_SLACK} of
 * {@link pairCostOf}'s, at a sixth of its time (no sine per pair on the sphere):
 * for the many decisions a pair's 7-bit code cannot make and its cost can by far
 * (pricing.ts). Allowedness is not checked; for a pair off the graph the number is
 * meaningless. Its per-unit terms ({@link quickTermsOf}) take 64 bytes a unit; a
 * second thread pricing the same market is handed them rather than making its own.
 */
export function quickPairCostOf(m: PackedMarket, config: PairflowConfig, terms: QuickTerms | null = quickTermsOf(m, config)): PairCost {
  const euclid = config.metric === 'euclidean';
  const exact = pairCostOf(m, config);
  if (terms === null) return exact;
  const { demand: dTerms, supply: sTerms } = terms;
  const minPerKm = 60 / config.speedKmh;
  const waitMinPerMs = config.waitWeight / 60_000;
  return (d: number, s: number): number => {
    const uo = d * STRIDE;
    const o = s * STRIDE;
    let km: number;
    if (euclid) {
      const dx = sTerms[o]! - dTerms[uo]!;
      const dy = sTerms[o + 1]! - dTerms[uo + 1]!;
      km = Math.sqrt(dx * dx + dy * dy);
    } else {
      const x = sTerms[o]! * dTerms[uo + 1]! - sTerms[o + 1]! * dTerms[uo]!;
      const y = sTerms[o + 2]! * dTerms[uo + 3]! - sTerms[o + 3]! * dTerms[uo + 2]!;
      const h = x * x + sTerms[o + 4]! * dTerms[uo + 4]! * y * y;
      // A pair decided near the limit by the exact formula may lie a hair past the series' range.
      if (!(h <= SERIES_MAX_H)) return exact(d, s);
      km = seriesKm(h);
    }
    const wait = sTerms[o + T_T]! - dTerms[uo + T_T]!;
    return km * minPerKm + (wait > 0 ? waitMinPerMs * wait : 0);
  };
}

/**
 * Every allowed, time-overlapping pair of one market with its exact hindsight cost,
 * rows = demand in occurrence order: the compact graph of {@link buildCompactGraph}
 * re-ordered, costs recomputed. For tests and reports (it holds 12 bytes a pair).
 *
 * @example
 * const g = buildAllowedGraph(packMarket(units, config), config);
 * // pairs of demand r: g.colIdx[g.rowPtr[r] .. g.rowPtr[r + 1])
 */
export function buildAllowedGraph(m: PackedMarket, config: PairflowConfig): AllowedGraph {
  return expandGraph(buildCompactGraph(m, config), pairCostOf(m, config));
}

/** A compact graph in occurrence order with exact costs. */
export function expandGraph(g: CompactGraph, exact: PairCost): AllowedGraph {
  const rowPtr = new Int32Array(g.nRows + 1);
  for (let d = 0; d < g.nRows; d++) {
    const r = g.demandRow[d]!;
    rowPtr[d + 1] = rowPtr[d]! + g.rowPtr[r + 1]! - g.rowPtr[r]!;
  }
  const colIdx = new Int32Array(rowPtr[g.nRows]!);
  const cost = new Float64Array(colIdx.length);
  for (let d = 0; d < g.nRows; d++) {
    const r = g.demandRow[d]!;
    let at = rowPtr[d]!;
    for (let e = g.rowPtr[r]!; e < g.rowPtr[r + 1]!; e++) {
      const c = columnOf(g, r, e);
      colIdx[at] = c;
      cost[at] = exact(d, c);
      at++;
    }
  }
  return { nRows: g.nRows, nCols: g.nCols, rowPtr, colIdx, cost };
}
