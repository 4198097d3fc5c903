/**
 * The exact hindsight optimum of one market (SPEC §4) on packed occurrences. Pure:
 * typed arrays in and out, the solver and the clock injected, so the same code runs
 * in this thread and in a worker.
 *
 * A market is cut into time segments where no unit spans a gap (segments.ts: no
 * pair crosses a cut). Each segment's full allowed graph is built once (graph.ts:
 * time sweep + grid), and while it is built the first candidates are picked
 * (candidates.ts). The segment is first solved on its candidates alone, cold; a
 * pricing pass (pricing.ts) then computes the reduced cost `c − u_d − v_s` of EVERY
 * allowed pair under the solver's dual prices. The most negative few of each demand
 * join the candidates (in the first round with the earliest-deadline greedy's pairs,
 * so the restricted graph can match nearly as many rows as the full one) and the
 * restricted assignment is solved again from where it stood
 * (matching/incremental.ts: only the rows the new pairs disturb are searched), until
 * no pair prices out in a pass that reads every row whose prices moved (rounds
 * before may skip rows by a bound, pricing.ts). The final prices and pairs are then
 * checked against the certificate of SPEC §5 on the candidates: feasible for every allowed pair (the last
 * pricing pass) with an objective equal to the primal cost, which proves the optimum
 * exact. Last, the match ceiling (ceiling.ts). In a worker, a large segment's pricing
 * passes read their rows on a second thread while a core is free (pricing-split.ts:
 * the same pairs found, so the same result).
 *
 * Pairs costing at least P are never needed: with `u_d ≤ P` and `v_s ≤ 0` their
 * reduced cost is ≥ 0 under any certified prices, and swapping such a pair for an
 * unmatched demand never costs more. They stay in the graph for the match ceiling.
 */

import { pairflowError } from '../errors.js';
import { checkCertificate } from '../matching/certificate.js';
import { GrowingAssignment } from '../matching/incremental.js';
import type { SolveOptions, SolveResult, SparseInstance } from '../matching/types.js';
import type { PairflowConfig } from '../model.js';
import { dropCandidate, FirstCandidates, markCandidate } from './candidates.js';
import { matchCeiling } from './ceiling.js';
import { buildCompactGraph, columnOf, expandGraph, firstReserve, GraphStore, isMarked, pairCostOf, quickPairCostOf, quickTermsOf, type AllowedGraph, type CompactGraph, type PackedMarket, type PairCost } from './graph.js';
import { columnPicks, kernelPicks, Pricer, pricerTables, rowAdds } from './pricing.js';
import type { PricingSplitter } from './pricing-split.js';
import { mergeProofs, subMarket, timeSegments, type SegmentProof } from './segments.js';

/** A sparse assignment solver with the contract of src/matching/types.ts. */
export type SparseSolver = (inst: SparseInstance, opts?: SolveOptions) => SolveResult;

/** The per-market figures of the hindsight optimum. */
export interface HindsightMarketResult {
  market: string;
  /** Demand occurrences. */
  demandUnits: number;
  /** Supply occurrences. */
  supplyUnits: number;
  /** Σ matched pair costs + P · abandoned. */
  cost: number;
  matched: number;
  /** Demand occurrences left unmatched. */
  abandoned: number;
  /** Allowed pairs; every pricing round of their time segment prices each of them. */
  pairsPriced: number;
  /** Pairs in the final restricted solve (candidates plus the violators added). */
  pairsSolved: number;
  /** Pricing passes, the last one reading every allowed pair whose prices moved and finding no violator (the most any time segment needed; early passes may read the rows with violators in turns, pricing.ts). */
  pricingRounds: number;
  /** Maximum-cardinality matching of the same allowed graph: no policy matches more. */
  ceiling: number;
  /** Wall time by the injected clock. */
  ms: number;
  /** Where that time went, by the same clock (summed over time segments). */
  phases: HindsightPhases;
  /** With the `cover` option: the units of a minimum vertex cover certifying `ceiling` (König). */
  cover?: HindsightCover;
}

/**
 * A minimum vertex cover of the allowed graph (König's theorem: as many units as the
 * match ceiling, and every allowed pair has one of them), as (t, a, b) triples per
 * unit: arrival time and place (lat/lon or x/y). The covered supply units are the
 * ones the demand that no policy could serve was competing for.
 */
