import { WASM_BASE64 } from './dense-jv.wasm.js';

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
 * One instance is kept per process; its memory holds a copy of the matrix, and a
 * larger matrix gets a new instance (see kernelFor; the caller keeps n small enough,
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
  if (compiled === undefined) {
    try {
      compiled = wasmApi === undefined ? null : new wasmApi.Module(Uint8Array.from(atob(WASM_BASE64), (ch) => ch.charCodeAt(0)));
    } catch {
      compiled = null;
    }
  }
  if (compiled === null || wasmApi === undefined) return null;
  try {
    const memory = new wasmApi.Memory({ initial: Math.ceil(bytes / 65536) });
    const exp = new wasmApi.Instance(compiled, { env: { memory } }).exports as Omit<Kernel, 'memory'>;
    kernel = { memory, scanned: exp.scanned, solve: exp.solve };
    return kernel;
  } catch {
    // no memory to be had of that size
    return null;
  }
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
  const V = align(C + n * n * 8 + 128);
  const U = V + np * 8;
  const R2C = U + np * 8;
  const C2R = R2C + np * 4;
  const W = align(C2R + np * 4);
  const k = W + 64 * np <= MAX_BYTES ? kernelFor(W + 64 * np) : null;
  if (k === null) return { status: WASM_NO_KERNEL, ...none, scanned: 0 };
  const buf = k.memory.buffer;
  new Float64Array(buf, C, n * n).set(cost);
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
