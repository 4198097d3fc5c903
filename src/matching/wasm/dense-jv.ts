import { WASM_BASE64 } from './dense-jv.wasm.js';
import { decodeBase64 } from './shared-memory.js';

/*
 * The dense shortest-augmenting-path kernel of dense-jv.wat (assembled by
 * scripts/build-wasm.mjs into dense-jv.wasm.ts), run in WebAssembly. A process's
 * first dense solve in JS spends most of its time before the engine has optimised
 * the searches (geometric n = 1000: 80 ms first, 30–45 ms once compiled); wasm has no
 * interpreted phase: V8 compiles each function with its baseline compiler (Liftoff)
 * on first call and optimises the hot ones in the background, so the first solve
 * runs near compiled speed. A running call never switches to optimised code, so the
 * kernel does no long loop in one call: each search is a call of its own ($search,
 * once per free row) and each search step one more ($relax). Measured in fresh
 * processes (geometric and clustered n = 1000, medians of 8 alternated runs): the
 * same first-solve time as a module compiled eagerly and optimised up front (V8
 * flags --no-wasm-dynamic-tiering --no-wasm-lazy-compilation): 31.1 against 31.2 ms and
 * 35.0 against 36.5 ms; before the searches were split out of one long call, 25 against 17.5 ms of
 * kernel time.
 *
 * One instance is kept per process; its memory holds a copy of the matrix (or, for
 * the row-minima start's pass, wasmRowMinima, a few of its rows at a time), and a
 * larger need gets a new instance (see kernelFor; the caller keeps n small enough,
 * see dense.ts).
 */

/** The part of the WebAssembly API used here (the project's TS libs do not declare it). */
interface WasmApi {
  readonly Module: new (bytes: Uint8Array) => object;
  readonly Instance: new (mod: object, imports: object) => { readonly exports: unknown };
  readonly Memory: new (desc: { initial: number }) => WasmMemory;
}
interface WasmMemory {
  readonly buffer: ArrayBuffer;
}
const wasmApi = (globalThis as unknown as { WebAssembly?: WasmApi }).WebAssembly;

interface Kernel {
  readonly memory: WasmMemory;
  readonly scanned: { readonly value: number };
  readonly solve: (n: number, c: number, v: number, u: number, r2c: number, c2r: number, w: number, maxScan: number, maxFree: number) => number;
  readonly ties: { readonly value: number };
  readonly rowMinima: (cb: number, rows: number, n: number, r0: number, u: number, r2c: number, c2r: number, f: number, nFree: number, countBelow: number) => number;
  readonly columnsAt: (pc: number, n: number, m: number, out: number) => number;
  readonly freeAt: (pc: number, n: number, c2r: number, m: number, start: number) => number;
}

/** The compiled module (null where WebAssembly with SIMD is not available), and the instance of the last solve. */
let compiled: object | null | undefined;
let kernel: Kernel | null = null;

/**
 * An instance whose memory holds `bytes`: the last one if it is large enough, else a
 * new one with a memory of its own. A memory is never grown: growing detaches its
 * old buffer, and once any buffer has been detached V8 adds a check to every
 * typed-array access of optimised JS code in the process (measured: the JS solve of
 * c_ij = i·j costs at n = 1000 run 25–35 % slower after a kernel call that had
 * grown its memory). Null where the kernel cannot run.
 */
function kernelFor(bytes: number): Kernel | null {
  if (kernel !== null && kernel.memory.buffer.byteLength >= bytes) return kernel;
  const made = newKernel(bytes);
  if (made !== null) kernel = made;
  return made;
}

/** A new instance with a memory of `bytes` of its own; null where the kernel cannot run or no such memory can be had. */
function newKernel(bytes: number): Kernel | null {
  if (compiled === undefined) {
    try {
      compiled = wasmApi === undefined ? null : new wasmApi.Module(decodeBase64(WASM_BASE64));
    } catch {
      compiled = null;
    }
  }
  if (compiled === null || wasmApi === undefined) return null;
  try {
    const memory = new wasmApi.Memory({ initial: Math.ceil(bytes / 65536) });
    const exp = new wasmApi.Instance(compiled, { env: { memory } }).exports as Omit<Kernel, 'memory'>;
    return { memory, ...exp };
  } catch {
    // no memory to be had of that size
    return null;
  }
}

/** Where the kernel's arrays start after an n × n matrix at offset 0 (and the 16 cells of padding its row scans read past the last row). */
const afterMatrix = (n: number): number => align(n * n * 8 + 128);

/** Bytes of every array of the full search for an n × n matrix (see wasmDenseJv). */
function fullSearchBytes(n: number): number {
  const np = align(n);
  return align(afterMatrix(n) + np * 8 * 2 + np * 4 * 2) + 64 * np;
}

/**
 * Instances whose memory holds a caller's matrix at offset 0 ({@link kernelMatrix}),
 * by that memory: never used to copy another matrix in.
 */
