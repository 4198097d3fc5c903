/**
 * The window engine's own sequence of epoch solves under SPEC §3 `commit: "due"`, on
 * the generated city (one market): each instance recorded with the warm hints the
 * engine passed to it (the previous epoch's tentative pairs and prices). The benchmark
 * then times cold and warm solves of exactly these instances.
 */
import type { SolveOptions, SolveResult, SparseInstance, WarmStart } from '../../src/matching/index.js';
import { solveSparse } from '../../src/matching/index.js';
import { DEFAULT_CONFIG, type PairflowConfig, type SourcedEvent } from '../../src/model.js';
import { generateEvents } from '../../src/gen/gen.js';
import { WindowEngine, type EngineSink } from '../../src/window/engine.js';

export interface RecordedSolve {
  readonly instance: SparseInstance;
  readonly warm: WarmStart;
}

export interface EngineSequenceOptions {
  readonly seed: number;
  /** Demand multiplier of the generated city (see `pairflow gen --scale`). */
  readonly scale: number;
  readonly windowMs: number;
  /** Record the solves whose epoch falls in [fromHour, fromHour + hours) of the day. */
  readonly fromHour: number;
  readonly hours: number;
}

export interface EngineSequence {
  readonly solves: RecordedSolve[];
  /** Epoch solves the engine ran in that span (the recorded ones carry at least one tentative pair). */
  readonly epochs: number;
}

const HOUR_MS = 3_600_000;

function copyInstance(inst: SparseInstance): SparseInstance {
  return {
    nRows: inst.nRows,
    nCols: inst.nCols,
    rowPtr: inst.rowPtr.slice(),
    colIdx: inst.colIdx.slice(),
    cost: inst.cost.slice(),
    unmatchedCost: inst.unmatchedCost ? inst.unmatchedCost.slice() : null,
  };
}

export function engineDueSequence(o: EngineSequenceOptions): EngineSequence {
  const config: PairflowConfig = { ...DEFAULT_CONFIG, commit: 'due', windowMs: o.windowMs };
  const events: SourcedEvent[] = [...generateEvents({ days: 1, seed: o.seed, markets: 1, scale: o.scale })]
    .map((event, seq) => ({ event, pos: { file: 'gen', line: seq + 1 }, seq }))
    .sort((a, b) => a.event.t - b.event.t || a.seq - b.seq);
  const dayStart = Math.floor(events[0]!.event.t / (24 * HOUR_MS)) * 24 * HOUR_MS;
  const from = dayStart + o.fromHour * HOUR_MS;
  const to = from + o.hours * HOUR_MS;
  const solves: RecordedSolve[] = [];
  let epochs = 0;
  let clock = 0; // event time of the solve in progress, from the engine's advance
  const solve = (inst: SparseInstance, opts: SolveOptions): SolveResult => {
    const res = solveSparse(inst, opts);
    if (clock < from || clock >= to) return res;
    epochs++;
    const w = opts.warm;
    if (w?.rowToCol !== undefined && w.rowToCol.some((j) => j >= 0)) {
      solves.push({
        instance: copyInstance(inst),
        warm: {
          ...(w.colPrices !== undefined ? { colPrices: w.colPrices.slice() } : {}),
          ...(w.rowPrices !== undefined ? { rowPrices: w.rowPrices.slice() } : {}),
          rowToCol: w.rowToCol.slice(),
        },
      });
    }
    return res;
  };
  const sink: EngineSink = { assignment: () => {}, expiry: () => {}, epoch: () => {} };
  const engine = new WindowEngine(config, sink, { warm: true, solve });
  for (const ev of events) {
    if (ev.event.t >= to + config.windowMs) break;
    clock = ev.event.t;
    engine.advanceTo(ev.event.t);
    engine.ingest(ev);
  }
  return { solves, epochs };
}
