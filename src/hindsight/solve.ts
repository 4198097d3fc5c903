/**
 * The exact hindsight optimum of one market (SPEC §4) on packed occurrences. Pure:
 * typed arrays in and out, the solver and the clock injected, so the same code runs
 * in this thread and in a worker.
 *
 * A market is first cut into time segments where no unit spans a gap (no pair
 * crosses a cut). Each segment's full allowed graph is built once (time sweep + grid,
 * see hindsight-graph.ts) and splits into connected components, solved independently.
 * Each component is first solved on a small candidate set (the k cheapest pairs of
 * each demand and of each supply); a pricing pass then computes the reduced cost
 * `c − u_d − v_s` of EVERY allowed pair under the solver's dual prices. The most
 * negative few of each demand join the candidates and the components they touch are
 * re-solved, warm from the previous prices, until no pair prices out. The final prices are then feasible for the LP over all allowed pairs and
 * their objective equals the primal cost (SPEC §5), which proves the optimum exact.
 *
 * Pairs costing at least P are never needed: with `u_d ≤ P` and `v_s ≤ 0` their
 * reduced cost is ≥ 0 under any certified prices, and swapping such a pair for an
 * unmatched demand never costs more. They stay in the graph for the match ceiling.
 */

import { maxCardinalityMatching, minVertexCover } from '../matching/cardinality.js';
import { checkCertificate } from '../matching/certificate.js';
import { pairflowError } from '../errors.js';
import type { SolveOptions, SolveResult, SparseInstance } from '../matching/types.js';
import type { PairflowConfig } from '../model.js';
import {
  buildCompactGraph,
  expandGraph,
  GraphStore,
  pairCostOf,
  type AllowedGraph,
  type CompactGraph,
  type PackedMarket,
} from './graph.js';

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
  /** Pricing passes over all allowed pairs, the last one finding no violator (the most any time segment needed). */
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
  /** The match ceiling (Hopcroft–Karp). */
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

/** A sparse assignment solver with the contract of src/matching/types.ts. */
export type SparseSolver = (inst: SparseInstance, opts?: SolveOptions) => SolveResult;

/** Options of the hindsight solve of one market. */
export interface HindsightMarketOptions {
  /**
   * Candidate pairs per demand in the first restricted solve (its k cheapest). Any
   * k ≥ 1 gives the same optimum; a small k means more pricing rounds.
   * @default 12
   */
  candidatesPerDemand?: number;
  /**
   * Pairs added per demand in each pricing round: its most negative reduced costs.
   * @default 12
   */
  addPerRow?: number;
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
  /** Component solves (all rounds). */
  solves: number;
  /** Warm re-solves whose prices failed the certificate and were redone cold. */
  warmRetries: number;
  /** Pricing decisions too close to call on the float32 cost, settled on the exact cost. */
  rechecks: number;
  /** Row pricings over all rounds (a row whose prices stood still is not priced again). */
  rowsPriced: number;
}

/** @default candidatesPerDemand */
export const DEFAULT_CANDIDATES_PER_DEMAND = 12;
/** @default addPerRow */
export const DEFAULT_ADD_PER_ROW = 12;

// A non-candidate pair prices out below this (relative to its cost): well under the
// certificate's 1e-9 yet above the rounding of duals built from sums of costs.
const PRICE_TOL = 1e-11;
// A float32 cost is within 2^-24 of the exact one (relative); twice that again covers
// the rounding of the reduced cost computed from it.
const F32_SLACK = 2 ** -22;

function find(parent: Int32Array, x: number): number {
  let r = x;
  while (parent[r]! !== r) r = parent[r]!;
  while (parent[x]! !== r) {
    const next = parent[x]!;
    parent[x] = r;
    x = next;
  }
  return r;
}

/**
 * Marks the k cheapest pairs (cost < `limit`) of every row and of every column: a
 * supply that is nobody's favourite still gets its best demands, so the first prices
 * are not blind to it.
 */
