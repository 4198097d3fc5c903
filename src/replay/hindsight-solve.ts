/**
 * The exact hindsight optimum of one market (SPEC §4) on packed occurrences. Pure:
 * typed arrays in and out, the solver and the clock injected, so the same code runs
 * in this thread and in a worker.
 *
 * The full allowed graph is built once (time sweep + grid, see hindsight-graph.ts).
 * It splits into connected components, solved independently. Each component is first
 * solved on a small candidate set (the k cheapest pairs of each demand); a pricing
 * pass then computes the reduced cost `c − u_d − v_s` of EVERY allowed pair under the
 * solver's dual prices. Pairs with negative reduced cost join the candidates and the
 * components they touch are re-solved, warm from the previous prices, until no pair
 * prices out. The final prices are then feasible for the LP over all allowed pairs and
 * their objective equals the primal cost (SPEC §5), which proves the optimum exact.
 *
 * Pairs costing at least P are never needed: with `u_d ≤ P` and `v_s ≤ 0` their
 * reduced cost is ≥ 0 under any certified prices, and swapping such a pair for an
 * unmatched demand never costs more. They stay in the graph for the match ceiling.
 */

import { maxCardinalityMatching } from '../matching/cardinality.js';
import { checkCertificate } from '../matching/certificate.js';
import { pairflowError } from '../errors.js';
import type { SolveOptions, SolveResult, SparseInstance } from '../matching/types.js';
import type { PairflowConfig } from '../model.js';
import { buildAllowedGraph, type AllowedGraph, type PackedMarket } from './hindsight-graph.js';

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
  /** Allowed pairs; every pricing round prices each of them. */
  pairsPriced: number;
  /** Pairs in the final restricted solve (candidates plus the violators added). */
  pairsSolved: number;
  /** Pricing passes over all allowed pairs (the last one finds no violator). */
  pricingRounds: number;
  /** Maximum-cardinality matching of the same allowed graph: no policy matches more. */
  ceiling: number;
  /** Wall time by the injected clock. */
  ms: number;
}

/** Per-demand figures, in the market's occurrence order. */
export interface HindsightDemandCosts {
  /** Event time of each demand occurrence. */
  demandT: Float64Array;
  /** Its hindsight cost: the matched pair's cost, or P when unmatched. */
  demandCost: Float64Array;
}

/** A sparse assignment solver with the contract of src/matching/types.ts. */
export type SparseSolver = (inst: SparseInstance, opts?: SolveOptions) => SolveResult;

/** Options of the hindsight solve of one market. */
export interface HindsightMarketOptions {
  /**
   * Candidate pairs per demand in the first restricted solve (its k cheapest). Any
   * k ≥ 1 gives the same optimum; a small k means more pricing rounds.
   * @default 6
   */
  candidatesPerDemand?: number;
  /** Clock for `ms`. @default performance.now */
  now?: () => number;
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
}

/** @default candidatesPerDemand */
export const DEFAULT_CANDIDATES_PER_DEMAND = 6;

// A non-candidate pair prices out below this (relative to its cost): well under the
// certificate's 1e-9 yet above the rounding of duals built from sums of costs.
const PRICE_TOL = 1e-11;

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

/** Marks, per row, its k cheapest pairs that cost less than `limit`. */
function markCheapest(g: AllowedGraph, k: number, limit: number, inCand: Uint8Array): void {
  const scratch: number[] = [];
  for (let r = 0; r < g.nRows; r++) {
    const start = g.rowPtr[r]!;
    const end = g.rowPtr[r + 1]!;
    scratch.length = 0;
    for (let e = start; e < end; e++) if (g.cost[e]! < limit) scratch.push(g.cost[e]!);
    if (scratch.length <= k) {
      for (let e = start; e < end; e++) if (g.cost[e]! < limit) inCand[e] = 1;
      continue;
    }
    scratch.sort((a, b) => a - b);
    const cut = scratch[k - 1]!;
    let taken = 0;
    for (let e = start; e < end && taken < k; e++) {
      if (g.cost[e]! < cut) {
        inCand[e] = 1;
        taken++;
      }
    }
    for (let e = start; e < end && taken < k; e++) {
      if (g.cost[e]! === cut) {
        inCand[e] = 1;
        taken++;
      }
    }
  }
}

/**
 * Solves one packed market exactly. `solve` is the sparse assignment solver (the
 * caller passes `solveSparse`); it is injected so this module stays free of imports
 * a worker would not need.
 */
