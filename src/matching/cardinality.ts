/**
 * Maximum-cardinality bipartite matching (Hopcroft–Karp, finished by depth-first
 * passes once its phases augment few paths) and the minimum vertex
 * cover it proves by König's theorem. Costs play no part here: the replay report
 * uses the matching size as the "match ceiling" of a window (no policy can match
 * more pairs than exist disjointly) and the cover to name the units that limit it.
 *
 * Pure: no I/O. Both routines are iterative so graphs with very long alternating
 * paths (hundreds of thousands of rows) cannot exhaust the call stack.
 */

import { kernelDepthFirst } from './wasm/depth-first.js';
import type { KernelArena } from './wasm/shared-memory.js';
import { pairflowError } from '../errors.js';

/**
 * The allowed pairs of a bipartite graph in CSR form (rows = demand, columns = supply).
 * With `rowBase`, a pair's column is its row's base plus its `colIdx` entry, which
 * lets a graph whose rows each span few columns keep two bytes a pair (the hindsight's
 * graphs, src/hindsight/graph.ts).
 */
export interface BipartiteGraph {
  readonly nRows: number;
  readonly nCols: number;
  /** Length nRows + 1: row r's columns are `colIdx[rowPtr[r] .. rowPtr[r+1])` (plus `rowBase[r]`). */
  readonly rowPtr: Int32Array;
  /** Column of each pair (less its row's base); duplicates are harmless here. */
  readonly colIdx: Int32Array | Uint16Array;
  /** Length nRows: what each row's `colIdx` entries add to. @default all 0 */
  readonly rowBase?: Int32Array;
}

/** `g.rowBase`, or zeros. */
function baseOf(g: BipartiteGraph): Int32Array {
  return g.rowBase ?? new Int32Array(g.nRows);
}

/** A matching: `rowToCol[r]` is r's column or -1, `colToRow[c]` the inverse. */
export interface CardinalityMatching {
  /** Number of matched pairs. */
  readonly size: number;
  /** Length nRows; -1 where unmatched. */
  readonly rowToCol: Int32Array;
  /** Length nCols; -1 where unmatched. */
  readonly colToRow: Int32Array;
}

/** A vertex cover: every pair has its row in `rows` or its column in `cols` (both ascending). */
export interface VertexCover {
  readonly rows: Int32Array;
  readonly cols: Int32Array;
}

const UNREACHED = 0x7fffffff;

function checkGraph(g: BipartiteGraph): void {
  const { nRows, nCols, rowPtr, colIdx } = g;
  if (!Number.isInteger(nRows) || nRows < 0 || !Number.isInteger(nCols) || nCols < 0) {
    throw pairflowError('PAIRFLOW_ERR_SOLVER_INPUT', { detail: `graph sizes must be integers ≥ 0, got nRows=${nRows}, nCols=${nCols}` });
  }
  if (rowPtr.length !== nRows + 1) {
    throw pairflowError('PAIRFLOW_ERR_SOLVER_INPUT', { detail: `rowPtr has length ${rowPtr.length}, expected nRows + 1 = ${nRows + 1}` });
  }
  if (rowPtr[0] !== 0 || rowPtr[nRows] !== colIdx.length) {
    throw pairflowError('PAIRFLOW_ERR_SOLVER_INPUT', {
      detail: `rowPtr must start at 0 and end at colIdx.length = ${colIdx.length}, got ${rowPtr[0]} and ${rowPtr[nRows]}`,
    });
  }
  if (g.rowBase !== undefined && g.rowBase.length !== nRows) {
    throw pairflowError('PAIRFLOW_ERR_SOLVER_INPUT', { detail: `rowBase has length ${g.rowBase.length}, expected nRows = ${nRows}` });
  }
  for (let r = 0; r < nRows; r++) {
    if (rowPtr[r + 1]! < rowPtr[r]!) {
      throw pairflowError('PAIRFLOW_ERR_SOLVER_INPUT', { detail: `rowPtr decreases at row ${r}: ${rowPtr[r]} then ${rowPtr[r + 1]}` });
    }
    const base = g.rowBase?.[r] ?? 0;
    for (let e = rowPtr[r]!; e < rowPtr[r + 1]!; e++) {
      const c = base + colIdx[e]!;
      if (c < 0 || c >= nCols) {
        throw pairflowError('PAIRFLOW_ERR_SOLVER_INPUT', {
          detail: base === 0 ? `colIdx[${e}] = ${c} is outside 0..${nCols - 1}` : `column ${c} of pair ${e} (row ${r}'s base ${base} + ${colIdx[e]}) is outside 0..${nCols - 1}`,
        });
      }
    }
  }
}