export interface HindsightCover {
  /** (t, a, b) per covered demand occurrence. */
  demand: Float64Array;
  /** (t, a, b) per covered supply occurrence. */
  supply: Float64Array;
}

/** Wall time per phase of a market's hindsight solve, in ms. */
export interface HindsightPhases {
  /** Building the allowed graph (time sweep + grid). */
  graphMs: number;
  /** Connected components and the first candidate choice. */
  setupMs: number;
  /** The first restricted solve of every component. */
  firstSolveMs: number;
  /** Pricing passes over every allowed pair. */
  pricingMs: number;
  /** Re-solves after violators were added (warm starts and their certificate checks). */
  resolveMs: number;
  /** The match ceiling (augmenting paths from the optimum's matching, cardinality.ts). */
  ceilingMs: number;
}

/** Per-demand figures, in the market's occurrence order. */
export interface HindsightDemandCosts {
  /** Event time of each demand occurrence. */
  demandT: Float64Array;
  /** Its hindsight cost: the matched pair's cost, or P when unmatched. */
  demandCost: Float64Array;
  /** Minutes it waited for its supply in the hindsight optimum (`max(0, s.t − d.t)`); NaN when unmatched. */
  demandWait: Float64Array;
}

/** Options of the hindsight solve of one market. */
export interface HindsightMarketOptions {
  /**
   * Candidate pairs per demand in the first restricted solve (its k cheapest). Any
   * k ≥ 1 gives the same optimum; a small k means more pricing rounds. Measured with
   * one pair a column added per round (`addPerColumn`) on the busiest district of a
   * generated day, one thread, alternating runs: at scale 4 (114 M allowed pairs)
   * k = 4 took 13.4–13.7 s in 13 rounds against 14.3 s in 12 at 8 (2: 13.9–14.5 s,
   * 14 rounds; 3: 13.8–14.1 s; 6: 13.6 s; 12: 15.1 s), at scale 1 1.21–1.24 s
   * against 1.29–1.30 s, on the demo week's largest 7.95–8.10 s against 8.85–9.09 s,
   * at scale 8 (one run each) 61.9 s against 64.6 s, 15 rounds either way. (By rows
   * alone, before that rule, 8 was best and fewer cost rounds at scale 8.)
   * @default 4
   */
  candidatesPerDemand?: number;
  /**
   * Pairs added per demand in each pricing round: its most negative reduced costs.
   * Each pair added makes the re-solves' searches wider, each one left out may cost
   * a round: counted (by rows alone, before `addPerColumn`) on a busy district's day
   * (`gen --scale 4`, 114 M allowed pairs), 12 a row took 12 rounds, 912 M pairs
   * scanned by the re-solves and 930 M read by the pricing passes; 4 a row 16 rounds,
   * 540 M and 1,267 M (6: 14, 622 M, 1,124 M; 2: 22, 432 M, 1,670 M). A pair scanned
   * in a search costs about twice a pair read in a pricing pass (15 against 7.5 ns
   * there), so 4 and 6 come out even and about a seventh under 12; on the demo week's
   * largest district 4 came out ahead of 6 (re-solves 9.8 s at 12, 7.4 s at 6, 6.6 s
   * at 4), and holds a quarter fewer pairs. With the column rule (4 first candidates),
   * 3 and 5 a row measured within noise of 4 (13.3–13.9 s), 6 slower (14.7 s).
   * @default 4
   */
  addPerRow?: number;
  /**
   * While a pricing pass finds many violators, the next reads the rows left with
   * them in this many turns, one share a pass (pricing.ts, where it is measured).
   * 1 reads them all.
   * @default 6
   */
  pricingTurns?: number;
  /**
   * Pairs kept per supply in each pricing round: its most negative reduced costs,
   * added where their demand did not take them (see pricing.ts). 0 adds by rows alone.
   * @default 1
   */
  addPerColumn?: number;
  /** Clock for `ms`. @default performance.now */
  now?: () => number;
  /** Also return the minimum vertex cover behind the match ceiling (one more pass over the pairs). @default false */
  cover?: boolean;
}

