/**
 * The engine's state across restarts, partitions and time: a market restored from its
 * snapshot, a market run in an engine of its own (one per Kafka partition, as live mode
 * does) and a market in one engine with every other (replay) make the same decisions,
 * record for record; and the state the engine holds follows its pools, not the length
 * of the run. Scenarios put units on a coarse grid of points, so equal costs — the
 * cases where the order of rows and columns decides between optimal solutions — are
 * everywhere.
 */
import { describe, expect, it } from 'vitest';
import { DEFAULT_CONFIG, type PairflowConfig, type SourcedEvent } from '../../../src/model.js';
import { Pipeline } from '../../../src/pipeline/drive.js';
import { WindowEngine } from '../../../src/window/engine.js';
import { feed, MARKETS, Tape, tiedLog, uninterrupted } from '../../helpers/tied-log.js';
import { mulberry32, randInt } from '../../helpers/random.js';

describe('WindowEngine state: restore', () => {
  it('restoring from snapshots at several points gives the same records as one uninterrupted run, ties included (seeded)', () => {
    let restoredDone = 0;
    let largestPool = 0;
    for (let seed = 1; seed <= 40; seed++) {
      const busy = seed % 4 === 0;
      const n = busy ? 800 : 300;
      const { config, events } = tiedLog(seed, n, busy);
      const ref = uninterrupted(config, events);
      const rand = mulberry32(seed * 7919);
      const cuts = [...new Set([randInt(rand, 1, n - 1), randInt(rand, 1, n - 1), randInt(rand, 1, n - 1)])].sort((a, b) => a - b);
      const tape = new Tape();
      let engine = new WindowEngine(config, tape, { verify: true, now: () => 0 });
      let from = 0;
      for (const cut of [...cuts, events.length]) {
        feed(engine, events.slice(from, cut));
        from = cut;
        if (cut === events.length) break;
        // Stop here: keep only what a snapshot keeps, through JSON, as on the pool topic.
        const states = engine.marketNames().map((m) => [m, JSON.parse(JSON.stringify(engine.snapshot(m)))] as const);
        for (const [, s] of states) largestPool = Math.max(largestPool, (s as { pools: { demand: { high: number } } }).pools.demand.high);
        engine = new WindowEngine(config, tape, { verify: true, now: () => 0 });
        for (const [m, s] of states) {
          engine.restore(m, s);
          restoredDone += (s as { units: Array<{ state: string }> }).units.filter((u) => u.state === 'done').length;
        }
      }
      engine.finish();
      expect(tape.all(), `seed ${seed} cuts ${cuts.join(',')} ${config.commit}`).toEqual(ref.all());
    }
    // The scenarios did carry reported units across restarts (for duplicates and
    // re-arrivals), and pools larger than a slot array's first allocation.
    expect(restoredDone).toBeGreaterThan(0);
    expect(largestPool).toBeGreaterThan(40);
  });
});

describe('WindowEngine state: one engine per partition', () => {
  it('a market alone in its engine makes the same records as among others (seeded)', () => {
    for (let seed = 100; seed < 130; seed++) {
      const { config, events } = tiedLog(seed, 400);
      const together = uninterrupted(config, events).all();
      for (const market of MARKETS) {
        const alone = uninterrupted(config, events.filter((e) => e.event.market === market)).all();
        expect(alone[market] ?? [], `seed ${seed} market ${market}`).toEqual(together[market] ?? []);
      }
    }
  });

  it('seq breaks ties only within a market: renumbering events (Kafka offsets) changes nothing', () => {
    for (let seed = 200; seed < 215; seed++) {
      const { config, events } = tiedLog(seed, 300);
      const ref = uninterrupted(config, events).all();
      // Per-market offsets: increasing in the same order, other values.
      const next = new Map<string, number>();
      const renumbered = events.map((e) => {
        const k = (next.get(e.event.market) ?? 1000) + 3;
        next.set(e.event.market, k);
        return { ...e, seq: k };
      });
      expect(uninterrupted(config, renumbered).all(), `seed ${seed}`).toEqual(ref);
    }
  });
});

