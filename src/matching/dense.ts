import type { DenseInstance, SolveOptions, SolveResult } from './types.js';
import { validateDense, validateWarm } from './validate.js';
import { defaultNow, finishResult, Sum } from './result.js';
import { infeasibleRow, mustMatchAll, shiftToNonPositive, solveSparseChecked, solveSparseCore, unreachableColumn } from './sparse.js';
import { PairflowError } from '../errors.js';
import type { SparseInstance, WarmStart } from './types.js';

/*
 * The dense twin of sparse.ts: the same invariants (see there), but each search
 * scans whole rows against a shrinking list of unsettled columns instead of a heap,
 * which is what pays off when every pair is allowed. A pair is allowed iff its cost
 * is < +Infinity (NaN compares false everywhere, so it is skipped the same way).
 */

const PRIVATE = -2;
const NONE = -1;

export function solveDenseCore(inst: DenseInstance, opts: SolveOptions): SolveResult {
  const now = opts.now ?? defaultNow;
  const t0 = now();
  validateDense(inst);
  validateWarm(opts.warm, inst.nRows, inst.nCols);
  const k = candidateCount(inst.nCols);
  const strategy = opts.strategy ?? 'auto';
  if (strategy === 'candidates' || (strategy === 'auto' && inst.nRows * inst.nCols >= 250_000 && 4 * k <= inst.nCols)) {
    const res = solveByCandidates(inst, opts, k);
    if (res !== null) {
      res.stats.ms = now() - t0;
      return res;
    }
  }
  return solveDenseFull(inst, opts, now, t0);
}

