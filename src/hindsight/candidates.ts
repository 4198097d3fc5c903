/**
 * The first candidate pairs of a segment, picked while the graph is built (a
 * {@link RowVisitor}: each row is seen once, in cache, instead of in a pass of its
 * own over every pair). Pure.
 *
 * In the graph a candidate is marked by its code byte (graph.ts): no array of its
 * own, and a byte the pricing passes read anyway.
 */

import { CODE_TOP, isMarked, MARK, type RowVisitor } from './graph.js';
import type { CandidateArrays, KernelVisitor } from './wasm/graph-rows.js';

/** Marks pair `e` a candidate in the graph's `codes` (its code is gone). */
export function markCandidate(codes: Uint8Array, e: number): void {
  codes[e] = MARK;
}

/** Undoes {@link markCandidate} for a candidate found to cost P or more: its code is the top one. */
export function dropCandidate(codes: Uint8Array, e: number): void {
  codes[e] = CODE_TOP;
}

/**
 * Picks, row by row as the graph is built, the k cheapest pairs of every row and of
 * every column (cost below P): a supply that is nobody's favourite still gets its
 * best demands, so the first prices are not blind to it. Costs are compared by their
 * codes (ties, an eighth of a minute apart at most, fall either way: any choice
 * of candidates gives the same optimum). Also notes each row's column range.
 *
 * The cheapest pairs alone cannot match enough rows: near each other in time and
 * place, demands want the same few supplies. On a busy day (`gen --scale 4`, 58,050
 * demands of one district) the k = 12 cheapest of every row and column (the default then) held a
 * matching of 35,647 pairs where the allowed graph holds 52,792; the rows left over
 * priced at u = P, so half of all allowed pairs priced out in the first round and the
 * rounds dragged on. So each row, as it is completed, also picks one free column by
 * earliest deadline: of its columns not yet taken, the one whose unit leaves first.
 * Rows complete in the order their demands leave, which makes this the greedy that
 * is optimal when only time constrains (a demand and a supply present together; an
 * exchange argument, common practice for interval scheduling); on that day it
 * matched 52,782 rows. Its pairs join the restricted assignment with the first
 * pricing round's, not in the first solve: there they made the cold solve's searches
 * long (3–4× its time) for no fewer rounds. The solve of that district's day took
 * 32 s instead of 51 s (same optimum).
 */
export class FirstCandidates implements RowVisitor {
  /** Per row: the lowest and highest column among its pairs (lo > hi when none). */
  readonly colLo: Int32Array;
  readonly colHi: Int32Array;
  private colCode: Int32Array;
  private colEdge: Int32Array;
  /** Per column, its k-th cheapest code so far (the heap's top), where most pairs stop. */
  private colBar: Int32Array;
  private bestCode: Int32Array;
  private bestEdge: Int32Array;
  /**
   * Where the row kernel builds the graph (graph.ts), its look at each row: the arrays
   * above then live in the kernel memory (see {@link kernelVisitor}).
   */
  private visit: ((len: number, start: number) => number) | null = null;
  private picked: (() => number) | null = null;

  /** Rows the earliest-deadline greedy matched (see {@link row}). */
  greedy = 0;
  /** The greedy's pairs, rows ascending, for the caller to add (not marked here). */
  readonly greedyEdges: Int32Array;
  private taken: Uint8Array | null;
  /** The pairs marked so far, in the order marked (each once). */
  private marked = new Int32Array(1024);
  private nMarked = 0;
  /**
   * @param k candidates per row and per column
   * @param supplyEnd per column, when its unit leaves: with it, each row also picks the
   *   earliest-leaving free column of its own, listed in {@link greedyEdges}
   */
  constructor(
    nRows: number,
    private readonly nCols: number,
    private readonly k: number,
    private readonly supplyEnd: Float64Array | null = null,
  ) {
    this.taken = supplyEnd === null ? null : new Uint8Array(nCols);
    this.greedyEdges = new Int32Array(supplyEnd === null ? 0 : Math.min(nRows, nCols));
    this.colLo = new Int32Array(nRows);
    this.colHi = new Int32Array(nRows);
    // Per column a max-heap of k codes (CODE_TOP, "≥ P", while not full).
    this.colCode = new Int32Array(nCols * k).fill(CODE_TOP);
    this.colEdge = new Int32Array(nCols * k).fill(-1);
    this.colBar = new Int32Array(nCols).fill(CODE_TOP);
    this.bestCode = new Int32Array(k);
    this.bestEdge = new Int32Array(k);
  }