function markCheapest(g: CompactGraph, kAsked: number, limit: number, inCand: Uint8Array): void {
  const { nRows, nCols, rowPtr, colIdx, cost32: cost } = g;
  // No row or column has more pairs than the largest degree: a larger k buys nothing
  // but a per-column buffer of nCols · k.
  let maxDeg = 0;
  for (let r = 0; r < nRows; r++) maxDeg = Math.max(maxDeg, rowPtr[r + 1]! - rowPtr[r]!);
  const colDeg = new Int32Array(nCols);
  for (let e = 0; e < colIdx.length; e++) colDeg[colIdx[e]!]!++;
  for (let c = 0; c < nCols; c++) maxDeg = Math.max(maxDeg, colDeg[c]!);
  const k = Math.max(1, Math.min(kAsked, maxDeg));
  // Per-row (then per-column) best k by insertion into a small sorted buffer.
  const bestCost = new Float64Array(k);
  const bestEdge = new Int32Array(k);
  let n = 0;
  const offer = (e: number, c: number): void => {
    if (n === k && c >= bestCost[k - 1]!) return;
    let p = n < k ? n++ : k - 1;
    while (p > 0 && bestCost[p - 1]! > c) {
      bestCost[p] = bestCost[p - 1]!;
      bestEdge[p] = bestEdge[p - 1]!;
      p--;
    }
    bestCost[p] = c;
    bestEdge[p] = e;
  };
  for (let r = 0; r < nRows; r++) {
    n = 0;
    for (let e = rowPtr[r]!; e < rowPtr[r + 1]!; e++) if (cost[e]! < limit) offer(e, cost[e]!);
    for (let q = 0; q < n; q++) inCand[bestEdge[q]!] = 1;
  }
  // Per column, a best-k list of its own, filled in one pass over the pairs.
  const colCost = new Float64Array(nCols * k).fill(Infinity);
  const colEdge = new Int32Array(nCols * k).fill(-1);
  for (let e = 0; e < colIdx.length; e++) {
    const c = cost[e]!;
    if (!(c < limit)) continue;
    const base = colIdx[e]! * k;
    if (c >= colCost[base + k - 1]!) continue;
    let p = k - 1;
    while (p > 0 && colCost[base + p - 1]! > c) {
      colCost[base + p] = colCost[base + p - 1]!;
      colEdge[base + p] = colEdge[base + p - 1]!;
      p--;
    }
    colCost[base + p] = c;
    colEdge[base + p] = e;
  }
  for (let q = 0; q < colEdge.length; q++) if (colEdge[q]! >= 0) inCand[colEdge[q]!] = 1;
}

/** What one time segment of a market yields. */
interface SegmentResult {
  cost: number;
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
  warmRetries: number;
  rechecks: number;
  rowsPriced: number;
  /** With `wantDetail`: the segment's graph and prices, rows in its demand order. */
  detail: HindsightMarketDetail | null;
}

/**
 * Splits a market where no unit spans a gap in time: sorted by arrival, a new
 * segment starts at an arrival later than every `end` before it. No pair crosses a
 * cut, so segments solve independently, and only one segment's pairs are held in
 * memory at a time (a week of a city is seven nights apart).
 * Returns, per unit, its segment: demand first, then supply.
 */
function timeSegments(m: PackedMarket): { count: number; demandSeg: Int32Array; supplySeg: Int32Array } {
  const n = m.nDemand + m.nSupply;
  const at = new Float64Array(n);
  at.set(m.demandT, 0);
  at.set(m.supplyT, m.nDemand);
  const order = new Int32Array(n);
  for (let i = 0; i < n; i++) order[i] = i;
  order.sort((a, b) => at[a]! - at[b]! || a - b);
  const demandSeg = new Int32Array(m.nDemand);
  const supplySeg = new Int32Array(m.nSupply);
  let count = 0;
  let reach = -Infinity;
  for (let q = 0; q < n; q++) {
    const u = order[q]!;
    const isDemand = u < m.nDemand;
    const i = isDemand ? u : u - m.nDemand;
    const t = at[u]!;
    const end = isDemand ? m.demandEnd[i]! : m.supplyEnd[i]!;
    if (q === 0 || t > reach) count++;
    if (end > reach) reach = end;
    if (isDemand) demandSeg[i] = count - 1;
    else supplySeg[i] = count - 1;
  }
  return { count, demandSeg, supplySeg };
}