function solveDenseFull(inst: DenseInstance, opts: SolveOptions, now: () => number, t0: number): SolveResult {
  // A warm start runs on the allowed cells as CSR: the warm start of warm.ts needs rows
  // by column, which the sparse core builds, and a warm re-solve searches little.
  if (opts.warm?.rowToCol !== undefined) return solveSparseChecked(denseToCsr(inst), opts, now, t0);

  const { nRows, nCols, cost } = inst;
  const delta = inst.unmatchedCost ?? null;

  const v = new Float64Array(nCols);
  const u = new Float64Array(nRows);
  const rowToCol = new Int32Array(nRows).fill(NONE);
  const colToRow = new Int32Array(nCols).fill(NONE);
  let scannedPairs = 0;
  let augmentations = 0;

  let j = 0;
  let r = 0;
  let x = 0;
  let base = 0;

  // ---- a perfect assignment starts from column reduction and reduction transfer
  // (see sparse.ts for why that is allowed there).
  const perfect = nRows === nCols && nRows > 0 && mustMatchAll(delta);
  if (perfect) {
    const colArg = new Int32Array(nCols).fill(NONE);
    v.fill(Infinity);
    for (r = 0; r < nRows; r++) {
      base = r * nCols;
      for (j = 0; j < nCols; j++) {
        x = cost[base + j]!;
        if (x < v[j]!) {
          v[j] = x;
          colArg[j] = r;
        }
      }
    }
    scannedPairs += nRows * nCols;
    const hits = new Int32Array(nRows);
    for (j = nCols - 1; j >= 0; j--) {
      const i = colArg[j]!;
      if (i === NONE) throw unreachableColumn(j);
      if (hits[i]!++ === 0) {
        rowToCol[i] = j;
        colToRow[j] = i;
      } else if (v[j]! < v[rowToCol[i]!]!) {
        colToRow[rowToCol[i]!] = NONE;
        rowToCol[i] = j;
        colToRow[j] = i;
      }
    }
    for (r = 0; r < nRows; r++) {
      const j1 = rowToCol[r]!;
      u[r] = 0;
      if (j1 === NONE || hits[r] !== 1) continue;
      base = r * nCols;
      let m = Infinity;
      for (j = 0; j < nCols; j++) {
        if (j === j1) continue;
        x = cost[base + j]! - v[j]!;
        if (x < m) m = x;
      }
      scannedPairs += nCols;
      if (m < Infinity) {
        v[j1] = v[j1]! - m;
        u[r] = m;
      }
    }
  }

  let freeRows = new Int32Array(nRows);
  let nFree = 0;
  for (r = 0; r < nRows; r++) if (rowToCol[r] === NONE) freeRows[nFree++] = r;
  let nextRows = new Int32Array(nRows);
  for (let pass = 0; pass < 2 && nFree > 0; pass++) {
    let nNext = 0;
    let k = 0;
    let budget = nRows;
    while (k < nFree) {
      r = freeRows[k++]!;
      let u1 = Infinity;
      let j1 = NONE;
      if (delta !== null && delta[r]! < Infinity) {
        u1 = delta[r]!;
        j1 = PRIVATE;
      }
      let u2 = Infinity;
      let j2 = NONE;
      base = r * nCols;
      for (j = 0; j < nCols; j++) {
        x = cost[base + j]! - v[j]!;
        if (x < u2) {
          if (x < u1) {
            u2 = u1;
            j2 = j1;
            u1 = x;
            j1 = j;
          } else {
            u2 = x;
            j2 = j;
          }
        }
      }
      scannedPairs += nCols;
      if (j1 === NONE) throw infeasibleRow(r);
      if (j1 === PRIVATE) {
        u[r] = u1;
        continue;
      }
      let target = j1;
      let ur = u1;
      if (u1 < u2) {
        if (u2 < Infinity) {
          v[j1] = v[j1]! - (u2 - u1);
          ur = u2;
        }
      } else if (colToRow[j1] !== NONE && j2 !== NONE && (j2 === PRIVATE || colToRow[j2] === NONE)) {
        target = j2;
      }
      if (target === PRIVATE) {
        u[r] = ur;
        continue;
      }
      const prev = colToRow[target]!;
      colToRow[target] = r;
      rowToCol[r] = target;
      u[r] = ur;
      if (prev !== NONE) {
        rowToCol[prev] = NONE;
        if (u1 < u2 && budget > 0) {
          budget--;
          freeRows[--k] = prev;
        } else {
          nextRows[nNext++] = prev;
        }
      }
    }
    const tmp = freeRows;
    freeRows = nextRows;
    nextRows = tmp;
    nFree = nNext;
  }

  const searchedRows = nFree;
  if (nFree > 0) {
    const dist = new Float64Array(nCols);
    const pred = new Int32Array(nCols);
    const remaining = new Int32Array(nCols);
    const done = new Int32Array(nCols);

    for (let f = 0; f < nFree; f++) {
      const r0 = freeRows[f]!;
      augmentations++;
      dist.fill(Infinity);
      for (j = 0; j < nCols; j++) remaining[j] = j;
      let nRem = nCols;
      let nDone = 0;
      let bestPriv = Infinity;
      let privRow = NONE;
      let sink = NONE;
      let minVal = 0;
      let i = r0;
      let ui = 0;
      base = 0;
      for (;;) {
        if (delta !== null) {
          x = base + delta[i]! - ui;
          if (x < bestPriv) {
            bestPriv = x;
            privRow = i;
          }
        }
        const at = relaxRow(cost, i * nCols, base - ui, i, v, dist, pred, remaining, nRem, colToRow);
        const lowest = at === NONE ? Infinity : dist[remaining[at]!]!;
        scannedPairs += nRem;
        if (at === NONE || lowest > bestPriv) {
          if (bestPriv === Infinity) throw infeasibleRow(r0);
          minVal = bestPriv;
          break;
        }
        j = remaining[at]!;
        if (colToRow[j] === NONE) {
          sink = j;
          minVal = lowest;
          break;
        }
        remaining[at] = remaining[--nRem]!;
        done[nDone++] = j;
        i = colToRow[j]!;
        base = lowest;
        ui = u[i]!;
      }

      for (let t = 0; t < nDone; t++) {
        j = done[t]!;
        const d = minVal - dist[j]!;
        v[j] = v[j]! - d;
        const ri = colToRow[j]!;
        u[ri] = u[ri]! + d;
      }
      u[r0] = minVal;

      if (sink === NONE) {
        j = privRow === r0 ? NONE : rowToCol[privRow]!;
        rowToCol[privRow] = NONE;
        u[privRow] = delta![privRow]!;
        if (j !== NONE) colToRow[j] = NONE;
        sink = j;
      }
      j = sink;
      while (j !== NONE) {
        i = pred[j]!;
        const prevCol = i === r0 ? NONE : rowToCol[i]!;
        rowToCol[i] = j;
        colToRow[j] = i;
        j = prevCol;
      }
    }
  }

  if (perfect) shiftToNonPositive(v);
  const primal = new Sum();
  for (r = 0; r < nRows; r++) {
    j = rowToCol[r]!;
    if (j === NONE) {
      u[r] = delta![r]!;
      primal.add(u[r]!);
    } else {
      const c = cost[r * nCols + j]!;
      u[r] = c - v[j]!;
      primal.add(c);
    }
  }
  return finishResult(primal.value, rowToCol, colToRow, u, v, {
    augmentations,
    scannedPairs,
    ms: now() - t0,
    warm: false,
    warmPairsKept: 0,
    searchedRows,
  });
}

