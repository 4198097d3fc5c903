/**
 * Unit occurrences (SPEC §1): the log alone decides them, whatever any policy did.
 * The online engine and the hindsight benchmark both build them with the same
 * {@link OccurrenceLedger}, so they can never disagree on what a unit is. Pure.
 *
 * "Still available at w" means `w ≤ end`. SPEC §1 calls `until` the *last instant*
 * the unit is available, and `end = min(until, time it was ended)` has the same
 * meaning, so availability includes the instant `end` itself. This is also the pool
 * rule of SPEC §3 (`t < τ ≤ end`) and the hindsight rule of SPEC §4
 * (`max(s.t, d.t) ≤ min(end_s, end_d)`). Consequences:
 * - a withdraw at exactly `until` applies (it changes nothing but is not counted as
 *   ignored); a withdraw one millisecond after `until` is ignored and counted;
 * - a second withdraw at the same millisecond as the first applies again (a no-op)
 *   and is not counted; one at a later millisecond is counted.
 */
import { type ArrivalEvent, type PairflowConfig, type Side, type SourcedEvent, type UnitPlace, untilOf } from '../model.js';

/** One unit occurrence (SPEC §1). `end` only ever decreases as the ledger learns more. */
export interface Occurrence extends UnitPlace {
  /**
   * Slot in the ledger: dense from 0 in creation order while nothing is released; a
   * released slot is reused by a later occurrence (see {@link OccurrenceLedger.release}).
   */
  readonly index: number;
  readonly side: Side;
  readonly id: string;
  readonly market: string;
  /** Arrival time (ms). */
  readonly t: number;
  /** Last available instant from the arrival: its `until`, or `t + patience`. */
  readonly until: number;
  /** `min(until, time it was ended)`: the last instant it is available. */
  end: number;
  /** The `seq` of the arrival event (stable file order). */
  readonly seq: number;
}

/** What one event did to the ledger. */
export type LedgerOutcome =
  /** A new occurrence; `ended` is an earlier occurrence of the same unit whose `end` this arrival cut short. */
  | { readonly kind: 'arrival'; readonly occurrence: Occurrence; readonly ended: Occurrence | null }
  /** Same side, id and t as an earlier arrival: ignored and counted. */
  | { readonly kind: 'duplicate'; readonly of: Occurrence }
  /** `ended` is the occurrence the withdraw applied to; `changed` whether its `end` moved. */
  | { readonly kind: 'withdraw'; readonly ended: Occurrence; readonly changed: boolean }
  /** No occurrence with `t ≤ w` still available at `w`: ignored and counted. */
  | { readonly kind: 'ignored-withdraw' };

/**
 * Incremental occurrence builder: apply events one at a time. Meant for time order
 * (stable by `seq`); an event applied out of time order (a late event in live mode)
 * is placed in its unit's history by time: it ends the occurrence before it if that
 * one is still available, and is itself ended by the arrival after it. Withdraws
 * already applied are not revisited. Markets and sides are separate namespaces.
 */
export class OccurrenceLedger {
  /**
   * Every occurrence held, by index. A released index holds `undefined` until it is
   * reused; code that releases nothing (the hindsight) sees a dense array.
   */
  readonly occurrences: Occurrence[] = [];
  /** Arrivals ignored as duplicates. */
  duplicates = 0;
  /** Withdraws that found no occurrence still available. */
  ignoredWithdraws = 0;

  private readonly config: PairflowConfig;
  /**
   * Per unit (side, market, id): the index of its occurrence with the largest `t`, by
   * market, then side (demand, supply), then id.
   */
  private readonly tails = new Map<string, [Map<string, number>, Map<string, number>]>();
  /** prev[i] / next[i]: the unit's occurrence before / after occurrence i in time, or -1. */
  private prev: Int32Array = new Int32Array(1024);
  private next: Int32Array = new Int32Array(1024);
  /** Released indices, reused last-released first. */
  private readonly freeIndices: number[] = [];

  constructor(config: PairflowConfig) {
    this.config = config;
  }

  /** Applies one event and says what it did. */
  apply(sourced: SourcedEvent): LedgerOutcome {
    const ev = sourced.event;
    if (ev.type === 'withdraw') return this.withdraw(this.unitsOf(ev.side, ev.market), ev.id, ev.t);
    return this.arrive(ev, sourced.seq);
  }

  /** The unit's occurrences, oldest first (for tests and diagnostics). */
  historyOf(side: Side, market: string, id: string): Occurrence[] {
    const out: Occurrence[] = [];
    let i = this.tails.get(market)?.[side === 'supply' ? 1 : 0].get(id) ?? -1;
    while (i >= 0) {
      out.push(this.occurrences[i]!);
      i = this.prev[i]!;
    }
    return out.reverse();
  }

  /**
   * Re-creates an occurrence from stored state (live mode's pool snapshot) without
   * applying any rule: it is placed in its unit's history by time and ends nothing.
   * An occurrence of the unit with the same `t` is returned as it is.
   */
  adopt(fields: Omit<Occurrence, 'index'>): Occurrence {
    const units = this.unitsOf(fields.side, fields.market);
    let after = -1;
    let before = units.get(fields.id) ?? -1;
    while (before >= 0 && this.occurrences[before]!.t > fields.t) {
      after = before;
      before = this.prev[before]!;
    }
    if (before >= 0 && this.occurrences[before]!.t === fields.t) return this.occurrences[before]!;
    const index = this.nextIndex();
    const occ: Occurrence = {
      index, side: fields.side, id: fields.id, market: fields.market, t: fields.t, until: fields.until, end: fields.end,
      lat: fields.lat, lon: fields.lon, x: fields.x, y: fields.y, has: fields.has, needs: fields.needs, seq: fields.seq,
    };
    this.push(occ, before, after, units);
    return occ;
  }

