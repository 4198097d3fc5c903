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
 * One instance is kept per process; its memory holds a copy of the matrix and grows
 * to the largest one solved (the caller keeps n small enough, see dense.ts).
 */

/** The part of the WebAssembly API used here (the project's TS libs do not declare it). */
interface WasmApi {
  readonly Module: new (bytes: Uint8Array) => object;
  readonly Instance: new (mod: object, imports: object) => { readonly exports: unknown };
}
const wasmApi = (globalThis as unknown as { WebAssembly?: WasmApi }).WebAssembly;

interface Kernel {
  readonly memory: { readonly buffer: ArrayBuffer; grow(pages: number): number };
  readonly scanned: { readonly value: number };
  readonly solve: (n: number, c: number, v: number, u: number, r2c: number, c2r: number, w: number, maxScan: number, maxFree: number) => number;
}

let kernel: Kernel | null | undefined;

/** The kernel, compiled on first use; null where WebAssembly (with SIMD) is not available. */
function loadKernel(): Kernel | null {
  if (kernel !== undefined) return kernel;
  if (wasmApi === undefined) return (kernel = null);
  try {
    const bytes = Uint8Array.from(atob(WASM_BASE64), (ch) => ch.charCodeAt(0));
    const exp = new wasmApi.Instance(new wasmApi.Module(bytes), {}).exports as Kernel;
    kernel = { memory: exp.memory, scanned: exp.scanned, solve: exp.solve };
  } catch {
    kernel = null;
  }
  return kernel;
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

const align = (x: number): number => (x + 15) & ~15;

/**
 * Solves the square n × n matrix `cost` (every row matched) in the wasm kernel. It
 * gives up after reading `maxScan` pairs, or when more than `maxFree` rows are left
 * for the searches after the reductions. Prices and assignment come back as found:
 * every matched pair tight (u + v = c), no allowed pair's reduced cost negative.
 */
export function wasmDenseJv(cost: Float64Array, n: number, maxScan: number, maxFree: number): WasmJvOut {
  const none = { rowToCol: new Int32Array(0), colToRow: new Int32Array(0), u: new Float64Array(0), v: new Float64Array(0) };
  const k = loadKernel();
  if (k === null) return { status: WASM_NO_KERNEL, ...none, scanned: 0 };
  const np = (n + 15) & ~15;
  const C = 0;
  const V = align(C + n * n * 8 + 128);
  const U = V + np * 8;
  const R2C = U + np * 8;
  const C2R = R2C + np * 4;
  const W = align(C2R + np * 4);
  const end = W + 64 * np;
  const have = k.memory.buffer.byteLength;
  if (end > have) k.memory.grow(Math.ceil((end - have) / 65536));
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
