/**
 * The windowed online policy of SPEC §3. Pure: time is an input (event time, and an
 * injected clock used only to measure solve time).
 *
 * Choices where SPEC §3 is silent:
 * - an occurrence that leaves unmatched is reported by an {@link ExpiryRecord} at the
 *   first epoch τ with `end < τ` that the engine closes after learning the end; one
 *   that ended before its first epoch never pools and is reported at that epoch;
 * - an {@link EpochRecord} is written for every solve, not for every epoch (W = 1 s
 *   over a week is 600k epochs per market; most change nothing and are skipped);
 * - `priceMin`/`priceMean`/`priceMax` are over the supply (column) prices of the solve;
 * - dual prices are carried per occurrence: a new unit starts unknown (NaN).
 */
import { pairflowError } from '../errors.js';
import { checkCertificate, solveSparse } from '../matching/index.js';
import type { SolveOptions, SolveResult, SparseInstance, WarmStart } from '../matching/index.js';
import { type PairflowConfig, reserveOf, type Side, type SourcedEvent } from '../model.js';
import { capabilitiesAllow } from './geo.js';
import { cellKmFor, cosDeg, type GridOptions, SpatialGrid } from './grid.js';
import { KeyedHeap } from './heap.js';
import { type Occurrence, OccurrenceLedger } from './occurrences.js';
import { TagBits } from './tags.js';

/** One executed pair (SPEC §3): decided at epoch `decidedAt`, at cost `travelMin + waitWeight·waitMin`. */
export interface AssignmentRecord {
  market: string;
  /** The epoch τ at which the pair was executed (ms). */
  epoch: number;
  demandId: string;
  supplyId: string;
  /** Arrival times of the two occurrences: with the ids they name the occurrences. */
  demandT: number;
  supplyT: number;
  /** Equal to `epoch`. */
  decidedAt: number;
  travelMin: number;
  /** `(τ − d.t) / 60000`. */
  waitMin: number;
  /** `c(s,d,τ) = travelMin + waitWeight · waitMin`. */
  cost: number;
}

/** An occurrence that left the pool unmatched (its end passed, or it was withdrawn). */
export interface ExpiryRecord {
  market: string;
  side: Side;
  id: string;
  t: number;
  end: number;
  /** The epoch at which the engine noticed it: the first epoch τ with `end < τ`. */
  epoch: number;
  /** P for demand, 0 for supply. */
  cost: number;
  /** Where the unit was (lat/lon or x/y, per the metric): for maps of unserved demand. Not part of the bus record. */
  lat?: number;
  lon?: number;
  x?: number;
  y?: number;
}

/**
 * The dual prices of one side of one solve, unit by unit, with where each unit is. The
 * arrays are views into the engine's buffers: valid during the call only.
 */
export interface PriceRecord {
  market: string;
  epoch: number;
  side: Side;
  /** Units in this record. */
  n: number;
  /** Coordinates of unit k: (a[k], b[k]) = (lat, lon) under haversine, (x, y) under euclidean. */
  a: Float64Array;
  b: Float64Array;
  /** Dual price of unit k in this solve (SPEC §5: u_d for demand, v_s ≤ 0 for supply). */
  price: Float64Array;
}

/** What happened at one solved epoch of one market. */
export interface EpochRecord {
  market: string;
  epoch: number;
  poolDemand: number;
  poolSupply: number;
  candidatePairs: number;
  /** Pairs executed at this epoch. */
  matched: number;
  /** Pairs of the solution kept for later (commit "due"). */
  tentative: number;
  solveMs: number;
  warm: boolean;
  augmentations: number;
  /** The solver's objective: Σ matched c + Σ defer over unmatched demand. */
  primalCost: number;
  /** Σ u + Σ v: equals primalCost (SPEC §5). */
  dualObjective: number;
  /** Over the supply (column) prices of this solve; 0 when the pool has no supply. */
  priceMin: number;
  priceMean: number;
  priceMax: number;
  /** Late events of this market (SPEC §3) taken since its previous epoch record. */
  late: number;
}

/** Where the engine's records go; called synchronously, in epoch order per market. */
export interface EngineSink {
  assignment(a: AssignmentRecord): void;
  expiry(e: ExpiryRecord): void;
  epoch(s: EpochRecord): void;
  /**
   * Optional: the dual prices of every solve, per side (for maps of where supply was
   * scarce). Left out, the engine builds nothing for it.
   */
  prices?(p: PriceRecord): void;
}

/** Running totals over every market. */
export interface EngineTotals {
  /** Occurrences (SPEC §1) seen, per side. */
  demandUnits: number;
  supplyUnits: number;
  /** Executed pairs. */
  matched: number;
  /** Demand occurrences that left the pool unmatched. */
  abandoned: number;
  /** Σ c(s,d,τ) + P · abandoned, so far. */
  cost: number;
  duplicates: number;
  ignoredWithdraws: number;
  /** Events whose time was before an epoch already closed for their market. */
  late: number;
  /**
   * Events refused because they were later than the engine keeps history for (before
   * the market's last closed epoch minus `allowedLatenessMs`); each became a reject.
   */
  tooLate: number;
}

/** Engine options. */
export interface EngineOptions {
  /** Carry dual prices from epoch to epoch as a warm start. @default true */
  warm?: boolean;
  /** Clock for `solveMs` only. @default performance.now */
  now?: () => number;
  /** Run `checkCertificate` on every solve and throw on failure (for tests). @default false */
  verify?: boolean;
  /** The sparse solver; injected to observe or record epoch solves (benchmarks, tests). @default solveSparse */
  solve?: (inst: SparseInstance, opts: SolveOptions) => SolveResult;
  /**
   * Forget occurrences once they are reported and their end lies more than
   * `allowedLatenessMs` before the market's last closed epoch, so memory follows the
   * pools rather than the length of the run; events older than that are refused. Off,
   * every occurrence is kept (and nothing is refused). @default true
   */
  bounded?: boolean;
}

/** A unit of a {@link PoolSnapshot}: an occurrence the engine still holds. */
export interface SnapshotUnit {
  side: Side;
  id: string;
  t: number;
  until: number;
  end: number;
  seq: number;
  lat?: number;
  lon?: number;
  x?: number;
  y?: number;
  has?: readonly string[];
  needs?: readonly string[];
  /** Carried dual price, null when none. */
  price: number | null;
  /**
   * `pending`: known, joins the pool at `joinEpoch`; `pool`: in the pool at `slot`;
   * `done`: already reported (matched or expired), kept only while a late event could
   * still concern it.
   */
  state: 'pending' | 'pool' | 'done';
  /** `pending` only. */
  joinEpoch?: number;
  /** `pool` only: the unit's slot in its side's pool (row and column order of the solves). */
  slot?: number;
}

/** Slot layout of one side's pool, so a restored pool solves in the same row/column order. */
export interface SnapshotPoolLayout {
  /** Slots in use are below `high`. */
  high: number;
  /** Free slots below `high`, in reuse order (the last is reused first). */
  free: number[];
}

/** Serialisable state of one market (live mode stores it on the compacted pool topic). */
export interface PoolSnapshot {
  version: 2;
  market: string;
  windowMs: number;
  /** Last closed epoch of the market; -Infinity is written as null. */
  lastClosed: number | null;
  /** Late events not yet counted in an epoch record. */
  late: number;
  pools: { demand: SnapshotPoolLayout; supply: SnapshotPoolLayout };
  units: SnapshotUnit[];
  /** Tentative pairs (commit "due") as [demand unit, supply unit] positions in `units`. */
  tentative: Array<[number, number]>;
}

/** The snapshot format this engine writes and reads. */
export const SNAPSHOT_VERSION = 2;

/** The fixed part of a {@link SnapshotUnit}: what stays the same while the engine holds it. */
export type PoolUnit = Pick<SnapshotUnit, 'side' | 'id' | 't' | 'until' | 'seq' | 'lat' | 'lon' | 'x' | 'y' | 'has' | 'needs'>;

/** {@link PoolColumns} `state` codes. */
export const COL_POOL = 0;
export const COL_PENDING = 1;
export const COL_DONE = 2;

/**
 * A {@link PoolSnapshot} in columns: one entry per unit in snapshot order. `aux` is the
 * slot (state pool) or the join epoch (state pending); `price` is NaN for none.
 */
export interface PoolColumns {
  head: Omit<PoolSnapshot, 'units' | 'tentative'>;
  /** Occurrence index in the engine that wrote it (meaningless elsewhere). */
  occ: Int32Array;
  seq: Float64Array;
  end: Float64Array;
  price: Float64Array;
  state: Uint8Array;
  aux: Float64Array;
  tentative: Array<[number, number]>;
}