  /** Occurrences held now (released ones excluded). */
  get size(): number {
    return this.occurrences.length - this.freeIndices.length;
  }

  /**
   * Forgets an occurrence and frees its index for reuse. Its unit's history closes
   * over the gap. The caller (the engine) releases only occurrences already reported
   * and so far in the past that no event it still accepts can concern them.
   */
  release(index: number): void {
    const occ = this.occurrences[index];
    if (occ === undefined) return;
    const p = this.prev[index]!;
    const n = this.next[index]!;
    if (p >= 0) this.next[p] = n;
    if (n >= 0) this.prev[n] = p;
    else {
      const units = this.unitsOf(occ.side, occ.market);
      if (p >= 0) units.set(occ.id, p);
      else units.delete(occ.id);
    }
    (this.occurrences as (Occurrence | undefined)[])[index] = undefined;
    this.freeIndices.push(index);
  }

  private nextIndex(): number {
    return this.freeIndices.length > 0 ? this.freeIndices.pop()! : this.occurrences.length;
  }

  private push(occ: Occurrence, before: number, after: number, units: Map<string, number>): void {
    const index = occ.index;
    if (index === this.occurrences.length) this.occurrences.push(occ);
    else this.occurrences[index] = occ;
    if (index >= this.prev.length) {
      const size = Math.max(index + 1, this.prev.length * 2);
      const grownPrev = new Int32Array(size);
      grownPrev.set(this.prev);
      this.prev = grownPrev;
      const grownNext = new Int32Array(size);
      grownNext.set(this.next);
      this.next = grownNext;
    }
    this.prev[index] = before;
    this.next[index] = after;
    if (before >= 0) this.next[before] = index;
    if (after >= 0) this.prev[after] = index;
    else units.set(occ.id, index);
  }

  private unitsOf(side: Side, market: string): Map<string, number> {
    let sides = this.tails.get(market);
    if (sides === undefined) {
      sides = [new Map(), new Map()];
      this.tails.set(market, sides);
    }
    return sides[side === 'supply' ? 1 : 0];
  }

  private arrive(ev: ArrivalEvent, seq: number): LedgerOutcome {
    const units = this.unitsOf(ev.type, ev.market);
    const tail = units.get(ev.id) ?? -1;
    // Walk back from the newest occurrence to the last one with t ≤ ev.t; in time order
    // this stops at once.
    let after = -1;
    let before = tail;
    while (before >= 0 && this.occurrences[before]!.t > ev.t) {
      after = before;
      before = this.prev[before]!;
    }
    // The history holds at most one occurrence per t (duplicates are never inserted),
    // so an earlier arrival at the same t can only be `before`.
    if (before >= 0 && this.occurrences[before]!.t === ev.t) {
      this.duplicates++;
      return { kind: 'duplicate', of: this.occurrences[before]! };
    }
    const index = this.nextIndex();
    const until = untilOf(ev, this.config);
    let end = until;
    if (after >= 0) {
      // A late arrival: the next arrival of the unit ends it, if it is still available then.
      const nextT = this.occurrences[after]!.t;
      if (nextT <= end) end = nextT;
    }
    // One object shape for every occurrence (absent fields are undefined): hot loops
    // over occurrences then stay monomorphic.
    const occ: Occurrence = {
      index, side: ev.type, id: ev.id, market: ev.market, t: ev.t, until, end,
      lat: ev.lat, lon: ev.lon, x: ev.x, y: ev.y, has: ev.has, needs: ev.needs, seq,
    };
    this.push(occ, before, after, units);

    let ended: Occurrence | null = null;
    if (before >= 0) {
      const p = this.occurrences[before]!;
      if (ev.t < p.end) {
        p.end = ev.t;
        ended = p;
      }
    }
    return { kind: 'arrival', occurrence: occ, ended };
  }

  private withdraw(units: Map<string, number>, id: string, w: number): LedgerOutcome {
    let i = units.get(id) ?? -1;
    while (i >= 0 && this.occurrences[i]!.t > w) i = this.prev[i]!;
    if (i < 0 || w > this.occurrences[i]!.end) {
      this.ignoredWithdraws++;
      return { kind: 'ignored-withdraw' };
    }
    const occ = this.occurrences[i]!;
    const changed = w < occ.end;
    if (changed) occ.end = w;
    return { kind: 'withdraw', ended: occ, changed };
  }
}

/**
 * All occurrences of a log whose events are sorted by `t` (stable by `seq`), with the
 * counts of ignored duplicates and withdraws. Built on {@link OccurrenceLedger}, so the
 * batch and the incremental views agree.
 * @example const { occurrences } = buildOccurrences(events, DEFAULT_CONFIG)
 */
export function buildOccurrences(
  sortedEvents: readonly SourcedEvent[],
  config: PairflowConfig,
): { occurrences: Occurrence[]; duplicates: number; ignoredWithdraws: number } {
  const ledger = new OccurrenceLedger(config);
  for (let i = 0; i < sortedEvents.length; i++) ledger.apply(sortedEvents[i]!);
  return { occurrences: ledger.occurrences, duplicates: ledger.duplicates, ignoredWithdraws: ledger.ignoredWithdraws };
}
