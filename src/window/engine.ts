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
import { capabilitiesAllow, travelMin } from './geo.js';
import { cellKmFor, type GridOptions, SpatialGrid } from './grid.js';
import { KeyedHeap } from './heap.js';
import { type Occurrence, OccurrenceLedger } from './occurrences.js';

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
}

/** A unit of a {@link PoolSnapshot}: an occurrence the engine still holds (pending or in the pool). */
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
  /** `pending` = known but not yet in the pool: it joins at `joinEpoch`. */
  state: 'pending' | 'pool';
  joinEpoch: number;
}

/** Serialisable pool state of one market (live mode stores it on the compacted pool topic). */
export interface PoolSnapshot {
  version: 1;
  market: string;
  windowMs: number;
  /** Last closed epoch of the market; -Infinity is written as null. */
  lastClosed: number | null;
  units: SnapshotUnit[];
  /** Tentative pairs (commit "due") as [demand unit, supply unit] positions in `units`. */
  tentative: Array<[number, number]>;
}

/** Where an occurrence is, as far as the engine is concerned. */
const ST_PENDING = 1;
const ST_POOL = 2;
const ST_MATCHED = 3;
const ST_GONE = 4;

/** One side's pool of a market: slots (reused) hold occurrence indices; the grid indexes the slots. */
class SidePool {
  slotOcc: Int32Array = new Int32Array(16).fill(-1);
  /** Slots in use are below `high`; freed ones are reused last-freed first. */
  high = 0;
  size = 0;
  private readonly free: number[] = [];
  readonly grid: SpatialGrid;

  constructor(gridOpts: GridOptions) {
    this.grid = new SpatialGrid(gridOpts);
  }

  add(occ: number, a: number, b: number): number {
    let slot: number;
    if (this.free.length > 0) slot = this.free.pop()!;
    else {
      slot = this.high++;
      if (slot >= this.slotOcc.length) {
        const grown = new Int32Array(this.slotOcc.length * 2).fill(-1);
        grown.set(this.slotOcc);
        this.slotOcc = grown;
      }
    }
    this.slotOcc[slot] = occ;
    this.grid.insert(slot, a, b);
    this.size++;
    return slot;
  }

