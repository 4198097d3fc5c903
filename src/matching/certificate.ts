import type { DenseInstance, SolveResult, SparseInstance } from './types.js';
import { Sum } from './result.js';

/** What {@link checkCertificate} found. */
export interface CertificateReport {
  /** True iff the pairs are a feasible assignment and the duals prove it optimal (SPEC §5). */
  readonly ok: boolean;
  /** Σ matched costs + Σ δ over unmatched rows, recomputed from the instance. */
  readonly primalCost: number;
  /** Σ rowDuals + Σ colDuals. */
  readonly dualObjective: number;
  /** Largest violation of a dual constraint (pair, δ bound or column sign); 0 when none. */
  readonly maxViolation: number;
  /** Human-readable findings, at most {@link MAX_PROBLEMS} of them; empty when ok. */
  readonly problems: string[];
}

/** Options of {@link checkCertificate}. */
export interface CertificateOptions {
  /**
   * Relative tolerance, scaled by the largest magnitude among costs, δ and duals
   * (1 when all are 0) for each constraint, and by max(|primal|, that magnitude)
   * for the duality gap. @default 1e-9
   */
  readonly relTol?: number;
  /**
   * Check a result of `maximizeSparse`/`maximizeDense`: `cost` holds weights,
   * `unmatchedCost` holds values, and the duals must satisfy p + q ≥ w, p ≥ ω,
   * q ≥ 0, Σp + Σq = the maximum. @default false
   */
  readonly maximize?: boolean;
}

const MAX_PROBLEMS = 20;

function isDense(inst: SparseInstance | DenseInstance): inst is DenseInstance {
  return !('rowPtr' in inst);
}

/**
 * Verifies an optimality certificate (SPEC §5) in O(allowed pairs): the pairs form a
 * feasible assignment, `result.cost` is its cost, `u_d + v_s ≤ c_sd` on every allowed
 * pair, `u_d ≤ δ_d`, `v_s ≤ 0`, and Σu + Σv equals the primal cost (LP duality /
 * Egerváry's theorem). The instance is assumed valid (as the solvers check it).
 * @example
 * const res = solveSparse(inst);
 * const rep = checkCertificate(inst, res);
 * if (!rep.ok) throw new Error(rep.problems.join('; '));
 */
