import { instantiate, lazyModule, type KernelMemory } from '../../matching/wasm/shared-memory.js';
import { WASM_BASE64 } from './graph-rows.wasm.js';

/*
 * The pair loop of the hindsight's graph build (graph.ts buildCompactGraph) in
 * WebAssembly: graph-rows.wat, assembled by scripts/build-wasm.mjs into
 * graph-rows.wasm.ts. The build's sweep stays in JavaScript (supplies join the grid,
 * rows are written in order, the first candidates see each row); what moves is the
 * scan of one row's cells, pair by pair, with the grid's buckets, the supplies'
 * terms and the row's output held in the kernel memory of the pair store, past its
 * pairs (GraphStore.scratch): the same memory the pricing kernel reads.
 *
 * Measured on a busy district's day (`gen --scale 4`, 114 M pairs, one thread, the
 * pairs in a kernel memory either way): the graph phase (build and first candidates)
 * took 1.80 s against 2.49–2.54 s with the rows scanned in JavaScript; the graph is
 * the same array for array (tests/unit/hindsight/graph.test.ts).
 */

type RowFn = (
  terms: number, cells: number, pool: number, nbr: number, nNbr: number,
  outCols: number, outCodes: number, defer: number, out: number,
  euclid: number, capMode: number, needs: number,
  u0: number, u1: number, u2: number, u3: number, u4: number,
  t: number, gone: number, cut: number, twoR: number, sixth: number,
  minPerKm: number, waitPerMs: number, edgeBelow: number, maxTravel: number, edge: number,
  P: number, perStep: number, top: number,
) => number;

type PlaceFn = (cols: number, codes: number, len: number, dstCols: number, dstCodes: number, span: number, out: number) => number;
type VisitFn = (
  cols: number, codes: number, len: number, start: number, k: number,
  colCode: number, colEdge: number, colBar: number, bestCode: number, bestEdge: number,
  greedy: number, taken: number, supplyEnd: number, top: number, out: number,
) => number;

/**
 * The arrays of the first candidates (candidates.ts FirstCandidates) where the row
 * kernel's `visit` reads and writes them: in the kernel memory, past the build's own.
 */
export interface CandidateArrays {
  readonly colCode: Int32Array;
  readonly colEdge: Int32Array;
  readonly colBar: Int32Array;
  readonly bestCode: Int32Array;
  readonly bestEdge: Int32Array;
  /** Per column, 1 once the earliest-deadline greedy took it (empty without the greedy). */
  readonly taken: Uint8Array;
  readonly supplyEnd: Float64Array;
}

/**
 * A row visitor (graph.ts RowVisitor) that can look at rows through the kernel: it
 * says what it needs, takes over arrays in the kernel memory, and from then on calls
 * `visit(len, start)` for the row just written (the number of its cheapest it holds)
 * and `picked()` for the greedy's place in the row (-1: none).
 */
export interface KernelVisitor {
  readonly k: number;
  readonly greedy: boolean;
  adopt(arrays: CandidateArrays, visit: (len: number, start: number) => number, picked: () => number): void;
}

const kernelModule = lazyModule(WASM_BASE64);

interface Exports {
  readonly row: RowFn;
  readonly place: PlaceFn;
  readonly visit: VisitFn;
}

/** Room in a kernel memory past a store's pairs, for the build's working arrays. */
export interface ScratchSpace {
  readonly memory: KernelMemory;
  /** The byte offset where at least `bytes` are free (growing the memory as needed); -1 when they cannot be had. */
  scratch(bytes: number): number;
}

/** The numbers a row's pair test uses, as graph.ts computes them for the build. */
export interface RowConstants {
  readonly euclid: boolean;
  /** Whether each unit has one capability word to test (graph.ts capWords === 1). */
  readonly oneCapWord: boolean;
  readonly cut: number;
  readonly twoR: number;
  readonly sixth: number;
  readonly minPerKm: number;
  readonly waitPerMs: number;
  readonly edgeBelow: number;
  readonly maxTravel: number;
  readonly edge: number;
  readonly P: number;
  readonly perStep: number;
  readonly top: number;
}

/** Bytes of the call's result area and of the cell list (at most 25 cells of a 5 × 5 block). */
const OUT_BYTES = 64;
const NBR_CELLS = 32;
/** First room of a new cell's bucket (supplies). */
const FIRST_ROOM = 4;

/**
 * The grid of one build's supplies and the row kernel over it, all in a kernel
 * memory. Cells are numbered as they first get a supply; each cell's bucket is a
 * slice of one pool, moved to the pool's end with twice the room when it fills.
 */