export function solvePackedMarket(
  market: string,
  m: PackedMarket,
  config: PairflowConfig,
  solve: SparseSolver,
  opts: HindsightMarketOptions = {},
): HindsightMarketResult & HindsightDemandCosts & { detail: HindsightMarketDetail } {
  const now = opts.now ?? (() => performance.now());
  const k = Math.max(1, Math.floor(opts.candidatesPerDemand ?? DEFAULT_CANDIDATES_PER_DEMAND));
  const t0 = now();
  const P = config.abandonPenalty;
  const g = buildAllowedGraph(m, config);
  const { nRows, nCols, rowPtr, colIdx, cost } = g;
  const nnz = colIdx.length;

  // Connected components over the pairs that can matter (cost < P).
  const parent = new Int32Array(nRows + nCols);
  for (let i = 0; i < parent.length; i++) parent[i] = i;
  for (let r = 0; r < nRows; r++) {
    for (let e = rowPtr[r]!; e < rowPtr[r + 1]!; e++) {
      if (!(cost[e]! < P)) continue;
      const a = find(parent, r);
      const b = find(parent, nRows + colIdx[e]!);
      if (a !== b) parent[a < b ? b : a] = a < b ? a : b;
    }
  }
  // Dense component ids for components holding at least one useful pair; rows and
  // columns keep their global order inside a component (rows are in time order, so
  // augmenting paths stay local).
  const compOfRoot = new Int32Array(nRows + nCols).fill(-1);
  const rowComp = new Int32Array(nRows).fill(-1);
  const colComp = new Int32Array(nCols).fill(-1);
  let nComp = 0;
  for (let r = 0; r < nRows; r++) {
    let useful = false;
    for (let e = rowPtr[r]!; e < rowPtr[r + 1]!; e++) {
      if (cost[e]! < P) {
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

  const inCand = new Uint8Array(nnz);
  markCheapest(g, k, P, inCand);

  // Prices and assignment of the whole market; rows with no useful pair stay
  // unmatched at u = P, columns outside every component keep v = 0.
  const rowDuals = new Float64Array(nRows).fill(P);
  const colDuals = new Float64Array(nCols);
  const rowToCol = new Int32Array(nRows).fill(-1);
  const solved = new Uint8Array(nComp);
  const dirty = new Uint8Array(nComp).fill(1);
  let pricingRounds = 0;
  let warmRetries = 0;
  let solves = 0;

  for (;;) {
    for (let q = 0; q < nComp; q++) {
      if (dirty[q] === 0) continue;
      solveComponent(q);
      dirty[q] = 0;
      solved[q] = 1;
    }
    pricingRounds++;
    let violators = 0;
    for (let r = 0; r < nRows; r++) {
      const u = rowDuals[r]!;
      for (let e = rowPtr[r]!; e < rowPtr[r + 1]!; e++) {
        if (inCand[e] === 1) continue;
        const c = cost[e]!;
        if (c - u - colDuals[colIdx[e]!]! < -PRICE_TOL * (1 + Math.abs(c))) {
          inCand[e] = 1;
          dirty[rowComp[r]!] = 1;
          violators++;
        }
      }
    }
    if (violators === 0) break;
  }

  let pairsSolved = 0;
  for (let e = 0; e < nnz; e++) pairsSolved += inCand[e]!;

  const demandCost = new Float64Array(nRows).fill(P);
  let total = 0;
  let matched = 0;
  for (let r = 0; r < nRows; r++) {
    const c = rowToCol[r]!;
    if (c >= 0) {
      for (let e = rowPtr[r]!; e < rowPtr[r + 1]!; e++) {
        if (colIdx[e] === c) {
          demandCost[r] = cost[e]!;
          break;
        }
      }
      matched++;
    }
    total += demandCost[r]!;
  }
  const ceiling = maxCardinalityMatching(g).size;

  return {
    market,
    demandUnits: nRows,
    supplyUnits: nCols,
    cost: total,
    matched,
    abandoned: nRows - matched,
    pairsPriced: nnz,
    pairsSolved,
    pricingRounds,
    ceiling,
    ms: now() - t0,
    demandT: m.demandT.slice(),
    demandCost,
    detail: { graph: g, rowDuals, colDuals, rowToCol, solves, warmRetries },
  };

  function solveComponent(q: number): void {
    const rows = compRows.subarray(compRowStart[q]!, compRowStart[q + 1]!);
    const nr = rows.length;
    const nc = compColCount[q + 1]!;
    const ptr = new Int32Array(nr + 1);
    for (let i = 0; i < nr; i++) {
      const r = rows[i]!;
      let deg = 0;
      for (let e = rowPtr[r]!; e < rowPtr[r + 1]!; e++) deg += inCand[e]!;
      ptr[i + 1] = ptr[i]! + deg;
    }
    const cols = new Int32Array(ptr[nr]!);
    const costs = new Float64Array(ptr[nr]!);
    const colGlobal = new Int32Array(nc);
    let at = 0;
    for (let i = 0; i < nr; i++) {
      const r = rows[i]!;
      for (let e = rowPtr[r]!; e < rowPtr[r + 1]!; e++) {
        if (inCand[e] === 0) continue;
        const c = colIdx[e]!;
        cols[at] = colLocal[c]!;
        costs[at] = cost[e]!;
        at++;
      }
    }
    // Every column of the component is reached by a useful pair of one of its rows,
    // candidate or not.
    for (let i = 0; i < nr; i++) {
      const r = rows[i]!;
      for (let e = rowPtr[r]!; e < rowPtr[r + 1]!; e++) {
        const c = colIdx[e]!;
        if (colComp[c] === q) colGlobal[colLocal[c]!] = c;
      }
    }
    const inst: SparseInstance = {
      nRows: nr,
      nCols: nc,
      rowPtr: ptr,
      colIdx: cols,
      cost: costs,
      unmatchedCost: new Float64Array(nr).fill(P),
    };
    let solveOpts: SolveOptions;
    if (solved[q] === 1) {
      const rowPrices = new Float64Array(nr);
      const prevMatch = new Int32Array(nr);
      for (let i = 0; i < nr; i++) {
        const r = rows[i]!;
        rowPrices[i] = rowDuals[r]!;
        const c = rowToCol[r]!;
        prevMatch[i] = c >= 0 ? colLocal[c]! : -1;
      }
      const colPrices = new Float64Array(nc);
      for (let j = 0; j < nc; j++) colPrices[j] = colDuals[colGlobal[j]!]!;
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
          detail: `hindsight market ${market}: solver prices do not certify optimality: ${rep.problems.slice(0, 3).join('; ')}`,
        });
      }
    }
    for (let i = 0; i < nr; i++) {
      const r = rows[i]!;
      rowDuals[r] = res.rowDuals[i]!;
      const c = res.rowToCol[i]!;
      rowToCol[r] = c >= 0 ? colGlobal[c]! : -1;
    }
    for (let j = 0; j < nc; j++) colDuals[colGlobal[j]!] = res.colDuals[j]!;
  }
}
