/**
 * The replay summary (SPEC §6) and its human rendering. The JSON keys SPEC §6 names
 * are always present; everything measured in wall time sits under `timings`, so two
 * runs of the same log compare equal once `timings` is removed.
 */
import { describeInput } from '../consume/index.js';
import { pairflowError } from '../errors.js';

/** The online policy's outcome (SPEC §6 `online`). */
export interface OnlineStats {
  /** Σ executed pair costs + P · abandoned. */
  cost: number;
  /** Executed pairs. */
  matched: number;
  /** Demand occurrences never matched. */
  abandoned: number;
  /** Mean of (decidedAt − demandT) in minutes over matched pairs; null when nothing was matched. */
  meanWaitMin: number | null;
  /** 95th percentile of the same waits, linear between order statistics; null when nothing was matched. */
  p95WaitMin: number | null;
}

/** The hindsight optimum as the summary reports it (SPEC §4). */
export interface HindsightStats {
  cost: number;
  matched: number;
  abandoned: number;
  /** Largest number of pairs any policy could match (max-cardinality matching of the allowed graph). */
  ceiling: number;
  /** Allowed pairs priced by the dual pass, pairs in the final solve, and pricing rounds. */
  pairsPriced: number;
  pairsSolved: number;
  pricingRounds: number;
}

/** Solve times of the epochs that had something to solve, split by warm or cold start. */
export interface EpochSolveTimes {
  count: number;
  totalMs: number;
  meanMs: number | null;
  p95Ms: number | null;
}

export interface MarketSummary {
  market: string;
  online: { cost: number; matched: number; abandoned: number };
  hindsight: { cost: number; matched: number; abandoned: number } | null;
}

/** What reading counted: per file in `files`, summed over the files in `books`. */
export interface ReadCounts {
  /** Lines (JSON Lines, blank ones included) or records (Avro, lost ones included when counted). */
  lines: number;
  blankLines: number;
  events: number;
  /** Lines or records rejected one by one. */
  rejectedLines: number;
  /** Avro records inside damaged blocks. */
  lostRecords: number;
  /** Rejects that stand for damage, not for one line (a gzip stream's end, an Avro block or header). */
  damage: number;
}

/** How much of one input file was read (`files` in the summary). */
export interface FileSummary extends ReadCounts {
  /** The file's name (its directory left out, so runs compare equal wherever the log lies). */
  file: string;
  bytes: number;
  /** Read to the end without damage. */
  complete: boolean;
}

/**
 * The books of a run (docs/principles.md rule 4, "nothing is lost"): every input line
 * or record and every event accounted for, from the summary alone. They close when
 * {@link booksErrors} finds nothing:
 * - `lines = blankLines + events + rejectedLines + lostRecords` (what was read)
 * - `rejects = rejectedLines + damage` (what the rejects output holds)
 * - `events = arrivals + withdraws`
 * - `arrivals = demandOccurrences + supplyOccurrences + duplicates`
 * - `withdraws = appliedWithdraws + ignoredWithdraws`
 * - `demandOccurrences = matched + demandExpired`, `supplyOccurrences = matched + supplyExpired`
 */
export interface Books extends ReadCounts {
  rejects: number;
  /** Supply and demand events read, and withdraws. */
  arrivals: number;
  withdraws: number;
  /** Arrivals repeating a side, id and t: ignored (SPEC §1). */
  duplicates: number;
  demandOccurrences: number;
  supplyOccurrences: number;
  /** Withdraws that ended an occurrence (withdraws − ignoredWithdraws), and those that found none. */
  appliedWithdraws: number;
  ignoredWithdraws: number;
  /** Executed pairs: one demand and one supply occurrence each. */
  matched: number;
  /** Occurrences that left unmatched (expired.jsonl), per side. */
  demandExpired: number;
  supplyExpired: number;
}

/** The identities of {@link Books} that do not hold, as sentences; empty when the books close. */
export function booksErrors(b: Books): string[] {
  const out: string[] = [];
  const check = (name: string, left: number, right: number): void => {
    if (left !== right) out.push(`${name}: ${left} ≠ ${right}`);
  };
  check('lines = blankLines + events + rejectedLines + lostRecords', b.lines, b.blankLines + b.events + b.rejectedLines + b.lostRecords);
  check('rejects = rejectedLines + damage', b.rejects, b.rejectedLines + b.damage);
  check('events = arrivals + withdraws', b.events, b.arrivals + b.withdraws);
  check('arrivals = demandOccurrences + supplyOccurrences + duplicates', b.arrivals, b.demandOccurrences + b.supplyOccurrences + b.duplicates);
  check('withdraws = appliedWithdraws + ignoredWithdraws', b.withdraws, b.appliedWithdraws + b.ignoredWithdraws);
  check('demandOccurrences = matched + demandExpired', b.demandOccurrences, b.matched + b.demandExpired);
  check('supplyOccurrences = matched + supplyExpired', b.supplyOccurrences, b.matched + b.supplyExpired);
  return out;
}