/** Options of {@link maxCardinalityMatching}. */
export interface CardinalityOptions {
  /**
   * The greedy seed is known to be close to maximum (each row's pair of a good
   * matching placed first in its row, as the hindsight's match ceiling does with
   * the optimum's pairs): the depth-first passes start at once, without a
   * Hopcroft–Karp phase. Measured on a busy district's day (`gen --scale 4`, 114 M
   * pairs, a seed 67 pairs short of the 52,792 maximum): the one phase cost about
   * 0.45 s and found 3 paths, the passes after it found the other 64 in 0.35 s;
   * passes alone found all 67 in 0.45 s. The result is maximum either way.
   * @default false
   */
  nearMaximumSeed?: boolean;
  /**
   * Check the graph's shape and every pair's column first (one pass over the pairs).
   * Only a caller that built the graph itself and knows it sound turns this off.
   * @default true
   */
  check?: boolean;
  /**
   * An arena in the kernel memory that holds the graph's columns (16-bit, with row
   * bases: the hindsight's pair store): the depth-first passes then run in
   * WebAssembly (wasm/depth-first.wat), to the same matching.
   */
  arena?: KernelArena | null;
}

/**
 * A maximum-cardinality matching by Hopcroft–Karp. A greedy pass seeds it; each
 * phase then layers the graph by BFS from the free rows and augments along a maximal
 * set of vertex-disjoint shortest paths, found by an explicit-stack DFS. Once a phase
 * augments fewer than {@link DEPTH_FIRST_BELOW} paths, depth-first passes finish
 * the job (see depthFirstPasses); with `nearMaximumSeed` they start at once.
 *
 * @example
 * const g = { nRows: 2, nCols: 2, rowPtr: Int32Array.of(0, 2, 3), colIdx: Int32Array.of(0, 1, 0) };
 * maxCardinalityMatching(g).size // 2 (row 0 → column 1, row 1 → column 0)
 */
export function maxCardinalityMatching(g: BipartiteGraph, opts: CardinalityOptions = {}): CardinalityMatching {
  if (opts.check !== false) checkGraph(g);
  const { nRows, nCols, rowPtr, colIdx } = g;
  const rowBase = baseOf(g);
  const rowToCol = new Int32Array(nRows).fill(-1);
  const colToRow = new Int32Array(nCols).fill(-1);
  let size = 0;

  // Greedy seed: cheap, and usually leaves few augmentations for the phases.
  for (let r = 0; r < nRows; r++) {
    const base = rowBase[r]!;
    for (let e = rowPtr[r]!, end = rowPtr[r + 1]!; e < end; e++) {
      const c = base + colIdx[e]!;
      if (colToRow[c] === -1) {
        colToRow[c] = r;
        rowToCol[r] = c;
        size++;
        break;
      }
    }
  }

  const layer = new Int32Array(nRows);
  const queue = new Int32Array(nRows);
  const next = new Int32Array(nRows); // per-row cursor into its pairs, kept across DFS restarts
  const stack = new Int32Array(nRows);
  let r = 0, r2 = 0, c = 0, e = 0, end = 0, head = 0, tail = 0, sp = 0, limit = 0, lr = 0, base = 0;
  let phaseAugments = opts.nearMaximumSeed === true ? 0 : Infinity;

  for (;;) {
    if (phaseAugments < DEPTH_FIRST_BELOW) {
      const arena = opts.arena ?? null;
      const inKernel = arena !== null && colIdx instanceof Uint16Array && g.rowBase !== undefined ? kernelDepthFirst(arena, nRows, nCols, rowPtr, rowBase, colIdx, rowToCol, colToRow) : -1;
      size += inKernel >= 0 ? inKernel : depthFirstPasses(g, rowBase, rowToCol, colToRow);
      break;
    }
    phaseAugments = 0;
    // BFS: layer rows by alternating-path length from the free rows; `limit` is the
    // length of the shortest augmenting path (the layer at which a free column appears).
    head = 0;
    tail = 0;
    for (r = 0; r < nRows; r++) {
      if (rowToCol[r] === -1) {
        layer[r] = 0;
        queue[tail++] = r;
      } else {
        layer[r] = UNREACHED;
      }
    }
    limit = UNREACHED;
    while (head < tail) {
      r = queue[head++]!;
      lr = layer[r]!;
      if (lr >= limit) break; // BFS order: every later row is at least as deep
      base = rowBase[r]!;
      for (e = rowPtr[r]!, end = rowPtr[r + 1]!; e < end; e++) {
        r2 = colToRow[base + colIdx[e]!]!;
        if (r2 === -1) {
          if (limit === UNREACHED) limit = lr + 1;
        } else if (layer[r2] === UNREACHED) {
          layer[r2] = lr + 1;
          queue[tail++] = r2;
        }
      }
    }
    if (limit === UNREACHED) break;

    // DFS along the layers, one free row at a time. A row whose pairs are exhausted
    // is dead for the rest of the phase (its layer is cleared), so each pair is
    // scanned at most once per phase.
    for (r = 0; r < nRows; r++) next[r] = rowPtr[r]!;
    for (let root = 0; root < nRows; root++) {
      if (rowToCol[root] !== -1 || layer[root] !== 0) continue;
      sp = 0;
      stack[sp++] = root;
      while (sp > 0) {
        r = stack[sp - 1]!;
        e = next[r]!;
        if (e === rowPtr[r + 1]) {
          layer[r] = UNREACHED;
          sp--;
          if (sp > 0) next[stack[sp - 1]!]!++;
          continue;
        }
        c = rowBase[r]! + colIdx[e]!;
        r2 = colToRow[c]!;
        if (r2 === -1) {
          if (layer[r]! + 1 === limit) {
            // Augment: every row on the stack takes the column its cursor points at.
            for (let i = sp - 1; i >= 0; i--) {
              const row = stack[i]!;
              const col = rowBase[row]! + colIdx[next[row]!]!;
              rowToCol[row] = col;
              colToRow[col] = row;
            }
            size++;
            phaseAugments++;
            // The path's rows must not start another path this phase.
            for (let i = 0; i < sp; i++) layer[stack[i]!] = UNREACHED;
            break;
          }
          next[r]!++;
        } else if (layer[r2] === layer[r]! + 1) {
          stack[sp++] = r2;
        } else {
          next[r]!++;
        }
      }
    }
  }
  return { size, rowToCol, colToRow };
}