describe('WindowEngine state: bounded memory', () => {
  it('forgetting reported occurrences changes no record of an in-order log (seeded)', () => {
    for (let seed = 300; seed < 320; seed++) {
      const { config, events } = tiedLog(seed, 400);
      expect(uninterrupted(config, events).all(), `seed ${seed}`).toEqual(uninterrupted(config, events, { bounded: false }).all());
    }
  });

  it('the occurrences held follow the pools, not the length of the run', () => {
    // A steady stream for ten simulated hours: what is held at the end is no more than
    // after the first hour, with a margin for the stream's own fluctuation.
    const rand = mulberry32(4242);
    const config: PairflowConfig = { ...DEFAULT_CONFIG, metric: 'euclidean', windowMs: 5000 };
    const engine = new WindowEngine(config, new Tape());
    const kept = new WindowEngine(config, new Tape(), { bounded: false });
    let t = 0;
    let seq = 0;
    const heldAt: number[] = [];
    for (let hour = 1; hour <= 10; hour++) {
      while (t < hour * 3_600_000) {
        t += randInt(rand, 100, 2000);
        const side = rand() < 0.5 ? 'demand' : 'supply';
        const ev: SourcedEvent = {
          event: { type: side, id: `${side}-${seq}`, market: 'm', t, until: null, x: rand() * 10, y: rand() * 10 },
          pos: { file: 'steady', line: seq + 1 }, seq: seq++,
        };
        for (const e of [engine, kept]) { e.advanceTo(t); e.ingest(ev); }
      }
      heldAt.push(engine.heldOccurrences());
    }
    expect(kept.heldOccurrences()).toBe(seq);
    expect(Math.max(...heldAt.slice(1))).toBeLessThan(heldAt[0]! * 1.5);
    expect(heldAt[9]!).toBeLessThan(seq / 20);
    expect(engine.totals()).toEqual(kept.totals());
  });
});

describe('WindowEngine state: couriers back after each job', () => {
  it('a matched occurrence ended by its courier coming back leaves the snapshot once past the lateness, not at the end of the shift', () => {
    // 20 couriers on 8-hour shifts, each back 5 minutes after every job (SPEC §1: the
    // new arrival ends the matched occurrence at its time); orders every few seconds.
    const rand = mulberry32(77);
    const config: PairflowConfig = { ...DEFAULT_CONFIG, metric: 'euclidean', windowMs: 5000, allowedLatenessMs: 2000, maxTravelMin: 60 };
    const shiftEnd = 8 * 3_600_000;
    const backAt: Array<{ t: number; id: string }> = [];
    const sink = new Tape();
    const matched: string[] = [];
    sink.assignment = (a: AssignmentRecord): void => { matched.push(a.supplyId); backAt.push({ t: a.epoch + 300_000, id: a.supplyId }); };
    const engine = new WindowEngine(config, sink);
    let seq = 0;
    const offer = (t: number, side: 'supply' | 'demand', id: string, until: number | null): void => {
      engine.advanceTo(t);
      expect(engine.ingest({ event: { type: side, id, market: 'm', t, until, x: rand() * 5, y: rand() * 5 }, pos: { file: 'shift', line: seq + 1 }, seq: seq++ })).toBeNull();
    };
    for (let c = 0; c < 20; c++) offer(c, 'supply', `c${c}`, shiftEnd);
    for (let t = 1000; t < 2 * 3_600_000; t += randInt(rand, 2000, 8000)) {
      backAt.sort((a, b) => a.t - b.t);
      while (backAt.length > 0 && backAt[0]!.t <= t) {
        const b = backAt.shift()!;
        offer(b.t, 'supply', b.id, shiftEnd);
      }
      offer(t, 'demand', `o${seq}`, null);
    }
    const done = engine.snapshot('m').units.filter((u) => u.state === 'done' && u.side === 'supply').length;
    // Hundreds of jobs, yet only the courier occurrences still open (matched, not yet
    // back) or ended within the lateness are kept.
    expect(matched.length).toBeGreaterThan(400);
    expect(done).toBeLessThanOrEqual(20 + 5);
  });
});

describe('Pipeline', () => {
  it('the watermark lateness delays when epochs close, never what they decide, on an in-order log (seeded)', () => {
    for (let seed = 400; seed < 420; seed++) {
      const { config, events } = tiedLog(seed, 300);
      const tapes = [0, 1500, 20_000].map((allowedLatenessMs) => {
        const tape = new Tape();
        const p = new Pipeline({ ...config, allowedLatenessMs }, tape, { verify: true, now: () => 0 });
        for (const ev of events) p.offer({ kind: 'event', ev });
        p.finish();
        expect(tape.rejects).toEqual([]);
        return tape.all();
      });
      expect(tapes[1], `seed ${seed}`).toEqual(tapes[0]);
      expect(tapes[2], `seed ${seed}`).toEqual(tapes[0]);
    }
  });
});