  remove(slot: number): void {
    this.slotOcc[slot] = -1;
    this.grid.remove(slot);
    this.free.push(slot);
    this.size--;
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
  /** Something changed since the last solve that can change the optimum. */
  dirty = false;

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
  private readonly due: boolean;
  private readonly warmOn: boolean;
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

  // Per occurrence, by index.
  private state: Uint8Array = new Uint8Array(1024);
  private slotOf: Int32Array = new Int32Array(1024).fill(-1);
  private price: Float64Array = new Float64Array(1024).fill(NaN);
  private partner: Int32Array = new Int32Array(1024).fill(-1);
  /** Demand only: allowed supply seen so far, flat [supplyOcc, travelMin, ...]; stale entries are dropped at use. */
  private cand: Array<number[] | undefined> = [];

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
  private readonly qIds: number[] = [];
  private readonly qDist: number[] = [];

  private readonly tot: EngineTotals = {
    demandUnits: 0, supplyUnits: 0, matched: 0, abandoned: 0, cost: 0, duplicates: 0, ignoredWithdraws: 0, late: 0,
  };

  constructor(config: PairflowConfig, sink: EngineSink, opts: EngineOptions = {}) {
    this.config = config;
    this.sink = sink;
    this.W = config.windowMs;
    this.P = config.abandonPenalty;
    this.R = reserveOf(config);
    this.due = config.commit === 'due';
    this.warmOn = opts.warm ?? true;
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
   * was refused (the pipeline turns it into a reject).
   */
  ingest(sourced: SourcedEvent): string | null {
    const ev = sourced.event;
    const m = this.marketOf(ev.market);
    if (ev.t < m.lastClosed) this.tot.late++;
    const out = this.ledger.apply(sourced);
    if (out.kind === 'arrival') {
      const occ = out.occurrence;
      this.ensure(occ.index + 1);
      if (occ.side === 'demand') this.tot.demandUnits++;
      else this.tot.supplyUnits++;
      this.state[occ.index] = ST_PENDING;
      const join = Math.max(this.epochAfter(occ.t), m.lastClosed + this.W);
      m.pending.push(join, occ.index);
      this.schedule(m, join);
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
      return;
    }
    this.run(watermark);
    for (const m of this.marketList) if (closed > m.lastClosed) m.lastClosed = closed;
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

  /**
   * The serialisable pool state of one market: units pending or in the pool (with
   * their prices), tentative pairs, and the last closed epoch. Units already matched
   * or expired are not included. JSON-safe.
   */
  snapshot(market: string): PoolSnapshot {
    const m = this.markets.get(market);
    const closed = m === undefined ? this.globalClosed : m.lastClosed;
    const snap: PoolSnapshot = {
      version: 1, market, windowMs: this.W, lastClosed: closed === -Infinity ? null : closed, units: [], tentative: [],
    };
    if (m === undefined) return snap;
    const occs = this.ledger.occurrences;
    const at = new Map<number, number>();
    const add = (id: number, state: 'pending' | 'pool', joinEpoch: number): void => {
      const o = occs[id]!;
      const p = this.price[id]!;
      const u: SnapshotUnit = { side: o.side, id: o.id, t: o.t, until: o.until, end: o.end, seq: o.seq, price: Number.isFinite(p) ? p : null, state, joinEpoch };
      if (o.lat !== undefined) u.lat = o.lat;
      if (o.lon !== undefined) u.lon = o.lon;
      if (o.x !== undefined) u.x = o.x;
      if (o.y !== undefined) u.y = o.y;
      if (o.has !== undefined) u.has = [...o.has];
      if (o.needs !== undefined) u.needs = [...o.needs];
      at.set(id, snap.units.length);
      snap.units.push(u);
    };
    const joinAt = m.lastClosed === -Infinity ? 0 : m.lastClosed;
    for (const pool of [m.demand, m.supply]) {
      for (let slot = 0; slot < pool.high; slot++) {
        const id = pool.slotOcc[slot]!;
        if (id >= 0) add(id, 'pool', joinAt);
      }
    }
    const pending = m.pending.entries().sort((x, y) => x[0] - y[0] || x[1] - y[1]);
    for (const [key, id] of pending) add(id, 'pending', key);
    for (let slot = 0; slot < m.demand.high; slot++) {
      const d = m.demand.slotOcc[slot]!;
      if (d >= 0 && this.partner[d]! >= 0) snap.tentative.push([at.get(d)!, at.get(this.partner[d]!)!]);
    }
    return snap;
  }

  /**
   * Restores a market from {@link snapshot} output into an engine that holds no unit
   * of that market yet (live mode after a restart). Restored units count in
   * `demandUnits`/`supplyUnits`. Throws `PAIRFLOW_ERR_STATE_INVALID` for another
   * version, another window length or a malformed state.
   */
  restore(market: string, state: unknown): void {
    const snap = parseSnapshot(market, state, this.W);
    const m = this.marketOf(market);
    if (m.demand.size + m.supply.size + m.pending.size > 0) {
      throw pairflowError('PAIRFLOW_ERR_INTERNAL_BUG', { detail: `restore(${market}): the market already holds units` });
    }
    if (snap.lastClosed !== null && snap.lastClosed > m.lastClosed) m.lastClosed = snap.lastClosed;
    const ids: number[] = [];
    for (const u of snap.units) {
      const o = this.ledger.adopt({
        side: u.side, id: u.id, market, t: u.t, until: u.until, end: u.end, seq: u.seq,
        lat: u.lat, lon: u.lon, x: u.x, y: u.y, has: u.has, needs: u.needs,
      });
      this.ensure(o.index + 1);
      if (this.state[o.index] !== 0) {
        throw pairflowError('PAIRFLOW_ERR_INTERNAL_BUG', { detail: `restore(${market}): ${u.side} ${u.id} at ${u.t} is already known` });
      }
      if (u.side === 'demand') this.tot.demandUnits++;
      else this.tot.supplyUnits++;
      this.price[o.index] = u.price ?? NaN;
      ids.push(o.index);
    }
    const occs = this.ledger.occurrences;
    // Supply first, so that each demand's candidate list is built by its own query.
    for (const side of ['supply', 'demand'] as const) {
      snap.units.forEach((u, k) => {
        if (u.state === 'pool' && u.side === side) this.enterPool(m, occs[ids[k]!]!, m.lastClosed + this.W);
      });
    }
    snap.units.forEach((u, k) => {
      if (u.state !== 'pending') return;
      this.state[ids[k]!] = ST_PENDING;
      const join = Math.max(u.joinEpoch, m.lastClosed + this.W);
      m.pending.push(join, ids[k]!);
      this.schedule(m, join);
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

  private ensure(n: number): void {
    if (n <= this.state.length) return;
    const size = Math.max(n, this.state.length * 2);
    const st = new Uint8Array(size);
    st.set(this.state);
    this.state = st;
    this.slotOf = growI32(this.slotOf, size, -1);
    this.price = growF64(this.price, size, NaN);
    this.partner = growI32(this.partner, size, -1);
  }

  /** First epoch τ with `x < τ`. */
  private epochAfter(x: number): number {
    return (Math.floor(x / this.W) + 1) * this.W;
  }

  private endMoved(m: MarketState, occ: Occurrence): void {
    if (this.state[occ.index] === ST_POOL) {
      const at = Math.max(this.epochAfter(occ.end), m.lastClosed + this.W);
      m.expiry.push(at, occ.index);
      this.schedule(m, at);
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
    while (m.pending.peekKey() <= tau) this.join(m, m.pending.pop(), tau);
    while (m.expiry.peekKey() <= tau) {
      const id = m.expiry.pop();
      if (this.state[id] === ST_POOL && occs[id]!.end < tau) this.leaveUnmatched(m, id, tau);
    }
    while (m.lastChance.peekKey() <= tau) {
      const id = m.lastChance.pop();
      if (this.state[id] === ST_POOL) m.dirty = true;
    }
    if (m.dirty && m.demand.size > 0 && m.supply.size > 0) this.solve(m, tau);
    m.dirty = false;
    m.lastClosed = tau;
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
      return;
    }
    this.enterPool(m, o, tau + this.W);
  }

  /** Puts an occurrence in its market's pool; its triggers fire at epochs ≥ `from`. */
  private enterPool(m: MarketState, o: Occurrence, from: number): void {
    const id = o.index;
    this.state[id] = ST_POOL;
    // Under "due" only a unit at its last chance can make a pair executable.
    if (!this.due || o.until < from) m.dirty = true;
    const [a, b] = this.coords(o);
    const speed = this.config.speedKmh;
    const maxTravel = this.config.maxTravelMin;
    const occs = this.ledger.occurrences;
    if (o.side === 'demand') {
      this.slotOf[id] = m.demand.add(id, a, b);
      const list: number[] = [];
      const n = m.supply.grid.queryInto(a, b, this.queryKm, this.qIds, this.qDist);
      for (let k = 0; k < n; k++) {
        const s = m.supply.slotOcc[this.qIds[k]!]!;
        const tr = travelMin(this.qDist[k]!, speed);
        if (tr <= maxTravel && capabilitiesAllow(o.needs, occs[s]!.has)) list.push(s, tr);
      }
      this.cand[id] = list;
      if (this.demandLastChanceMatters) this.pushLastChance(m, o, from);
    } else {
      this.slotOf[id] = m.supply.add(id, a, b);
      const n = m.demand.grid.queryInto(a, b, this.queryKm, this.qIds, this.qDist);
      for (let k = 0; k < n; k++) {
        const d = m.demand.slotOcc[this.qIds[k]!]!;
        const tr = travelMin(this.qDist[k]!, speed);
        if (tr <= maxTravel && capabilitiesAllow(occs[d]!.needs, o.has)) this.cand[d]!.push(id, tr);
      }
      if (this.due) this.pushLastChance(m, o, from);
    }
    const expiresAt = Math.max(this.epochAfter(o.end), from);
    m.expiry.push(expiresAt, id);
    this.schedule(m, expiresAt);
  }

  private pushLastChance(m: MarketState, o: Occurrence, from: number): void {
    // First epoch with until < τ + W; one already reached needs no trigger (the join is one).
    const at = this.epochAfter(o.until - this.W);
    if (at >= from) {
      m.lastChance.push(at, o.index);
      this.schedule(m, at);
    }
  }

  private removeFromPool(m: MarketState, o: Occurrence, next: number): void {
    const id = o.index;
    this.state[id] = next;
    (o.side === 'demand' ? m.demand : m.supply).remove(this.slotOf[id]!);
    this.slotOf[id] = -1;
    this.cand[id] = undefined;
    const p = this.partner[id]!;
    if (p >= 0) {
      this.partner[p] = -1;
      this.partner[id] = -1;
    }
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

  private solve(m: MarketState, tau: number): void {
    const occs = this.ledger.occurrences;
    const W = this.W;
    // Columns: the supply pool in slot order.
    const sup = m.supply;
    this.colOfSlot = growI32(this.colOfSlot, sup.high);
    this.colOcc = growI32(this.colOcc, sup.size);
    this.colPrices = growF64(this.colPrices, sup.size);
    let nCols = 0;
    for (let slot = 0; slot < sup.high; slot++) {
      const s = sup.slotOcc[slot]!;
      if (s < 0) continue;
      this.colOfSlot[slot] = nCols;
      this.colOcc[nCols] = s;
      this.colPrices[nCols] = this.price[s]!;
      nCols++;
    }
    // Rows: the demand pool in slot order, pairs from each demand's candidate list.
    const dem = m.demand;
    let bound = 0;
    for (let slot = 0; slot < dem.high; slot++) {
      const d = dem.slotOcc[slot]!;
      if (d >= 0) bound += this.cand[d]!.length >> 1;
    }
    this.rowPtr = growI32(this.rowPtr, dem.size + 1);
    this.rowOcc = growI32(this.rowOcc, dem.size);
    this.delta = growF64(this.delta, dem.size);
    this.rowPrices = growF64(this.rowPrices, dem.size);
    this.warmPairs = growI32(this.warmPairs, dem.size);
    this.colIdx = growI32(this.colIdx, bound);
    this.cost = growF64(this.cost, bound);
    this.travel = growF64(this.travel, bound);
    const { rowPtr, colIdx, cost, travel, delta, rowOcc, rowPrices, warmPairs, colOfSlot } = this;
    const st = this.state, slotOf = this.slotOf, partner = this.partner;
    const waitPerMs = this.config.waitWeight / 60_000;
    const lastChanceBefore = tau + W;
    let nRows = 0;
    let nnz = 0;
    for (let slot = 0; slot < dem.high; slot++) {
      const d = dem.slotOcc[slot]!;
      if (d < 0) continue;
      const od = occs[d]!;
      rowOcc[nRows] = d;
      rowPtr[nRows] = nnz;
      const wait = waitPerMs * (tau - od.t);
      const list = this.cand[d]!;
      let w = 0;
      for (let k = 0; k < list.length; k += 2) {
        const s = list[k]!;
        if (st[s] !== ST_POOL) continue;
        const tr = list[k + 1]!;
        list[w] = s;
        list[w + 1] = tr;
        w += 2;
        colIdx[nnz] = colOfSlot[slotOf[s]!]!;
        cost[nnz] = tr + wait;
        travel[nnz] = tr;
        nnz++;
      }
      if (w !== list.length) list.length = w;
      delta[nRows] = od.until < lastChanceBefore ? this.P : this.R;
      rowPrices[nRows] = this.price[d]!;
      const p = partner[d]!;
      warmPairs[nRows] = p >= 0 && st[p] === ST_POOL ? colOfSlot[slotOf[p]!]! : -1;
      nRows++;
    }
    rowPtr[nRows] = nnz;
    const inst: SparseInstance = {
      nRows, nCols,
      rowPtr: rowPtr.subarray(0, nRows + 1),
      colIdx: colIdx.subarray(0, nnz),
      cost: cost.subarray(0, nnz),
      unmatchedCost: delta.subarray(0, nRows),
    };
    let warm: WarmStart | undefined;
    if (this.warmOn) {
      warm = this.due
        ? { colPrices: this.colPrices.subarray(0, nCols), rowPrices: rowPrices.subarray(0, nRows), rowToCol: warmPairs.subarray(0, nRows) }
        : { colPrices: this.colPrices.subarray(0, nCols), rowPrices: rowPrices.subarray(0, nRows) };
    }
    const res: SolveResult = this.solver(inst, this.now !== undefined ? { warm, now: this.now } : { warm });
    if (this.verify) {
      const rep = checkCertificate(inst, res);
      if (!rep.ok) {
        throw pairflowError('PAIRFLOW_ERR_INTERNAL_BUG', {
          detail: `market ${m.name} epoch ${tau}: solver certificate failed: ${rep.problems.join('; ')}`,
        });
      }
    }

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
      const s = this.colOcc[j]!;
      const v = res.colDuals[j]!;
      this.price[s] = v;
      partner[s] = -1;
      dualObjective += v;
      pSum += v;
      if (v < pMin) pMin = v;
      if (v > pMax) pMax = v;
    }

    if (this.sink.prices) this.emitPrices(m.name, tau, nRows, rowOcc, res.rowDuals, nCols, this.colOcc, res.colDuals);

    let matched = 0;
    let tentative = 0;
    for (let i = 0; i < nRows; i++) {
      const j = res.rowToCol[i]!;
      if (j < 0) continue;
      const d = rowOcc[i]!;
      const s = this.colOcc[j]!;
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
    this.sink.epoch({
      market: m.name, epoch: tau, poolDemand: nRows, poolSupply: nCols, candidatePairs: nnz, matched, tentative,
      solveMs: res.stats.ms, warm: res.stats.warm, augmentations: res.stats.augmentations,
      primalCost: res.cost, dualObjective,
      priceMin: nCols > 0 ? pMin : 0, priceMean: nCols > 0 ? pSum / nCols : 0, priceMax: nCols > 0 ? pMax : 0,
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
  if (s.version !== 1) bad(`field 'version': got ${JSON.stringify(s.version)}, expected 1`);
  if (s.windowMs !== windowMs) bad(`field 'windowMs': got ${JSON.stringify(s.windowMs)}, expected ${windowMs} (the window of this run)`);
  if (s.lastClosed !== null && !isNum(s.lastClosed)) bad(`field 'lastClosed': expected null or a number`);
  if (!Array.isArray(s.units)) return bad(`field 'units': expected an array`);
  if (!Array.isArray(s.tentative)) return bad(`field 'tentative': expected an array`);
  const units = s.units as unknown[];
  units.forEach((raw, k) => {
    const u = raw as Record<string, unknown> | null;
    const where = `units[${k}]`;
    if (u === null || typeof u !== 'object') return bad(`${where}: expected an object`);
    if (u.side !== 'demand' && u.side !== 'supply') bad(`${where}.side: got ${JSON.stringify(u.side)}, expected "demand" or "supply"`);
    if (typeof u.id !== 'string' || u.id === '') bad(`${where}.id: expected a non-empty string`);
    for (const f of ['t', 'until', 'end', 'seq', 'joinEpoch']) if (!isNum(u[f])) bad(`${where}.${f}: expected a finite number`);
    for (const f of ['lat', 'lon', 'x', 'y']) if (u[f] !== undefined && !isNum(u[f])) bad(`${where}.${f}: expected a finite number`);
    for (const f of ['has', 'needs']) if (u[f] !== undefined && !isStrings(u[f])) bad(`${where}.${f}: expected an array of strings`);
    if (u.price !== null && !isNum(u.price)) bad(`${where}.price: expected null or a finite number`);
    if (u.state !== 'pending' && u.state !== 'pool') bad(`${where}.state: got ${JSON.stringify(u.state)}, expected "pending" or "pool"`);
    return undefined;
  });
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