/** What the solve proves, for tests and reports: the graph, the final prices and assignment. */
export interface HindsightMarketDetail {
  graph: AllowedGraph;
  /** u per demand (length nDemand). */
  rowDuals: Float64Array;
  /** v per supply (length nSupply). */
  colDuals: Float64Array;
  /** Supply per demand, -1 when unmatched. */
  rowToCol: Int32Array;
  /** Restricted solves (all rounds, all time segments). */
  solves: number;
  /** Final prices that failed the certificate and were found again by a cold solve. */
  retries: number;
  /** Pricing decisions too close to call on a pair's cost code, settled on the build's cost (or the exact one). */
  rechecks: number;
  /** Row pricings over all rounds (a row whose prices stood still is not priced again). */
  rowsPriced: number;
  /** Pricing passes whose rows were read on two threads (pricing-split.ts). */
  splitPasses: number;
  /** Row pricings read by the WebAssembly kernel (wasm/pricing-scan.ts): all, where the pairs were in a kernel memory. */
  kernelRows: number;
}

/**
 * Segments with fewer allowed pairs re-solve in JavaScript: each kernel memory
 * reserves address space until it is collected, and their searches are short.
 */
const KERNEL_SEARCH_MIN_PAIRS = 1_000_000;

/** @default candidatesPerDemand */
export const DEFAULT_CANDIDATES_PER_DEMAND = 4;
/** @default addPerRow */
export const DEFAULT_ADD_PER_ROW = 4;
/** @default addPerColumn */
export const DEFAULT_ADD_PER_COLUMN = 1;
/** @default pricingTurns */
export const DEFAULT_PRICING_TURNS = 6;

/** What one time segment of a market yields. */
interface SegmentResult {
  matched: number;
  pairsPriced: number;
  pairsSolved: number;
  pricingRounds: number;
  ceiling: number;
  demandCost: Float64Array;
  demandWait: Float64Array;
  cover: HindsightCover | null;
  phases: HindsightPhases;
  solves: number;
  retries: number;
  rechecks: number;
  rowsPriced: number;
  splitPasses: number;
  kernelRows: number;
  /** With `wantDetail`: the segment's graph and prices, rows in its demand order. */
  proof: SegmentProof | null;
}

const zeroPhases = (): HindsightPhases => ({ graphMs: 0, setupMs: 0, firstSolveMs: 0, pricingMs: 0, resolveMs: 0, ceilingMs: 0 });

/**
 * Solves one packed market exactly, time segment by time segment. `solve` is the
 * sparse assignment solver (the caller passes `solveSparse`); it is injected so this
 * module stays free of imports a worker would not need. With `wantDetail` the
 * segments' graphs and prices are put back together into market-wide ones. `store`
 * holds the pairs; a worker passes the same one for market after market, so the
 * memory of one market's pairs is reused by the next instead of waiting for the GC.
 * `splitter` gives large segments' pricing passes a second thread while a core is
 * free (pricing-split.ts; its store must then be shared): the result is the same.
 */
