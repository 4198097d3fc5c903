/**
 * Seeded benchmark instances: dense uniform matrices, sparse instances that surely
 * hold a perfect matching, and window sequences that evolve the way an online pool
 * does (units leave, new ones arrive, survivors' costs grow by the wait term).
 */

import type { DenseInstance, SolveResult, SparseInstance, WarmStart } from '../../src/matching/types.js';
import { mulberry32, permutation } from './random.js';

export type CostKind = 'int' | 'float';

/**
 * Costs are ≥ 1 so that scipy's sparse matrices never drop an explicit zero (a zero
 * entry of a scipy.sparse matrix is not an edge there).
 */
function draw(rand: () => number, kind: CostKind): number {
  return kind === 'int' ? 1 + Math.floor(rand() * 1000) : 1 + rand() * 999;
}

/** A dense nRows × nCols matrix of uniform costs: integers in 1..1000 or floats in [1, 1000). */
export function denseUniform(seed: number, nRows: number, nCols: number, kind: CostKind): DenseInstance {
  const rand = mulberry32(seed);
  const cost = new Float64Array(nRows * nCols);
  for (let i = 0; i < cost.length; i++) cost[i] = draw(rand, kind);
  return { nRows, nCols, cost };
}

/**
 * The structured dense families of bench:solver, the costs users have rather than
 * uniform random numbers (named after the classes of the dense-assignment literature,
 * e.g. Dell'Amico & Toth 2000, "Algorithms and codes for dense assignment problems:
 * the state of the art" — from memory):
 * - `geometric`: rows and columns are random points in a 1000 × 1000 square, cost =
 *   Euclidean distance (the DIMACS "geometric" generator's idea);
 * - `clustered`: the same, the points drawn around 10 random centres (normal, σ = 30);
 * - `few-ints`: uniform integers 0..9 (few distinct costs, many ties);
 * - `machol-wien`: c_ij = (i + 1)(j + 1) (Machol & Wien 1976), every assignment has
 *   nearly the same cost, a known hard case for shortest-path methods;
 * - `rank-one`: c_ij = a_i · b_j + noise, a and b uniform in [1, 100), noise uniform in [0, 1).
 * Instances built here and nowhere else; the names say what they imitate.
 */
export type DenseFamily = 'geometric' | 'clustered' | 'few-ints' | 'machol-wien' | 'rank-one';
export const DENSE_FAMILIES: readonly DenseFamily[] = ['geometric', 'clustered', 'few-ints', 'machol-wien', 'rank-one'];

export function denseFamily(seed: number, n: number, family: DenseFamily): DenseInstance {
  const rand = mulberry32(seed);
  const cost = new Float64Array(n * n);
  const points = (count: number, draw: () => [number, number]): Float64Array => {
    const xy = new Float64Array(2 * count);
    for (let i = 0; i < count; i++) [xy[2 * i], xy[2 * i + 1]] = draw();
    return xy;
  };
  const distances = (a: Float64Array, b: Float64Array): void => {
    for (let i = 0; i < n; i++) {
      for (let j = 0; j < n; j++) cost[i * n + j] = Math.hypot(a[2 * i]! - b[2 * j]!, a[2 * i + 1]! - b[2 * j + 1]!);
    }
  };
  switch (family) {
    case 'geometric': {
      const draw = (): [number, number] => [rand() * 1000, rand() * 1000];
      distances(points(n, draw), points(n, draw));
      break;
    }
    case 'clustered': {
      const centres = points(10, () => [rand() * 1000, rand() * 1000]);
      // Box–Muller: two uniforms give one standard normal.
      const normal = (): number => Math.sqrt(-2 * Math.log(1 - rand())) * Math.cos(2 * Math.PI * rand());
      const draw = (): [number, number] => {
        const c = Math.floor(rand() * 10);
        return [centres[2 * c]! + 30 * normal(), centres[2 * c + 1]! + 30 * normal()];
      };
      distances(points(n, draw), points(n, draw));
      break;
    }
    case 'few-ints':
      for (let k = 0; k < cost.length; k++) cost[k] = Math.floor(rand() * 10);
      break;
    case 'machol-wien':
      for (let i = 0; i < n; i++) for (let j = 0; j < n; j++) cost[i * n + j] = (i + 1) * (j + 1);
      break;
    case 'rank-one': {
      const a = Float64Array.from({ length: n }, () => 1 + rand() * 99);
      const b = Float64Array.from({ length: n }, () => 1 + rand() * 99);
      for (let i = 0; i < n; i++) for (let j = 0; j < n; j++) cost[i * n + j] = a[i]! * b[j]! + rand();
      break;
    }
  }
  return { nRows: n, nCols: n, cost };
}