/** Builds the snapshot of `cols`, taking the fixed part of its k-th unit from `unitAt(k)`. */
export function expandPoolColumns(cols: Omit<PoolColumns, 'occ'>, unitAt: (k: number) => PoolUnit): PoolSnapshot {
  const snap: PoolSnapshot = { ...cols.head, units: [], tentative: cols.tentative };
  const n = cols.seq.length;
  for (let k = 0; k < n; k++) {
    const f = unitAt(k);
    const code = cols.state[k];
    const p = cols.price[k]!;
    const unit: SnapshotUnit = {
      side: f.side, id: f.id, t: f.t, until: f.until, end: cols.end[k]!, seq: cols.seq[k]!, price: Number.isNaN(p) ? null : p,
      state: code === COL_POOL ? 'pool' : code === COL_PENDING ? 'pending' : 'done',
    };
    if (code === COL_POOL) unit.slot = cols.aux[k]!;
    else if (code === COL_PENDING) unit.joinEpoch = cols.aux[k]!;
    if (code !== COL_DONE) {
      // A reported unit keeps only what tells it apart.
      if (f.lat !== undefined) unit.lat = f.lat;
      if (f.lon !== undefined) unit.lon = f.lon;
      if (f.x !== undefined) unit.x = f.x;
      if (f.y !== undefined) unit.y = f.y;
      if (f.has !== undefined) unit.has = f.has;
      if (f.needs !== undefined) unit.needs = f.needs;
    }
    snap.units.push(unit);
  }
  return snap;
}

/** Where an occurrence is, as far as the engine is concerned (0: the index is free). */
const ST_PENDING = 1;
const ST_POOL = 2;
const ST_MATCHED = 3;
const ST_GONE = 4;

/** Empty candidate lists (shared: never written, replaced on the first append). */
const NO_SLOTS = new Int32Array(0);
const NO_VALUES = new Float64Array(0);
/** Placeholder for emptied entries of the engine's scratch list of grid cells. */
const NO_BUCKET: number[] = [];
const DEG = Math.PI / 180;

/**
 * One side's pool of a market: slots (reused) hold occurrence indices; the grid indexes
 * the slots. What the candidate scan reads per unit is kept by slot in typed arrays, so
 * a scan touches no occurrence object.
 */
class SidePool {
  slotOcc: Int32Array = new Int32Array(16).fill(-1);
  /** The serial of the occurrence in each slot (0 when free): tells a live candidate entry from a stale one. */
  slotSerial: Float64Array = new Float64Array(16);
  /** Where the unit in each slot is: (lat, lon) or (x, y), and cos(lat) under haversine. */
  slotA: Float64Array = new Float64Array(16);
  slotB: Float64Array = new Float64Array(16);
  slotCos: Float64Array = new Float64Array(16);
  /** Arrival time and `until` of the unit in each slot (what a solve reads of a row). */
  slotT: Float64Array = new Float64Array(16);
  slotUntil: Float64Array = new Float64Array(16);
  /**
   * Capabilities of the unit in each slot ({@link TagBits}): a demand's needs, the
   * complement of a supply's has; a pair is allowed when the AND of the two is 0.
   */
  slotMask: Int32Array = new Int32Array(16);
  /**
   * Supply only: per slot, the allowed demand seen so far, entry k being demand pool slot
   * `candSlot[slot][k]` at `candValue[slot][2k]` minutes with serial `candValue[slot][2k + 1]`,
   * for k < candLen[slot] (an entry is live while that demand slot holds that serial;
   * stale entries are dropped at use). Kept on the supply side so a solve can lay out
   * each row's pairs in column order by counting, without sorting. A slot's arrays are
   * kept for its next unit.
   */
  candSlot: Int32Array[] = new Array<Int32Array>(16).fill(NO_SLOTS);
  candValue: Float64Array[] = new Array<Float64Array>(16).fill(NO_VALUES);
  candLen: Int32Array = new Int32Array(16);
  /**
   * Demand only: per slot, how many live entries the supply lists hold for the unit
   * there (one per pooled supply it may pair with): a solve sizes its rows from it.
   */
  deg: Int32Array = new Int32Array(16);
  /** Slots in use are below `high`; freed ones are reused last-freed first. */
  high = 0;
  size = 0;
  free: number[] = [];
  readonly grid: SpatialGrid;

  constructor(gridOpts: GridOptions) {
    this.grid = new SpatialGrid(gridOpts);
  }

  add(occ: number, serial: number, a: number, b: number, mask: number): number {
    const slot = this.free.length > 0 ? this.free.pop()! : this.high++;
    this.place(occ, serial, slot, a, b, mask);
    return slot;
  }

  /** Takes a stored slot layout (restore): slots below `high` not in use must read -1. */
  setLayout(high: number, free: readonly number[]): void {
    if (high > this.slotOcc.length) this.grow(high);
    this.high = high;
    this.free = [...free];
  }

  private grow(n: number): void {
    const size = Math.max(n, this.slotOcc.length * 2);
    const occ = new Int32Array(size).fill(-1);
    occ.set(this.slotOcc);
    this.slotOcc = occ;
    this.slotSerial = growF64(this.slotSerial, size);
    this.slotA = growF64(this.slotA, size);
    this.slotB = growF64(this.slotB, size);
    this.slotCos = growF64(this.slotCos, size);
    this.slotT = growF64(this.slotT, size);
    this.slotUntil = growF64(this.slotUntil, size);
    this.slotMask = growI32(this.slotMask, size);
    this.candLen = growI32(this.candLen, size);
    this.deg = growI32(this.deg, size);
    while (this.candSlot.length < size) {
      this.candSlot.push(NO_SLOTS);
      this.candValue.push(NO_VALUES);
    }
  }

  /** Puts `occ` (with its serial, place and capability mask) at a given slot. */
  place(occ: number, serial: number, slot: number, a: number, b: number, mask: number): void {
    if (slot >= this.slotOcc.length) this.grow(slot + 1);
    this.slotOcc[slot] = occ;
    this.slotSerial[slot] = serial;
    this.slotA[slot] = a;
    this.slotB[slot] = b;
    this.slotCos[slot] = cosDeg(a);
    this.slotMask[slot] = mask;
    this.candLen[slot] = 0;
    this.deg[slot] = 0;
    this.grid.insert(slot, a, b);
    this.size++;
  }

  remove(slot: number): void {
    this.slotOcc[slot] = -1;
    this.slotSerial[slot] = 0;
    this.candLen[slot] = 0;
    this.grid.remove(slot);
    this.free.push(slot);
    this.size--;
  }

  /**
   * The (supply) unit at `slot` is leaving: each demand of `dem` its list holds a live
   * entry for has one pair fewer. Call before {@link remove}.
   */
  dropCands(slot: number, dem: SidePool): void {
    const ds = this.candSlot[slot]!, val = this.candValue[slot]!;
    const n = this.candLen[slot]!;
    const serial = dem.slotSerial, deg = dem.deg;
    for (let k = 0; k < n; k++) {
      const d = ds[k]!;
      if (serial[d] === val[2 * k + 1]) deg[d]!--;
    }
    this.candLen[slot] = 0;
  }

  /** Makes room for more than `n` candidates at `slot`, keeping the first n. */
  growCand(slot: number, n: number): void {
    const size = Math.max(16, n * 2);
    const ds = new Int32Array(size);
    ds.set(this.candSlot[slot]!.subarray(0, n));
    this.candSlot[slot] = ds;
    const val = new Float64Array(2 * size);
    val.set(this.candValue[slot]!.subarray(0, 2 * n));
    this.candValue[slot] = val;
  }
}

