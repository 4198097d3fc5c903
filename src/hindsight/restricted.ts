/**
 * The restricted solves of the hindsight optimum: each component solved on its
 * candidate pairs alone, warm from its previous prices once it has been solved, its
 * certificate checked every time (the exactness proof rests on these prices). Pure:
 * the solver and the clock are injected.
 *
 * Each row's "unmatched" option is handed to the solver as an explicit private
 * column of cost P, so a warm start can say "this row stays unmatched" and the
 * solver only re-augments the rows that gained pairs. Prices come back in the form
 * of SPEC §5 (u ≤ P per row, v ≤ 0 per real column).
 */

import { pairflowError } from '../errors.js';
import { checkCertificate } from '../matching/certificate.js';
import type { SolveOptions, SolveResult, SparseInstance } from '../matching/types.js';
import type { CandidateRows, Components } from './candidates.js';

/** A sparse assignment solver with the contract of src/matching/types.ts. */
export type SparseSolver = (inst: SparseInstance, opts?: SolveOptions) => SolveResult;

export class RestrictedSolves {
  /** u per graph row (SPEC §5 form); P for rows outside every component. */
  readonly rowDuals: Float64Array;
  /** v per column; 0 for columns outside every component. */
  readonly colDuals: Float64Array;
  /** Column per graph row, -1 when unmatched. */
  readonly rowToCol: Int32Array;
  private readonly rawRowDuals: Float64Array;
  private readonly privateDuals: Float64Array;
  private readonly solved: Uint8Array;
  readonly dirty: Uint8Array;
  // The instances of every round, written over the same buffers (a component's
  // pairs: at most every candidate, plus one private column per row).
  private readonly instPtr: Int32Array;
  private instCol: Int32Array;
  private instCost: Float64Array;
  solves = 0;
  /** Warm solves whose prices failed the certificate and were redone cold. */
  warmRetries = 0;

  constructor(
    nRows: number,
    nCols: number,
    private readonly comps: Components,
    private readonly cand: CandidateRows,
    private readonly colIdx: Int32Array,
    private readonly P: number,
    private readonly solve: SparseSolver,
    private readonly now: () => number,
  ) {
    this.rowDuals = new Float64Array(nRows).fill(P);
    this.colDuals = new Float64Array(nCols);
    this.rowToCol = new Int32Array(nRows).fill(-1);
    this.rawRowDuals = new Float64Array(nRows);
    this.privateDuals = new Float64Array(nRows);
    this.solved = new Uint8Array(comps.count);
    this.dirty = new Uint8Array(comps.count).fill(1);
    this.instPtr = new Int32Array(nRows + 1);
    this.instCol = new Int32Array(0);
    this.instCost = new Float64Array(0);
  }

  /** Solves every dirty component (all of them the first time). */
  solveDirty(): void {
    for (let q = 0; q < this.comps.count; q++) {
      if (this.dirty[q] === 0) continue;
      this.solveComponent(q);
      this.dirty[q] = 0;
      this.solved[q] = 1;
    }
  }

  /** Marks the component of graph row r for a new solve. */
  touch(r: number): void {
    this.dirty[this.comps.rowComp[r]!] = 1;
  }

  private solveComponent(q: number): void {
    const { comps, cand, colIdx, P, rowToCol, rawRowDuals, privateDuals, rowDuals, colDuals } = this;
    const rows = comps.rows.subarray(comps.rowStart[q]!, comps.rowStart[q + 1]!);
    const nr = rows.length;
    const colGlobal = comps.cols.subarray(comps.colStart[q]!, comps.colStart[q + 1]!);
    const nc = colGlobal.length;
    const colLocal = comps.colLocal;
    const ptr = this.instPtr.subarray(0, nr + 1);
    for (let i = 0; i < nr; i++) {
      const r = rows[i]!;
      ptr[i + 1] = ptr[i]! + cand.ptr[r + 1]! - cand.ptr[r]! + 1;
    }
    const size = ptr[nr]!;
    if (size > this.instCol.length) {
      // Grown with head-room: later rounds add violators to the same rows.
      const cap = Math.max(size, Math.ceil(this.instCol.length * 1.5));
      this.instCol = new Int32Array(cap);
      this.instCost = new Float64Array(cap);
    }
    const cols = this.instCol.subarray(0, size);
    const costs = this.instCost.subarray(0, size);
    let at = 0;
    for (let i = 0; i < nr; i++) {
      const r = rows[i]!;
      const end = cand.ptr[r + 1]!;
      for (let t = cand.ptr[r]!; t < end; t++) {
        cols[at] = colLocal[colIdx[cand.edge[t]!]!]!;
        costs[at] = cand.cost[t]!;
        at++;
      }
      cols[at] = nc + i;
      costs[at] = P;
      at++;
    }
    const inst: SparseInstance = { nRows: nr, nCols: nc + nr, rowPtr: ptr, colIdx: cols, cost: costs, unmatchedCost: null };
    let opts: SolveOptions;
    if (this.solved[q] === 1) {
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
      opts = { warm: { rowPrices, colPrices, rowToCol: prevMatch }, now: this.now };
    } else {
      opts = { now: this.now };
    }
    let res = this.solve(inst, opts);
    this.solves++;
    // A warm start that fails its certificate is retried cold; a cold solve that
    // fails it is a solver bug.
    if (!checkCertificate(inst, res).ok) {
      if (opts.warm !== undefined) {
        this.warmRetries++;
        res = this.solve(inst, { now: this.now });
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
