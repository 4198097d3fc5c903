import { instantiate, lazyModule, type KernelMemory } from '../../matching/wasm/shared-memory.js';
import { WASM_BASE64 } from './pricing-scan.wasm.js';

/*
 * The tight loop of a pricing pass (pricing.ts) in WebAssembly: pricing-scan.wat,
 * assembled by scripts/build-wasm.mjs into pricing-scan.wasm.ts. It reads the pair
 * store in place, so the store lives in the kernel's memory: a shared
 * WebAssembly.Memory (graph.ts GraphStore), whose pages, like a SharedArrayBuffer's,
 * are made resident only as they are written, and which a helper thread can be sent
 * whole (pricing-split.ts). Beyond the pairs the memory holds, per pricer, a copy of
 * the column prices and the column picks' counts and reduced costs (a "slot", see
 * {@link KernelColumns}). Each thread instantiates the module once over each memory.
 *
 * Why: the loop is a load of a code, of a column and of its price, a subtraction and
 * a comparison per pair, and JavaScript's typed-array reads check their bounds at
 * every one. Measured on one thread: on random rows shaped like a busy district's
 * (58,000 rows of 1,970 pairs), 2.6 ns a pair in JavaScript and 1.7 ns here; on that
 * district itself (`gen --scale 4`, one day, 114 M pairs, 16 rounds), the pricing
 * passes took 2.0 s against 2.7–3.1 s and the whole market 7.9–8.0 s against
 * 9.0–9.4 s, to the same optimum. The results go back through memory (`out`): reading
 * an exported global from JavaScript cost 0.4 s of those passes.
 */

/**
 * Where one pricer's kernel reads column numbers: views into a kernel memory, past
 * the pairs. `duals` is a copy of the column prices (made at the start of each
 * pass, {@link ScanKernel.loadDuals}); `count` and `red` are the pricer's column
 * picks' own arrays (pricing.ts ColumnPicks), which the kernel consults to stop at a
 * violator that enters its column's few; `out` is where a call leaves what it found.
 */
export interface KernelColumns {
  readonly memory: KernelMemory;
  readonly duals: Float64Array;
  readonly count: Int32Array;
  readonly red: Float64Array;
  /** Where a call leaves the row's floor and the violators it counted. */
  readonly out: Float64Array;
}

interface Exports {
  readonly clear: (
    codes: number, cols: number, duals: number, count: number, red: number, perCol: number, out: number,
    e: number, end: number, base: number, top: number,
    step: number, u: number, bar: number, deep: number, rowCut: number, least: number,
  ) => number;
}

const kernelModule = lazyModule(WASM_BASE64);

/** One pricer's kernel: the module instantiated over the memory of its columns. */
export class ScanKernel {
  private readonly x: Exports;
  /** Byte offsets of the columns' arrays in the memory. */
  readonly dualsAt: number;
  readonly countAt: number;
  readonly redAt: number;
  readonly outAt: number;
  private readonly out: Float64Array;

  private constructor(readonly columns: KernelColumns, x: Exports) {
    this.x = x;
    this.dualsAt = columns.duals.byteOffset;
    this.countAt = columns.count.byteOffset;
    this.redAt = columns.red.byteOffset;
    this.outAt = columns.out.byteOffset;
    this.out = columns.out;
  }

  /** The kernel over `columns`' memory, or null where it cannot run. */
  static over(columns: KernelColumns): ScanKernel | null {
    const x = instantiate<Exports>(kernelModule.get(), columns.memory);
    return x === null ? null : new ScanKernel(columns, x);
  }

  /** Copies the pass's column prices where the kernel reads them. */
  loadDuals(colDuals: Float64Array): void {
    this.columns.duals.set(colDuals.subarray(0, this.columns.duals.length));
  }

  /**
   * Reads pairs [e, end) of a row (codes at byte `codesAt`, columns at `colsAt` less
   * `base`) until one must be handled in full; returns that pair's index (`end`
   * when none). The row's floor is then {@link least}, and {@link violators} the
   * violators counted.
   */
  clear(
    codesAt: number, colsAt: number, perCol: number, e: number, end: number, base: number, top: number,
    step: number, u: number, bar: number, deep: number, rowCut: number, least: number,
  ): number {
    return this.x.clear(codesAt, colsAt, this.dualsAt, this.countAt, this.redAt, perCol, this.outAt, e, end, base, top, step, u, bar, deep, rowCut, least);
  }

  /** The row's floor after the last {@link clear}. */
  least(): number {
    return this.out[0]!;
  }

  /** Violators the last {@link clear} counted. */
  violators(): number {
    return this.out[1]!;
  }
}