/** Per-market state: pools, timed triggers and the last closed epoch. */
class MarketState {
  readonly name: string;
  /** Position in first-seen order: breaks ties between markets at the same epoch. */
  readonly index: number;
  lastClosed: number;
  /** Key of this market's live entry in the engine's agenda (+Infinity when none). */
  scheduledAt = Infinity;
  readonly demand: SidePool;
  readonly supply: SidePool;
  /** Known arrivals waiting for their first epoch, keyed by it. */
  readonly pending = new KeyedHeap();
  /** Pool units keyed by the first epoch after their end (lazy: stale entries are skipped). */
  readonly expiry = new KeyedHeap();
  /** Pool units keyed by the first epoch at which they are at their last chance. */
  readonly lastChance = new KeyedHeap();
  /**
   * Reported occurrences keyed by the last-closed epoch from which their index can be
   * reused: past their end plus the lateness and past every trigger pushed for them
   * (a stale trigger must not fire for the index's next occurrence).
   */
  readonly retire = new KeyedHeap();
  /**
   * A reported occurrence falls quiet at its end plus the lateness (again, earlier, when
   * its end moves earlier): from the first {@link WindowEngine.retireDue} whose limit
   * reaches that key, no accepted event can concern it, so it leaves the snapshot,
   * though its index waits in `retire`. The keys are kept per occurrence (see
   * `quietOld`/`quietNew`) instead of in a heap, as only this test reads them: calls of
   * retireDue so far, and the limit of the last one.
   */
  retireCalls = 0;
  retiredThrough = -Infinity;
  /** Something changed since the last solve that can change the optimum. */
  dirty = false;
  /** Late events since the last epoch record. */
  late = 0;

  constructor(name: string, index: number, lastClosed: number, gridOpts: GridOptions) {
    this.name = name;
    this.index = index;
    this.lastClosed = lastClosed;
    this.demand = new SidePool(gridOpts);
    this.supply = new SidePool(gridOpts);
  }
}

function growF64(a: Float64Array, n: number, fill = 0): Float64Array {
  if (n <= a.length) return a;
  const b = new Float64Array(Math.max(n, a.length * 2)).fill(fill);
  b.set(a);
  return b;
}

function growI32(a: Int32Array, n: number, fill = 0): Int32Array {
  if (n <= a.length) return a;
  const b = new Int32Array(Math.max(n, a.length * 2)).fill(fill);
  b.set(a);
  return b;
}

/**
 * The windowed online policy (SPEC §3), for every market at once.
 *
 * Epochs are the multiples of `windowMs`. At epoch τ the pool holds the occurrences
 * with `t < τ ≤ end` not matched yet; the engine solves the window's min-cost
 * assignment exactly (`solveSparse`), with deferral cost P for demand at its last
 * chance (`until < τ + W`) and R otherwise, and executes every pair (`commit: "all"`)
 * or only those with a unit at its last chance (`"due"`, the rest stay tentative).
 *
 * Epochs where nothing executable can change are skipped without a solve. Under
 * `"all"` an epoch is solved when a unit joined or a demand reached its last chance
 * (only when P ≠ R): the units left after a solve were unmatched in an optimum, and
 * from one epoch to the next pair costs only grow while deferral costs stay, so they
 * stay unmatched; units leaving cannot make a pair profitable either. Under `"due"`
 * an epoch is solved only when some unit is at its last chance (reached it, or joined
 * at it): nothing executes otherwise, and a last chance lasts exactly one epoch
 * (τ ∈ (until − W, until]). Ties aside, skipping changes no executed pair; the
 * tentative pairs of the last solve are the warm start of the next. An
 * {@link EpochRecord} is written for every solve.
 *
 * What a market does depends on its own events alone, in their order: units that join
 * or leave at the same epoch are taken in (t, seq) order, and each solve sees its rows
 * and columns in pool-slot order with every row's pairs in column order. So one engine
 * per Kafka partition (live) and one engine for a whole log (replay) make the same
 * decisions for a market, and a market restored from its {@link snapshot} carries on
 * exactly as if it had never stopped.
 *
 * Memory (with `bounded`, the default): an occurrence is forgotten once it has been
 * reported and its end lies more than `allowedLatenessMs` before the market's last
 * closed epoch; an event older than that horizon is refused (`ingest` says why), since
 * the history it could concern may be gone. Memory then follows the pools and the
 * arrival rate, never the length of the run.
 *
 * @example
 * const engine = new WindowEngine(config, sink);
 * for (const ev of sortedEvents) { engine.advanceTo(ev.event.t); engine.ingest(ev); }
 * engine.finish();
 */
export class WindowEngine {
  private readonly config: PairflowConfig;
  private readonly sink: EngineSink;
  private readonly W: number;
  private readonly P: number;
  private readonly R: number;
  private readonly L: number;
  private readonly due: boolean;
  private readonly warmOn: boolean;
  private readonly bounded: boolean;
  private readonly solver: (inst: SparseInstance, opts: SolveOptions) => SolveResult;
  private readonly verify: boolean;
  private readonly now: (() => number) | undefined;
  private readonly haversine: boolean;
  private readonly gridOpts: GridOptions;
  /** Grid query radius: the largest allowed travel distance plus rounding slack. */
  private readonly queryKm: number;
  /** Whether a demand's last-chance transition can change the optimum. */
  private readonly demandLastChanceMatters: boolean;

  private readonly ledger: OccurrenceLedger;
  private readonly markets = new Map<string, MarketState>();
  private readonly marketList: MarketState[] = [];
  /** Markets keyed by their next trigger epoch (lazy: see {@link schedule}). */
  private readonly agenda = new KeyedHeap();
  private globalClosed = -Infinity;
  /** Markets whose state changed since the last {@link takeTouched}. */
  private readonly touched = new Set<MarketState>();

  // Per occurrence, by index.
  private state: Uint8Array = new Uint8Array(1024);
  private slotOf: Int32Array = new Int32Array(1024).fill(-1);
  private price: Float64Array = new Float64Array(1024).fill(NaN);
  private partner: Int32Array = new Int32Array(1024).fill(-1);
  /** A number never reused, told apart from a later occurrence at the same (reused) index. */
  private serial: Float64Array = new Float64Array(1024);
  /** The largest trigger key ever pushed for the occurrence: it can be forgotten only after it. */
  private maxKey: Float64Array = new Float64Array(1024).fill(-Infinity);
  private nextSerial = 1;
  /**
   * Quiet keys of a reported occurrence (see {@link MarketState.retireCalls}): the least
   * pushed before its market's retireDue call number `quietCall`, and the least pushed
   * since (+Infinity for none).
   */
  private quietOld: Float64Array = new Float64Array(1024).fill(Infinity);
  private quietNew: Float64Array = new Float64Array(1024).fill(Infinity);
  private quietCall: Float64Array = new Float64Array(1024);
  /** Capability bits of every tag seen (see {@link SidePool.slotMask}). */
  private readonly tags = new TagBits();

  // Solve buffers, reused across epochs.
  private rowPtr: Int32Array = new Int32Array(64);
  private colIdx: Int32Array = new Int32Array(256);
  private cost: Float64Array = new Float64Array(256);
  private travel: Float64Array = new Float64Array(256);
  private delta: Float64Array = new Float64Array(64);
  private rowOcc: Int32Array = new Int32Array(64);
  private colOcc: Int32Array = new Int32Array(64);
  private colOfSlot: Int32Array = new Int32Array(64);
  private rowPrices: Float64Array = new Float64Array(64);
  private colPrices: Float64Array = new Float64Array(64);
  private warmPairs: Int32Array = new Int32Array(64);
  private rowOfSlot: Int32Array = new Int32Array(64);
  private rowWait: Float64Array = new Float64Array(64);
  private cursor: Int32Array = new Int32Array(64);
  private nRows = 0;
  private nCols = 0;
  /** Grid cells of one candidate scan (see {@link scanPairs}). */
  private readonly qBuckets: number[][] = [];
  private readonly batch: number[] = [];
  private readonly bySeq = (x: number, y: number): number => {
    const a = this.ledger.occurrences[x]!, b = this.ledger.occurrences[y]!;
    return a.t - b.t || a.seq - b.seq;
  };

  private readonly tot: EngineTotals = {
    demandUnits: 0, supplyUnits: 0, matched: 0, abandoned: 0, cost: 0, duplicates: 0, ignoredWithdraws: 0, late: 0, tooLate: 0,
  };

  constructor(config: PairflowConfig, sink: EngineSink, opts: EngineOptions = {}) {
    this.config = config;
    this.sink = sink;
    this.W = config.windowMs;
    this.P = config.abandonPenalty;
    this.R = reserveOf(config);
    this.L = config.allowedLatenessMs;
    this.due = config.commit === 'due';
    this.warmOn = opts.warm ?? true;
    this.bounded = opts.bounded ?? true;
    this.solver = opts.solve ?? solveSparse;
    this.verify = opts.verify ?? false;
    this.now = opts.now;
    this.haversine = config.metric === 'haversine';
    const cellKm = cellKmFor(config);
    this.gridOpts = { metric: config.metric, cellKm };
    this.queryKm = cellKm * (1 + 1e-9) + 1e-9;
    this.demandLastChanceMatters = this.due || this.P !== this.R;
    this.ledger = new OccurrenceLedger(config);
  }