/** The units of one segment as a packed market of their own (same relative order). */
function subMarket(m: PackedMarket, dIdx: Int32Array, sIdx: Int32Array): PackedMarket {
  const w = m.capWords;
  const pick = (src: Float64Array, idx: Int32Array): Float64Array => {
    const out = new Float64Array(idx.length);
    for (let i = 0; i < idx.length; i++) out[i] = src[idx[i]!]!;
    return out;
  };
  const bits = (src: Uint32Array, idx: Int32Array): Uint32Array => {
    const out = new Uint32Array(idx.length * w);
    for (let i = 0; i < idx.length; i++) out.set(src.subarray(idx[i]! * w, idx[i]! * w + w), i * w);
    return out;
  };
  return {
    nDemand: dIdx.length,
    nSupply: sIdx.length,
    demandT: pick(m.demandT, dIdx),
    demandEnd: pick(m.demandEnd, dIdx),
    demandA: pick(m.demandA, dIdx),
    demandB: pick(m.demandB, dIdx),
    supplyT: pick(m.supplyT, sIdx),
    supplyEnd: pick(m.supplyEnd, sIdx),
    supplyA: pick(m.supplyA, sIdx),
    supplyB: pick(m.supplyB, sIdx),
    capWords: w,
    demandNeeds: bits(m.demandNeeds, dIdx),
    supplyHas: bits(m.supplyHas, sIdx),
  };
}

/**
 * Solves one packed market exactly, time segment by time segment. `solve` is the
 * sparse assignment solver (the caller passes `solveSparse`); it is injected so this
 * module stays free of imports a worker would not need. With `wantDetail` the
 * segments' graphs and prices are put back together into market-wide ones. `store`
 * holds the pairs; a worker passes the same one for market after market, so the
 * memory of one market's pairs is reused by the next instead of waiting for the GC.
 */
export function solvePackedMarket(
  market: string,
  m: PackedMarket,
  config: PairflowConfig,
  solve: SparseSolver,
  opts: HindsightMarketOptions = {},
  wantDetail = false,
  store: GraphStore = new GraphStore(),
): HindsightMarketResult & HindsightDemandCosts & { detail: HindsightMarketDetail | null } {
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
    phases: { graphMs: 0, setupMs: 0, firstSolveMs: 0, pricingMs: 0, resolveMs: 0, ceilingMs: 0 } as HindsightPhases,
    demandT: m.demandT.slice(),
    demandCost: new Float64Array(m.nDemand),
    demandWait: new Float64Array(m.nDemand).fill(NaN),
    detail: null as HindsightMarketDetail | null,
  } as HindsightMarketResult & HindsightDemandCosts & { detail: HindsightMarketDetail | null };
  const coverParts: HindsightCover[] = [];
  const { count, demandSeg, supplySeg } = timeSegments(m);
  // Unit indices per segment, by counting sort (indices stay ascending).
  const group = (seg: Int32Array): { start: Int32Array; idx: Int32Array } => {
    const start = new Int32Array(count + 1);
    for (let i = 0; i < seg.length; i++) start[seg[i]! + 1]!++;
    for (let q = 0; q < count; q++) start[q + 1]! += start[q]!;
    const fill = start.slice(0, count);
    const idx = new Int32Array(seg.length);
    for (let i = 0; i < seg.length; i++) idx[fill[seg[i]!]!++] = i;
    return { start, idx };
  };
  const ds = group(demandSeg);
  const ss = group(supplySeg);
  const parts: Array<{ dIdx: Int32Array; sIdx: Int32Array; r: SegmentResult }> = [];
  let solves = 0;
  let warmRetries = 0;
  let rechecks = 0;
  let rowsPriced = 0;
  // Each segment's graph is done with before the next is built, so they share `store`.
  for (let q = 0; q < count; q++) {
    const dIdx = ds.idx.subarray(ds.start[q]!, ds.start[q + 1]!);
    const sIdx = ss.idx.subarray(ss.start[q]!, ss.start[q + 1]!);
    if (dIdx.length === 0 && !wantDetail) continue;
    const sub = count === 1 ? m : subMarket(m, dIdx, sIdx);
    const r = solveSegment(sub, config, solve, opts, now, store, wantDetail);
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
    warmRetries += r.warmRetries;
    rechecks += r.rechecks;
    rowsPriced += r.rowsPriced;
    if (wantDetail) parts.push({ dIdx, sIdx, r });
  }
  // Summed in occurrence order, so the total does not depend on how segments fell.
  for (let i = 0; i < m.nDemand; i++) out.cost += out.demandCost[i]!;
  out.abandoned = m.nDemand - out.matched;
  if (opts.cover) out.cover = joinCovers(coverParts);
  if (wantDetail) out.detail = mergeDetail(m, parts, solves, warmRetries, rechecks, rowsPriced);
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