/**
 * One step of the dense search: relaxes row `i` (at distance offset `off`) against
 * the unsettled columns and returns the position in `remaining` of the closest one,
 * preferring a free column on ties (it ends the search sooner), or NONE. Kept small
 * and separate so the engine optimises this hot loop on its own.
 */
function relaxRow(
  cost: Float64Array,
  rowBase: number,
  off: number,
  i: number,
  v: Float64Array,
  dist: Float64Array,
  pred: Int32Array,
  remaining: Int32Array,
  nRem: number,
  colToRow: Int32Array,
): number {
  let lowest = Infinity;
  let at = NONE;
  for (let t = 0; t < nRem; t++) {
    const j = remaining[t]!;
    const x = off + cost[rowBase + j]! - v[j]!;
    let s = dist[j]!;
    if (x < s) {
      pred[j] = i;
      dist[j] = x;
      s = x;
    }
    if (s <= lowest && (s < lowest || (s < Infinity && colToRow[j] === NONE))) {
      lowest = s;
      at = t;
    }
  }
  return at;
}

/** Candidate pairs per row for the candidates strategy: enough that few pairs price out. */
function candidateCount(nCols: number): number {
  return Math.min(nCols, Math.max(8, Math.ceil(2.5 * Math.log2(nCols + 1))));
}

/**
 * Exact dense solve on a sparse subset: each row's k cheapest pairs (plus its warm
 * pair) are solved by the sparse core; then every pair of the matrix is priced with
 * the duals found, and any with negative reduced cost joins its row's candidates for
 * a warm re-solve. When none prices out, the duals certify the dense instance too:
 * the constraints are the same, only checked on more pairs. Returns null when the
 * subset cannot be matched (the caller then searches the full matrix).
 */