/**
 * n × n with `perRow` distinct candidate columns per row, one of them from a random
 * permutation, so a perfect matching exists (scipy's full matching needs one).
 */
export function sparseWithPermutation(seed: number, n: number, perRow: number, kind: CostKind): SparseInstance {
  const rand = mulberry32(seed);
  const perm = permutation(rand, n);
  const k = Math.min(perRow, n);
  const rowPtr = new Int32Array(n + 1);
  const colIdx = new Int32Array(n * k);
  const cost = new Float64Array(n * k);
  const stamp = new Int32Array(n).fill(-1);
  let e = 0;
  for (let r = 0; r < n; r++) {
    const first = perm[r]!;
    stamp[first] = r;
    colIdx[e] = first;
    cost[e++] = draw(rand, kind);
    for (let got = 1; got < k; ) {
      const c = Math.floor(rand() * n);
      if (stamp[c] === r) continue;
      stamp[c] = r;
      colIdx[e] = c;
      cost[e++] = draw(rand, kind);
      got++;
    }
    rowPtr[r + 1] = e;
  }
  return { nRows: n, nCols: n, rowPtr, colIdx, cost };
}

/** One window of a sequence with the index maps back to the previous window. */
export interface SequenceStep {
  readonly instance: SparseInstance;
  /** Per row: its index in the previous window, or -1 for a new arrival. */
  readonly rowPrev: Int32Array;
  /** Per column: its index in the previous window, or -1. */
  readonly colPrev: Int32Array;
  /** Cost added to every pair of a surviving row since the previous window (the wait term). */
  readonly shift: number;
}

/** How units leave between windows. */
export type TurnoverPolicy =
  /** A random `fraction` of rows and of columns leaves each step. */
  | 'random'
  /**
   * SPEC §3 `commit: "due"`: a random `fraction` of rows is at its last chance; those
   * rows leave with their columns (executed pairs, or abandoned); every other pair of
   * the previous solution stays as a tentative pair.
   */
  | 'due';

/** Options of {@link windowSequence}. */
export interface SequenceOptions {
  readonly seed: number;
  /** Demand rows and supply columns per window. */
  readonly units: number;
  readonly steps: number;
  /** Share of units replaced per step, 0..1. */
  readonly fraction: number;
  readonly policy: TurnoverPolicy;
  /** Mean allowed supply per demand unit; sets the area's size. @default 20 */
  readonly neighbours?: number;
  /** SPEC §2 defaults. */
  readonly speedKmh?: number;
  readonly maxTravelMin?: number;
  readonly waitWeight?: number;
  readonly windowMs?: number;
  readonly abandonPenalty?: number;
}

interface Unit {
  x: number;
  y: number;
  /** Arrival, ms (demand only). */
  t: number;
}

/**
 * A sequence of windows over one market on a square map: cost = travel minutes
 * (euclidean) + waitWeight × minutes waited, pairs allowed within `maxTravelMin`,
 * δ = abandonPenalty. `solve` decides each window (the `due` policy needs the
 * previous solution to know which pairs survive); the bench then re-times the
 * stored windows cold and warm.
 */
export function windowSequence(opts: SequenceOptions, solve: (inst: SparseInstance) => SolveResult): SequenceStep[] {
  const speed = opts.speedKmh ?? 25;
  const maxTravel = opts.maxTravelMin ?? 15;
  const waitWeight = opts.waitWeight ?? 1;
  const windowMs = opts.windowMs ?? 5000;
  const penalty = opts.abandonPenalty ?? 30;
  const radius = (maxTravel * speed) / 60;
  const n = opts.units;
  const side = Math.sqrt((n * Math.PI * radius * radius) / (opts.neighbours ?? 20));
  const rand = mulberry32(opts.seed);
  const place = (t: number): Unit => ({ x: rand() * side, y: rand() * side, t });

  let tau = windowMs;
  let rows: Unit[] = Array.from({ length: n }, () => place(tau - Math.floor(rand() * windowMs) - 1));
  let cols: Unit[] = Array.from({ length: n }, () => place(0));
  let rowPrev = new Int32Array(n).fill(-1);
  let colPrev = new Int32Array(n).fill(-1);
  const steps: SequenceStep[] = [];
  const cells = Math.max(1, Math.floor(side / radius));
  const cellSize = side / cells;

  for (let k = 0; k < opts.steps; k++) {
    const instance = buildWindow(rows, cols, tau, { speed, maxTravel, waitWeight, penalty, cells, cellSize });
    steps.push({ instance, rowPrev, colPrev, shift: k === 0 ? 0 : (waitWeight * windowMs) / 60000 });
    if (k === opts.steps - 1) break;
    const result = solve(instance);

    const rowGone = new Uint8Array(n);
    const colGone = new Uint8Array(n);
    const quota = Math.round(opts.fraction * n);
    const pickRows = permutation(rand, n);
    if (opts.policy === 'random') {
      const pickCols = permutation(rand, n);
      for (let i = 0; i < quota; i++) {
        rowGone[pickRows[i]!] = 1;
        colGone[pickCols[i]!] = 1;
      }
    } else {
      for (let i = 0; i < quota; i++) {
        const r = pickRows[i]!;
        rowGone[r] = 1;
        const c = result.rowToCol[r]!;
        if (c >= 0) colGone[c] = 1;
      }
    }
    tau += windowMs;
    const nextRows: Unit[] = [];
    const nextCols: Unit[] = [];
    const nextRowPrev: number[] = [];
    const nextColPrev: number[] = [];
    for (let r = 0; r < n; r++) if (!rowGone[r]) { nextRows.push(rows[r]!); nextRowPrev.push(r); }
    for (let c = 0; c < n; c++) if (!colGone[c]) { nextCols.push(cols[c]!); nextColPrev.push(c); }
    while (nextRows.length < n) { nextRows.push(place(tau - 1 - Math.floor(rand() * windowMs))); nextRowPrev.push(-1); }
    while (nextCols.length < n) { nextCols.push(place(0)); nextColPrev.push(-1); }
    rows = nextRows;
    cols = nextCols;
    rowPrev = Int32Array.from(nextRowPrev);
    colPrev = Int32Array.from(nextColPrev);
  }
  return steps;
}