function mergeDetail(
  m: PackedMarket,
  parts: ReadonlyArray<{ dIdx: Int32Array; sIdx: Int32Array; r: SegmentResult }>,
  solves: number,
  warmRetries: number,
  rechecks: number,
  rowsPriced: number,
): HindsightMarketDetail {
  const rowDuals = new Float64Array(m.nDemand);
  const colDuals = new Float64Array(m.nSupply);
  const rowToCol = new Int32Array(m.nDemand).fill(-1);
  const rowPtr = new Int32Array(m.nDemand + 1);
  let nnz = 0;
  for (const { dIdx, r } of parts) {
    const g = r.detail!.graph;
    nnz += g.colIdx.length;
    for (let i = 0; i < dIdx.length; i++) rowPtr[dIdx[i]! + 1] = g.rowPtr[i + 1]! - g.rowPtr[i]!;
  }
  for (let d = 0; d < m.nDemand; d++) rowPtr[d + 1]! += rowPtr[d]!;
  const colIdx = new Int32Array(nnz);
  const cost = new Float64Array(nnz);
  for (const { dIdx, sIdx, r: seg } of parts) {
    const r = seg.detail!;
    const g = r.graph;
    for (let i = 0; i < dIdx.length; i++) {
      const d = dIdx[i]!;
      rowDuals[d] = r.rowDuals[i]!;
      const c = r.rowToCol[i]!;
      rowToCol[d] = c >= 0 ? sIdx[c]! : -1;
      let at = rowPtr[d]!;
      for (let e = g.rowPtr[i]!; e < g.rowPtr[i + 1]!; e++) {
        colIdx[at] = sIdx[g.colIdx[e]!]!;
        cost[at] = g.cost[e]!;
        at++;
      }
    }
    for (let j = 0; j < sIdx.length; j++) colDuals[sIdx[j]!] = r.colDuals[j]!;
  }
  return { graph: { nRows: m.nDemand, nCols: m.nSupply, rowPtr, colIdx, cost }, rowDuals, colDuals, rowToCol, solves, warmRetries, rechecks, rowsPriced };
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
): SegmentResult {
  const k = Math.max(1, Math.floor(opts.candidatesPerDemand ?? DEFAULT_CANDIDATES_PER_DEMAND));
  const P = config.abandonPenalty;
  // Costs ≥ 0 (the config check asks waitWeight ≥ 0) let a sign mark the candidates.
  if (!(config.waitWeight >= 0)) {
    throw pairflowError('PAIRFLOW_ERR_CONFIG_INVALID', { file: 'config', detail: `waitWeight must be ≥ 0 for the hindsight optimum, got ${config.waitWeight}` });
  }
  const phases: HindsightPhases = { graphMs: 0, setupMs: 0, firstSolveMs: 0, pricingMs: 0, resolveMs: 0, ceilingMs: 0 };
  let tPhase = now();
  const lap = (key: keyof HindsightPhases): void => {
    const t = now();
    phases[key] += t - tPhase;
    tPhase = t;
  };
  const g = buildCompactGraph(m, config, store);
  const exact = pairCostOf(m, config);
  lap('graphMs');
  const { nRows, nCols, rowPtr, colIdx, cost32, rowDemand } = g;
  const nnz = colIdx.length;
  // Every pair whose exact cost is below P has a float32 cost below this.
  const pCut = P + Math.abs(P) * F32_SLACK;

  // Connected components over the pairs that can matter (cost < P, or a float32
  // cost that cannot tell): a superset of the useful pairs only merges components.
  const parent = new Int32Array(nRows + nCols);
  for (let i = 0; i < parent.length; i++) parent[i] = i;
  for (let r = 0; r < nRows; r++) {
    for (let e = rowPtr[r]!; e < rowPtr[r + 1]!; e++) {
      if (!(cost32[e]! < pCut)) continue;
      const a = find(parent, r);
      const b = find(parent, nRows + colIdx[e]!);
      if (a !== b) parent[a < b ? b : a] = a < b ? a : b;
    }
  }
  // Dense component ids for components holding at least one such pair; rows and
  // columns keep their graph order inside a component (rows are in time order, so
  // augmenting paths stay local).
  const compOfRoot = new Int32Array(nRows + nCols).fill(-1);
  const rowComp = new Int32Array(nRows).fill(-1);
  const colComp = new Int32Array(nCols).fill(-1);
  let nComp = 0;
  for (let r = 0; r < nRows; r++) {
    let useful = false;
    for (let e = rowPtr[r]!; e < rowPtr[r + 1]!; e++) {
      if (cost32[e]! < pCut) {
        useful = true;
        break;
      }
    }
    if (!useful) continue;
    const root = find(parent, r);
    if (compOfRoot[root] === -1) compOfRoot[root] = nComp++;
    rowComp[r] = compOfRoot[root]!;
  }
  for (let c = 0; c < nCols; c++) colComp[c] = compOfRoot[find(parent, nRows + c)]!;
  const rowLocal = new Int32Array(nRows);
  const colLocal = new Int32Array(nCols);
  const compRowCount = new Int32Array(nComp + 1);
  const compColCount = new Int32Array(nComp + 1);
  for (let r = 0; r < nRows; r++) if (rowComp[r]! >= 0) rowLocal[r] = compRowCount[rowComp[r]! + 1]!++;
  for (let c = 0; c < nCols; c++) if (colComp[c]! >= 0) colLocal[c] = compColCount[colComp[c]! + 1]!++;
  // compRows[compRowStart[q] ..] lists component q's rows in ascending order.
  const compRowStart = new Int32Array(nComp + 1);
  for (let q = 0; q < nComp; q++) compRowStart[q + 1] = compRowStart[q]! + compRowCount[q + 1]!;
  const compRows = new Int32Array(compRowStart[nComp]!);
  for (let r = 0; r < nRows; r++) if (rowComp[r]! >= 0) compRows[compRowStart[rowComp[r]!]! + rowLocal[r]!] = r;
  const compColStart = new Int32Array(nComp + 1);
  for (let q = 0; q < nComp; q++) compColStart[q + 1] = compColStart[q]! + compColCount[q + 1]!;
  const compCols = new Int32Array(compColStart[nComp]!);
  for (let c = 0; c < nCols; c++) if (colComp[c]! >= 0) compCols[compColStart[colComp[c]!]! + colLocal[c]!] = c;

  // The candidate pairs, the only ones the restricted solves see, with exact costs,
  // as a CSR over graph rows. In the graph a candidate is marked by the sign of its
  // float32 cost (costs are ≥ 0, and a candidate's is not read again): a byte per
  // pair saved, and one array fewer for the pricing passes to stream through.
  const cand = new CandidateRows(nRows, nnz);
  {
    const inCand = new Uint8Array(nnz);
    markCheapest(g, k, pCut, inCand);
    let at = 0;
    for (let r = 0; r < nRows; r++) {
      const d = rowDemand[r]!;
      for (let e = rowPtr[r]!; e < rowPtr[r + 1]!; e++) {
        if (inCand[e] === 0) continue;
        const c = exact(d, colIdx[e]!);
        if (!(c < P)) {
          inCand[e] = 0;
          continue;
        }
        cand.edge[at] = e;
        cand.cost[at] = c;
        at++;
        markCandidate(cost32, e);
      }
      cand.ptr[r + 1] = at;
    }
  }

  // Prices and assignment per graph row; rows with no useful pair stay unmatched at
  // u = P, columns outside every component keep v = 0.
  const rowDuals = new Float64Array(nRows).fill(P);
  const colDuals = new Float64Array(nCols);
  const rowToCol = new Int32Array(nRows).fill(-1);
  // Each row's "unmatched" option is handed to the solver as an explicit private
  // column of cost P, so a warm start can say "this row stays unmatched" and the
  // solver only re-augments the rows that gained pairs. Raw prices from that form:
  const rawRowDuals = new Float64Array(nRows);
  const privateDuals = new Float64Array(nRows);

  const solved = new Uint8Array(nComp);
  const dirty = new Uint8Array(nComp).fill(1);
  let pricingRounds = 0;
  const addPerRow = Math.max(1, Math.floor(opts.addPerRow ?? DEFAULT_ADD_PER_ROW));
  const addRed = new Float64Array(addPerRow);
  const addEdge = new Int32Array(addPerRow);
  const addCost = new Float64Array(addPerRow);
  // The pairs a pricing pass adds, in row order.
  let newRow = new Int32Array(1024);
  let newEdge = new Int32Array(1024);
  let newCost = new Float64Array(1024);
  // The restricted instances of every round, written over the same buffers (a
  // component's pairs: at most every pair, plus one private column per row).
  const instPtr = new Int32Array(nRows + 1);
  const instCol = new Int32Array(nnz + nRows);
  const instCost = new Float64Array(nnz + nRows);
  let warmRetries = 0;
  let solves = 0;
  let rechecks = 0;
  lap('setupMs');

  // Incremental pricing. A row whose last pricing found it clean (no violator left
  // out) needs no new pass while its price and the prices of all its columns stand
  // still: its reduced costs are then the same numbers. Columns are in arrival order,
  // so a row's columns lie in a short index range, and "did a column in the range
  // move?" is one lookup in a prefix count of the columns that moved.
  const colLo = new Int32Array(nRows);
  const colHi = new Int32Array(nRows);
  for (let r = 0; r < nRows; r++) {
    let lo = nCols;
    let hi = -1;
    for (let e = rowPtr[r]!; e < rowPtr[r + 1]!; e++) {
      const c = colIdx[e]!;
      if (c < lo) lo = c;
      if (c > hi) hi = c;
    }
    colLo[r] = lo;
    colHi[r] = hi;
  }
  const rowClean = new Uint8Array(nRows);
  const pricedU = new Float64Array(nRows);
  const pricedV = new Float64Array(nCols);
  const movedBefore = new Int32Array(nCols + 1);
  let rowsPriced = 0;

  for (;;) {
    for (let q = 0; q < nComp; q++) {
      if (dirty[q] === 0) continue;
      solveComponent(q);
      dirty[q] = 0;
      solved[q] = 1;
    }
    lap(pricingRounds === 0 ? 'firstSolveMs' : 'resolveMs');
    pricingRounds++;
    let violators = 0;
    let nNew = 0;
    // Columns whose price moved since the previous pass (every one, the first time).
    for (let c = 0; c < nCols; c++) {
      const v = colDuals[c]!;
      const moved = pricingRounds === 1 || v !== pricedV[c] ? 1 : 0;
      movedBefore[c + 1] = movedBefore[c]! + moved;
      pricedV[c] = v;
    }
    for (let r = 0; r < nRows; r++) {
      const u = rowDuals[r]!;
      if (rowClean[r] === 1 && u === pricedU[r] && (colHi[r]! < colLo[r]! || movedBefore[colHi[r]! + 1] === movedBefore[colLo[r]!])) continue;
      pricedU[r] = u;
      rowsPriced++;
      const au = Math.abs(u);
      const d = rowDemand[r]!;
      let nb = 0;
      let rowViolators = 0;
      for (let e = rowPtr[r]!; e < rowPtr[r + 1]!; e++) {
        const c32 = cost32[e]!;
        if (c32 < 0) continue;
        const v = colDuals[colIdx[e]!]!;
        // Far from zero the float32 cost decides either way; near zero the exact cost
        // does. The reduced cost kept for ranking may be the float32 one: any choice
        // among true violators is sound.
        let red = c32 - u - v;
        const slack = F32_SLACK * (Math.abs(c32) + au + Math.abs(v));
        if (red >= slack) continue;
        let c = NaN;
        if (red >= -slack - 2 * PRICE_TOL * (1 + Math.abs(c32))) {
          rechecks++;
          c = exact(d, colIdx[e]!);
          red = c - u - v;
          if (red >= -PRICE_TOL * (1 + Math.abs(c))) continue;
        }
        violators++;
        rowViolators++;
        // Keep the addPerRow most negative: adding every violator at once floods
        // the restricted solve with pairs that the next prices no longer want.
        if (nb === addPerRow && red >= addRed[nb - 1]!) continue;
        let p = nb < addPerRow ? nb++ : addPerRow - 1;
        while (p > 0 && addRed[p - 1]! > red) {
          addRed[p] = addRed[p - 1]!;
          addEdge[p] = addEdge[p - 1]!;
          addCost[p] = addCost[p - 1]!;
          p--;
        }
        addRed[p] = red;
        addEdge[p] = e;
        addCost[p] = c;
      }
      // Clean when every violator found is added now.
      rowClean[r] = rowViolators > nb ? 0 : 1;
      if (nb > 0) {
        if (nNew + nb > newRow.length) {
          const grow = <T extends Int32Array | Float64Array>(a: T): T => {
            const b = new (a.constructor as new (n: number) => T)(Math.max(2 * a.length, nNew + nb));
            b.set(a);
            return b;
          };
          newRow = grow(newRow);
          newEdge = grow(newEdge);
          newCost = grow(newCost);
        }
        for (let q = 0; q < nb; q++) {
          const e = addEdge[q]!;
          const c = Number.isNaN(addCost[q]!) ? exact(d, colIdx[e]!) : addCost[q]!;
          // A violator has c < u + v ≤ P; anything else is a bug in the prices.
          if (!(c < P)) throw pairflowError('PAIRFLOW_ERR_INTERNAL_BUG', { detail: `hindsight: pair of cost ${c} ≥ P priced out` });
          markCandidate(cost32, e);
          newRow[nNew] = r;
          newEdge[nNew] = e;
          newCost[nNew] = c;
          nNew++;
        }
        dirty[rowComp[r]!] = 1;
      }
    }
    if (nNew > 0) cand.merge(newRow, newEdge, newCost, nNew);
    lap('pricingMs');
    if (violators === 0) break;
  }

  const pairsSolved = cand.ptr[nRows]!;
  const demandCost = new Float64Array(nRows).fill(P);
  const demandWait = new Float64Array(nRows).fill(NaN);
  let total = 0;
  let matched = 0;
  for (let r = 0; r < nRows; r++) {
    const c = rowToCol[r]!;
    const d = rowDemand[r]!;
    if (c >= 0) {
      for (let q = cand.ptr[r]!; q < cand.ptr[r + 1]!; q++) {
        if (colIdx[cand.edge[q]!] === c) {
          demandCost[d] = cand.cost[q]!;
          break;
        }
      }
      demandWait[d] = Math.max(0, m.supplyT[c]! - m.demandT[d]!) / 60_000;
      matched++;
    }
  }
  for (let d = 0; d < nRows; d++) total += demandCost[d]!;
  let detail: HindsightMarketDetail | null = null;
  if (wantDetail) {
    const rd = new Float64Array(nRows);
    const rc = new Int32Array(nRows);
    for (let r = 0; r < nRows; r++) {
      rd[rowDemand[r]!] = rowDuals[r]!;
      rc[rowDemand[r]!] = rowToCol[r]!;
    }
    detail = { graph: expandGraph(g, exact), rowDuals: rd, colDuals, rowToCol: rc, solves, warmRetries, rechecks, rowsPriced };
  }
  lap('setupMs');
  // Hopcroft–Karp seeds itself greedily with each row's first free pair: with the
  // optimum's pair first in each row, that seed is the optimum's matching, and
  // only the few rows it leaves short need augmenting.
  for (let r = 0; r < nRows; r++) {
    const c = rowToCol[r]!;
    if (c < 0) continue;
    const first = rowPtr[r]!;
    for (let e = first; e < rowPtr[r + 1]!; e++) {
      if (colIdx[e] !== c) continue;
      colIdx[e] = colIdx[first]!;
      colIdx[first] = c;
      const t = cost32[e]!;
      cost32[e] = cost32[first]!;
      cost32[first] = t;
      break;
    }
  }
  const maxMatching = maxCardinalityMatching(g);
  const ceiling = maxMatching.size;
  let cover: HindsightCover | null = null;
  if (opts.cover) {
    const vc = minVertexCover(g, maxMatching);
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
    cost: total,
    matched,
    pairsPriced: nnz,
    pairsSolved,
    pricingRounds,
    ceiling,
    demandCost,
    demandWait,
    cover,
    phases,
    solves,
    warmRetries,
    rechecks,
    rowsPriced,
    detail,
  };

  function solveComponent(q: number): void {
    const rows = compRows.subarray(compRowStart[q]!, compRowStart[q + 1]!);
    const nr = rows.length;
    const nc = compColCount[q + 1]!;
    const ptr = instPtr.subarray(0, nr + 1);
    for (let i = 0; i < nr; i++) {
      const r = rows[i]!;
      ptr[i + 1] = ptr[i]! + cand.ptr[r + 1]! - cand.ptr[r]! + 1;
    }
    const cols = instCol.subarray(0, ptr[nr]!);
    const costs = instCost.subarray(0, ptr[nr]!);
    const colGlobal = compCols.subarray(compColStart[q]!, compColStart[q + 1]!);
    let at = 0;
    for (let i = 0; i < nr; i++) {
      const r = rows[i]!;
      for (let t = cand.ptr[r]!; t < cand.ptr[r + 1]!; t++) {
        cols[at] = colLocal[colIdx[cand.edge[t]!]!]!;
        costs[at] = cand.cost[t]!;
        at++;
      }
      cols[at] = nc + i;
      costs[at] = P;
      at++;
    }
    const inst: SparseInstance = { nRows: nr, nCols: nc + nr, rowPtr: ptr, colIdx: cols, cost: costs, unmatchedCost: null };
    let solveOpts: SolveOptions;
    if (solved[q] === 1) {
      const rowPrices = new Float64Array(nr);
      const prevMatch = new Int32Array(nr);
      const colPrices = new Float64Array(nc + nr);
      for (let j = 0; j < nc; j++) colPrices[j] = colDuals[colGlobal[j]!]!;
      for (let i = 0; i < nr; i++) {
        const r = rows[i]!;
        rowPrices[i] = rawRowDuals[r]!;
        colPrices[nc + i] = privateDuals[r]!;
        const c = rowToCol[r]!;
        // Every previous pair is offered, a row on its private column too, so only
        // what the new pairs disturb needs to be searched again.
        prevMatch[i] = c >= 0 ? colLocal[c]! : nc + i;
      }
      solveOpts = { warm: { rowPrices, colPrices, rowToCol: prevMatch }, now };
    } else {
      solveOpts = { now };
    }
    let res = solve(inst, solveOpts);
    solves++;
    // The exactness proof rests on these prices, so each solve's certificate is
    // checked (O(pairs), cheap next to the solve). A warm start that fails it is
    // retried cold; a cold solve that fails it is a solver bug.
    if (!checkCertificate(inst, res).ok) {
      if (solveOpts.warm !== undefined) {
        warmRetries++;
        res = solve(inst, { now });
      }
      const rep = checkCertificate(inst, res);
      if (!rep.ok) {
        throw pairflowError('PAIRFLOW_ERR_INTERNAL_BUG', {
          detail: `hindsight: solver prices do not certify optimality: ${rep.problems.slice(0, 3).join('; ')}`,
        });
      }
    }
    for (let i = 0; i < nr; i++) {
      const r = rows[i]!;
      const c = res.rowToCol[i]!;
      rowToCol[r] = c >= 0 && c < nc ? colGlobal[c]! : -1;
      const vp = res.colDuals[nc + i]!;
      rawRowDuals[r] = res.rowDuals[i]!;
      privateDuals[r] = vp;
      // Back to the form of SPEC §5: u' = u + v_private ≤ P. It is ≤ u, so still
      // feasible, and Σu' + Σv over real columns equals the same objective (a free
      // private column has price 0, a taken one makes u' = P exactly).
      rowDuals[r] = res.rowDuals[i]! + vp;
    }
    for (let j = 0; j < nc; j++) colDuals[colGlobal[j]!] = res.colDuals[j]!;
  }
}