  /**
   * Takes one event. In replay, call `advanceTo(ev.t)` first, so that an event at
   * exactly an epoch τ is not known at τ. An event whose time is before an epoch
   * already closed for its market is late: counted, and its unit joins from the next
   * epoch if still available. Returns null when the event was taken, or the reason it
   * was refused (the pipeline turns it into a reject): with `bounded`, an event older
   * than the market's last closed epoch minus `allowedLatenessMs`.
   */
  ingest(sourced: SourcedEvent): string | null {
    const ev = sourced.event;
    const m = this.marketOf(ev.market);
    if (this.bounded && ev.t < m.lastClosed - this.L) {
      this.tot.tooLate++;
      return `too late: t=${ev.t} is more than allowedLatenessMs (${this.L} ms) before the last closed window ` +
        `(epoch ${m.lastClosed}) of market '${m.name}'; the history it could concern is no longer held`;
    }
    if (ev.t < m.lastClosed) {
      this.tot.late++;
      m.late++;
    }
    this.touched.add(m);
    const out = this.ledger.apply(sourced);
    if (out.kind === 'arrival') {
      const occ = out.occurrence;
      this.fresh(occ.index);
      if (occ.side === 'demand') this.tot.demandUnits++;
      else this.tot.supplyUnits++;
      this.state[occ.index] = ST_PENDING;
      const join = Math.max(this.epochAfter(occ.t), m.lastClosed + this.W);
      this.push(m, m.pending, join, occ.index);
      if (out.ended !== null) this.endMoved(m, out.ended);
    } else if (out.kind === 'withdraw') {
      if (out.changed) this.endMoved(m, out.ended);
    }
    return null;
  }

  /**
   * Closes every epoch τ ≤ `watermark` of every market (or of `market` alone), in τ
   * order. Epochs where nothing can change are skipped at no cost.
   */
  advanceTo(watermark: number, market?: string): void {
    const closed = Math.floor(watermark / this.W) * this.W;
    if (market !== undefined) {
      const m = this.marketOf(market);
      this.runMarket(m, watermark);
      if (closed > m.lastClosed) m.lastClosed = closed;
      this.retireDue(m);
      return;
    }
    this.run(watermark);
    for (const m of this.marketList) {
      if (closed > m.lastClosed) m.lastClosed = closed;
      this.retireDue(m);
    }
    if (closed > this.globalClosed) this.globalClosed = closed;
  }

  /** The log has ended: closes epochs until every pool is empty. */
  finish(): void {
    this.run(Infinity);
  }

  /** Running totals; `cost` is the online total cost so far (SPEC §3). */
  totals(): EngineTotals {
    return { ...this.tot, duplicates: this.ledger.duplicates, ignoredWithdraws: this.ledger.ignoredWithdraws };
  }

  /** Occurrences held now (pending, pooled, or reported and not yet forgotten): what memory follows. */
  heldOccurrences(): number {
    return this.ledger.size;
  }

  /** Units in each market's pools now. */
  poolSizes(): Array<{ market: string; demand: number; supply: number; pending: number }> {
    return this.marketList.map((m) => ({ market: m.name, demand: m.demand.size, supply: m.supply.size, pending: m.pending.size }));
  }

  /**
   * Markets whose state changed (an event taken, an epoch closed) since the last call,
   * in first-seen order; clears the set. Live mode writes their snapshots with each
   * committed batch.
   */
  takeTouched(): string[] {
    const out = [...this.touched].sort((a, b) => a.index - b.index).map((m) => m.name);
    this.touched.clear();
    return out;
  }

  /**
   * The serialisable state of one market: units pending or in the pool (with their
   * prices and slots), reported units still within the lateness horizon, tentative
   * pairs, the pools' slot layout and the last closed epoch. JSON-safe.
   */
  snapshot(market: string): PoolSnapshot {
    const cols = this.poolColumns(market);
    return expandPoolColumns(cols, (k) => this.unitOf(cols.occ[k]!));
  }

  /**
   * The state of {@link snapshot} in columns, per unit in snapshot order: what changes
   * from window to window (state, slot or join epoch, end, price) in typed arrays, the
   * unit itself by its occurrence index (see {@link unitOf}). Live mode writes a
   * market's columns with each commit and a unit's fixed part only once.
   */
  poolColumns(market: string): PoolColumns {
    const m = this.markets.get(market);
    const closed = m === undefined ? this.globalClosed : m.lastClosed;
    const head: PoolColumns['head'] = {
      version: SNAPSHOT_VERSION, market, windowMs: this.W, lastClosed: closed === -Infinity ? null : closed,
      late: m?.late ?? 0, pools: { demand: { high: 0, free: [] }, supply: { high: 0, free: [] } },
    };
    const ids: number[] = [];
    const states: number[] = [];
    const aux: number[] = [];
    const tentative: Array<[number, number]> = [];
    if (m !== undefined) {
      head.pools = {
        demand: { high: m.demand.high, free: [...m.demand.free] },
        supply: { high: m.supply.high, free: [...m.supply.free] },
      };
      const at = new Map<number, number>();
      const add = (id: number, state: number, a: number): void => {
        at.set(id, ids.length);
        ids.push(id);
        states.push(state);
        aux.push(a);
      };
      for (const pool of [m.demand, m.supply]) {
        for (let slot = 0; slot < pool.high; slot++) {
          const id = pool.slotOcc[slot]!;
          if (id >= 0) add(id, COL_POOL, slot);
        }
      }
      const bySeq = (x: [number, number], y: [number, number]): number => x[0] - y[0] || this.bySeq(x[1], y[1]);
      for (const [key, id] of m.pending.entries().sort(bySeq)) add(id, COL_PENDING, key);
      for (const [, id] of m.retire.entries().sort(bySeq)) if (!this.isQuiet(m, id)) add(id, COL_DONE, 0);
      for (let slot = 0; slot < m.demand.high; slot++) {
        const d = m.demand.slotOcc[slot]!;
        if (d >= 0 && this.partner[d]! >= 0) tentative.push([at.get(d)!, at.get(this.partner[d]!)!]);
      }
    }
    const n = ids.length;
    const cols: PoolColumns = {
      head, occ: Int32Array.from(ids), seq: new Float64Array(n), end: new Float64Array(n), price: new Float64Array(n),
      state: Uint8Array.from(states), aux: Float64Array.from(aux), tentative,
    };
    const occs = this.ledger.occurrences;
    for (let k = 0; k < n; k++) {
      const o = occs[ids[k]!]!;
      cols.seq[k] = o.seq;
      cols.end[k] = o.end;
      const p = this.price[o.index]!;
      cols.price[k] = Number.isFinite(p) ? p : NaN;
    }
    return cols;
  }

  /** The fixed part of a held occurrence (what {@link poolColumns} leaves out). */
  unitOf(occ: number): PoolUnit {
    const o = this.ledger.occurrences[occ];
    if (o === undefined) throw pairflowError('PAIRFLOW_ERR_INTERNAL_BUG', { detail: `unitOf(${occ}): no occurrence at that index` });
    const u: PoolUnit = { side: o.side, id: o.id, t: o.t, until: o.until, seq: o.seq };
    if (o.lat !== undefined) u.lat = o.lat;
    if (o.lon !== undefined) u.lon = o.lon;
    if (o.x !== undefined) u.x = o.x;
    if (o.y !== undefined) u.y = o.y;
    if (o.has !== undefined) u.has = [...o.has];
    if (o.needs !== undefined) u.needs = [...o.needs];
    return u;
  }