  /**
   * The row kernel's way in (wasm/graph-rows.ts): it hands over arrays in its memory,
   * which take the place of this visitor's own (as yet untouched), and from then on
   * looks at each row itself, the same loop as {@link row}'s in WebAssembly.
   */
  get kernelVisitor(): KernelVisitor {
    return {
      k: this.k,
      greedy: this.taken !== null,
      adopt: (a: CandidateArrays, visit: (len: number, start: number) => number, picked: () => number): void => {
        // (The kernel memory's bytes may hold an earlier market's numbers.)
        a.colCode.fill(CODE_TOP);
        a.colEdge.fill(-1);
        a.colBar.fill(CODE_TOP);
        a.taken.fill(0);
        if (this.supplyEnd !== null) a.supplyEnd.set(this.supplyEnd);
        this.colCode = a.colCode;
        this.colEdge = a.colEdge;
        this.colBar = a.colBar;
        this.bestCode = a.bestCode;
        this.bestEdge = a.bestEdge;
        if (this.taken !== null) this.taken = a.taken;
        this.visit = visit;
        this.picked = picked;
      },
    };
  }

  row(r: number, _demand: number, cols: Int32Array, codes: Uint8Array, len: number, start: number, marks: Uint8Array, lo: number, hi: number): void {
    if (this.visit !== null) {
      this.finishRow(r, cols, start, marks, lo, hi, this.visit(len, start), this.picked!());
      return;
    }
    const { k, colCode, colEdge, colBar, bestCode, bestEdge, taken, supplyEnd } = this;
    let n = 0;
    // The earliest-deadline pick: the free column that leaves first (cheapest on a tie).
    let bestI = -1;
    let bestEnd = Infinity;
    let bestC = CODE_TOP;
    for (let i = 0; i < len; i++) {
      const j = cols[i]!;
      const c = codes[i]!;
      if (c === CODE_TOP) continue;
      const e = start + i;
      if (taken !== null && taken[j] === 0) {
        const en = supplyEnd![j]!;
        if (en < bestEnd || (en === bestEnd && c < bestC)) {
          bestEnd = en;
          bestC = c;
          bestI = i;
        }
      }
      // The row's k cheapest, by insertion into a small sorted buffer.
      if (n < k || c < bestCode[k - 1]!) {
        let p = n < k ? n++ : k - 1;
        while (p > 0 && bestCode[p - 1]! > c) {
          bestCode[p] = bestCode[p - 1]!;
          bestEdge[p] = bestEdge[p - 1]!;
          p--;
        }
        bestCode[p] = c;
        bestEdge[p] = e;
      }
      // The column's k cheapest so far: its heap's top leaves, the pair sifts down.
      if (c < colBar[j]!) {
        const base = j * k;
        let p = 0;
        for (;;) {
          let ch = 2 * p + 1;
          if (ch >= k) break;
          if (ch + 1 < k && colCode[base + ch + 1]! > colCode[base + ch]!) ch++;
          if (!(colCode[base + ch]! > c)) break;
          colCode[base + p] = colCode[base + ch]!;
          colEdge[base + p] = colEdge[base + ch]!;
          p = ch;
        }
        colCode[base + p] = c;
        colEdge[base + p] = e;
        colBar[j] = colCode[base]!;
      }
    }
    this.finishRow(r, cols, start, marks, lo, hi, n, bestI);
  }

  /** A row's end: its column range, the greedy's pick (its place `bestI`, -1: none), and its `n` cheapest marked. */
  private finishRow(r: number, cols: Int32Array, start: number, marks: Uint8Array, lo: number, hi: number, n: number, bestI: number): void {
    this.colLo[r] = lo;
    this.colHi[r] = hi;
    if (bestI >= 0) {
      this.taken![cols[bestI]!] = 1;
      this.greedyEdges[this.greedy++] = start + bestI;
    }
    for (let q = 0; q < n; q++) this.mark(marks, this.bestEdge[q]!);
  }

  /**
   * Once the graph is built: marks the columns' picks as candidates too (in the
   * graph's `codes`), and returns every pair marked, ascending: the first restricted
   * solve's pairs, without a pass over the graph to find them.
   */
  markColumns(marks: Uint8Array): Int32Array {
    const colEdge = this.colEdge;
    for (let q = 0; q < colEdge.length; q++) if (colEdge[q]! >= 0) this.mark(marks, colEdge[q]!);
    return this.marked.subarray(0, this.nMarked).sort();
  }

  private mark(marks: Uint8Array, e: number): void {
    if (isMarked(marks[e]!)) return;
    markCandidate(marks, e);
    if (this.nMarked === this.marked.length) {
      const grown = new Int32Array(2 * this.nMarked);
      grown.set(this.marked);
      this.marked = grown;
    }
    this.marked[this.nMarked++] = e;
  }
}