function buildWindow(
  rows: Unit[],
  cols: Unit[],
  tau: number,
  p: { speed: number; maxTravel: number; waitWeight: number; penalty: number; cells: number; cellSize: number },
): SparseInstance {
  const { cells, cellSize } = p;
  const cellOf = (u: Unit) =>
    Math.min(cells - 1, Math.floor(u.x / cellSize)) * cells + Math.min(cells - 1, Math.floor(u.y / cellSize));
  // Bucket the columns on a grid of cells no smaller than the travel radius, so a
  // row's allowed columns lie in its own cell and the 8 around it.
  const head = new Int32Array(cells * cells).fill(-1);
  const nextInCell = new Int32Array(cols.length);
  cols.forEach((u, c) => {
    const cell = cellOf(u);
    nextInCell[c] = head[cell]!;
    head[cell] = c;
  });
  const rowPtr = new Int32Array(rows.length + 1);
  const colIdx: number[] = [];
  const cost: number[] = [];
  rows.forEach((d, r) => {
    const cx = Math.min(cells - 1, Math.floor(d.x / cellSize));
    const cy = Math.min(cells - 1, Math.floor(d.y / cellSize));
    const wait = (p.waitWeight * (tau - d.t)) / 60000;
    for (let ix = Math.max(0, cx - 1); ix <= Math.min(cells - 1, cx + 1); ix++) {
      for (let iy = Math.max(0, cy - 1); iy <= Math.min(cells - 1, cy + 1); iy++) {
        for (let c = head[ix * cells + iy]!; c !== -1; c = nextInCell[c]!) {
          const s = cols[c]!;
          const travel = (Math.hypot(s.x - d.x, s.y - d.y) / p.speed) * 60;
          if (travel <= p.maxTravel) {
            colIdx.push(c);
            cost.push(travel + wait);
          }
        }
      }
    }
    rowPtr[r + 1] = colIdx.length;
  });
  return {
    nRows: rows.length,
    nCols: cols.length,
    rowPtr,
    colIdx: Int32Array.from(colIdx),
    cost: Float64Array.from(cost),
    unmatchedCost: new Float64Array(rows.length).fill(p.penalty),
  };
}

/** The warm start for a step from the previous window's result, mapped onto this window. */
export function warmFromPrevious(step: SequenceStep, prev: SolveResult): WarmStart {
  const { rowPrev, colPrev, shift } = step;
  const colPrices = new Float64Array(colPrev.length);
  const prevColToNew = new Int32Array(prev.colDuals.length).fill(-1);
  for (let c = 0; c < colPrev.length; c++) {
    const p = colPrev[c]!;
    colPrices[c] = p >= 0 ? prev.colDuals[p]! : NaN;
    if (p >= 0) prevColToNew[p] = c;
  }
  const rowPrices = new Float64Array(rowPrev.length);
  const rowToCol = new Int32Array(rowPrev.length).fill(-1);
  for (let r = 0; r < rowPrev.length; r++) {
    const p = rowPrev[r]!;
    if (p < 0) {
      rowPrices[r] = NaN;
      continue;
    }
    rowPrices[r] = prev.rowDuals[p]! + shift;
    const pc = prev.rowToCol[p]!;
    if (pc >= 0) rowToCol[r] = prevColToNew[pc]!;
  }
  return { colPrices, rowPrices, rowToCol };
}
