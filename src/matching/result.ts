import type { SolveResult, SolveStats } from './types.js';

/** The default clock of `stats.ms`: the core never reads the time any other way. */
export const defaultNow = (): number => globalThis.performance.now();

export function finishResult(
  cost: number,
  rowToCol: Int32Array,
  colToRow: Int32Array,
  rowDuals: Float64Array,
  colDuals: Float64Array,
  stats: SolveStats,
): SolveResult {
  return { cost, rowToCol, colToRow, rowDuals, colDuals, stats };
}

/** Compensated (Neumaier) summation, so certificates of long sums stay within 1e-9. */
export class Sum {
  private s = 0;
  private c = 0;
  add(x: number): void {
    const t = this.s + x;
    this.c += Math.abs(this.s) >= Math.abs(x) ? this.s - t + x : x - t + this.s;
    this.s = t;
  }
  get value(): number {
    return this.s + this.c;
  }
}