  /**
   * Restores a market from {@link snapshot} output into an engine that holds no unit
   * of that market yet (live mode after a restart or a rebalance). Restored pending
   * and pooled units count in `demandUnits`/`supplyUnits`. Throws
   * `PAIRFLOW_ERR_STATE_INVALID` for another version, another window length or a
   * malformed state.
   */
  restore(market: string, state: unknown): void {
    const snap = parseSnapshot(market, state, this.W);
    const m = this.marketOf(market);
    if (m.demand.size + m.supply.size + m.pending.size + m.retire.size > 0) {
      throw pairflowError('PAIRFLOW_ERR_INTERNAL_BUG', { detail: `restore(${market}): the market already holds units` });
    }
    if (snap.lastClosed !== null && snap.lastClosed > m.lastClosed) m.lastClosed = snap.lastClosed;
    m.late = snap.late;
    const ids: number[] = [];
    for (const u of snap.units) {
      const o = this.ledger.adopt({
        side: u.side, id: u.id, market, t: u.t, until: u.until, end: u.end, seq: u.seq,
        lat: u.lat, lon: u.lon, x: u.x, y: u.y, has: u.has, needs: u.needs,
      });
      if (this.state.length > o.index && this.state[o.index] !== 0) {
        throw pairflowError('PAIRFLOW_ERR_INTERNAL_BUG', { detail: `restore(${market}): ${u.side} ${u.id} at ${u.t} is already known` });
      }
      this.fresh(o.index);
      if (u.state !== 'done') {
        if (u.side === 'demand') this.tot.demandUnits++;
        else this.tot.supplyUnits++;
      }
      this.price[o.index] = u.price ?? NaN;
      ids.push(o.index);
    }
    const occs = this.ledger.occurrences;
    m.demand.setLayout(snap.pools.demand.high, snap.pools.demand.free);
    m.supply.setLayout(snap.pools.supply.high, snap.pools.supply.free);
    // Supply first: each supply's candidate list starts empty and every demand adds itself by its own query.
    for (const side of ['supply', 'demand'] as const) {
      snap.units.forEach((u, k) => {
        if (u.state === 'pool' && u.side === side) this.enterPool(m, occs[ids[k]!]!, m.lastClosed + this.W, u.slot!);
      });
    }
    snap.units.forEach((u, k) => {
      const id = ids[k]!;
      if (u.state === 'pending') {
        this.state[id] = ST_PENDING;
        this.push(m, m.pending, Math.max(u.joinEpoch!, m.lastClosed + this.W), id);
      } else if (u.state === 'done') {
        this.state[id] = ST_GONE;
        this.retireLater(m, id);
      }
    });
    for (const [d, s] of snap.tentative) {
      this.partner[ids[d]!] = ids[s]!;
      this.partner[ids[s]!] = ids[d]!;
    }
    // As after the epoch it was taken at: the next solve waits for a trigger.
    m.dirty = false;
  }

  /** The last epoch closed for `market` (-Infinity before any). */
  closedThrough(market: string): number {
    return this.markets.get(market)?.lastClosed ?? this.globalClosed;
  }

  /** Markets seen so far, in first-seen order. */
  marketNames(): string[] {
    return this.marketList.map((m) => m.name);
  }

  // ---------------------------------------------------------------- internals

  private marketOf(name: string): MarketState {
    let m = this.markets.get(name);
    if (m === undefined) {
      m = new MarketState(name, this.marketList.length, this.globalClosed, this.gridOpts);
      this.markets.set(name, m);
      this.marketList.push(m);
    }
    return m;
  }

  /** Readies the per-occurrence arrays for a new occurrence at `index` (new or reused). */
  private fresh(index: number): void {
    const n = index + 1;
    if (n > this.state.length) {
      const size = Math.max(n, this.state.length * 2);
      const st = new Uint8Array(size);
      st.set(this.state);
      this.state = st;
      this.slotOf = growI32(this.slotOf, size, -1);
      this.price = growF64(this.price, size, NaN);
      this.partner = growI32(this.partner, size, -1);
      this.serial = growF64(this.serial, size, 0);
      this.maxKey = growF64(this.maxKey, size, -Infinity);
      this.quietOld = growF64(this.quietOld, size, Infinity);
      this.quietNew = growF64(this.quietNew, size, Infinity);
      this.quietCall = growF64(this.quietCall, size, 0);
    }
    this.state[index] = 0;
    this.slotOf[index] = -1;
    this.price[index] = NaN;
    this.partner[index] = -1;
    this.serial[index] = this.nextSerial++;
    this.maxKey[index] = -Infinity;
    this.quietOld[index] = Infinity;
    this.quietNew[index] = Infinity;
  }

  /** Pushes a trigger for an occurrence and schedules its market. */
  private push(m: MarketState, heap: KeyedHeap, key: number, id: number): void {
    heap.push(key, id);
    if (key > this.maxKey[id]!) this.maxKey[id] = key;
    this.schedule(m, key);
  }

  /** First epoch τ with `x < τ`. */
  private epochAfter(x: number): number {
    return (Math.floor(x / this.W) + 1) * this.W;
  }

  private endMoved(m: MarketState, occ: Occurrence): void {
    const st = this.state[occ.index];
    if (st === ST_POOL) {
      this.push(m, m.expiry, Math.max(this.epochAfter(occ.end), m.lastClosed + this.W), occ.index);
    } else if (this.bounded && (st === ST_MATCHED || st === ST_GONE)) {
      // A reported occurrence ended earlier (its courier is back after the job): it
      // falls quiet sooner (its retire key stays: an index waits for its last trigger).
      this.quietAt(m, occ.index, occ.end + this.L + 1);
    }
  }

  /** Records a quiet key for a reported occurrence (the heap push it replaces). */
  private quietAt(m: MarketState, id: number, key: number): void {
    if (this.quietCall[id] !== m.retireCalls) {
      // Keys pushed before a retireDue call count from that call on.
      if (this.quietNew[id]! < this.quietOld[id]!) this.quietOld[id] = this.quietNew[id]!;
      this.quietNew[id] = key;
      this.quietCall[id] = m.retireCalls;
    } else if (key < this.quietNew[id]!) {
      this.quietNew[id] = key;
    }
  }

  /** Whether a retireDue call has already passed a quiet key of reported occurrence `id`. */
  private isQuiet(m: MarketState, id: number): boolean {
    const before = this.quietCall[id] !== m.retireCalls ? Math.min(this.quietOld[id]!, this.quietNew[id]!) : this.quietOld[id]!;
    return before <= m.retiredThrough;
  }

  /** A reported occurrence can be forgotten once the horizon and all its triggers have passed. */
  private retireLater(m: MarketState, id: number): void {
    if (!this.bounded) return;
    const o = this.ledger.occurrences[id]!;
    this.quietAt(m, id, o.end + this.L + 1);
    m.retire.push(Math.max(o.end + this.L + 1, this.maxKey[id]!), id);
  }

  /** Forgets the reported occurrences of `m` that no accepted event can concern any more. */
  private retireDue(m: MarketState): void {
    // Quiet keys up to the limit now count (isQuiet): a quiet key of an occurrence is
    // never above its `retire` key (an end only moves earlier), so none outlives its index.
    m.retireCalls++;
    m.retiredThrough = m.lastClosed;
    while (m.retire.size > 0 && m.retire.peekKey() <= m.lastClosed) {
      const id = m.retire.pop();
      this.state[id] = 0;
      this.ledger.release(id);
    }
  }

  /** The next epoch at which something happens in `m`, dropping stale triggers. */
  private nextTrigger(m: MarketState): number {
    const st = this.state;
    while (m.expiry.size > 0 && st[m.expiry.peekId()] !== ST_POOL) m.expiry.pop();
    while (m.lastChance.size > 0 && st[m.lastChance.peekId()] !== ST_POOL) m.lastChance.pop();
    return Math.min(m.pending.peekKey(), m.expiry.peekKey(), m.lastChance.peekKey());
  }

  /** Makes sure the agenda holds an entry for `m` at or before `key`. */
  private schedule(m: MarketState, key: number): void {
    if (key < m.scheduledAt) {
      m.scheduledAt = key;
      this.agenda.push(key, m.index);
    }
  }

  /**
   * Closes the epochs ≤ limit of every market in τ order (ties: first-seen market
   * first), popping markets from the agenda so that the work per call does not grow
   * with the number of idle markets.
   */
  private run(limit: number): void {
    for (;;) {
      if (this.agenda.size === 0) return;
      const key = this.agenda.peekKey();
      if (key > limit) return;
      const m = this.marketList[this.agenda.pop()]!;
      // An entry superseded by an earlier one, or already handled by runMarket.
      if (key !== m.scheduledAt) continue;
      m.scheduledAt = Infinity;
      const k = this.nextTrigger(m);
      if (k !== key) {
        // Its trigger went stale; the market's real next epoch is later.
        this.schedule(m, k);
        continue;
      }
      this.closeEpoch(m, k);
      this.schedule(m, this.nextTrigger(m));
    }
  }

  private runMarket(m: MarketState, limit: number): void {
    for (let k = this.nextTrigger(m); k <= limit; k = this.nextTrigger(m)) this.closeEpoch(m, k);
    this.schedule(m, this.nextTrigger(m));
  }

