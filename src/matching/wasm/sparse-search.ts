import { infeasibleRow, type RowSearch, type RowsView } from '../sparse.js';
import { instantiate, lazyModule, type KernelArena } from './shared-memory.js';
import { WASM_BASE64 } from './sparse-search.wasm.js';

/*
 * The searches of an assignment that grows between solves (incremental.ts) in
 * WebAssembly: sparse-search.wat, SparseSearch.run of sparse.ts step for step, over
 * arrays that all live in one kernel arena (its pairs by row, prices, pairs, and the
 * search's own arrays). The same prices and pairs come out (tests/unit/matching/
 * incremental.test.ts holds the two to each other).
 *
 * Measured on a busy district's day (`gen --scale 4`, the hindsight's 16 rounds of
 * re-solves over up to 1.2 M pairs, one thread): 2.2–2.4 s against 2.5 s in
 * JavaScript. Less than the loops of the hindsight's other kernels gain: a search
 * spends much of its time in the heap, whose moves cost about the same either way.
 */

type RunFn = (
  rowStart: number, rowEnd: number, colIdx: number, cost: number,
  delta: number, u: number, rowToCol: number, colToRow: number,
  pd: number, pred: number, hpos: number, hcol: number, hkey: number,
  touched: number, settled: number, settledDist: number, r0: number,
) => number;

const kernelModule = lazyModule(WASM_BASE64);

/** The arrays of a search the assignment holds (each in the arena). */
export interface SearchArrays {
  readonly delta: Float64Array;
  readonly u: Float64Array;
  readonly rowToCol: Int32Array;
  readonly colToRow: Int32Array;
}

/**
 * One search at a time over an arena's arrays, reusing its own: what SparseSearch
 * does (sparse.ts), its price and distance per column side by side in `pd`.
 */
export class KernelSearch {
  private readonly run: RunFn;
  readonly pd: Float64Array;
  private readonly pred: Int32Array;
  private readonly hpos: Int32Array;
  private readonly hcol: Int32Array;
  private readonly hkey: Float64Array;
  private readonly touched: Int32Array;
  private readonly settled: Int32Array;
  private readonly settledDist: Float64Array;

  private constructor(run: RunFn, arena: KernelArena, nCols: number, private readonly a: SearchArrays) {
    this.run = run;
    this.pd = arena.f64(2 * nCols);
    this.pred = arena.i32(nCols);
    this.hpos = arena.i32(nCols);
    this.hcol = arena.i32(nCols);
    this.hkey = arena.f64(nCols);
    this.touched = arena.i32(nCols);
    this.settled = arena.i32(nCols);
    this.settledDist = arena.f64(nCols);
    for (let j = 0; j < nCols; j++) this.pd[2 * j + 1] = Infinity;
  }

  /** The search over `arena` for `nCols` columns and the assignment's arrays `a` (in the arena), or null where the kernel cannot run. */
  static over(arena: KernelArena, nCols: number, a: SearchArrays): KernelSearch | null {
    const x = instantiate<{ run: RunFn }>(kernelModule.get(), arena.memory);
    return x === null ? null : new KernelSearch(x.run, arena, nCols, a);
  }

  /** Takes the column prices `v` for the searches to come. */
  load(v: Float64Array): void {
    const { pd } = this;
    for (let j = 0; j < v.length; j++) pd[2 * j] = v[j]!;
  }

  /** Writes the column prices back to `v`. */
  flush(v: Float64Array): void {
    const { pd } = this;
    for (let j = 0; j < v.length; j++) v[j] = pd[2 * j]!;
  }

  /**
   * The searches of one solve over pairs `rows` (arrays of the arena) from column
   * prices `v`, which {@link RowSearch.flush} writes back: what a SparseSearch over the
   * same arrays is.
   */
  bind(rows: RowsView, v: Float64Array): RowSearch {
    this.load(v);
    return {
      run: (r0: number): number => {
        const n = this.search(rows, r0);
        if (n < 0) throw infeasibleRow(r0);
        return n;
      },
      flush: (): void => this.flush(v),
    };
  }

  /**
   * Augments from free row r0 (or settles it unmatched) over pairs `rows` (arrays of
   * the arena); returns the pairs scanned, or -1 when the row can be matched nowhere.
   */
  search(rows: RowsView, r0: number): number {
    const { a } = this;
    return this.run(
      rows.rowStart.byteOffset, rows.rowEnd.byteOffset, rows.colIdx.byteOffset, rows.cost.byteOffset,
      a.delta.byteOffset, a.u.byteOffset, a.rowToCol.byteOffset, a.colToRow.byteOffset,
      this.pd.byteOffset, this.pred.byteOffset, this.hpos.byteOffset, this.hcol.byteOffset, this.hkey.byteOffset,
      this.touched.byteOffset, this.settled.byteOffset, this.settledDist.byteOffset, r0,
    );
  }
}