export function solvePackedMarket(
  market: string,
  m: PackedMarket,
  config: PairflowConfig,
  solve: SparseSolver,
  opts: HindsightMarketOptions = {},
  wantDetail = false,
  store: GraphStore = new GraphStore(),
  splitter: PricingSplitter | null = null,
): HindsightMarketResult & HindsightDemandCosts & { detail: HindsightMarketDetail | null } {
  // Costs ≥ 0 (the config check asks waitWeight ≥ 0) let a sign mark the candidates.
  if (!(config.waitWeight >= 0)) {
    throw pairflowError('PAIRFLOW_ERR_CONFIG_INVALID', { file: 'config', detail: `waitWeight must be ≥ 0 for the hindsight optimum, got ${config.waitWeight}` });
  }
  const now = opts.now ?? (() => performance.now());
  const t0 = now();
  const out = {
    market,
    demandUnits: m.nDemand,
    supplyUnits: m.nSupply,
    cost: 0,
    matched: 0,
    abandoned: 0,
    pairsPriced: 0,
    pairsSolved: 0,
    pricingRounds: 0,
    ceiling: 0,
    ms: 0,
    phases: zeroPhases(),
    demandT: m.demandT.slice(),
    demandCost: new Float64Array(m.nDemand),
    demandWait: new Float64Array(m.nDemand).fill(NaN),
    detail: null as HindsightMarketDetail | null,
  } as HindsightMarketResult & HindsightDemandCosts & { detail: HindsightMarketDetail | null };
  const coverParts: HindsightCover[] = [];
  const seg = timeSegments(m);
  const parts: Array<{ dIdx: Int32Array; sIdx: Int32Array; proof: SegmentProof }> = [];
  let solves = 0;
  let retries = 0;
  let rechecks = 0;
  let rowsPriced = 0;
  let splitPasses = 0;
  let kernelRows = 0;
  // Each segment's graph is done with before the next is built, so they share `store`.
  for (let q = 0; q < seg.count; q++) {
    const dIdx = seg.demand.idx.subarray(seg.demand.start[q]!, seg.demand.start[q + 1]!);
    const sIdx = seg.supply.idx.subarray(seg.supply.start[q]!, seg.supply.start[q + 1]!);
    if (dIdx.length === 0 && !wantDetail) continue;
    const sub = seg.count === 1 ? m : subMarket(m, dIdx, sIdx);
    const r = solveSegment(sub, config, solve, opts, now, store, wantDetail, splitter);
    for (let i = 0; i < dIdx.length; i++) {
      out.demandCost[dIdx[i]!] = r.demandCost[i]!;
      out.demandWait[dIdx[i]!] = r.demandWait[i]!;
    }
    if (r.cover) coverParts.push(r.cover);
    out.matched += r.matched;
    out.pairsPriced += r.pairsPriced;
    out.pairsSolved += r.pairsSolved;
    out.pricingRounds = Math.max(out.pricingRounds, r.pricingRounds);
    out.ceiling += r.ceiling;
    for (const key of Object.keys(out.phases) as Array<keyof HindsightPhases>) out.phases[key] += r.phases[key];
    solves += r.solves;
    retries += r.retries;
    rechecks += r.rechecks;
    rowsPriced += r.rowsPriced;
    splitPasses += r.splitPasses;
    kernelRows += r.kernelRows;
    if (wantDetail) parts.push({ dIdx, sIdx, proof: r.proof! });
  }
  // Summed in occurrence order, so the total does not depend on how segments fell.
  for (let i = 0; i < m.nDemand; i++) out.cost += out.demandCost[i]!;
  out.abandoned = m.nDemand - out.matched;
  if (opts.cover) out.cover = joinCovers(coverParts);
  if (wantDetail) out.detail = { ...mergeProofs(m, parts), solves, retries, rechecks, rowsPriced, splitPasses, kernelRows };
  out.ms = now() - t0;
  return out;
}

function joinCovers(parts: readonly HindsightCover[]): HindsightCover {
  const join = (side: 'demand' | 'supply'): Float64Array => {
    const all = new Float64Array(parts.reduce((n, p) => n + p[side].length, 0));
    let at = 0;
    for (const p of parts) {
      all.set(p[side], at);
      at += p[side].length;
    }
    return all;
  };
  return { demand: join('demand'), supply: join('supply') };
}