export class KernelRows {
  private readonly row: RowFn;
  private readonly placeRow: PlaceFn;
  private readonly visitRow: VisitFn;
  private readonly cellOf = new Map<number, number>();
  private nCells = 0;
  private room: Int32Array;
  private poolEnd = 0;
  private poolRoom: number;
  private readonly termsAt: number;
  private readonly cellsAt: number;
  private readonly nbrAt: number;
  private readonly deferAt: number;
  private readonly outAt: number;
  private readonly poolAt: number;
  private readonly candidatesAt: number;
  private readonly colsAt: number;
  private readonly codesAt: number;
  private views!: { cells: Int32Array; pool: Int32Array; nbr: Int32Array; out: Int32Array };
  /** The row's columns and codes after {@link scan} (views into the kernel memory, room for every supply). */
  cols!: Int32Array;
  codes!: Uint8Array;
  /** Places in the row of the pairs the exact formula must decide ({@link deferred} of them). */
  defer!: Int32Array;

  private constructor(
    private readonly space: ScratchSpace,
    exp: Exports,
    base: number,
    nSupply: number,
    private readonly k: RowConstants,
    candidateBytes: number,
  ) {
    this.row = exp.row;
    this.placeRow = exp.place;
    this.visitRow = exp.visit;
    this.room = new Int32Array(Math.max(16, nSupply));
    const n = Math.max(1, nSupply);
    this.outAt = base;
    this.nbrAt = base + OUT_BYTES;
    this.termsAt = this.nbrAt + 4 * NBR_CELLS;
    this.cellsAt = this.termsAt + 64 * n;
    this.deferAt = this.cellsAt + 8 * n;
    this.colsAt = this.deferAt + 4 * n;
    this.codesAt = this.colsAt + 4 * n;
    this.candidatesAt = align8(this.codesAt + n);
    this.poolAt = align8(this.candidatesAt + candidateBytes);
    this.poolRoom = 4 * n + 1024;
    this.refresh(n);
  }

  /**
   * The kernel over `space` for a market of `nSupply` supplies with terms `sTerms`
   * (graph.ts termsOf), or null where it cannot run or its room cannot be had.
   */
  static open(space: ScratchSpace, nSupply: number, sTerms: Float64Array, k: RowConstants, visitor: KernelVisitor | null = null): KernelRows | null {
    const n = Math.max(1, nSupply);
    // (Each of its seven arrays starts on 8 bytes: 64 for their padding.)
    const candidateBytes = visitor === null ? 0 : 8 * n * visitor.k + 4 * n + 8 * visitor.k + (visitor.greedy ? n : 0) + 8 * n + 64;
    const bytes = OUT_BYTES + 4 * NBR_CELLS + 64 * n + 8 * n + 4 * n + 4 * n + n + 16 + candidateBytes + 4 * (4 * n + 1024);
    const base = space.scratch(bytes);
    if (base < 0) return null;
    const exp = instantiate<Exports>(kernelModule.get(), space.memory);
    if (exp === null) return null;
    const rows = new KernelRows(space, exp, base, nSupply, k, candidateBytes);
    new Float64Array(space.memory.buffer, rows.termsAt, sTerms.length).set(sTerms);
    if (visitor !== null) rows.lendTo(visitor, nSupply);
    return rows;
  }

  /** Hands `visitor` its arrays in the kernel memory and the kernel's look at each row. */
  private lendTo(visitor: KernelVisitor, nSupply: number): void {
    const buf = this.space.memory.buffer;
    const { k, greedy } = visitor;
    let at = this.candidatesAt;
    const take = (bytes: number): number => {
      const here = at;
      at = align8(at + bytes);
      return here;
    };
    const arrays: CandidateArrays = {
      colCode: new Int32Array(buf, take(4 * nSupply * k), nSupply * k),
      colEdge: new Int32Array(buf, take(4 * nSupply * k), nSupply * k),
      colBar: new Int32Array(buf, take(4 * nSupply), nSupply),
      bestCode: new Int32Array(buf, take(4 * k), k),
      bestEdge: new Int32Array(buf, take(4 * k), k),
      supplyEnd: new Float64Array(buf, take(8 * nSupply), nSupply),
      taken: new Uint8Array(buf, take(greedy ? nSupply : 0), greedy ? nSupply : 0),
    };
    const top = this.k.top;
    const ptrs = [arrays.colCode, arrays.colEdge, arrays.colBar, arrays.bestCode, arrays.bestEdge].map((a) => a.byteOffset) as [number, number, number, number, number];
    const takenAt = arrays.taken.byteOffset;
    const endAt = arrays.supplyEnd.byteOffset;
    visitor.adopt(
      arrays,
      (len, start) => this.visitRow(this.colsAt, this.codesAt, len, start, k, ptrs[0], ptrs[1], ptrs[2], ptrs[3], ptrs[4], greedy ? 1 : 0, takenAt, endAt, top, this.outAt),
      () => this.views.out[4]!,
    );
  }

