/**
 * The pool topic's records: markets committed as columns plus a unit record per unit
 * (written once, deleted when the unit leaves) restore exactly what the engine's
 * snapshot holds, and an engine restored from them goes on as if never stopped.
 */
import { describe, expect, it } from 'vitest';
import {
  applyPersisted, encodeMarketRecord, marketSnapshot, parseUnitKey, PoolReader, poolRecords, POSITION_KEY, RESTORE_MARK_KEY,
  type PersistedUnits, type PoolRecord, unitKey,
} from '../../../src/live/pool-records.js';
import { WindowEngine } from '../../../src/window/engine.js';
import { mulberry32, randInt } from '../../helpers/random.js';
import { feed, Tape, tiedLog, uninterrupted } from '../../helpers/tied-log.js';

const buf = (k: Buffer | string): Buffer => (typeof k === 'string' ? Buffer.from(k, 'utf8') : k);

/** An in-memory pool partition: records appended in commit order. */
class PoolLog {
  readonly records: PoolRecord[] = [];
  /**
   * What a reader sees after compaction: the latest record per key. With `lossy`, the
   * broker's cleaner has also removed some tombstones (their keys vanish) and a reader
   * raced it on others (it saw the deleted unit's old value and never its tombstone).
   */
  read(rand: () => number, lossy: boolean): PoolReader {
    const latest = new Map<string, PoolRecord>();
    const earlier = new Map<string, PoolRecord>();
    for (const r of this.records) {
      const k = buf(r.key).toString('latin1');
      const prev = latest.get(k);
      if (prev !== undefined && prev.value !== null) earlier.set(k, prev);
      latest.set(k, r);
    }
    const reader = new PoolReader();
    for (const [k, r] of latest) {
      let rec: PoolRecord | undefined = r;
      if (lossy && r.value === null) {
        const roll = rand();
        if (roll < 0.4) rec = undefined;
        else if (roll < 0.7) rec = earlier.get(k);
      }
      if (rec !== undefined) reader.take(buf(rec.key), rec.value === null ? null : Buffer.from(rec.value, 'utf8'));
    }
    return reader;
  }
}

describe('unitKey()', () => {
  it('round-trips any market and seq, and never parses a market key', () => {
    for (const market of ['north', 'zürich-øst', 'a\u0000b', 'x'.repeat(300), '1']) {
      for (const seq of [0, 7, 123_456_789_012]) {
        expect(parseUnitKey(unitKey(market, seq))).toEqual({ market, seq });
      }
      expect(parseUnitKey(Buffer.from(market, 'utf8'))).toBeNull();
    }
    expect(parseUnitKey(POSITION_KEY)).toBeNull();
    expect(parseUnitKey(RESTORE_MARK_KEY)).toBeNull();
    // A market of one name and seq never takes the key of another.
    expect(unitKey('a1', 2).equals(unitKey('a', 12))).toBe(false);
  });
});

