/**
 * The records of the compacted pool topic (SPEC §7, internal and versioned).
 *
 * - key = market: the **market record**, the market's state in columns
 *   ({@link PoolColumns}: per held unit its seq, state, slot or join epoch, end and dual
 *   price, as little-endian binary in base64) with the slot layouts, the last closed
 *   epoch and the tentative pairs;
 * - key = 0xFF 'u' market-length market seq: a **unit record**, the fixed part of one
 *   held unit (side, id, times, place, skills), written once when the unit is first
 *   committed and deleted (a tombstone) in the commit after it leaves the market;
 * - {@link POSITION_KEY}: the partition's position; {@link RESTORE_MARK_KEY}: a new
 *   owner's marker.
 *
 * Writing each unit once rather than each market whole with every commit keeps a
 * commit's pool bytes near 33 per held unit (the columns) plus the units that came and
 * went: with a full day's pools (thousands of units a partition) and a commit per
 * window, whole snapshots made the commits, not the solves, the slow part of live mode.
 * 0xFF never starts UTF-8, so no market key can take one of the other keys.
 */
import { pairflowError } from '../errors.js';
import {
  COL_DONE, expandPoolColumns, SNAPSHOT_VERSION,
  type PoolColumns, type PoolSnapshot, type PoolUnit,
} from '../window/engine.js';

/** The key of a partition's position record. */
export const POSITION_KEY = Buffer.from([0xff, 0x70]);
/** The key of the marker a new owner commits before it reads its pool partition back. */
export const RESTORE_MARK_KEY = Buffer.from([0xff, 0x72]);
const UNIT_TAG = 0x75;

/** Version of the market record in columns (version 2, a whole {@link PoolSnapshot}, is still read). */
export const MARKET_RECORD_VERSION = 3;

/** The unit record key of (market, seq). */
export function unitKey(market: string, seq: number): Buffer {
  const m = Buffer.from(market, 'utf8');
  const head = Buffer.from([0xff, UNIT_TAG, m.length >> 8, m.length & 0xff]);
  return Buffer.concat([head, m, Buffer.from(String(seq), 'latin1')]);
}

/** The (market, seq) of a unit record key; null for any other key. */
export function parseUnitKey(key: Buffer): { market: string; seq: number } | null {
  if (key.length < 5 || key[0] !== 0xff || key[1] !== UNIT_TAG) return null;
  const len = (key[2]! << 8) | key[3]!;
  if (4 + len >= key.length) return null;
  const seq = Number(key.subarray(4 + len).toString('latin1'));
  if (!Number.isFinite(seq)) return null;
  return { market: key.subarray(4, 4 + len).toString('utf8'), seq };
}

const f64 = (a: Float64Array): string => {
  const b = Buffer.allocUnsafe(a.length * 8);
  for (let i = 0; i < a.length; i++) b.writeDoubleLE(a[i]!, i * 8);
  return b.toString('base64');
};

/** The market record value of `cols` (JSON). */
export function encodeMarketRecord(cols: PoolColumns): string {
  return JSON.stringify({
    ...cols.head,
    version: MARKET_RECORD_VERSION,
    snapshotVersion: cols.head.version,
    n: cols.seq.length,
    seq: f64(cols.seq),
    end: f64(cols.end),
    price: f64(cols.price),
    aux: f64(cols.aux),
    state: Buffer.from(cols.state.buffer, cols.state.byteOffset, cols.state.byteLength).toString('base64'),
    tentative: cols.tentative,
  });
}

/** The unit record value of `u` (JSON). */
export function encodeUnitRecord(u: PoolUnit): string {
  return JSON.stringify(u);
}

/**
 * One market's state from its market record and the unit records of its partition
 * (`units`: seq → raw value). Version 2 records (whole snapshots) pass through; the
 * engine's restore checks the result. Throws `PAIRFLOW_ERR_STATE_INVALID` naming the
 * market when the record or a unit it names is missing or malformed.
 */