const lent = new WeakMap<ArrayBuffer, Kernel>();

/** The instance whose memory holds `cost` in place (an n × n matrix from kernelMatrix), else null. */
function homeOf(cost: Float64Array, n: number): Kernel | null {
  const k = lent.get(cost.buffer as ArrayBuffer);
  if (k === undefined || cost.byteOffset !== 0 || cost.length !== n * n) return null;
  return k.memory.buffer.byteLength >= fullSearchBytes(n) ? k : null;
}

/** Whether the kernel reads the n × n matrix `cost` in place (one from {@link kernelMatrix}) rather than a copy. */
export function readInPlace(cost: Float64Array, n: number): boolean {
  return homeOf(cost, n) !== null;
}

/**
 * An n × n cost matrix (row-major, zeros) that lives where the kernel reads its
 * matrix: at offset 0 of an instance's memory of its own. A solve by the kernel then
 * reads it in place instead of copying it into the kernel's memory, which in a
 * process's first solve costs page faults of fresh memory as well as the copy (n =
 * 1000: about 3 ms of a 22 ms solve; n = 2000 four times that). A caller that fills
 * its matrix here (the CLI's parser) writes it once. A plain array where the kernel
 * cannot run or n is past its size. The kernel only reads the matrix; each call
 * makes a new instance, so matrices so made never share memory.
 */
export function kernelMatrix(n: number): Float64Array {
  const bytes = fullSearchBytes(n);
  const k = n > 0 && bytes <= MAX_BYTES ? newKernel(bytes) : null;
  if (k === null) return new Float64Array(n * n);
  lent.set(k.memory.buffer, k);
  return new Float64Array(k.memory.buffer, 0, n * n);
}

/** The kernel's statuses besides a count of searches: see dense-jv.wat. */
export const WASM_BAD_CELL = -1;
export const WASM_INFEASIBLE = -2;
export const WASM_GAVE_UP = -3;
export const WASM_NO_KERNEL = -5;

export interface WasmJvOut {
  /** Searches run (≥ 0), or a WASM_* status (or -4), in which case the arrays are empty. */
  readonly status: number;
  readonly rowToCol: Int32Array;
  readonly colToRow: Int32Array;
  readonly u: Float64Array;
  readonly v: Float64Array;
  /** Pairs read (each search step counts the whole padded row). */
  readonly scanned: number;
}

const align = (x: number): number => Math.ceil(x / 16) * 16;
/** The kernel's largest memory: its addresses stay below 2^31 (n up to about 16 000). */
const MAX_BYTES = 2 ** 31;

/**
 * Solves the square n × n matrix `cost` (every row matched) in the wasm kernel. It
 * gives up after reading `maxScan` pairs, or when more than `maxFree` rows are left
 * for the searches after the reductions. Prices and assignment come back as found:
 * every matched pair tight (u + v = c), no allowed pair's reduced cost negative.
 */
export function wasmDenseJv(cost: Float64Array, n: number, maxScan: number, maxFree: number): WasmJvOut {
  const none = { rowToCol: new Int32Array(0), colToRow: new Int32Array(0), u: new Float64Array(0), v: new Float64Array(0) };
  const np = align(n);
  const C = 0;
  const V = afterMatrix(n);
  const U = V + np * 8;
  const R2C = U + np * 8;
  const C2R = R2C + np * 4;
  const W = align(C2R + np * 4);
  const home = homeOf(cost, n);
  const k = home ?? (W + 64 * np <= MAX_BYTES ? kernelFor(W + 64 * np) : null);
  if (k === null) return { status: WASM_NO_KERNEL, ...none, scanned: 0 };
  const buf = k.memory.buffer;
  if (home === null) new Float64Array(buf, C, n * n).set(cost);
  new Float64Array(buf, C + n * n * 8, 16).fill(0);
  const status = k.solve(n, C, V, U, R2C, C2R, W, maxScan, maxFree);
  const scanned = k.scanned.value;
  if (status < 0) return { status, ...none, scanned };
  return {
    status,
    rowToCol: new Int32Array(buf, R2C, n).slice(),
    colToRow: new Int32Array(buf, C2R, n).slice(),
    u: new Float64Array(buf, U, n).slice(),
    v: new Float64Array(buf, V, n).slice(),
    scanned,
  };
}

export interface WasmRowMinimaOut {
  /**
   * The count of rows left free (≥ 0), or WASM_BAD_CELL, WASM_INFEASIBLE (a row with
   * no allowed pair), WASM_GAVE_UP or WASM_NO_KERNEL; the arrays are then empty.
   */
  readonly status: number;
  /** Each row's minimum cost (NaN cells skipped). */
  readonly u: Float64Array;
  readonly rowToCol: Int32Array;
  readonly colToRow: Int32Array;
  /** The rows left without a column, in order, in the first `status` entries. */
  readonly freeRows: Int32Array;
  /** Pairs read. */
  readonly scanned: number;
}

