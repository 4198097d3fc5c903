/**
 * The event model and configuration of ../shared/SPEC.md §1–2, shared by every layer.
 * Pure: no I/O.
 */

export type Side = 'supply' | 'demand';

/** Where a unit is and what it has or needs: the fields every pair test reads. */
export interface UnitPlace {
  /** Location: lat/lon in degrees (haversine) or x/y in km (euclidean). */
  readonly lat?: number;
  readonly lon?: number;
  readonly x?: number;
  readonly y?: number;
  /** Supply capabilities. */
  readonly has?: readonly string[];
  /** Demand requirements: allowed only if `needs ⊆ has`. */
  readonly needs?: readonly string[];
}

/** A validated arrival (SPEC §1). Times are integer ms since the Unix epoch. */
export interface ArrivalEvent extends UnitPlace {
  readonly type: Side;
  readonly id: string;
  readonly market: string;
  readonly t: number;
  /** Last instant the unit is available; null means `t + patience` of its side. */
  readonly until: number | null;
}

/** A validated withdraw: ends the id's latest occurrence with `t ≤` this event's `t`. */
export interface WithdrawEvent {
  readonly type: 'withdraw';
  readonly id: string;
  readonly market: string;
  readonly t: number;
  readonly side: Side;
}

export type PairflowEvent = ArrivalEvent | WithdrawEvent;

/** Where an event or a reject came from: file and 1-based line, or Avro block/record. */
export interface SourcePosition {
  /** The file; for a Kafka record, its topic. */
  readonly file: string;
  /** 1-based line for JSON Lines; for Avro the 1-based record number in the file; for Kafka the record's offset. */
  readonly line: number;
  /** Avro only: 0-based block index and record index within the block. */
  readonly block?: number;
  readonly record?: number;
  /** Kafka only: the record's partition and offset. */
  readonly partition?: number;
  readonly offset?: number;
}

/** An event with its place in the input; `seq` gives the stable file order. */
export interface SourcedEvent {
  readonly event: PairflowEvent;
  readonly pos: SourcePosition;
  readonly seq: number;
}

/** A rejected line or record (SPEC §1): written to the rejects output, counted. */
export interface Reject {
  readonly pos: SourcePosition;
  readonly reason: string;
  /** The raw text of the line (JSONL) or a JSON rendering of the record (Avro), cut to 2 kB. */
  readonly raw: string;
}

export type Metric = 'haversine' | 'euclidean';
export type CommitMode = 'all' | 'due';

/** The cost-model and policy configuration of SPEC §2 (every field optional in the file). */
export interface PairflowConfig {
  /** @default 'haversine' */
  readonly metric: Metric;
  /** @default 25 */
  readonly speedKmh: number;
  /** @default 15 */
  readonly maxTravelMin: number;
  /** @default 1.0 */
  readonly waitWeight: number;
  /** P, the cost of a demand occurrence never matched. @default 30 */
  readonly abandonPenalty: number;
  /** R, the cost of deferring a demand that is not at its last chance; null means P. @default null */
  readonly reserve: number | null;
  /** @default 10 */
  readonly demandPatienceMin: number;
  /** @default 30 */
  readonly supplyPatienceMin: number;
  /** W. @default 5000 */
  readonly windowMs: number;
  /** @default 2000 */
  readonly allowedLatenessMs: number;
  /** @default 5000 */
  readonly idleMs: number;
  /** @default 'all' */
  readonly commit: CommitMode;
}

export const DEFAULT_CONFIG: PairflowConfig = Object.freeze({
  metric: 'haversine',
  speedKmh: 25,
  maxTravelMin: 15,
  waitWeight: 1.0,
  abandonPenalty: 30,
  reserve: null,
  demandPatienceMin: 10,
  supplyPatienceMin: 30,
  windowMs: 5000,
  allowedLatenessMs: 2000,
  idleMs: 5000,
  commit: 'all',
});

/** R as used by the policy: the configured reserve, or P when it is null. */
export function reserveOf(config: PairflowConfig): number {
  return config.reserve ?? config.abandonPenalty;
}

/** The last instant of availability of an arrival: `until`, or `t + patience` of its side. */
export function untilOf(ev: ArrivalEvent, config: PairflowConfig): number {
  if (ev.until !== null) return ev.until;
  const patienceMin = ev.type === 'demand' ? config.demandPatienceMin : config.supplyPatienceMin;
  return ev.t + Math.round(patienceMin * 60_000);
}