/** The exact optimum of one time segment (or of a market that has just one). */
function solveSegment(
  m: PackedMarket,
  config: PairflowConfig,
  solve: SparseSolver,
  opts: HindsightMarketOptions,
  now: () => number,
  store: GraphStore,
  wantDetail: boolean,
  splitter: PricingSplitter | null,
): SegmentResult {
  const k = Math.max(1, Math.floor(opts.candidatesPerDemand ?? DEFAULT_CANDIDATES_PER_DEMAND));
  const addPerRow = Math.max(1, Math.floor(opts.addPerRow ?? DEFAULT_ADD_PER_ROW));
  const addPerColumn = Math.max(0, Math.floor(opts.addPerColumn ?? DEFAULT_ADD_PER_COLUMN));
  const turns = Math.max(1, Math.floor(opts.pricingTurns ?? DEFAULT_PRICING_TURNS));
  const P = config.abandonPenalty;
  const phases = zeroPhases();
  let tPhase = now();
  const lap = (key: keyof HindsightPhases): void => {
    const t = now();
    phases[key] += t - tPhase;
    tPhase = t;
  };
  const first = new FirstCandidates(m.nDemand, m.nSupply, k, m.supplyEnd);
  // A helper may make the store's pages resident ahead of the build (pricing-split.ts).
  store.ensure(firstReserve(m), 0);
  const ahead = splitter?.prefault?.(store) ?? null;
  let g: CompactGraph;
  try {
    g = buildCompactGraph(m, config, store, 0, first, ahead?.progress ?? null);
  } finally {
    ahead?.done();
  }
  const exact = pairCostOf(m, config);
  lap('graphMs');
  const { nRows, nCols, rowPtr, codes, rowDemand } = g;
  const picked = first.markColumns(codes);
  // The restricted assignment over graph rows, every row free to stay unmatched at P;
  // its pairs are the marked ones, at their exact costs (a pair whose code could not
  // tell and is not below P after all takes the top code).
  // A large segment's re-solves search in WebAssembly where its pairs are in a kernel
  // memory (the worker's store): room for 64 pairs a row, growing past it if need be.
  const kernelPairs = store.memory !== null && codes.length >= KERNEL_SEARCH_MIN_PAIRS ? Math.min(codes.length, 64 * nRows + (1 << 20)) : 0;
  const restricted = new GrowingAssignment(nRows, nCols, new Float64Array(nRows).fill(P), now, kernelPairs);
  for (let q = 0, r = 0; q < picked.length; q++) {
    const e = picked[q]!;
    while (rowPtr[r + 1]! <= e) r++;
    const col = columnOf(g, r, e);
    const c = exact(rowDemand[r]!, col);
    if (c < P) restricted.add(r, col, c);
    else dropCandidate(codes, e);
  }
  // A large segment's passes may read half their rows on a helper thread: its tables are shared then.
  const split = splitter !== null && splitter.wants(g);
  const quick = quickTermsOf(m, config, split);
  // Pairs in a kernel memory are read by the pricing kernel (wasm/pricing-scan.ts), a slot a thread.
  const slot = store.holds(g) ? store.columns(0, nCols, addPerColumn) : null;
  const picks = slot !== null ? kernelPicks(slot, nCols, addPerColumn) : columnPicks(nCols, addPerColumn);
  const pricer = new Pricer(g, exact, first.colLo, first.colHi, addPerRow, P, addPerColumn, quickPairCostOf(m, config, quick), turns, pricerTables(nRows, nCols, split), picks, rowAdds(1024), slot);
  const columns = split && slot !== null ? store.columns(1, nCols, addPerColumn) : null;
  const helper = split ? splitter.open({ g, m, config, colLo: first.colLo, colHi: first.colHi, addPerRow, P, addPerColumn, turns, tables: pricer.tables, quick, columns }) : null;
  pricer.attach(helper);
  lap('setupMs');

  let pricingRounds = 0;
  let solves = 0;
  let retries = 0;
  let final: SolveResult | null = null;
  let finalInst: SparseInstance | null = null;
  // First a cold solve by the injected solver, its prices adopted; then each round
  // from where the last one stood.
  restricted.adopt(certified(restricted.instance(), solve(restricted.instance(), { now }), solve, now, () => retries++));
  solves++;
  try {
    for (;;) {
      lap(pricingRounds === 0 ? 'firstSolveMs' : 'resolveMs');
      pricingRounds++;
      let found = pricer.pass(restricted.u, restricted.v);
      // A pass that skipped rows by their bounds proves nothing; the proof is one that reads them.
      if (found.violators === 0) found = pricer.pass(restricted.u, restricted.v, true);
      for (let q = 0; q < found.n; q++) restricted.add(found.rows[q]!, found.cols[q]!, found.costs[q]!);
      if (pricingRounds === 1) addGreedyPairs(g, first, exact, P, restricted);
      lap('pricingMs');
      if (found.violators === 0) {
        // No allowed pair prices out: the prices prove the optimum once they certify
        // the restricted assignment itself (SPEC §5). Prices that do not are found again
        // cold and priced once more.
        const inst = restricted.instance();
        const res = restricted.result({ augmentations: 0, scannedPairs: 0, ms: 0, warm: true });
        if (checkCertificate(inst, res).ok) {
          final = res;
          finalInst = inst;
          break;
        }
        retries++;
        restricted.adopt(certified(inst, solve(inst, { now }), solve, now, () => {}));
      } else {
        restricted.solve();
      }
      solves++;
    }
  } finally {
    helper?.close();
  }
  lap('resolveMs');

  const { rowDuals, colDuals, rowToCol } = final;
  // The instance the certificate was checked on (a second copy would be 12 bytes a pair).
  const inst = finalInst!;
  const demandCost = new Float64Array(nRows).fill(P);
  const demandWait = new Float64Array(nRows).fill(NaN);
  let matched = 0;
  for (let r = 0; r < nRows; r++) {
    const c = rowToCol[r]!;
    if (c < 0) continue;
    for (let e = inst.rowPtr[r]!; e < inst.rowPtr[r + 1]!; e++) {
      if (inst.colIdx[e] === c) {
        demandCost[rowDemand[r]!] = inst.cost[e]!;
        break;
      }
    }
    demandWait[rowDemand[r]!] = Math.max(0, m.supplyT[c]! - m.demandT[rowDemand[r]!]!) / 60_000;
    matched++;
  }
  let proof: SegmentProof | null = null;
  if (wantDetail) {
    const rd = new Float64Array(nRows);
    const rc = new Int32Array(nRows);
    for (let r = 0; r < nRows; r++) {
      rd[rowDemand[r]!] = rowDuals[r]!;
      rc[rowDemand[r]!] = rowToCol[r]!;
    }
    proof = { graph: expandGraph(g, exact), rowDuals: rd, colDuals, rowToCol: rc };
  }
  lap('setupMs');
  // The pricing's kernel slots are done with: the ceiling's passes may take their room.
  const { size: ceiling, cover: vc } = matchCeiling(g, rowToCol, opts.cover === true, store.holds(g) ? store.arena() : null);
  let cover: HindsightCover | null = null;
  if (vc) {
    const triples = (idx: Int32Array, map: Int32Array | null, t: Float64Array, a: Float64Array, b: Float64Array): Float64Array => {
      const out = new Float64Array(idx.length * 3);
      for (let i = 0; i < idx.length; i++) {
        const u = map ? map[idx[i]!]! : idx[i]!;
        out[3 * i] = t[u]!;
        out[3 * i + 1] = a[u]!;
        out[3 * i + 2] = b[u]!;
      }
      return out;
    };
    cover = {
      demand: triples(vc.rows, rowDemand, m.demandT, m.demandA, m.demandB),
      supply: triples(vc.cols, null, m.supplyT, m.supplyA, m.supplyB),
    };
  }
  lap('ceilingMs');

  return {
    matched,
    pairsPriced: codes.length,
    pairsSolved: inst.colIdx.length,
    pricingRounds,
    ceiling,
    demandCost,
    demandWait,
    cover,
    phases,
    solves,
    retries,
    rechecks: pricer.rechecks,
    rowsPriced: pricer.rowsPriced,
    splitPasses: pricer.splitPasses,
    kernelRows: pricer.kernelRows,
    proof,
  };
}