/**
 * A Hopcroft–Karp phase costs a pass over the pairs of every row its BFS reaches,
 * however few paths it then augments. Near the end (long augmenting paths, one or two
 * per phase: a week of a busy market took twenty such phases) the depth-first passes
 * below find all the remaining paths in a pass or two instead.
 */
const DEPTH_FIRST_BELOW = 64;

/**
 * Augments a matching to a maximum one by depth-first passes (Pothen and Fan's
 * method with lookahead, the scan direction alternating between passes for fairness,
 * as in Duff, Kaya and Uçar's study of maximum transversal algorithms). Each pass runs
 * a depth-first search for an augmenting path from every free row, a column visited
 * at most once per pass, so a pass costs O(pairs); a pass that augments nothing has
 * searched everything reachable from the free rows by alternating paths without
 * meeting a free column, which (Berge) proves the matching maximum. The lookahead
 * cursor of a row only moves forward: a matched column never becomes free again.
 * Iterative, so paths of any length fit. Returns the number of augmentations.
 */
function depthFirstPasses(g: BipartiteGraph, rowBase: Int32Array, rowToCol: Int32Array, colToRow: Int32Array): number {
  const { nRows, nCols, rowPtr, colIdx } = g;
  const look = rowPtr.slice(0, nRows);
  const next = new Int32Array(nRows);
  const stack = new Int32Array(nRows);
  // via[i]: the column through which stack[i + 1] was reached (its matched column).
  const via = new Int32Array(nRows);
  const seen = new Int32Array(nCols);
  let added = 0;
  for (let pass = 1; ; pass++) {
    const forward = (pass & 1) === 1;
    let found = 0;
    for (let root = 0; root < nRows; root++) {
      if (rowToCol[root] !== -1 || rowPtr[root] === rowPtr[root + 1]) continue;
      let sp = 0;
      stack[sp++] = root;
      next[root] = forward ? rowPtr[root]! : rowPtr[root + 1]! - 1;
      while (sp > 0) {
        const r = stack[sp - 1]!;
        const end = rowPtr[r + 1]!;
        const base = rowBase[r]!;
        // Lookahead: a free column of r ends the path at once.
        let e = look[r]!;
        let free = -1;
        while (e < end) {
          const c = base + colIdx[e++]!;
          if (colToRow[c] === -1) {
            free = c;
            break;
          }
        }
        look[r] = e;
        if (free >= 0) {
          for (let i = 0; i < sp - 1; i++) {
            rowToCol[stack[i]!] = via[i]!;
            colToRow[via[i]!] = stack[i]!;
          }
          rowToCol[r] = free;
          colToRow[free] = r;
          found++;
          break;
        }
        // Every column of r is matched: go on through the next one not yet visited.
        let child = -1;
        if (forward) {
          for (let f = next[r]!; f < end; f++) {
            const c = base + colIdx[f]!;
            if (seen[c] === pass) continue;
            seen[c] = pass;
            next[r] = f + 1;
            via[sp - 1] = c;
            child = colToRow[c]!;
            break;
          }
        } else {
          const start = rowPtr[r]!;
          for (let f = next[r]!; f >= start; f--) {
            const c = base + colIdx[f]!;
            if (seen[c] === pass) continue;
            seen[c] = pass;
            next[r] = f - 1;
            via[sp - 1] = c;
            child = colToRow[c]!;
            break;
          }
        }
        if (child < 0) {
          sp--;
          continue;
        }
        stack[sp++] = child;
        next[child] = forward ? rowPtr[child]! : rowPtr[child + 1]! - 1;
      }
    }
    added += found;
    if (found === 0) return added;
  }
}