  private closeEpoch(m: MarketState, tau: number): void {
    const occs = this.ledger.occurrences;
    const batch = this.batch;
    this.touched.add(m);
    // Units that join or leave at one epoch are taken in (t, seq) order, whatever order
    // their triggers were pushed in: the pools' slot order then depends on the market's
    // events alone.
    batch.length = 0;
    while (m.pending.peekKey() <= tau) batch.push(m.pending.pop());
    if (batch.length > 1) this.sortBySeq(batch);
    for (const id of batch) this.join(m, id, tau);
    batch.length = 0;
    while (m.expiry.peekKey() <= tau) {
      const id = m.expiry.pop();
      if (this.state[id] === ST_POOL && occs[id]!.end < tau) batch.push(id);
    }
    if (batch.length > 1) this.sortBySeq(batch);
    for (let k = 0; k < batch.length; k++) {
      // A unit with two due entries appears twice, side by side after the sort.
      if (k > 0 && batch[k] === batch[k - 1]) continue;
      this.leaveUnmatched(m, batch[k]!, tau);
    }
    while (m.lastChance.peekKey() <= tau) {
      const id = m.lastChance.pop();
      if (this.state[id] === ST_POOL) m.dirty = true;
    }
    if (m.dirty && m.demand.size > 0 && m.supply.size > 0) this.solve(m, tau);
    m.dirty = false;
    m.lastClosed = tau;
  }

  /**
   * Sorts a batch of occurrence indices by (t, seq), stably, as `Array.prototype.sort`
   * with {@link bySeq} would; a batch of a window is short, and sorting it in place
   * allocates nothing.
   */
  private sortBySeq(batch: number[]): void {
    const n = batch.length;
    if (n > 32) {
      batch.sort(this.bySeq);
      return;
    }
    const occs = this.ledger.occurrences;
    for (let i = 1; i < n; i++) {
      const id = batch[i]!;
      const o = occs[id]!;
      const t = o.t, seq = o.seq;
      let j = i - 1;
      for (; j >= 0; j--) {
        const p = occs[batch[j]!]!;
        if (p.t < t || (p.t === t && p.seq <= seq)) break;
        batch[j + 1] = batch[j]!;
      }
      batch[j + 1] = id;
    }
  }

  private coords(o: Occurrence): [number, number] {
    return this.haversine ? [o.lat ?? NaN, o.lon ?? NaN] : [o.x ?? NaN, o.y ?? NaN];
  }

  private join(m: MarketState, id: number, tau: number): void {
    const o = this.ledger.occurrences[id]!;
    if (o.end < tau) {
      // Ended before it could ever be in a pool: never matched.
      this.state[id] = ST_GONE;
      this.emitExpiry(m, o, tau);
      this.retireLater(m, id);
      return;
    }
    this.enterPool(m, o, tau + this.W);
  }

  /**
   * Puts an occurrence in its market's pool (at `slot` when restoring); its triggers
   * fire at epochs ≥ `from`.
   */
  private enterPool(m: MarketState, o: Occurrence, from: number, slot = -1): void {
    const id = o.index;
    this.state[id] = ST_POOL;
    // Under "due" only a unit at its last chance can make a pair executable.
    if (!this.due || o.until < from) m.dirty = true;
    const a = (this.haversine ? o.lat : o.x) ?? NaN;
    const b = (this.haversine ? o.lon : o.y) ?? NaN;
    const ser = this.serial[id]!;
    const demand = o.side === 'demand';
    // A pair is allowed when (demand needs) AND (supply lacks) is 0: each side keeps its half.
    const mask = demand ? this.tags.maskOf(o.needs) : ~this.tags.maskOf(o.has);
    const own = demand ? m.demand : m.supply;
    if (slot >= 0) own.place(id, ser, slot, a, b, mask);
    else slot = own.add(id, ser, a, b, mask);
    this.slotOf[id] = slot;
    own.slotT[slot] = o.t;
    own.slotUntil[slot] = o.until;
    this.scanPairs(m, o, demand, slot, a, b, mask, ser);
    if (demand ? this.demandLastChanceMatters : this.due) this.pushLastChance(m, o, from);
    this.push(m, m.expiry, Math.max(this.epochAfter(o.end), from), id);
  }

  /**
   * Records the allowed pairs of a unit that just took `slot` of its side's pool (at
   * (a, b), capability half `mask`, serial `ser`) with every unit of the other side
   * within the query radius, exactly as a grid query would find them, on the supply
   * side's candidate lists. The order pairs are found in does not matter: each supply
   * list gets at most one entry per demand, and a solve orders rows by counting.
   */
  private scanPairs(m: MarketState, o: Occurrence, demand: boolean, slot: number, a: number, b: number, mask: number, ser: number): void {
    const other = demand ? m.supply : m.demand;
    const buckets = this.qBuckets;
    const nb = other.grid.bucketsNear(a, b, this.queryKm, buckets);
    if (nb === 0) return;
    const sup = m.supply;
    const r = this.queryKm;
    const speed = this.config.speedKmh;
    const maxTravel = this.config.maxTravelMin;
    const sphere = this.haversine;
    const twoR = 2 * other.grid.earthRadiusKm;
    const cosA = Math.cos(a * DEG);
    const oa = other.slotA, ob = other.slotB, oc = other.slotCos, om = other.slotMask, oSerial = other.slotSerial;
    const { candSlot, candValue, candLen } = sup;
    const deg = m.demand.deg;
    // Past 31 distinct tags the masks may leave some out: the lists decide.
    const byLists = this.tags.overflow;
    // A joining supply fills its own (emptied) list; a joining demand appends to each supply's.
    let n = 0;
    for (let k = 0; k < nb; k++) {
      const bucket = buckets[k]!;
      for (let i = 0; i < bucket.length; i++) {
        const p = bucket[i]!;
        if (byLists) {
          const q = this.ledger.occurrences[other.slotOcc[p]!]!;
          if (!(demand ? capabilitiesAllow(o.needs, q.has) : capabilitiesAllow(q.needs, o.has))) continue;
        } else if ((om[p]! & mask) !== 0) {
          continue;
        }
        // The grid's distance (sphereKm / planeKm) and travelMin, written out so that
        // they compile into this loop; a test holds the scan to queryInto bit for bit.
        let d: number;
        if (sphere) {
          const sLat = Math.sin(((oa[p]! - a) * DEG) / 2);
          const sLon = Math.sin(((ob[p]! - b) * DEG) / 2);
          let h = sLat * sLat + cosA * oc[p]! * sLon * sLon;
          if (h > 1) h = 1;
          // See sphereKm: atan(y / x) is atan2(y, x) to the last bit while y ≤ x.
          d = twoR * (h <= 0.5 ? Math.atan(Math.sqrt(h) / Math.sqrt(1 - h)) : Math.atan2(Math.sqrt(h), Math.sqrt(1 - h)));
        } else {
          d = Math.hypot(oa[p]! - a, ob[p]! - b);
        }
        if (!(d <= r)) continue;
        const tr = (d / speed) * 60;
        if (!(tr <= maxTravel)) continue;
        const at = demand ? p : slot;
        const dSlot = demand ? slot : p;
        const len = demand ? candLen[p]! : n;
        if (len === candSlot[at]!.length) sup.growCand(at, len);
        candSlot[at]![len] = dSlot;
        const val = candValue[at]!;
        val[2 * len] = tr;
        val[2 * len + 1] = demand ? ser : oSerial[p]!;
        if (demand) {
          candLen[p] = len + 1;
          n++;
        } else {
          n = len + 1;
          deg[p]!++;
        }
      }
    }
    if (demand) deg[slot]! += n;
    else candLen[slot] = n;
    buckets.fill(NO_BUCKET, 0, nb);
  }

  private pushLastChance(m: MarketState, o: Occurrence, from: number): void {
    // First epoch with until < τ + W; one already reached needs no trigger (the join is one).
    const at = this.epochAfter(o.until - this.W);
    if (at >= from) this.push(m, m.lastChance, at, o.index);
  }

  private removeFromPool(m: MarketState, o: Occurrence, next: number): void {
    const id = o.index;
    this.state[id] = next;
    const slot = this.slotOf[id]!;
    if (o.side === 'demand') {
      m.demand.remove(slot);
    } else {
      m.supply.dropCands(slot, m.demand);
      m.supply.remove(slot);
    }
    this.slotOf[id] = -1;
    const p = this.partner[id]!;
    if (p >= 0) {
      this.partner[p] = -1;
      this.partner[id] = -1;
    }
    this.retireLater(m, id);
  }

  private leaveUnmatched(m: MarketState, id: number, tau: number): void {
    const o = this.ledger.occurrences[id]!;
    this.removeFromPool(m, o, ST_GONE);
    this.emitExpiry(m, o, tau);
  }