// The least float32 above 0: a candidate of cost 0 is marked by its negative.
const F32_TINY = 2 ** -149;

/** Marks pair `e` a candidate: its float32 cost (≥ 0) turns negative. */
function markCandidate(cost32: Float32Array, e: number): void {
  const c = cost32[e]!;
  cost32[e] = c > 0 ? -c : -F32_TINY;
}

/**
 * Candidate pairs per graph row: graph edge and exact cost, CSR. Room for every pair
 * of the graph is reserved up front; pages never written cost no memory, and the
 * rounds' additions are merged in place, with no second copy.
 */
class CandidateRows {
  readonly ptr: Int32Array;
  readonly edge: Int32Array;
  readonly cost: Float64Array;

  constructor(nRows: number, capacity: number) {
    this.ptr = new Int32Array(nRows + 1);
    this.edge = new Int32Array(capacity);
    this.cost = new Float64Array(capacity);
  }

  /** Adds `n` pairs (rows ascending), each row's new pairs after its old ones. */
  merge(rows: Int32Array, edges: Int32Array, costs: Float64Array, n: number): void {
    const { ptr, edge, cost } = this;
    // From the last row down, each row's block moves right by the pairs added at or
    // after it, so nothing is overwritten before it has moved.
    let q = n - 1;
    let shift = n;
    let oldEnd = ptr[ptr.length - 1]!;
    for (let r = ptr.length - 2; r >= 0 && shift > 0; r--) {
      const a = ptr[r]!;
      let m = 0;
      while (q - m >= 0 && rows[q - m] === r) m++;
      const to = a + shift - m;
      if (to !== a) {
        edge.copyWithin(to, a, oldEnd);
        cost.copyWithin(to, a, oldEnd);
      }
      for (let t = 0; t < m; t++) {
        edge[oldEnd + shift - m + t] = edges[q - m + 1 + t]!;
        cost[oldEnd + shift - m + t] = costs[q - m + 1 + t]!;
      }
      ptr[r + 1] = oldEnd + shift;
      q -= m;
      shift -= m;
      oldEnd = a;
    }
  }
}