export function checkCertificate(
  inst: SparseInstance | DenseInstance,
  result: SolveResult,
  opts: CertificateOptions = {},
): CertificateReport {
  const relTol = opts.relTol ?? 1e-9;
  const sign = opts.maximize === true ? -1 : 1;
  const { nRows, nCols } = inst;
  const delta = inst.unmatchedCost ?? null;
  const { rowToCol, colToRow, rowDuals: u, colDuals: v } = result;
  const problems: string[] = [];
  const note = (p: string): void => {
    if (problems.length < MAX_PROBLEMS) problems.push(p);
  };
  const fail = (p: string): CertificateReport => ({
    ok: false,
    primalCost: NaN,
    dualObjective: NaN,
    maxViolation: NaN,
    problems: [p],
  });
  if (rowToCol.length !== nRows || u.length !== nRows) return fail(`rowToCol/rowDuals: expected length nRows = ${nRows}`);
  if (colToRow.length !== nCols || v.length !== nCols) return fail(`colToRow/colDuals: expected length nCols = ${nCols}`);

  const dense = isDense(inst);
  const pairCost = (r: number, j: number): number => {
    if (dense) {
      const c = inst.cost[r * nCols + j]!;
      return c < Infinity ? c : NaN;
    }
    const s = inst as SparseInstance;
    const end = s.rowPtr[r + 1]!;
    for (let e = s.rowPtr[r]!; e < end; e++) if (s.colIdx[e] === j) return s.cost[e]!;
    return NaN;
  };

  // magnitude scale for the tolerances: relative to the numbers involved, so a
  // certificate of tiny costs is checked as strictly as one of large costs
  let scale = 0;
  for (let r = 0; r < nRows; r++) scale = Math.max(scale, Math.abs(u[r]!));
  for (let j = 0; j < nCols; j++) scale = Math.max(scale, Math.abs(v[j]!));
  if (delta !== null) for (let r = 0; r < nRows; r++) if (delta[r]! < Infinity) scale = Math.max(scale, Math.abs(delta[r]!));
  const cs = inst.cost;
  for (let k = 0; k < cs.length; k++) if (cs[k]! < Infinity) scale = Math.max(scale, Math.abs(cs[k]!));
  if (scale === 0) scale = 1;
  const tol = relTol * scale;

  // primal feasibility and cost
  const primal = new Sum();
  for (let r = 0; r < nRows; r++) {
    const j = rowToCol[r]!;
    if (j === -1) {
      if (delta === null || !(delta[r]! < Infinity)) note(`row ${r} is unmatched but has no unmatched cost`);
      else primal.add(delta[r]!);
      continue;
    }
    if (!(j >= 0 && j < nCols)) {
      note(`rowToCol[${r}] = ${j} is not a column`);
      continue;
    }
    if (colToRow[j] !== r) note(`rowToCol[${r}] = ${j} but colToRow[${j}] = ${colToRow[j]}`);
    const c = pairCost(r, j);
    if (Number.isNaN(c)) note(`pair (row ${r}, column ${j}) is not allowed`);
    else primal.add(c);
  }
  for (let j = 0; j < nCols; j++) {
    const r = colToRow[j]!;
    if (r !== -1 && !(r >= 0 && r < nRows && rowToCol[r] === j)) note(`colToRow[${j}] = ${r} but that row is not on column ${j}`);
  }
  const primalCost = primal.value;
  const costScale = Math.max(Math.abs(primalCost), scale);
  if (!(Math.abs(result.cost - primalCost) <= relTol * costScale)) {
    note(`result.cost = ${result.cost} but the pairs cost ${primalCost}`);
  }

  // dual feasibility
  let maxViolation = 0;
  const dual = new Sum();
  let worst = '';
  const see = (viol: number, what: () => string): void => {
    if (!(viol <= maxViolation)) {
      maxViolation = Number.isNaN(viol) ? Infinity : viol;
      if (!(viol <= tol)) worst = what();
    }
  };
  for (let r = 0; r < nRows; r++) {
    const ur = u[r]!;
    dual.add(ur);
    if (!Number.isFinite(ur)) see(Infinity, () => `row dual ${r} = ${ur} is not finite`);
    if (delta !== null && delta[r]! < Infinity) {
      see(sign * (ur - delta[r]!), () => `row ${r}: dual ${ur} is on the wrong side of its unmatched cost ${delta[r]}`);
    }
  }
  for (let j = 0; j < nCols; j++) {
    const vj = v[j]!;
    dual.add(vj);
    if (!Number.isFinite(vj)) see(Infinity, () => `column dual ${j} = ${vj} is not finite`);
    see(sign * vj, () => `column ${j}: dual ${vj} has the wrong sign`);
  }
  if (dense) {
    const c = inst.cost;
    for (let r = 0; r < nRows; r++) {
      const ur = u[r]!;
      const b = r * nCols;
      for (let j = 0; j < nCols; j++) {
        const cij = c[b + j]!;
        if (!(cij < Infinity)) continue;
        const viol = sign * (ur + v[j]! - cij);
        if (viol > maxViolation) see(viol, () => `pair (row ${r}, column ${j}): u + v = ${ur + v[j]!} against cost ${cij}`);
      }
    }
  } else {
    const s = inst as SparseInstance;
    for (let r = 0; r < nRows; r++) {
      const ur = u[r]!;
      const end = s.rowPtr[r + 1]!;
      for (let e = s.rowPtr[r]!; e < end; e++) {
        const j = s.colIdx[e]!;
        const viol = sign * (ur + v[j]! - s.cost[e]!);
        if (viol > maxViolation) see(viol, () => `pair (row ${r}, column ${j}): u + v = ${ur + v[j]!} against cost ${s.cost[e]}`);
      }
    }
  }
  if (!(maxViolation <= tol)) note(`dual infeasible by ${maxViolation} (tolerance ${tol}): ${worst}`);
  const dualObjective = dual.value;
  if (!(Math.abs(dualObjective - primalCost) <= relTol * costScale)) {
    note(`duality gap: Σu + Σv = ${dualObjective} but the primal cost is ${primalCost}`);
  }
  return { ok: problems.length === 0, primalCost, dualObjective, maxViolation, problems };
}