  /** Views over the memory as it now stands (after it grew, the old ones end short). */
  private refresh(n: number): void {
    const buf = this.space.memory.buffer;
    this.views = {
      cells: new Int32Array(buf, this.cellsAt, 2 * n),
      pool: new Int32Array(buf, this.poolAt, this.poolRoom),
      nbr: new Int32Array(buf, this.nbrAt, NBR_CELLS),
      out: new Int32Array(buf, this.outAt, OUT_BYTES / 4),
    };
    this.defer = new Int32Array(buf, this.deferAt, n);
    this.cols = new Int32Array(buf, this.colsAt, n);
    this.codes = new Uint8Array(buf, this.codesAt, n);
  }

  /** Supply s joins grid cell `key`. */
  add(s: number, key: number): void {
    let c = this.cellOf.get(key);
    const { cells } = this.views;
    if (c === undefined) {
      c = this.nCells++;
      this.cellOf.set(key, c);
      cells[2 * c] = this.take(FIRST_ROOM);
      cells[2 * c + 1] = 0;
      this.room[c] = FIRST_ROOM;
    }
    const len = this.views.cells[2 * c + 1]!;
    if (len === this.room[c]!) {
      // Full: to the pool's end with twice the room.
      const at = this.take(2 * len);
      const { pool } = this.views;
      pool.copyWithin(at, this.views.cells[2 * c]!, this.views.cells[2 * c]! + len);
      this.views.cells[2 * c] = at;
      this.room[c] = 2 * len;
    }
    this.views.pool[this.views.cells[2 * c]! + len] = s;
    this.views.cells[2 * c + 1] = len + 1;
  }

  /** `n` entries at the pool's end (the pool grows, and the memory with it, when they do not fit). */
  private take(n: number): number {
    const at = this.poolEnd;
    if (at + n > this.poolRoom) {
      const want = Math.max(2 * this.poolRoom, at + n);
      if (this.space.scratch(this.poolAt - this.outAt + 4 * want) < 0) throw new RangeError('hindsight: no room for the graph build\'s grid in its kernel memory');
      this.poolRoom = want;
      this.refresh(this.cols.length);
    }
    this.poolEnd = at + n;
    return at;
  }

  /**
   * Scans the cells `keys` (those holding supplies) for demand terms u0..u4, capability
   * word `needs`, arrival `t`, with supplies ended before `gone` dropped from their
   * buckets; returns the row's length. Its pairs are {@link cols} / {@link codes};
   * {@link deferred} of them, at the places in {@link defer}, await the exact formula
   * (code 255 until then).
   */
  scan(keys: readonly number[], needs: number, u0: number, u1: number, u2: number, u3: number, u4: number, t: number, gone: number): number {
    const { nbr } = this.views;
    let nNbr = 0;
    for (let q = 0; q < keys.length; q++) {
      const c = this.cellOf.get(keys[q]!);
      if (c !== undefined) nbr[nNbr++] = c;
    }
    if (nNbr === 0) {
      this.views.out[0] = 0;
      return 0;
    }
    const k = this.k;
    return this.row(
      this.termsAt, this.cellsAt, this.poolAt, this.nbrAt, nNbr,
      this.colsAt, this.codesAt, this.deferAt, this.outAt,
      k.euclid ? 1 : 0, k.oneCapWord ? 1 : 0, needs | 0,
      u0, u1, u2, u3, u4,
      t, gone, k.cut, k.twoR, k.sixth,
      k.minPerKm, k.waitPerMs, k.edgeBelow, k.maxTravel, k.edge,
      k.P, k.perStep, k.top,
    );
  }

  /** Pairs of the last {@link scan} that the exact formula must decide. */
  deferred(): number {
    return this.views.out[0]!;
  }

  /** Whether the pairs of a store at `memory` can be written by {@link place}. */
  writes(memory: KernelMemory | null): boolean {
    return memory === this.space.memory;
  }

  /**
   * Writes the row's `len` pairs (settled) into the store at byte offsets `colsAt`
   * (u16 columns less the row's lowest, zeros for a row spanning more than `span`)
   * and `codesAt`; returns whether it spans more. Its lowest and highest column are
   * then {@link lo} and {@link hi}.
   */
  place(len: number, colsAt: number, codesAt: number, span: number): boolean {
    return this.placeRow(this.colsAt, this.codesAt, len, colsAt, codesAt, span, this.outAt) !== 0;
  }

  lo(): number {
    return this.views.out[2]!;
  }

  hi(): number {
    return this.views.out[3]!;
  }
}

/** n rounded up to a multiple of 8 (byte offsets pass 2^31: no 32-bit arithmetic). */
function align8(n: number): number {
  return Math.ceil(n / 8) * 8;
}

