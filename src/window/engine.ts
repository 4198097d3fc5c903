/**
 * The windowed online policy of SPEC §3. Pure: time is an input (event time, and an
 * injected clock used only to measure solve time).
 */
import type { Side } from '../model.js';

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
}