  private emitExpiry(m: MarketState, o: Occurrence, tau: number): void {
    const demand = o.side === 'demand';
    if (demand) {
      this.tot.abandoned++;
      this.tot.cost += this.P;
    }
    const e: ExpiryRecord = { market: m.name, side: o.side, id: o.id, t: o.t, end: o.end, epoch: tau, cost: demand ? this.P : 0 };
    if (this.haversine) {
      e.lat = o.lat;
      e.lon = o.lon;
    } else {
      e.x = o.x;
      e.y = o.y;
    }
    this.sink.expiry(e);
  }

  private priceA: Float64Array = new Float64Array(64);
  private priceB: Float64Array = new Float64Array(64);
  private priceV: Float64Array = new Float64Array(64);

  private emitPrices(
    market: string, tau: number,
    nRows: number, rowOcc: Int32Array, rowDuals: ArrayLike<number>,
    nCols: number, colOcc: Int32Array, colDuals: ArrayLike<number>,
  ): void {
    const occs = this.ledger.occurrences;
    const n = Math.max(nRows, nCols);
    this.priceA = growF64(this.priceA, n);
    this.priceB = growF64(this.priceB, n);
    this.priceV = growF64(this.priceV, n);
    const sides: Array<[Side, number, Int32Array, ArrayLike<number>]> = [['demand', nRows, rowOcc, rowDuals], ['supply', nCols, colOcc, colDuals]];
    for (const [side, count, ids, duals] of sides) {
      for (let k = 0; k < count; k++) {
        const [a, b] = this.coords(occs[ids[k]!]!);
        this.priceA[k] = a;
        this.priceB[k] = b;
        this.priceV[k] = duals[k]!;
      }
      this.sink.prices!({
        market, epoch: tau, side, n: count,
        a: this.priceA.subarray(0, count), b: this.priceB.subarray(0, count), price: this.priceV.subarray(0, count),
      });
    }
  }

  /** One epoch's solve: pack the pools into arrays, solve, unpack the decisions. */
  private solve(m: MarketState, tau: number): void {
    const inst = this.pack(m, tau);
    // Only "due" keeps tentative pairs between epochs: under "all" every pair is
    // executed, and prices without pairs are no hint the solver uses, so none is passed.
    let warm: WarmStart | undefined;
    if (this.warmOn && this.due) {
      const nRows = this.nRows, nCols = this.nCols;
      warm = { colPrices: this.colPrices.subarray(0, nCols), rowPrices: this.rowPrices.subarray(0, nRows), rowToCol: this.warmPairs.subarray(0, nRows) };
    }
    // pack() builds the instance well formed (each pair once, in column order, at a
    // finite cost: travel ≤ maxTravelMin plus a bounded wait term, and it checks the row
    // counts), so the solver's own pass over every pair is left out but when verifying.
    const check = this.verify;
    const res: SolveResult = this.solver(inst, this.now !== undefined ? { warm, check, now: this.now } : { warm, check });
    if (this.verify) {
      const rep = checkCertificate(inst, res);
      if (!rep.ok) {
        throw pairflowError('PAIRFLOW_ERR_INTERNAL_BUG', {
          detail: `market ${m.name} epoch ${tau}: solver certificate failed: ${rep.problems.join('; ')}`,
        });
      }
    }
    this.unpack(m, tau, inst, res);
  }

  /**
   * The window's instance: rows are the demand pool in slot order, columns the supply
   * pool in slot order, each row's allowed pairs in column order (laid out by counting,
   * from the supply side's lists); costs c(s,d,τ), deferral P or R; the carried prices
   * and tentative pairs as the warm start.
   */
  private pack(m: MarketState, tau: number): SparseInstance {
    const dem = m.demand;
    const sup = m.supply;
    const st = this.state, slotOf = this.slotOf, partner = this.partner;
    const waitPerMs = this.config.waitWeight / 60_000;
    const lastChanceBefore = tau + this.W;
    // Rows: the demand pool in slot order.
    this.rowOfSlot = growI32(this.rowOfSlot, dem.high);
    this.rowPtr = growI32(this.rowPtr, dem.size + 1);
    this.rowOcc = growI32(this.rowOcc, dem.size);
    this.delta = growF64(this.delta, dem.size);
    this.rowPrices = growF64(this.rowPrices, dem.size);
    this.rowWait = growF64(this.rowWait, dem.size);
    const { rowOfSlot, rowOcc, delta, rowPrices, rowWait, rowPtr } = this;
    let nRows = 0;
    for (let slot = 0; slot < dem.high; slot++) {
      const d = dem.slotOcc[slot]!;
      if (d < 0) continue;
      rowOfSlot[slot] = nRows;
      rowOcc[nRows] = d;
      rowWait[nRows] = waitPerMs * (tau - dem.slotT[slot]!);
      delta[nRows] = dem.slotUntil[slot]! < lastChanceBefore ? this.P : this.R;
      rowPrices[nRows] = this.price[d]!;
      rowPtr[nRows + 1] = dem.deg[slot]!;
      nRows++;
    }
    rowPtr[0] = 0;
    for (let r = 0; r < nRows; r++) rowPtr[r + 1]! += rowPtr[r]!;
    const nnz = rowPtr[nRows]!;
    this.colIdx = growI32(this.colIdx, nnz);
    this.cost = growF64(this.cost, nnz);
    this.travel = growF64(this.travel, nnz);
    this.cursor = growI32(this.cursor, nRows);
    const { colIdx, cost, travel, cursor } = this;
    for (let r = 0; r < nRows; r++) cursor[r] = rowPtr[r]!;
    // Columns: the supply pool in slot order. Each live pair goes to the next place of its
    // row, so each row receives its columns in increasing order; stale entries are dropped.
    this.colOfSlot = growI32(this.colOfSlot, sup.high);
    this.colOcc = growI32(this.colOcc, sup.size);
    this.colPrices = growF64(this.colPrices, sup.size);
    const { colOfSlot, colOcc, colPrices } = this;
    const { candSlot, candValue, candLen } = sup;
    const slotSerial = dem.slotSerial;
    let nCols = 0;
    for (let slot = 0; slot < sup.high; slot++) {
      const s = sup.slotOcc[slot]!;
      if (s < 0) continue;
      const j = nCols++;
      colOfSlot[slot] = j;
      colOcc[j] = s;
      colPrices[j] = this.price[s]!;
      const ds = candSlot[slot]!, val = candValue[slot]!;
      const len = candLen[slot]!;
      let w = 0;
      for (let k = 0; k < len; k++) {
        const dSlot = ds[k]!;
        const dSerial = val[2 * k + 1]!;
        if (slotSerial[dSlot] !== dSerial) continue;
        const t = val[2 * k]!;
        if (w !== k) {
          ds[w] = dSlot;
          val[2 * w] = t;
          val[2 * w + 1] = dSerial;
        }
        w++;
        const r = rowOfSlot[dSlot]!;
        const e = cursor[r]!++;
        colIdx[e] = j;
        travel[e] = t;
        cost[e] = t + rowWait[r]!;
      }
      candLen[slot] = w;
    }
    // The counts kept as pairs came and went must be what the lists hold.
    for (let r = 0; r < nRows; r++) {
      if (cursor[r] !== rowPtr[r + 1]) {
        throw pairflowError('PAIRFLOW_ERR_INTERNAL_BUG', {
          detail: `market ${m.name} epoch ${tau}: row ${r} holds ${cursor[r]! - rowPtr[r]!} pairs, counted ${rowPtr[r + 1]! - rowPtr[r]!}`,
        });
      }
    }
    this.warmPairs = growI32(this.warmPairs, nRows);
    const warmPairs = this.warmPairs;
    for (let r = 0; r < nRows; r++) {
      const p = partner[rowOcc[r]!]!;
      warmPairs[r] = p >= 0 && st[p] === ST_POOL ? colOfSlot[slotOf[p]!]! : -1;
    }
    this.nRows = nRows;
    this.nCols = nCols;
    return {
      nRows, nCols,
      rowPtr: rowPtr.subarray(0, nRows + 1),
      colIdx: colIdx.subarray(0, nnz),
      cost: cost.subarray(0, nnz),
      unmatchedCost: delta.subarray(0, nRows),
    };
  }