/**
 * A minimum vertex cover from a maximum matching, by König's theorem: run the
 * alternating BFS from the free rows (any pair from a row, the matched pair from a
 * column); the cover is the unreached rows plus the reached columns, and its size
 * equals the matching's. The covered units are the ones that limit how many pairs
 * can be matched at all.
 *
 * Throws `PAIRFLOW_ERR_SOLVER_INPUT` when the matching is not a valid matching of
 * `g` or not maximum (the BFS then reaches a free column).
 *
 * @example
 * const m = maxCardinalityMatching(g);
 * const cover = minVertexCover(g, m); // cover.rows.length + cover.cols.length === m.size
 */
export function minVertexCover(g: BipartiteGraph, matching: CardinalityMatching): VertexCover {
  checkGraph(g);
  const { nRows, nCols, rowPtr, colIdx } = g;
  const rowBase = baseOf(g);
  const { rowToCol, colToRow } = matching;
  if (rowToCol.length !== nRows || colToRow.length !== nCols) {
    throw pairflowError('PAIRFLOW_ERR_SOLVER_INPUT', {
      detail: `matching has ${rowToCol.length} rows and ${colToRow.length} columns, the graph ${nRows} and ${nCols}`,
    });
  }
  let size = 0;
  for (let r = 0; r < nRows; r++) {
    const c = rowToCol[r]!;
    if (c === -1) continue;
    if (c < 0 || c >= nCols || colToRow[c] !== r) {
      throw pairflowError('PAIRFLOW_ERR_SOLVER_INPUT', { detail: `matching is inconsistent at row ${r} (column ${c})` });
    }
    let isPair = false;
    for (let e = rowPtr[r]!, end = rowPtr[r + 1]!; e < end; e++) if (rowBase[r]! + colIdx[e]! === c) { isPair = true; break; }
    if (!isPair) throw pairflowError('PAIRFLOW_ERR_SOLVER_INPUT', { detail: `matched pair (${r}, ${c}) is not a pair of the graph` });
    size++;
  }
  for (let c = 0; c < nCols; c++) {
    const r = colToRow[c]!;
    if (r !== -1 && (r < 0 || r >= nRows || rowToCol[r] !== c)) {
      throw pairflowError('PAIRFLOW_ERR_SOLVER_INPUT', { detail: `matching is inconsistent at column ${c} (row ${r})` });
    }
  }

  const rowSeen = new Uint8Array(nRows);
  const colSeen = new Uint8Array(nCols);
  const queue = new Int32Array(nRows);
  let head = 0, tail = 0, r = 0, c = 0, e = 0, end = 0;
  for (r = 0; r < nRows; r++) {
    if (rowToCol[r] === -1) {
      rowSeen[r] = 1;
      queue[tail++] = r;
    }
  }
  while (head < tail) {
    r = queue[head++]!;
    const base = rowBase[r]!;
    for (e = rowPtr[r]!, end = rowPtr[r + 1]!; e < end; e++) {
      c = base + colIdx[e]!;
      if (colSeen[c]) continue;
      colSeen[c] = 1;
      const r2 = colToRow[c]!;
      if (r2 === -1) {
        throw pairflowError('PAIRFLOW_ERR_SOLVER_INPUT', {
          detail: `matching of size ${size} is not maximum: row ${r} reaches free column ${c} by an alternating path`,
        });
      }
      if (!rowSeen[r2]) {
        rowSeen[r2] = 1;
        queue[tail++] = r2;
      }
    }
  }

  let nr = 0, nc = 0;
  for (r = 0; r < nRows; r++) if (!rowSeen[r]) nr++;
  for (c = 0; c < nCols; c++) if (colSeen[c]) nc++;
  const rows = new Int32Array(nr);
  const cols = new Int32Array(nc);
  nr = 0;
  nc = 0;
  for (r = 0; r < nRows; r++) if (!rowSeen[r]) rows[nr++] = r;
  for (c = 0; c < nCols; c++) if (colSeen[c]) cols[nc++] = c;
  return { rows, cols };
}