/** `pairflow replay --json` (SPEC §6 plus extras). */
export interface ReplaySummary {
  windowMs: number;
  /** Occurrences (SPEC §1), not lines. */
  demandUnits: number;
  supplyUnits: number;
  online: OnlineStats;
  /** null only when the hindsight optimum was switched off (`--no-hindsight`). */
  hindsight: HindsightStats | null;
  /** online − hindsight; null without hindsight. */
  regret: number | null;
  /** online / hindsight; 1 when both are 0, null when only hindsight is 0 or without hindsight. */
  ratio: number | null;
  /** Rejected lines or records. */
  rejects: number;
  duplicates: number;
  ignoredWithdraws: number;
  late: number;
  commit: 'all' | 'due';
  warm: boolean;
  /** Epochs in which a market had something to solve. */
  epochs: { solved: number; warm: number; cold: number };
  markets: MarketSummary[];
  inputs: string[];
  /** Per input file, in the order given: how much of it was read. */
  files: FileSummary[];
  /** Every line and event accounted for; see {@link Books}. */
  books: Books;
  timings: {
    loadMs: number;
    onlineMs: number;
    hindsightMs: number | null;
    totalMs: number;
    /**
     * CPU time of the whole process over the run, user and system, every thread
     * (the online replay, the hindsight's workers, V8's own): with `totalMs`, how many
     * cores the run kept busy. Not reproducible, like every timing.
     */
    cpuMs: number;
    epochSolve: { warm: EpochSolveTimes; cold: EpochSolveTimes };
  };
}

/**
 * The p-quantile of `values` by linear interpolation between order statistics:
 * with the values sorted as x[0..n−1] and h = (n − 1)·p, it is
 * x[⌊h⌋] + (h − ⌊h⌋)·(x[⌊h⌋+1] − x[⌊h⌋]) — the default ("linear") method of
 * numpy.quantile / percentile, type 7 in Hyndman & Fan (1996). Null for no values.
 * Sorts `values` in place.
 * @example quantileLinear(Float64Array.of(1, 2, 3, 4), 0.95) // 3.85
 */
export function quantileLinear(values: Float64Array, p: number): number | null {
  const n = values.length;
  if (n === 0) return null;
  values.sort();
  const h = (n - 1) * p;
  const lo = Math.floor(h);
  const hi = Math.min(lo + 1, n - 1);
  return values[lo]! + (h - lo) * (values[hi]! - values[lo]!);
}

/**
 * regret and ratio of SPEC §4 from the two costs. The hindsight optimum is a lower
 * bound on every online policy's cost, so a negative regret is never a result: within
 * rounding (a relative 1e-9, as the certificates of SPEC §5) it is reported as 0 and
 * the ratio as 1; beyond that it is a bug, raised as `PAIRFLOW_ERR_INTERNAL_BUG`
 * rather than printed.
 */
export function regretAndRatio(online: number, hindsight: number | null): { regret: number | null; ratio: number | null } {
  if (hindsight === null) return { regret: null, ratio: null };
  const regret = online - hindsight;
  if (regret < 0) {
    const tolerance = 1e-9 * Math.max(1, Math.abs(online), Math.abs(hindsight));
    if (!(regret >= -tolerance)) {
      throw pairflowError('PAIRFLOW_ERR_INTERNAL_BUG', {
        detail: `the hindsight optimum (${hindsight}) exceeds the online cost (${online}), but it is a lower bound on every policy (SPEC §4)`,
      });
    }
    return { regret: 0, ratio: 1 };
  }
  let ratio: number | null;
  if (hindsight !== 0) ratio = online / hindsight;
  else ratio = online === 0 ? 1 : null;
  return { regret, ratio };
}

const fmtNum = (v: number | null | undefined, digits = 2): string =>
  v === null || v === undefined ? '–' : v.toLocaleString('en-US', { minimumFractionDigits: digits, maximumFractionDigits: digits });
const fmtInt = (v: number | null | undefined): string => (v === null || v === undefined ? '–' : v.toLocaleString('en-US'));
const fmtMs = (ms: number | null | undefined): string =>
  ms === null || ms === undefined ? '–' : ms >= 1000 ? `${(ms / 1000).toFixed(2)} s` : ms >= 1 ? `${ms.toFixed(1)} ms` : `${ms.toFixed(3)} ms`;

