/**
 * Seeded scenarios full of ties for the engine's state tests: a log of several markets
 * on a coarse grid of points (equal costs everywhere, so the order of rows and columns
 * decides between optimal solutions), and a tape of every record without wall-clock
 * fields to compare runs with.
 */
import { expect } from 'vitest';
import { DEFAULT_CONFIG, type PairflowConfig, type PairflowEvent, type Reject, type SourcedEvent } from '../../src/model.js';
import {
  type AssignmentRecord, type EngineOptions, type EngineSink, type EpochRecord, type ExpiryRecord, WindowEngine,
} from '../../src/window/engine.js';
import { mulberry32, randInt } from './random.js';

/** Every record of one market, in emission order, without wall-clock fields. */
export class Tape implements EngineSink {
  readonly lines = new Map<string, string[]>();
  rejects: Reject[] = [];
  private add(market: string, line: string): void {
    let l = this.lines.get(market);
    if (!l) this.lines.set(market, (l = []));
    l.push(line);
  }
  assignment(a: AssignmentRecord): void {
    this.add(a.market, `A ${a.epoch} ${a.demandId}@${a.demandT} ${a.supplyId}@${a.supplyT} ${a.cost}`);
  }
  expiry(e: ExpiryRecord): void {
    this.add(e.market, `E ${e.epoch} ${e.side} ${e.id}@${e.t} end ${e.end} ${e.cost}`);
  }
  epoch(s: EpochRecord): void {
    const { solveMs: _ms, ...rest } = s;
    this.add(s.market, `S ${JSON.stringify(rest)}`);
  }
  reject(r: Reject): void {
    this.rejects.push(r);
  }
  all(): Record<string, string[]> {
    return Object.fromEntries([...this.lines.entries()].sort((a, b) => (a[0] < b[0] ? -1 : 1)));
  }
}

export const MARKETS = ['north', 'south', 'east'];

/**
 * A seeded log of several markets on a 3×3 grid of points 1 km apart: couriers come
 * back after jobs (the same id again later), units cancel, arrivals repeat.
 */
export function tiedLog(seed: number, n: number, busy = false): { config: PairflowConfig; events: SourcedEvent[] } {
  const rand = mulberry32(seed);
  // Busy: one market, long patience and a short reach, so pools run to a hundred units
  // and more, with slots freed and reused all along.
  const markets = busy ? ['north'] : MARKETS;
  const evs: PairflowEvent[] = [];
  let t = 1_000_000;
  for (let i = 0; i < n; i++) {
    t += randInt(rand, 0, 700);
    const market = markets[randInt(rand, 0, markets.length - 1)]!;
    const side = rand() < 0.5 ? 'demand' : 'supply';
    const id = `${side[0]}${randInt(rand, 0, busy ? n : n / 6)}`;
    const r = rand();
    if (r < 0.1) {
      evs.push({ type: 'withdraw', side, id, market, t });
    } else {
      const ev: PairflowEvent = {
        type: side, id, market, t, until: rand() < 0.3 ? t + randInt(rand, 0, 20_000) : null,
        x: randInt(rand, 0, 2), y: randInt(rand, 0, 2),
      };
      evs.push(ev);
      if (r > 0.95) evs.push({ ...ev });
    }
  }
  const config: PairflowConfig = {
    ...DEFAULT_CONFIG, metric: 'euclidean', speedKmh: 60, maxTravelMin: 2, windowMs: [1000, 2000, 5000][randInt(rand, 0, 2)]!,
    waitWeight: [0, 1][randInt(rand, 0, 1)]!, abandonPenalty: 10, reserve: rand() < 0.5 ? null : 3,
    demandPatienceMin: busy ? 3 : 0.3, supplyPatienceMin: busy ? 5 : 0.5, commit: rand() < 0.5 ? 'all' : 'due', allowedLatenessMs: 0,
    ...(busy ? { maxTravelMin: 0.5, abandonPenalty: 1 } : {}),
  };
  return { config, events: evs.map((event, i) => ({ event, pos: { file: 'tied.jsonl', line: i + 1 }, seq: i })) };
}

export function feed(engine: WindowEngine, events: readonly SourcedEvent[]): void {
  for (const ev of events) {
    engine.advanceTo(ev.event.t);
    expect(engine.ingest(ev)).toBeNull();
  }
}

export function uninterrupted(config: PairflowConfig, events: readonly SourcedEvent[], opts: EngineOptions = {}): Tape {
  const tape = new Tape();
  const engine = new WindowEngine(config, tape, { verify: true, now: () => 0, ...opts });
  feed(engine, events);
  engine.finish();
  return tape;
}
