/** Seeded instance generators and an exhaustive reference for the solver tests. */
import { mulberry32, randInt } from '../../helpers/random.js';
import type { DenseInstance, SparseInstance } from '../../../src/matching/types.js';

export type CostKind = 'uniform' | 'ties' | 'negative' | 'exp';

export interface GenOptions {
  nRows: number;
  nCols: number;
  kind: CostKind;
  /** Probability that a pair is not allowed. */
  forbidden: number;
  /** Give every row an unmatched cost. */
  withDelta: boolean;
}

export function drawCost(rand: () => number, kind: CostKind): number {
  switch (kind) {
    case 'uniform':
      return rand() * 100;
    case 'ties':
      return randInt(rand, 0, 5);
    case 'negative':
      return rand() * 200 - 100;
    case 'exp':
      return -Math.log(1 - rand());
  }
}

export function randomDense(rand: () => number, o: GenOptions): DenseInstance {
  const cost = new Float64Array(o.nRows * o.nCols);
  for (let k = 0; k < cost.length; k++) cost[k] = rand() < o.forbidden ? Infinity : drawCost(rand, o.kind);
  let unmatchedCost: Float64Array | null = null;
  if (o.withDelta) {
    unmatchedCost = new Float64Array(o.nRows);
    for (let r = 0; r < o.nRows; r++) unmatchedCost[r] = o.kind === 'ties' ? randInt(rand, 0, 8) : drawCost(rand, o.kind) * 1.5;
  }
  return { nRows: o.nRows, nCols: o.nCols, cost, unmatchedCost };
}

/** The same allowed pairs in CSR form (columns in increasing order, or shuffled with `rand`). */
export function denseToSparse(d: DenseInstance, rand?: () => number): SparseInstance {
  const rowPtr = new Int32Array(d.nRows + 1);
  const cols: number[] = [];
  const costs: number[] = [];
  for (let r = 0; r < d.nRows; r++) {
    const rowCols: number[] = [];
    for (let j = 0; j < d.nCols; j++) if (d.cost[r * d.nCols + j]! < Infinity) rowCols.push(j);
    if (rand !== undefined) {
      for (let a = rowCols.length - 1; a > 0; a--) {
        const b = Math.floor(rand() * (a + 1));
        [rowCols[a], rowCols[b]] = [rowCols[b]!, rowCols[a]!];
      }
    }
    for (const j of rowCols) {
      cols.push(j);
      costs.push(d.cost[r * d.nCols + j]!);
    }
    rowPtr[r + 1] = cols.length;
  }
  return {
    nRows: d.nRows,
    nCols: d.nCols,
    rowPtr,
    colIdx: Int32Array.from(cols),
    cost: Float64Array.from(costs),
    unmatchedCost: d.unmatchedCost ?? null,
  };
}

/**
 * Optimal cost by exhaustive search over every assignment (common practice for tiny
 * instances); Infinity when infeasible.
 */
export function bruteForce(d: DenseInstance): number {
  const used = new Uint8Array(d.nCols);
  const delta = d.unmatchedCost ?? null;
  let best = Infinity;
  const go = (r: number, acc: number): void => {
    if (r === d.nRows) {
      if (acc < best) best = acc;
      return;
    }
    if (delta !== null && delta[r]! < Infinity) go(r + 1, acc + delta[r]!);
    for (let j = 0; j < d.nCols; j++) {
      const c = d.cost[r * d.nCols + j]!;
      if (used[j] || !(c < Infinity)) continue;
      used[j] = 1;
      go(r + 1, acc + c);
      used[j] = 0;
    }
  };
  go(0, 0);
  return best;
}

export { mulberry32, randInt };