/** Renders rows of cells as a left/right aligned text table (first column left, the rest right). */
export function textTable(rows: readonly (readonly string[])[]): string {
  const widths: number[] = [];
  for (const row of rows) row.forEach((cell, i) => { widths[i] = Math.max(widths[i] ?? 0, cell.length); });
  return rows
    .map((row) => row.map((cell, i) => (i === 0 ? cell.padEnd(widths[i]!) : cell.padStart(widths[i]!))).join('   ').trimEnd())
    .join('\n');
}

/** Describes a window length the way a user types it (5s, 1.5m, 250ms). */
export function formatWindow(ms: number): string {
  if (ms % 3_600_000 === 0) return `${ms / 3_600_000}h`;
  if (ms % 60_000 === 0 || (ms >= 60_000 && (ms / 60_000) * 10 === Math.round((ms / 60_000) * 10))) return `${ms / 60_000}m`;
  if (ms % 1000 === 0 || (ms >= 1000 && (ms / 1000) * 10 === Math.round((ms / 1000) * 10))) return `${ms / 1000}s`;
  return `${ms}ms`;
}

/** The human summary `pairflow replay` prints without `--json`. */
export function formatReplaySummary(s: ReplaySummary): string {
  const h = s.hindsight;
  const lines: string[] = [];
  // "warm start" only where a solve had prices to start from: with commit "all" every
  // carried-over unit is unmatched and priced 0, so each solve starts cold anyway.
  const start = !s.warm ? 'cold start (--no-warm)' : s.epochs.warm > 0 ? 'warm start' : 'warm start on, no solve had prices to carry over';
  lines.push(
    `pairflow replay: ${s.inputs.length === 1 ? s.inputs[0] : `${s.inputs.length} files`}, window ${formatWindow(s.windowMs)}, ` +
      `commit ${s.commit}, ${start}`,
  );
  lines.push('');
  lines.push(textTable([
    ['', 'online', 'hindsight'],
    ['cost', fmtNum(s.online.cost), fmtNum(h?.cost)],
    ['matched', fmtInt(s.online.matched), fmtInt(h?.matched)],
    ['abandoned', fmtInt(s.online.abandoned), fmtInt(h?.abandoned)],
    ['mean wait (min)', fmtNum(s.online.meanWaitMin), '–'],
    ['p95 wait (min)', fmtNum(s.online.p95WaitMin), '–'],
  ]));
  lines.push('');
  const ratio = s.ratio === null ? '–' : s.ratio.toFixed(4);
  const facts: [string, string][] = [
    ['regret', h ? `${fmtNum(s.regret)}  (online − hindsight)` : '–  (hindsight not computed)'],
    ['ratio', h ? `${ratio}  (online / hindsight)` : '–'],
    ['units', `demand ${fmtInt(s.demandUnits)}, supply ${fmtInt(s.supplyUnits)} occurrences`],
    ['ignored', `duplicates ${fmtInt(s.duplicates)}, withdraws finding no unit ${fmtInt(s.ignoredWithdraws)}`],
    ['rejects', `${fmtInt(s.rejects)}${s.rejects > 0 ? '  (rejected lines/records; --out DIR writes rejects.jsonl)' : ''}`],
  ];
  for (const f of s.files) facts.push(['read', describeInput(f)]);
  if (h) facts.push(['match ceiling', `${fmtInt(h.ceiling)}  (most pairs any policy could match)`]);
  const keyWidth = Math.max(...facts.map((f) => f[0].length));
  for (const [k, v] of facts) lines.push(`${k.padEnd(keyWidth)}   ${v}`);
  if (s.markets.length > 1) {
    lines.push('');
    lines.push(textTable([
      ['market', 'online cost', 'hindsight cost', 'matched', 'abandoned'],
      ...s.markets.map((m) => [m.market, fmtNum(m.online.cost), fmtNum(m.hindsight?.cost), fmtInt(m.online.matched), fmtInt(m.online.abandoned)]),
    ]));
  }
  lines.push('');
  const t = s.timings;
  const es = (e: EpochSolveTimes): string => (e.count === 0 ? 'none' : `${fmtInt(e.count)} × ${fmtMs(e.meanMs)} mean, p95 ${fmtMs(e.p95Ms)}`);
  lines.push(`timings: load ${fmtMs(t.loadMs)}, online ${fmtMs(t.onlineMs)}, hindsight ${fmtMs(t.hindsightMs)}, total ${fmtMs(t.totalMs)} (CPU ${fmtMs(t.cpuMs)}, all threads)`);
  lines.push(`epoch solves: warm ${es(t.epochSolve.warm)}; cold ${es(t.epochSolve.cold)}`);
  return lines.join('\n') + '\n';
}