describe('poolRecords() and PoolReader', () => {
  it('restore from the pool records at many commits gives the same records as one uninterrupted run, ties, cancellations and compaction included (seeded)', () => {
    let unitRecords = 0;
    let tombstones = 0;
    let heldPerCommit = 0;
    for (let seed = 1; seed <= 24; seed++) {
      const busy = seed % 4 === 0;
      const n = busy ? 800 : 300;
      const { config, events } = tiedLog(seed, n, busy);
      const ref = uninterrupted(config, events);
      const rand = mulberry32(seed * 104_729);
      const log = new PoolLog();
      const tape = new Tape();
      let engine = new WindowEngine(config, tape, { verify: true, now: () => 0 });
      let persisted: PersistedUnits = new Map();
      let from = 0;
      while (from < events.length) {
        // Commit every few events, as live mode does after a batch.
        const to = Math.min(events.length, from + randInt(rand, 1, 40));
        feed(engine, events.slice(from, to));
        from = to;
        const { records, after } = poolRecords(engine, engine.takeTouched(), persisted);
        log.records.push(...records);
        applyPersisted(persisted, after);
        for (const r of records) {
          if (typeof r.key === 'string') heldPerCommit += (JSON.parse(r.value!) as { n: number }).n;
          else if (r.value === null) tombstones++;
          else unitRecords++;
        }
        if (from < events.length && rand() < 0.15) {
          // Stop: a new owner restores from what the topic holds.
          engine = new WindowEngine(config, tape, { verify: true, now: () => 0 });
          const restored = log.read(rand, seed % 2 === 0).restoreInto(engine);
          engine.takeTouched();
          persisted = restored.persisted;
        }
      }
      engine.finish();
      expect(tape.all(), `seed ${seed}`).toEqual(ref.all());
    }
    // Units came and went, and each was written once rather than with every commit
    // that held it (what whole snapshots would have written).
    expect(tombstones).toBeGreaterThan(100);
    expect(unitRecords * 4).toBeLessThan(heldPerCommit);
  });

  it('restores what whole snapshots restore, and writes a unit once however many commits hold it', () => {
    const { config, events } = tiedLog(8, 800, true);
    const engine = new WindowEngine(config, new Tape(), { now: () => 0 });
    const persisted: PersistedUnits = new Map();
    const log = new PoolLog();
    const writes = new Map<string, number>();
    for (let i = 0; i < events.length; i += 25) {
      feed(engine, events.slice(i, i + 25));
      const { records, after } = poolRecords(engine, engine.takeTouched(), persisted);
      for (const r of records) {
        if (typeof r.key !== 'string' && r.value !== null) {
          const k = r.key.toString('latin1');
          writes.set(k, (writes.get(k) ?? 0) + 1);
        }
      }
      log.records.push(...records);
      applyPersisted(persisted, after);
    }
    expect(Math.max(...writes.values())).toBe(1);
    const copy = new WindowEngine(config, new Tape(), { now: () => 0 });
    const got = log.read(() => 1, false).restoreInto(copy);
    const whole = new WindowEngine(config, new Tape(), { now: () => 0 });
    for (const m of engine.marketNames()) whole.restore(m, JSON.parse(JSON.stringify(engine.snapshot(m))));
    for (const m of engine.marketNames()) expect(copy.snapshot(m), m).toEqual(whole.snapshot(m));
    expect(got.units).toBe(engine.marketNames().reduce((s, m) => s + engine.snapshot(m).units.length, 0));
    expect(got.units).toBeGreaterThan(20);
  });

  it('a market record naming a unit whose record is missing, or with damaged columns, is PAIRFLOW_ERR_STATE_INVALID', () => {
    const { config, events } = tiedLog(3, 200);
    const engine = new WindowEngine(config, new Tape(), { now: () => 0 });
    feed(engine, events);
    const market = engine.marketNames().find((m) => engine.poolColumns(m).seq.length > 1)!;
    const cols = engine.poolColumns(market);
    const value = Buffer.from(encodeMarketRecord(cols), 'utf8');
    const units = new Map([...cols.seq].map((seq, k) => [seq, Buffer.from(JSON.stringify(engine.unitOf(cols.occ[k]!)), 'utf8')]));
    expect(marketSnapshot(market, value, units).snapshot).toEqual(JSON.parse(JSON.stringify(engine.snapshot(market))));
    const codeOf = (f: () => unknown): unknown => {
      try {
        f();
      } catch (err) {
        return (err as { code?: unknown }).code;
      }
      return null;
    };
    const fewer = new Map(units);
    fewer.delete(cols.seq[1]!);
    expect(codeOf(() => marketSnapshot(market, value, fewer))).toBe('PAIRFLOW_ERR_STATE_INVALID');
    const rec = JSON.parse(value.toString('utf8')) as Record<string, unknown>;
    for (const damaged of [{ ...rec, n: (rec.n as number) + 1 }, { ...rec, price: 42 }, { ...rec, version: 9 }]) {
      expect(codeOf(() => marketSnapshot(market, Buffer.from(JSON.stringify(damaged)), units))).toBe('PAIRFLOW_ERR_STATE_INVALID');
    }
    expect(codeOf(() => marketSnapshot(market, Buffer.from('{no'), units))).toBe('PAIRFLOW_ERR_STATE_INVALID');
    // A whole snapshot (version 2, written before unit records) is still read.
    const v2 = Buffer.from(JSON.stringify(engine.snapshot(market)), 'utf8');
    const copy = new WindowEngine(config, new Tape(), { now: () => 0 });
    copy.restore(market, marketSnapshot(market, v2, undefined).snapshot);
    expect(copy.snapshot(market)).toEqual(engine.snapshot(market));
  });
});