/**
 * A cold solve's result once its certificate holds; one that fails is solved once
 * more (`onRetry`), and a second failure is a solver bug.
 */
function certified(inst: SparseInstance, res: SolveResult, solve: SparseSolver, now: () => number, onRetry: () => void): SolveResult {
  if (checkCertificate(inst, res).ok) return res;
  onRetry();
  const again = solve(inst, { now });
  const rep = checkCertificate(inst, again);
  if (!rep.ok) {
    throw pairflowError('PAIRFLOW_ERR_INTERNAL_BUG', {
      detail: `hindsight: solver prices do not certify optimality: ${rep.problems.slice(0, 3).join('; ')}`,
    });
  }
  return again;
}

/**
 * The earliest-deadline greedy's pairs (candidates.ts) not yet candidates, added to
 * the restricted assignment with the first pricing round's pairs.
 */
function addGreedyPairs(g: CompactGraph, first: FirstCandidates, exact: PairCost, P: number, restricted: GrowingAssignment): void {
  const { greedyEdges: edges } = first;
  const n = first.greedy;
  if (edges.length === 0) return;
  const { nRows, rowPtr, codes, rowDemand } = g;
  let q = 0;
  for (let r = 0; r < nRows && q < n; r++) {
    for (; q < n && edges[q]! < rowPtr[r + 1]!; q++) {
      const e = edges[q]!;
      if (isMarked(codes[e]!)) continue;
      const col = columnOf(g, r, e);
      const c = exact(rowDemand[r]!, col);
      if (!(c < P)) continue;
      markCandidate(codes, e);
      restricted.add(r, col, c);
    }
  }
}