function solveByCandidates(inst: DenseInstance, opts: SolveOptions, k: number): SolveResult | null {
  const { nRows, nCols, cost } = inst;
  // per-row candidate lists, grown in place: row r owns slots [r * cap, r * cap + count[r])
  let cap = k + 1;
  let slots = new Int32Array(nRows * cap);
  const count = new Int32Array(nRows);
  const topKey = new Float64Array(k);
  const topCol = new Int32Array(k);
  let scanned = 0;
  const wPair = opts.warm?.rowToCol;
  let maxAbs = 0;
  for (let r = 0; r < nRows; r++) {
    const base = r * nCols;
    let n = 0;
    for (let j = 0; j < nCols; j++) {
      const c = cost[base + j]!;
      if (!(c < Infinity)) continue;
      if (c > maxAbs) maxAbs = c;
      else if (-c > maxAbs) maxAbs = -c;
      if (n === k && c >= topKey[k - 1]!) continue;
      let p = n < k ? n++ : k - 1;
      while (p > 0 && topKey[p - 1]! > c) {
        topKey[p] = topKey[p - 1]!;
        topCol[p] = topCol[p - 1]!;
        p--;
      }
      topKey[p] = c;
      topCol[p] = j;
    }
    const at = r * cap;
    for (let t = 0; t < n; t++) slots[at + t] = topCol[t]!;
    count[r] = n;
    if (wPair !== undefined) {
      const wj = wPair[r]!;
      if (wj >= 0 && wj < nCols && cost[base + wj]! < Infinity) {
        let seen = false;
        for (let t = 0; t < n; t++) if (topCol[t] === wj) seen = true;
        if (!seen) slots[at + count[r]!++] = wj;
      }
    }
  }
  scanned += nRows * nCols;

  let warm: WarmStart | undefined = opts.warm;
  let augmentations = 0;
  const extra = new Int32Array(nRows);
  for (let round = 0; round < 20; round++) {
    const sub = packCandidates(inst, slots, cap, count);
    let res: SolveResult;
    try {
      res = solveSparseCore(sub, { ...(warm !== undefined ? { warm } : {}), ...(opts.now !== undefined ? { now: opts.now } : {}), strategy: 'full' });
    } catch (err) {
      if (err instanceof PairflowError && err.code === 'PAIRFLOW_ERR_SOLVER_INFEASIBLE') return null;
      throw err;
    }
    augmentations += res.stats.augmentations;
    scanned += res.stats.scannedPairs;
    // price every pair; a pair may miss by rounding noise far below the certificate's tolerance
    const u = res.rowDuals;
    const v = res.colDuals;
    let scale = maxAbs;
    for (let r = 0; r < nRows; r++) scale = Math.max(scale, Math.abs(u[r]!));
    for (let j = 0; j < nCols; j++) scale = Math.max(scale, Math.abs(v[j]!));
    const slack = -1e-11 * (scale > 0 ? scale : 1);
    let violations = 0;
    extra.fill(0);
    for (let r = 0; r < nRows; r++) {
      const base = r * nCols;
      const ur = u[r]!;
      for (let j = 0; j < nCols; j++) {
        if (cost[base + j]! - ur - v[j]! < slack) {
          extra[r]!++;
          violations++;
        }
      }
    }
    scanned += nRows * nCols;
    if (violations === 0) {
      return {
        ...res,
        stats: { ...res.stats, augmentations, scannedPairs: scanned, warm: opts.warm !== undefined && res.stats.warm, ms: 0 },
      };
    }
    // grow the lists and add the pairs that priced out (they are not candidates yet:
    // a candidate never prices out after a solve)
    let need = 0;
    for (let r = 0; r < nRows; r++) need = Math.max(need, count[r]! + extra[r]!);
    if (need > cap) {
      const nextCap = Math.max(need, 2 * cap);
      const grown = new Int32Array(nRows * nextCap);
      for (let r = 0; r < nRows; r++) grown.set(slots.subarray(r * cap, r * cap + count[r]!), r * nextCap);
      slots = grown;
      cap = nextCap;
    }
    for (let r = 0; r < nRows; r++) {
      if (extra[r] === 0) continue;
      const base = r * nCols;
      const ur = u[r]!;
      for (let j = 0; j < nCols; j++) {
        if (cost[base + j]! - ur - v[j]! < slack) slots[r * cap + count[r]!++] = j;
      }
    }
    scanned += nRows * nCols;
    warm = { colPrices: v, rowPrices: u, rowToCol: res.rowToCol };
  }
  return null;
}

function packCandidates(inst: DenseInstance, slots: Int32Array, cap: number, count: Int32Array): SparseInstance {
  const { nRows, nCols, cost } = inst;
  const rowPtr = new Int32Array(nRows + 1);
  for (let r = 0; r < nRows; r++) rowPtr[r + 1] = rowPtr[r]! + count[r]!;
  const nnz = rowPtr[nRows]!;
  const colIdx = new Int32Array(nnz);
  const sub = new Float64Array(nnz);
  for (let r = 0; r < nRows; r++) {
    let e = rowPtr[r]!;
    const at = r * cap;
    for (let t = 0; t < count[r]!; t++, e++) {
      const j = slots[at + t]!;
      colIdx[e] = j;
      sub[e] = cost[r * nCols + j]!;
    }
  }
  return { nRows, nCols, rowPtr, colIdx, cost: sub, unmatchedCost: inst.unmatchedCost ?? null };
}

/** The allowed cells of a dense matrix (cost < +Infinity; NaN is not allowed) as CSR. */
function denseToCsr(inst: DenseInstance): SparseInstance {
  const { nRows, nCols, cost } = inst;
  const rowPtr = new Int32Array(nRows + 1);
  let nnz = 0;
  for (let k = 0; k < cost.length; k++) if (cost[k]! < Infinity) nnz++;
  const colIdx = new Int32Array(nnz);
  const sub = new Float64Array(nnz);
  let e = 0;
  for (let r = 0; r < nRows; r++) {
    const base = r * nCols;
    for (let j = 0; j < nCols; j++) {
      const c = cost[base + j]!;
      if (!(c < Infinity)) continue;
      colIdx[e] = j;
      sub[e++] = c;
    }
    rowPtr[r + 1] = e;
  }
  return { nRows, nCols, rowPtr, colIdx, cost: sub, unmatchedCost: inst.unmatchedCost ?? null };
}