export function marketSnapshot(market: string, value: Buffer, units: ReadonlyMap<number, Buffer> | undefined): { snapshot: unknown; seqs: number[] } {
  const bad = (detail: string): never => {
    throw pairflowError('PAIRFLOW_ERR_STATE_INVALID', { market, detail });
  };
  let rec: Record<string, unknown>;
  try {
    rec = JSON.parse(value.toString('utf8')) as Record<string, unknown>;
  } catch (err) {
    return bad(`pool record is not JSON: ${(err as Error).message}`);
  }
  if (rec === null || typeof rec !== 'object') return bad('pool record: expected an object');
  if (rec.version === SNAPSHOT_VERSION) return { snapshot: rec, seqs: [] };
  if (rec.version !== MARKET_RECORD_VERSION) return bad(`pool record field 'version': got ${JSON.stringify(rec.version)}, expected ${MARKET_RECORD_VERSION} or ${SNAPSHOT_VERSION}`);
  const n = rec.n;
  if (!Number.isInteger(n) || (n as number) < 0) return bad(`pool record field 'n': expected a count`);
  const col = (name: string, width: number): Buffer => {
    const v = rec[name];
    if (typeof v !== 'string') return bad(`pool record field '${name}': expected base64 text`);
    const b = Buffer.from(v, 'base64');
    if (b.length !== (n as number) * width) bad(`pool record field '${name}': ${b.length} bytes, expected ${(n as number) * width} for ${n as number} units`);
    return b;
  };
  const doubles = (name: string): Float64Array => {
    const b = col(name, 8);
    const a = new Float64Array(n as number);
    for (let i = 0; i < a.length; i++) a[i] = b.readDoubleLE(i * 8);
    return a;
  };
  const cols: Omit<PoolColumns, 'occ'> = {
    head: {
      version: rec.snapshotVersion as 2, market: rec.market as string, windowMs: rec.windowMs as number,
      lastClosed: rec.lastClosed as number | null, late: rec.late as number, pools: rec.pools as PoolSnapshot['pools'],
    },
    seq: doubles('seq'), end: doubles('end'), price: doubles('price'), aux: doubles('aux'),
    state: new Uint8Array(col('state', 1)),
    tentative: rec.tentative as Array<[number, number]>,
  };
  if (cols.state.some((c) => c > COL_DONE)) bad(`pool record field 'state': a code above ${COL_DONE}`);
  const seqs = [...cols.seq];
  const snapshot = expandPoolColumns(cols, (k) => {
    const raw = units?.get(seqs[k]!);
    if (raw === undefined) return bad(`the unit record of seq ${seqs[k]!} is missing from the pool topic`);
    try {
      return JSON.parse(raw.toString('utf8')) as PoolUnit;
    } catch (err) {
      return bad(`the unit record of seq ${seqs[k]!} is not JSON: ${(err as Error).message}`);
    }
  });
  return { snapshot, seqs };
}

/** The pool topic's records as Kafka messages take them. */
export interface PoolRecord {
  key: Buffer | string;
  value: string | null;
}

/** Per market, the units whose unit record is committed: seq → record key. */
export type PersistedUnits = Map<string, Map<number, Buffer>>;

/** What an engine must offer to be written to and restored from the pool topic. */
interface PoolEngine {
  poolColumns(market: string): PoolColumns;
  unitOf(occ: number): PoolUnit;
  restore(market: string, state: unknown): void;
}

/**
 * The pool records of one commit for the `touched` markets of `engine`: a unit record
 * for each unit not yet in `persisted`, a tombstone for each unit gone, the market
 * records. `after` is what `persisted` becomes once the transaction has landed (apply
 * it with {@link applyPersisted}; an aborted transaction leaves `persisted` as it was).
 */
export function poolRecords(engine: PoolEngine, touched: readonly string[], persisted: PersistedUnits): { records: PoolRecord[]; after: PersistedUnits } {
  const records: PoolRecord[] = [];
  const after: PersistedUnits = new Map();
  for (const market of touched) {
    const cols = engine.poolColumns(market);
    const before = persisted.get(market);
    const now = new Map<number, Buffer>();
    for (let k = 0; k < cols.seq.length; k++) {
      const seq = cols.seq[k]!;
      let key = before?.get(seq);
      if (key === undefined) {
        key = unitKey(market, seq);
        records.push({ key, value: encodeUnitRecord(engine.unitOf(cols.occ[k]!)) });
      }
      now.set(seq, key);
    }
    if (before !== undefined) for (const [seq, key] of before) if (!now.has(seq)) records.push({ key, value: null });
    records.push({ key: market, value: encodeMarketRecord(cols) });
    after.set(market, now);
  }
  return { records, after };
}

/** `persisted` once the commit of {@link poolRecords} has landed. */
export function applyPersisted(persisted: PersistedUnits, after: PersistedUnits): void {
  for (const [market, units] of after) persisted.set(market, units);
}

/**
 * The market and unit records of one pool partition, read in offset order (the latest
 * per key wins, a null value deletes), and the markets restored from them.
 */
export class PoolReader {
  private readonly markets = new Map<string, Buffer>();
  private readonly units = new Map<string, Map<number, Buffer>>();

  /** One record (not the position record or a marker). */
  take(key: Buffer, value: Buffer | null): void {
    const unit = parseUnitKey(key);
    if (unit === null) {
      if (value === null) this.markets.delete(key.toString('utf8'));
      else this.markets.set(key.toString('utf8'), value);
      return;
    }
    let of = this.units.get(unit.market);
    if (of === undefined) this.units.set(unit.market, (of = new Map()));
    if (value === null) of.delete(unit.seq);
    else of.set(unit.seq, value);
  }

  /**
   * Restores every market read into `engine`; returns the counts and the units whose
   * records are committed. A unit record no market record names (its tombstone went to
   * compaction while the partition was being read) is counted as committed, so the
   * market's next commit deletes it again.
   */
  restoreInto(engine: PoolEngine): { markets: number; units: number; persisted: PersistedUnits } {
    const persisted: PersistedUnits = new Map();
    let units = 0;
    for (const [market, value] of this.markets) {
      const { snapshot, seqs } = marketSnapshot(market, value, this.units.get(market));
      engine.restore(market, snapshot);
      units += (snapshot as { units: unknown[] }).units.length;
      persisted.set(market, new Map(seqs.map((seq) => [seq, unitKey(market, seq)])));
    }
    for (const [market, of] of this.units) {
      let keys = persisted.get(market);
      if (keys === undefined) persisted.set(market, (keys = new Map()));
      for (const seq of of.keys()) if (!keys.has(seq)) keys.set(seq, unitKey(market, seq));
    }
    return { markets: this.markets.size, units, persisted };
  }
}
