/** Seeded instance generators and an exhaustive reference for the solver tests. */
import { mulberry32, randInt } from '../../helpers/random.js';
import type { DenseInstance, SolveResult, SparseInstance, WarmStart } from '../../../src/matching/types.js';

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

export interface SequenceOptions {
  nDemand: number;
  nSupply: number;
  /** Candidate columns per row (nearest supply). */
  k: number;
  /** Fraction of the surviving units replaced by new arrivals each step. */
  replace: number;
  /** 'all': every pair of a solution is executed; 'due': only pairs with a unit at its last chance. */
  commit: 'all' | 'due';
  /** Per-step wait cost added to each row's pairs, per step of age. */
  waitPerStep: number;
  /** δ of a row. */
  defer: number;
}

interface Unit {
  x: number;
  y: number;
  age: number;
  /** Steps left before the unit is at its last chance. */
  life: number;
}

/**
 * A seeded sequence of window instances in the shape pairflow's engine produces:
 * units on a 10 × 10 plane, each row allowed to its k nearest columns, costs =
 * distance + wait term growing with the row's age, and a fraction of units replaced
 * each step. `advance(res)` executes pairs of `res` per the commit policy and returns
 * the next instance together with the warm start mapped onto it.
 */
export class WindowSequence {
  private readonly rand: () => number;
  private demand: Unit[] = [];
  private supply: Unit[] = [];
  inst!: SparseInstance;
  warm: WarmStart | undefined;

  constructor(
    seed: number,
    private readonly o: SequenceOptions,
  ) {
    this.rand = mulberry32(seed);
    for (let r = 0; r < o.nDemand; r++) this.demand.push(this.unit());
    for (let j = 0; j < o.nSupply; j++) this.supply.push(this.unit());
    this.build();
  }

  private unit(): Unit {
    return { x: this.rand() * 10, y: this.rand() * 10, age: 0, life: 1 + Math.floor(this.rand() * 4) };
  }

  private build(): void {
    const { k } = this.o;
    const nR = this.demand.length;
    const nC = this.supply.length;
    const rowPtr = new Int32Array(nR + 1);
    const cols: number[] = [];
    const costs: number[] = [];
    const topD = new Float64Array(k);
    const topJ = new Int32Array(k);
    for (let r = 0; r < nR; r++) {
      const a = this.demand[r]!;
      // the k nearest columns by insertion into a sorted top-k list
      let n = 0;
      for (let j = 0; j < nC; j++) {
        const b = this.supply[j]!;
        const dd = (a.x - b.x) ** 2 + (a.y - b.y) ** 2;
        if (n === k && dd >= topD[k - 1]!) continue;
        let p = n < k ? n++ : k - 1;
        while (p > 0 && topD[p - 1]! > dd) {
          topD[p] = topD[p - 1]!;
          topJ[p] = topJ[p - 1]!;
          p--;
        }
        topD[p] = dd;
        topJ[p] = j;
      }
      for (let t = 0; t < n; t++) {
        cols.push(topJ[t]!);
        costs.push(Math.sqrt(topD[t]!) + this.o.waitPerStep * a.age);
      }
      rowPtr[r + 1] = cols.length;
    }
    this.inst = {
      nRows: nR,
      nCols: nC,
      rowPtr,
      colIdx: Int32Array.from(cols),
      cost: Float64Array.from(costs),
      unmatchedCost: new Float64Array(nR).fill(this.o.defer),
    };
  }

  advance(res: SolveResult): void {
    const nR = this.demand.length;
    const nC = this.supply.length;
    const goneR = new Uint8Array(nR);
    const goneC = new Uint8Array(nC);
    const tentative = new Map<number, number>();
    for (let r = 0; r < nR; r++) {
      const j = res.rowToCol[r]!;
      if (j < 0) continue;
      const due = this.demand[r]!.life <= 1 || this.supply[j]!.life <= 1;
      if (this.o.commit === 'all' || due) {
        goneR[r] = 1;
        goneC[j] = 1;
      } else {
        tentative.set(r, j);
      }
    }
    // departures (expiry and the replaced fraction), then arrivals
    for (let r = 0; r < nR; r++) if (!goneR[r] && (this.demand[r]!.life <= 1 || this.rand() < this.o.replace)) goneR[r] = 1;
    for (let j = 0; j < nC; j++) if (!goneC[j] && (this.supply[j]!.life <= 1 || this.rand() < this.o.replace)) goneC[j] = 1;
    const mapR = new Int32Array(nR).fill(-1);
    const mapC = new Int32Array(nC).fill(-1);
    const demand: Unit[] = [];
    const supply: Unit[] = [];
    const rowPrices: number[] = [];
    const colPrices: number[] = [];
    for (let r = 0; r < nR; r++) {
      if (goneR[r]) continue;
      const u = this.demand[r]!;
      mapR[r] = demand.length;
      demand.push({ ...u, age: u.age + 1, life: u.life - 1 });
      rowPrices.push(res.rowDuals[r]!);
    }
    for (let j = 0; j < nC; j++) {
      if (goneC[j]) continue;
      const s = this.supply[j]!;
      mapC[j] = supply.length;
      supply.push({ ...s, life: s.life - 1 });
      colPrices.push(res.colDuals[j]!);
    }
    while (demand.length < this.o.nDemand) {
      demand.push(this.unit());
      rowPrices.push(NaN);
    }
    while (supply.length < this.o.nSupply) {
      supply.push(this.unit());
      colPrices.push(NaN);
    }
    const rowToCol = new Int32Array(demand.length).fill(-1);
    for (const [r, j] of tentative) if (mapR[r]! >= 0 && mapC[j]! >= 0) rowToCol[mapR[r]!] = mapC[j]!;
    this.demand = demand;
    this.supply = supply;
    this.build();
    this.warm = { colPrices: Float64Array.from(colPrices), rowPrices: Float64Array.from(rowPrices), rowToCol };
  }
}