/** Bytes of matrix rows copied into the kernel's memory at a time by {@link wasmRowMinima}. */
const ROW_CHUNK_BYTES = 1 << 18;

/** Row r's start for its scan for a free column at its minimum: floor(frac(r · golden ratio) · n), as in the kernel. */
export function spreadStart(r: number, n: number): number {
  return Math.floor(((r * 0.6180339887498949) % 1) * n);
}

/**
 * The row-minima start's pass (dense.ts, greedyOnRowMinima, which gives its rules and
 * runs the same steps in JS) in the kernel. The rows go through the kernel a few at a
 * time (at most ROW_CHUNK_BYTES), so it never holds the whole matrix and there is no
 * large fresh memory to fault in (copying n = 1000 into a fresh memory costs about
 * 3 ms; this whole pass about 1.5 ms). After each batch of the greedy pass,
 * `stop(rowsDone, nFree, ties)` may end it (WASM_GAVE_UP); `ties` counts the cells at
 * their row's minimum over the first min(rowsDone, `countRows`) rows. More than
 * `maxLeft` rows free after the greedy pass also give up. A matrix from
 * {@link kernelMatrix} is read in place, nothing copied.
 */
export function wasmRowMinima(
  cost: Float64Array,
  n: number,
  countRows: number,
  maxLeft: number,
  stop: (rowsDone: number, nFree: number, ties: number) => boolean,
): WasmRowMinimaOut {
  const none = { u: new Float64Array(0), rowToCol: new Int32Array(0), colToRow: new Int32Array(0), freeRows: new Int32Array(0), scanned: 0 };
  const chunk = Math.max(2, Math.min(n, Math.floor(ROW_CHUNK_BYTES / (8 * n))));
  const np = align(n);
  // A matrix in the kernel's memory (kernelMatrix) is read in place, its arrays after it.
  const home = homeOf(cost, n);
  const U = home !== null ? afterMatrix(n) : align(chunk * n * 8);
  const R2C = U + np * 8;
  const C2R = R2C + np * 4;
  const F = C2R + np * 4;
  const AT = F + np * 4;
  const bytes = AT + np * 4;
  const k = home ?? (bytes <= MAX_BYTES ? kernelFor(bytes) : null);
  if (k === null) return { status: WASM_NO_KERNEL, ...none };
  const buf = k.memory.buffer;
  const rows = home !== null ? null : new Float64Array(buf, 0, chunk * n);
  if (home !== null) new Float64Array(buf, n * n * 8, 16).fill(0);
  // Byte offset of row r of the matrix (in place), or of slot `at` of the rows copied in.
  const rowAt = (r: number, at: number): number => {
    if (rows === null) return r * n * 8;
    rows.set(cost.subarray(r * n, r * n + n), at * n);
    return at * n * 8;
  };
  const u = new Float64Array(buf, U, n);
  const rowToCol = new Int32Array(buf, R2C, n);
  const colToRow = new Int32Array(buf, C2R, n);
  const freeRows = new Int32Array(buf, F, n);
  const at = new Int32Array(buf, AT, n);
  new Int32Array(buf, R2C, 2 * np).fill(-1);
  let nFree = 0;
  for (let r0 = 0; r0 < n; r0 += chunk) {
    const r1 = Math.min(n, r0 + chunk);
    if (rows !== null) rows.set(cost.subarray(r0 * n, r1 * n));
    nFree = k.rowMinima(rows !== null ? 0 : r0 * n * 8, r1 - r0, n, r0, U, R2C, C2R, F, nFree, countRows);
    if (nFree < 0) return { status: nFree === -1 ? WASM_BAD_CELL : WASM_INFEASIBLE, ...none };
    if (stop(r1, nFree, k.ties.value)) return { status: WASM_GAVE_UP, ...none };
  }
  if (nFree > maxLeft) return { status: WASM_GAVE_UP, ...none };
  // paths of two tight pairs: row r takes a column j at its minimum, whose row i moves
  // to a free column at i's minimum (row r in slot 0, row i in slot 1)
  let scanned = n * n;
  let left = 0;
  for (let f = 0; f < nFree; f++) {
    const r = freeRows[f]!;
    const ties = k.columnsAt(rowAt(r, 0), n, u[r]!, AT);
    scanned += n;
    let done = false;
    for (let t = 0; t < ties && !done; t++) {
      const j = at[t]!;
      const i = colToRow[j]!;
      const to = k.freeAt(rowAt(i, 1), n, C2R, u[i]!, spreadStart(i, n));
      scanned += n;
      if (to < 0) continue;
      rowToCol[i] = to;
      colToRow[to] = i;
      rowToCol[r] = j;
      colToRow[j] = r;
      done = true;
    }
    if (!done) freeRows[left++] = r;
  }
  return { status: left, u: u.slice(), rowToCol: rowToCol.slice(), colToRow: colToRow.slice(), freeRows: freeRows.slice(0, left), scanned };
}
