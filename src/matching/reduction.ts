/*
 * Augmenting row reduction (the Jonker–Volgenant start): cheap greedy passes that
 * settle most free rows before any shortest-path search. A free row takes its
 * cheapest option at the current prices; when that beats its second option, the
 * column's price drops by the difference (so the row stays indifferent at the new
 * price), and a row it displaces is tried again at once (within a budget) or in the
 * next pass. Each step lowers only the price of the column taken, so reduced costs
 * stay ≥ 0 for every matched row and every matched pair stays tight. Dense and
 * sparse rows differ only in how a row's two cheapest options are found.
 */

/** A row's own "unmatched" option, never materialised as a column. */
export const PRIVATE = -2;
export const NONE = -1;

/** Rows still free after the passes, in `freeRows[0 .. nFree)`, and the pairs scanned. */
export interface Reduced {
  readonly freeRows: Int32Array;
  readonly nFree: number;
  readonly scanned: number;
}

export interface ReductionOptions {
  readonly passes: number;
  /**
   * Take only what is free: a row whose best column is held waits for the searches
   * instead of displacing its holder (after a warm start, where most best columns are
   * held and tied, displacing mostly moves ties around).
   */
  readonly noDisplace: boolean;
  /**
   * Writes row r's two cheapest options at prices v into `two` as [u1, u2, j1, j2]
   * (j = PRIVATE for its unmatched option, NONE when there is none); returns the pairs read.
   */
  readonly cheapestTwo: (r: number, two: Float64Array) => number;
  /** The error for a row with no option at all. */
  readonly infeasible: (r: number) => Error;
}

export function reduceRows(
  freeRows: Int32Array,
  nFree: number,
  u: Float64Array,
  v: Float64Array,
  rowToCol: Int32Array,
  colToRow: Int32Array,
  o: ReductionOptions,
): Reduced {
  const nRows = rowToCol.length;
  const two = new Float64Array(4);
  let nextRows: Int32Array = new Int32Array(nRows);
  let scanned = 0;
  for (let pass = 0; pass < o.passes && nFree > 0; pass++) {
    let nNext = 0;
    let k = 0;
    let budget = nRows; // bounds same-pass re-processing of displaced rows
    while (k < nFree) {
      const r = freeRows[k++]!;
      scanned += o.cheapestTwo(r, two);
      const u1 = two[0]!;
      const u2 = two[1]!;
      const j1 = two[2]!;
      const j2 = two[3]!;
      if (j1 === NONE) throw o.infeasible(r);
      if (j1 === PRIVATE) {
        u[r] = u1;
        continue;
      }
      const tieToFree = u1 === u2 && j2 !== NONE && (j2 === PRIVATE || colToRow[j2] === NONE);
      if (o.noDisplace && colToRow[j1] !== NONE && !tieToFree) {
        nextRows[nNext++] = r;
        continue;
      }
      let target = j1;
      let ur = u1;
      if (u1 < u2) {
        if (u2 < Infinity) {
          v[j1] = v[j1]! - (u2 - u1);
          ur = u2;
        }
      } else if (colToRow[j1] !== NONE && tieToFree) {
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
  return { freeRows, nFree, scanned };
}

/**
 * Ends a forward search from free row r0 (shared by the dense and sparse searches):
 * with `sink` a free column, every row on the path back to r0 moves one column over
 * (`pred[col]` is the row that reached it); with `sink` NONE the search ended on
 * `privRow`'s own unmatched option, so privRow leaves its column (price u = δ) and the
 * path ends at that column instead.
 */
export function shiftAlongPath(
  r0: number,
  sink: number,
  privRow: number,
  pred: Int32Array,
  delta: Float64Array | null,
  u: Float64Array,
  rowToCol: Int32Array,
  colToRow: Int32Array,
): void {
  let j = sink;
  if (j === NONE) {
    j = privRow === r0 ? NONE : rowToCol[privRow]!;
    rowToCol[privRow] = NONE;
    u[privRow] = delta![privRow]!;
    if (j !== NONE) colToRow[j] = NONE;
  }
  while (j !== NONE) {
    const i = pred[j]!;
    const prevCol = i === r0 ? NONE : rowToCol[i]!;
    rowToCol[i] = j;
    colToRow[j] = i;
    j = prevCol;
  }
}
