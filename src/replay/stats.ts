/**
 * The statistics sink of replay and sweep: online cost, waits, per-market figures,
 * epoch solve times and per-bucket costs, derived from the records alone.
 */
import type { Reject } from '../model.js';
import type { AssignmentRecord, EpochRecord, ExpiryRecord } from '../ports.js';
import type { RecordSink } from '../pipeline/drive.js';
import type { EngineTotals } from '../window/engine.js';
import { bucketOf, type BucketPlan } from './buckets.js';
import { quantileLinear, type EpochSolveTimes, type OnlineStats } from './summary.js';

/** The outcome of one online replay over loaded events: plain data (it crosses worker threads). */
export interface OnlineRun {
  windowMs: number;
  totals: EngineTotals;
  online: OnlineStats;
  markets: { market: string; cost: number; matched: number; abandoned: number }[];
  epochs: { solved: number; warm: number; cold: number };
  epochSolve: { warm: EpochSolveTimes; cold: EpochSolveTimes };
  /** Per-bucket online cost (executed pair costs by the demand's t, plus P per abandoned demand by its t). */
  buckets: Float64Array | null;
  /** Sum of the records' costs; equals totals.cost when the engine's records and totals agree. */
  recordedCost: number;
  ms: number;
}

/** Growable Float64Array: waits of 300k assignments without 300k boxed numbers. */
export class FloatList {
  data = new Float64Array(1024);
  length = 0;
  push(v: number): void {
    if (this.length === this.data.length) {
      const next = new Float64Array(this.data.length * 2);
      next.set(this.data);
      this.data = next;
    }
    this.data[this.length++] = v;
  }
  view(): Float64Array {
    return this.data.subarray(0, this.length);
  }
}

function solveTimes(list: FloatList): EpochSolveTimes {
  const v = list.view();
  let total = 0;
  for (let i = 0; i < v.length; i++) total += v[i]!;
  return {
    count: v.length,
    totalMs: total,
    meanMs: v.length > 0 ? total / v.length : null,
    p95Ms: quantileLinear(v.slice(), 0.95),
  };
}

/**
 * The replay statistics, gathered by a sink like any other: the summary figures are
 * derived from the records as they stream past, never from inside the driver.
 */
export class ReplayStats implements RecordSink {
  readonly waits = new FloatList();
  readonly warmMs = new FloatList();
  readonly coldMs = new FloatList();
  readonly markets = new Map<string, { cost: number; matched: number; abandoned: number }>();
  readonly buckets: Float64Array | null;
  solved = 0;
  cost = 0;
  /** Rejects that reached the pipeline (file rejects and events refused by the engine). */
  rejects = 0;

  constructor(private readonly plan: BucketPlan | undefined) {
    this.buckets = plan ? new Float64Array(plan.count) : null;
  }

  private market(name: string): { cost: number; matched: number; abandoned: number } {
    let m = this.markets.get(name);
    if (!m) {
      m = { cost: 0, matched: 0, abandoned: 0 };
      this.markets.set(name, m);
    }
    return m;
  }

  assignment(a: AssignmentRecord): void {
    this.waits.push((a.decidedAt - a.demandT) / 60_000);
    const m = this.market(a.market);
    m.cost += a.cost;
    m.matched += 1;
    this.cost += a.cost;
    if (this.buckets) this.buckets[bucketOf(this.plan!, a.demandT)]! += a.cost;
  }

  expiry(e: ExpiryRecord): void {
    if (e.side !== 'demand') return;
    const m = this.market(e.market);
    m.cost += e.cost;
    m.abandoned += 1;
    this.cost += e.cost;
    if (this.buckets) this.buckets[bucketOf(this.plan!, e.t)]! += e.cost;
  }

  reject(_r: Reject): void {
    this.rejects += 1;
  }

  epoch(s: EpochRecord): void {
    if (s.poolDemand === 0 || s.poolSupply === 0) return;
    this.solved += 1;
    (s.warm ? this.warmMs : this.coldMs).push(s.solveMs);
  }

  /** The run's figures once the source is drained. */
  result(windowMs: number, totals: EngineTotals, ms: number): OnlineRun {
    const waits = this.waits.view();
    let waitSum = 0;
    for (let i = 0; i < waits.length; i++) waitSum += waits[i]!;
    const online: OnlineStats = {
      cost: totals.cost,
      matched: totals.matched,
      abandoned: totals.abandoned,
      meanWaitMin: waits.length > 0 ? waitSum / waits.length : null,
      p95WaitMin: quantileLinear(waits, 0.95),
    };
    const warmTimes = solveTimes(this.warmMs);
    const coldTimes = solveTimes(this.coldMs);
    return {
      windowMs,
      totals: { ...totals },
      online,
      markets: [...this.markets.entries()]
        .sort((a, b) => (a[0] < b[0] ? -1 : a[0] > b[0] ? 1 : 0))
        .map(([market, m]) => ({ market, ...m })),
      epochs: { solved: this.solved, warm: warmTimes.count, cold: coldTimes.count },
      epochSolve: { warm: warmTimes, cold: coldTimes },
      buckets: this.buckets,
      recordedCost: this.cost,
      ms,
    };
  }
}
