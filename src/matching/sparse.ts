import { pairflowError } from '../errors.js';
import type { SolveOptions, SolveResult, SparseInstance } from './types.js';
import { validateSparse, validateWarm } from './validate.js';
import { defaultNow, finishResult, Sum } from './result.js';

/*
 * Shortest augmenting paths with dual prices (the Jonker–Volgenant family) on a CSR
 * instance. Invariants between augmentations, which together make the final state an
 * optimality certificate for SPEC §5:
 *   - every allowed pair has reduced cost c − u − v ≥ 0 for matched rows;
 *   - a matched pair is tight;
 *   - v ≤ 0 everywhere, and a column that is still free has v = 0 (free columns are
 *     only ever popped as the sink, so they never move);
 *   - each row's "unmatched" option is a private column of price 0 and cost δ; it is
 *     never materialised: Dijkstra keeps the best one reached as a candidate sink.
 * A row that ends on its private column can never be reached again (only that row is
 * adjacent to it), so it is settled for good.
 */

const PRIVATE = -2;
const NONE = -1;

export function solveSparseCore(inst: SparseInstance, opts: SolveOptions): SolveResult {
  const now = opts.now ?? defaultNow;
  const t0 = now();
  validateSparse(inst);
  const warm = opts.warm;
  validateWarm(warm, inst.nRows, inst.nCols);

  const { nRows, nCols, rowPtr, colIdx, cost } = inst;
  const delta = inst.unmatchedCost ?? null;

  const v = new Float64Array(nCols);
  const u = new Float64Array(nRows);
  const rowToCol = new Int32Array(nRows).fill(NONE);
  const colToRow = new Int32Array(nCols).fill(NONE);
  let scannedPairs = 0;
  let augmentations = 0;
  let usedWarm = false;

  let e = 0;
  let end = 0;
  let j = 0;
  let r = 0;
  let x = 0;

  // ---- warm start. Previous pairs that are still allowed start matched, at the
  // previous column prices (clamped to ≤ 0); every other column restarts at 0, so a
  // garbage price can never be left on a column that ends free. A kept pair must be
  // the row's cheapest option at these prices; when it is not, its column's price is
  // raised just enough (at most twice per column, never above 0), or else the pair is
  // dropped and the column goes back to 0. A raise can spoil the pairs of rows that
  // also reach that column, so those are re-checked from a worklist: prices only
  // rise and each column moves at most three times, so the repair ends, and what
  // survives satisfies the same invariants as a cold start.
  if (warm !== undefined && warm.rowToCol !== undefined) {
    const wCol = warm.colPrices;
    const wRow = warm.rowPrices;
    const wPair = warm.rowToCol;
    const pairEdge = new Int32Array(nRows).fill(NONE);
    let nPairs = 0;
    for (r = 0; r < nRows; r++) {
      j = wPair[r]!;
      if (j < 0 || j >= nCols || colToRow[j] !== NONE) continue;
      end = rowPtr[r + 1]!;
      let found = NONE;
      for (e = rowPtr[r]!; e < end; e++) {
        if (colIdx[e] === j) {
          found = e;
          break;
        }
      }
      scannedPairs += end - rowPtr[r]!;
      if (found === NONE) continue;
      let p = wCol !== undefined ? wCol[j]! : NaN;
      if (!Number.isFinite(p)) {
        const q = wRow !== undefined ? wRow[r]! : NaN;
        p = Number.isFinite(q) ? cost[found]! - q : 0;
      }
      v[j] = p < 0 ? p : 0;
      colToRow[j] = r;
      rowToCol[r] = j;
      pairEdge[r] = found;
      nPairs++;
    }
    if (nPairs > 0) {
      usedWarm = true;
      // rows by column (CSC) of the pairs' rows only, for the re-check worklist
      const colPtr = new Int32Array(nCols + 1);
      for (r = 0; r < nRows; r++) {
        if (pairEdge[r] === NONE) continue;
        end = rowPtr[r + 1]!;
        for (e = rowPtr[r]!; e < end; e++) colPtr[colIdx[e]! + 1]!++;
      }
      for (j = 0; j < nCols; j++) colPtr[j + 1]! += colPtr[j]!;
      const colRows = new Int32Array(colPtr[nCols]!);
      const fillAt = colPtr.slice(0, nCols);
      for (r = 0; r < nRows; r++) {
        if (pairEdge[r] === NONE) continue;
        end = rowPtr[r + 1]!;
        for (e = rowPtr[r]!; e < end; e++) colRows[fillAt[colIdx[e]!]!++] = r;
      }
      const moves = new Uint8Array(nCols);
      const queue = new Int32Array(nRows);
      const queued = new Uint8Array(nRows);
      let qHead = 0;
      let qLen = 0;
      for (r = 0; r < nRows; r++) {
        if (pairEdge[r] === NONE) continue;
        queue[(qHead + qLen++) % nRows] = r;
        queued[r] = 1;
      }
      while (qLen > 0) {
        r = queue[qHead]!;
        qHead = (qHead + 1) % nRows;
        qLen--;
        queued[r] = 0;
        const ej = pairEdge[r]!;
        if (ej === NONE) continue;
        j = colIdx[ej]!;
        let m = delta !== null ? delta[r]! : Infinity;
        end = rowPtr[r + 1]!;
        for (e = rowPtr[r]!; e < end; e++) {
          if (e === ej) continue;
          x = cost[e]! - v[colIdx[e]!]!;
          if (x < m) m = x;
        }
        scannedPairs += end - rowPtr[r]!;
        const a = cost[ej]! - v[j]!;
        if (a <= m) {
          u[r] = a;
          continue;
        }
        const need = cost[ej]! - m;
        let next: number;
        if (need <= 0 && moves[j]! < 2) {
          next = need;
        } else {
          pairEdge[r] = NONE;
          rowToCol[r] = NONE;
          colToRow[j] = NONE;
          next = 0;
        }
        moves[j] = moves[j]! + 1;
        if (!(next > v[j]!)) continue;
        v[j] = next;
        if (pairEdge[r] !== NONE) u[r] = cost[ej]! - next;
        const stop = colPtr[j + 1]!;
        for (let t = colPtr[j]!; t < stop; t++) {
          const i = colRows[t]!;
          if (i === r || queued[i] === 1 || pairEdge[i] === NONE) continue;
          queue[(qHead + qLen++) % nRows] = i;
          queued[i] = 1;
        }
      }
    }
  }

  // ---- augmenting row reduction: cheap greedy passes that settle most rows before
  // any shortest-path search. Each step lowers only the price of the column the row
  // takes, so the invariants hold throughout.
  let freeRows = new Int32Array(nRows);
  let nFree = 0;
  for (r = 0; r < nRows; r++) if (rowToCol[r] === NONE) freeRows[nFree++] = r;
  const warmPairsKept = nRows - nFree;
  let nextRows = new Int32Array(nRows);
  for (let pass = 0; pass < 2 && nFree > 0; pass++) {
    let nNext = 0;
    let k = 0;
    let budget = nRows; // bounds same-pass re-processing of displaced rows
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
      end = rowPtr[r + 1]!;
      for (e = rowPtr[r]!; e < end; e++) {
        j = colIdx[e]!;
        x = cost[e]! - v[j]!;
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
      scannedPairs += end - rowPtr[r]!;
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

  // ---- shortest augmenting paths (Dijkstra on reduced costs, indexed binary heap,
  // lazy reset of only what each search touched).
  const searchedRows = nFree;
  if (nFree > 0) {
    const dist = new Float64Array(nCols).fill(Infinity);
    const pred = new Int32Array(nCols);
    const state = new Uint8Array(nCols); // 0 untouched, 1 in heap, 2 done
    const heap = new Int32Array(nCols);
    const hpos = new Int32Array(nCols);
    const touched = new Int32Array(nCols);
    const done = new Int32Array(nCols);

    for (let f = 0; f < nFree; f++) {
      const r0 = freeRows[f]!;
      augmentations++;
      let nTouched = 0;
      let nDone = 0;
      let hsize = 0;
      let bestPriv = Infinity;
      let privRow = NONE;
      let sink = NONE;
      let minVal = 0;
      let i = r0;
      let base = 0;
      let ui = 0;
      for (;;) {
        if (delta !== null) {
          x = base + delta[i]! - ui;
          if (x < bestPriv) {
            bestPriv = x;
            privRow = i;
          }
        }
        end = rowPtr[i + 1]!;
        for (e = rowPtr[i]!; e < end; e++) {
          j = colIdx[e]!;
          const st = state[j]!;
          if (st === 2) continue;
          x = base + cost[e]! - ui - v[j]!;
          if (st === 0) {
            state[j] = 1;
            touched[nTouched++] = j;
            dist[j] = x;
            pred[j] = i;
            // push and sift up
            let p = hsize++;
            while (p > 0) {
              const parent = (p - 1) >> 1;
              const pj = heap[parent]!;
              if (dist[pj]! <= x) break;
              heap[p] = pj;
              hpos[pj] = p;
              p = parent;
            }
            heap[p] = j;
            hpos[j] = p;
          } else if (x < dist[j]!) {
            dist[j] = x;
            pred[j] = i;
            let p = hpos[j]!;
            while (p > 0) {
              const parent = (p - 1) >> 1;
              const pj = heap[parent]!;
              if (dist[pj]! <= x) break;
              heap[p] = pj;
              hpos[pj] = p;
              p = parent;
            }
            heap[p] = j;
            hpos[j] = p;
          }
        }
        scannedPairs += end - rowPtr[i]!;
        if (hsize === 0 || dist[heap[0]!]! > bestPriv) {
          if (bestPriv === Infinity) throw infeasibleRow(r0);
          minVal = bestPriv;
          break;
        }
        // pop the minimum
        j = heap[0]!;
        const dj = dist[j]!;
        hsize--;
        if (hsize > 0) {
          const last = heap[hsize]!;
          const dl = dist[last]!;
          let p = 0;
          for (;;) {
            let c = 2 * p + 1;
            if (c >= hsize) break;
            const c2 = c + 1;
            if (c2 < hsize && dist[heap[c2]!]! < dist[heap[c]!]!) c = c2;
            const cj = heap[c]!;
            if (dist[cj]! >= dl) break;
            heap[p] = cj;
            hpos[cj] = p;
            p = c;
          }
          heap[p] = last;
          hpos[last] = p;
        }
        state[j] = 2;
        if (colToRow[j] === NONE) {
          sink = j;
          minVal = dj;
          break;
        }
        done[nDone++] = j;
        i = colToRow[j]!;
        base = dj;
        ui = u[i]!;
      }

      // dual update on everything settled closer than the sink
      for (let t = 0; t < nDone; t++) {
        j = done[t]!;
        const d = minVal - dist[j]!;
        v[j] = v[j]! - d;
        const ri = colToRow[j]!;
        u[ri] = u[ri]! + d;
      }
      u[r0] = minVal;

      // augment back to r0
      if (sink === NONE) {
        // privRow leaves its column for its private one
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

      for (let t = 0; t < nTouched; t++) {
        j = touched[t]!;
        dist[j] = Infinity;
        state[j] = 0;
      }
    }
  }

  // exact row duals from the final prices: matched pairs tight, unmatched rows at δ
  const primal = new Sum();
  for (r = 0; r < nRows; r++) {
    j = rowToCol[r]!;
    if (j === NONE) {
      u[r] = delta![r]!;
      primal.add(u[r]!);
      continue;
    }
    end = rowPtr[r + 1]!;
    for (e = rowPtr[r]!; e < end; e++) {
      if (colIdx[e] === j) {
        u[r] = cost[e]! - v[j]!;
        primal.add(cost[e]!);
        break;
      }
    }
  }
  return finishResult(primal.value, rowToCol, colToRow, u, v, {
    augmentations,
    scannedPairs,
    ms: now() - t0,
    warm: usedWarm,
    warmPairsKept,
    searchedRows,
  });
}

function infeasibleRow(r: number): Error {
  return pairflowError('PAIRFLOW_ERR_SOLVER_INFEASIBLE', {
    detail: `row ${r} cannot be matched: every column it may take is needed by other rows (or it has no allowed pair), and it has no unmatched cost`,
  });
}

export { infeasibleRow };