  /** Carries the prices, executes the pairs the commit mode allows, keeps the rest tentative. */
  private unpack(m: MarketState, tau: number, inst: SparseInstance, res: SolveResult): void {
    const occs = this.ledger.occurrences;
    const { nRows, nCols, rowOcc, colOcc } = this;
    const { rowPtr, colIdx, cost } = inst;
    const travel = this.travel;
    const partner = this.partner;
    const lastChanceBefore = tau + this.W;
    // Carry prices by occurrence; clear the old tentative pairs (the new solution replaces them).
    let dualObjective = 0;
    for (let i = 0; i < nRows; i++) {
      const d = rowOcc[i]!;
      this.price[d] = res.rowDuals[i]!;
      dualObjective += res.rowDuals[i]!;
      partner[d] = -1;
    }
    let pMin = Infinity, pMax = -Infinity, pSum = 0;
    for (let j = 0; j < nCols; j++) {
      const s = colOcc[j]!;
      const v = res.colDuals[j]!;
      this.price[s] = v;
      partner[s] = -1;
      dualObjective += v;
      pSum += v;
      if (v < pMin) pMin = v;
      if (v > pMax) pMax = v;
    }
    if (this.sink.prices) this.emitPrices(m.name, tau, nRows, rowOcc, res.rowDuals, nCols, colOcc, res.colDuals);

    let matched = 0;
    let tentative = 0;
    for (let i = 0; i < nRows; i++) {
      const j = res.rowToCol[i]!;
      if (j < 0) continue;
      const d = rowOcc[i]!;
      const s = colOcc[j]!;
      const od = occs[d]!;
      const os = occs[s]!;
      if (this.due && od.until >= lastChanceBefore && os.until >= lastChanceBefore) {
        partner[d] = s;
        partner[s] = d;
        tentative++;
        continue;
      }
      let e = rowPtr[i]!;
      const end = rowPtr[i + 1]!;
      while (e < end && colIdx[e] !== j) e++;
      const c = cost[e]!;
      this.sink.assignment({
        market: m.name, epoch: tau, demandId: od.id, supplyId: os.id, demandT: od.t, supplyT: os.t,
        decidedAt: tau, travelMin: travel[e]!, waitMin: (tau - od.t) / 60_000, cost: c,
      });
      this.tot.matched++;
      this.tot.cost += c;
      matched++;
      this.removeFromPool(m, od, ST_MATCHED);
      this.removeFromPool(m, os, ST_MATCHED);
    }
    const late = m.late;
    m.late = 0;
    this.sink.epoch({
      market: m.name, epoch: tau, poolDemand: nRows, poolSupply: nCols, candidatePairs: inst.colIdx.length, matched, tentative,
      solveMs: res.stats.ms, warm: res.stats.warm, augmentations: res.stats.augmentations,
      primalCost: res.cost, dualObjective,
      priceMin: nCols > 0 ? pMin : 0, priceMean: nCols > 0 ? pSum / nCols : 0, priceMax: nCols > 0 ? pMax : 0,
      late,
    });
  }
}

function isNum(v: unknown): v is number {
  return typeof v === 'number' && Number.isFinite(v);
}

function isStrings(v: unknown): v is string[] {
  return Array.isArray(v) && v.every((x) => typeof x === 'string');
}

/** Checks a stored pool state field by field; the first problem is thrown. */
function parseSnapshot(market: string, state: unknown, windowMs: number): PoolSnapshot {
  const bad = (detail: string): never => {
    throw pairflowError('PAIRFLOW_ERR_STATE_INVALID', { market, detail });
  };
  if (state === null || typeof state !== 'object') return bad('expected an object');
  const s = state as Record<string, unknown>;
  if (s.version !== SNAPSHOT_VERSION) bad(`field 'version': got ${JSON.stringify(s.version)}, expected ${SNAPSHOT_VERSION}`);
  if (s.windowMs !== windowMs) bad(`field 'windowMs': got ${JSON.stringify(s.windowMs)}, expected ${windowMs} (the window of this run)`);
  if (s.lastClosed !== null && !isNum(s.lastClosed)) bad(`field 'lastClosed': expected null or a number`);
  if (!Number.isInteger(s.late) || (s.late as number) < 0) bad(`field 'late': expected a count`);
  const pools = s.pools as Record<string, unknown> | null;
  if (pools === null || typeof pools !== 'object') return bad(`field 'pools': expected an object`);
  const layouts = new Map<Side, { high: number; free: number[] }>();
  for (const side of ['demand', 'supply'] as const) {
    const l = pools[side] as Record<string, unknown> | null;
    const where = `pools.${side}`;
    if (l === null || typeof l !== 'object') return bad(`${where}: expected an object`);
    if (!Number.isInteger(l.high) || (l.high as number) < 0) bad(`${where}.high: expected a count`);
    if (!Array.isArray(l.free) || !l.free.every((x) => Number.isInteger(x) && x >= 0 && x < (l.high as number))) {
      bad(`${where}.free: expected slots below high`);
    }
    layouts.set(side, { high: l.high as number, free: l.free as number[] });
  }
  if (!Array.isArray(s.units)) return bad(`field 'units': expected an array`);
  if (!Array.isArray(s.tentative)) return bad(`field 'tentative': expected an array`);
  const units = s.units as unknown[];
  units.forEach((raw, k) => {
    const u = raw as Record<string, unknown> | null;
    const where = `units[${k}]`;
    if (u === null || typeof u !== 'object') return bad(`${where}: expected an object`);
    if (u.side !== 'demand' && u.side !== 'supply') bad(`${where}.side: got ${JSON.stringify(u.side)}, expected "demand" or "supply"`);
    if (typeof u.id !== 'string' || u.id === '') bad(`${where}.id: expected a non-empty string`);
    for (const f of ['t', 'until', 'end', 'seq']) if (!isNum(u[f])) bad(`${where}.${f}: expected a finite number`);
    for (const f of ['lat', 'lon', 'x', 'y']) if (u[f] !== undefined && !isNum(u[f])) bad(`${where}.${f}: expected a finite number`);
    for (const f of ['has', 'needs']) if (u[f] !== undefined && !isStrings(u[f])) bad(`${where}.${f}: expected an array of strings`);
    if (u.price !== null && !isNum(u.price)) bad(`${where}.price: expected null or a finite number`);
    if (u.state !== 'pending' && u.state !== 'pool' && u.state !== 'done') {
      bad(`${where}.state: got ${JSON.stringify(u.state)}, expected "pending", "pool" or "done"`);
    }
    if (u.state === 'pending' && !isNum(u.joinEpoch)) bad(`${where}.joinEpoch: expected a finite number`);
    if (u.state === 'pool') {
      const l = layouts.get(u.side as Side)!;
      if (!Number.isInteger(u.slot) || (u.slot as number) < 0 || (u.slot as number) >= l.high) bad(`${where}.slot: expected a slot below pools.${String(u.side)}.high`);
    }
    return undefined;
  });
  // Every slot below high is either used once or free once.
  for (const side of ['demand', 'supply'] as const) {
    const l = layouts.get(side)!;
    const used = new Uint8Array(l.high);
    for (const slot of l.free) used[slot]! += 1;
    for (const u of units as SnapshotUnit[]) if (u.state === 'pool' && u.side === side) used[u.slot!]! += 1;
    const wrong = used.findIndex((c) => c !== 1);
    if (wrong >= 0) bad(`pools.${side}: slot ${wrong} is ${used[wrong] === 0 ? 'neither used nor free' : 'used or freed twice'}`);
  }
  const typed = units as SnapshotUnit[];
  const keys = new Set<string>();
  typed.forEach((u, k) => {
    const key = `${u.side} ${u.t} ${u.id}`;
    if (keys.has(key)) bad(`units[${k}]: a second ${u.side} '${u.id}' at t=${u.t}`);
    keys.add(key);
  });
  const seen = new Set<number>();
  (s.tentative as unknown[]).forEach((raw, k) => {
    const where = `tentative[${k}]`;
    if (!Array.isArray(raw) || raw.length !== 2 || !raw.every((x) => Number.isInteger(x) && x >= 0 && x < typed.length)) {
      bad(`${where}: expected [demand unit, supply unit] positions in units`);
    }
    const [d, sp] = raw as [number, number];
    if (typed[d]!.side !== 'demand' || typed[sp]!.side !== 'supply' || typed[d]!.state !== 'pool' || typed[sp]!.state !== 'pool') {
      bad(`${where}: expected a pooled demand and a pooled supply`);
    }
    if (seen.has(d) || seen.has(sp)) bad(`${where}: a unit is in two tentative pairs`);
    seen.add(d);
    seen.add(sp);
  });
  return s as unknown as PoolSnapshot;
}
