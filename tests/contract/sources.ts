/**
 * One contract for every event source (file, Kafka topic): given the same log, a
 * source delivers every valid event exactly once, each market's events in log order,
 * a reject naming where it came from for every bad line — and the pipeline fed from it
 * makes, market by market, the decisions of a replay of the log. Each source's test
 * file calls {@link sourceContract} with a factory, so the sources cannot drift apart.
 */
import { expect, it } from 'vitest';
import { toJsonLine } from '../../src/consume/schema.js';
import { DEFAULT_CONFIG, type PairflowConfig, type PairflowEvent, type Reject, type SourcedEvent } from '../../src/model.js';
import { drivePartitioned, fileSource, Pipeline, type RecordSink } from '../../src/pipeline/drive.js';
import type { AssignmentRecord, EpochRecord, EventSource, ExpiryRecord } from '../../src/ports.js';
import { mulberry32, randInt } from '../helpers/random.js';

/** A log as lines, with what a correct reader must make of it. */
export interface ContractLog {
  /** JSON Lines text lines, in file order (time order per market). */
  lines: string[];
  /** The valid events, in file order. */
  events: PairflowEvent[];
  /** 1-based line numbers of the bad lines. */
  badLines: number[];
  config: PairflowConfig;
}

const MARKETS = ['harbour', 'old-town', 'airport', 'north'];

/** A seeded log of four markets in time order, with bad lines sprinkled in. */
export function contractLog(seed: number, n = 600): ContractLog {
  const rand = mulberry32(seed);
  const lines: string[] = [];
  const events: PairflowEvent[] = [];
  const badLines: number[] = [];
  let t = 1_790_000_000_000;
  for (let i = 0; i < n; i++) {
    t += randInt(rand, 0, 4000);
    const market = MARKETS[randInt(rand, 0, MARKETS.length - 1)]!;
    const r = rand();
    if (r < 0.04) {
      lines.push(r < 0.02 ? '{"type":"demand","id":' : JSON.stringify({ type: 'demand', id: `x${i}`, market, t, x: 'far', y: 1 }));
      badLines.push(lines.length);
      continue;
    }
    const side = rand() < 0.5 ? 'demand' : 'supply';
    const ev: PairflowEvent = r < 0.1
      ? { type: 'withdraw', side, id: `${side[0]}${randInt(rand, 0, i)}`, market, t }
      : { type: side, id: `${side[0]}${i}`, market, t, until: null, x: rand() * 6, y: rand() * 6 };
    lines.push(toJsonLine(ev));
    events.push(ev);
  }
  const config: PairflowConfig = { ...DEFAULT_CONFIG, metric: 'euclidean', windowMs: 5000, speedKmh: 20, maxTravelMin: 12, commit: seed % 2 === 0 ? 'all' : 'due' };
  return { lines, events, badLines, config };
}

/** Every record of a run, per market, in emission order (wall-clock fields left out). */
class Tape implements RecordSink {
  readonly byMarket = new Map<string, string[]>();
  readonly rejects: Reject[] = [];
  private add(m: string, s: string): void {
    let l = this.byMarket.get(m);
    if (!l) this.byMarket.set(m, (l = []));
    l.push(s);
  }
  assignment(a: AssignmentRecord): void { this.add(a.market, `A ${a.epoch} ${a.demandId}@${a.demandT} ${a.supplyId}@${a.supplyT} ${a.cost}`); }
  expiry(e: ExpiryRecord): void { this.add(e.market, `E ${e.epoch} ${e.side} ${e.id}@${e.t} ${e.cost}`); }
  epoch(s: EpochRecord): void { this.add(s.market, `S ${s.epoch} ${s.poolDemand}x${s.poolSupply} ${s.matched} ${s.primalCost}`); }
  reject(r: Reject): void { this.rejects.push(r); }
}

async function collectItems(source: EventSource): Promise<{ events: SourcedEvent[]; rejects: Reject[] }> {
  const events: SourcedEvent[] = [];
  const rejects: Reject[] = [];
  for await (const item of source.items()) {
    if (item.kind === 'event') events.push(item.ev);
    else rejects.push(item.reject);
  }
  await source.close();
  return { events, rejects };
}

/** The source through one pipeline per partition (a file is one partition), as live mode runs it. */
async function tapeOf(source: EventSource, config: PairflowConfig): Promise<Map<string, string[]>> {
  const tape = new Tape();
  await drivePartitioned(source, () => new Pipeline(config, tape, { now: () => 0 }), null);
  return tape.byMarket;
}

/**
 * Registers the contract's tests for one source.
 * @param makeSource builds the source under test over a log (e.g. writes it to a file, or publishes it)
 */
export function sourceContract(name: string, makeSource: (log: ContractLog) => Promise<EventSource>, seeds: readonly number[] = [11, 12]): void {
  for (const seed of seeds) {
    it(`${name}: every valid event once, each market in log order, a reject per bad line (seed ${seed})`, async () => {
      const log = contractLog(seed);
      const { events, rejects } = await collectItems(await makeSource(log));
      expect(events.map((e) => toJsonLine(e.event)).sort()).toEqual(log.events.map(toJsonLine).sort());
      for (const market of MARKETS) {
        expect(events.filter((e) => e.event.market === market).map((e) => toJsonLine(e.event)), market)
          .toEqual(log.events.filter((e) => e.market === market).map(toJsonLine));
      }
      expect(rejects).toHaveLength(log.badLines.length);
      for (const r of rejects) {
        expect(r.pos.file).not.toBe('');
        expect(r.reason).not.toBe('');
        expect(r.raw.length).toBeGreaterThan(0);
      }
    });

    it(`${name}: the pipeline fed from it decides as a replay of the log does, market by market (seed ${seed})`, async () => {
      const log = contractLog(seed);
      const reference = await tapeOf(fileSource({
        events: log.events.map((event, i) => ({ event, pos: { file: 'ref', line: i + 1 }, seq: i })),
        rejects: [],
      }), log.config);
      const got = await tapeOf(await makeSource(log), log.config);
      expect([...got.keys()].sort()).toEqual([...reference.keys()].sort());
      for (const [market, lines] of reference) expect(got.get(market), market).toEqual(lines);
      expect([...reference.values()].flat().some((l) => l.startsWith('A '))).toBe(true);
    });
  }
}
