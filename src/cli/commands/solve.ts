/**
 * `pairflow solve FILE [--unmatched-cost X] [--maximize] [--json]` (SPEC §6): one
 * exact min-cost assignment of a dense CSV cost matrix or a JSON sparse instance
 * (formats in ../solve-input.ts), with the dual prices that certify it (SPEC §5).
 */

import { performance } from 'node:perf_hooks';
import type { Command } from 'commander';
import { pairflowError, PairflowError } from '../../errors.js';
import { maxCardinalityMatching, minVertexCover, type BipartiteGraph } from '../../matching/cardinality.js';
import { checkCertificate, maximizeDense, maximizeSparse, solveDense, solveSparse } from '../../matching/index.js';
import type { DenseInstance, SolveResult, SparseInstance } from '../../matching/types.js';
import { MAX_COST, MAX_COST_TEXT } from '../../matching/validate.js';
import { parseNumber } from '../parse.js';
import { writeOut } from '../stdout.js';
import { readSolveInput, type SolveInput } from '../solve-input.js';

/** Options of `pairflow solve`. */
export interface SolveCommandOptions {
  /**
   * Cost of leaving a row unmatched, the same for every row; overrides a JSON
   * instance's `unmatchedCost`. With `maximize` it is the weight earned by leaving a
   * row unmatched. @default undefined — every row must be matched
   */
  readonly unmatchedCost?: number;
  /**
   * Treat the numbers as weights and maximise their sum. The reported duals are then
   * those of the maximisation LP: `rowDuals[r] + colDuals[c] ≥ w[r][c]` for every
   * allowed pair, `colDuals ≥ 0`, `rowDuals[r] ≥` r's unmatched weight, and their sum
   * equals `cost` (the total weight). @default false
   */
  readonly maximize?: boolean;
}

/** What `pairflow solve --json` prints (0-based indices). */
export interface SolveReport {
  /** Σ matched costs + Σ unmatched costs (with `maximize`: the total weight). */
  readonly cost: number;
  /** `[row, col]` per matched pair, ascending by row. */
  readonly pairs: [number, number][];
  readonly rowDuals: number[];
  readonly colDuals: number[];
  /** Time in the solver alone: no parsing, no checks, no printing. */
  readonly solveMs: number;
  /** Rows left unmatched (not printed by `--json`, which holds exactly SPEC §6's fields). */
  readonly unmatchedRows: number[];
}

function listSome(xs: ArrayLike<number>, max = 5): string {
  const shown = Array.from({ length: Math.min(xs.length, max) }, (_, i) => String(xs[i]));
  return xs.length > max ? `${shown.join(', ')}, … (${xs.length} in all)` : shown.join(', ');
}

/** The allowed pairs alone, for the feasibility explanation. */
function graphOf(input: SolveInput): BipartiteGraph {
  if (input.kind === 'sparse') return input.instance;
  const { nRows, nCols, cost } = input.instance;
  const rowPtr = new Int32Array(nRows + 1);
  const cols: number[] = [];
  for (let r = 0; r < nRows; r++) {
    for (let c = 0; c < nCols; c++) if (Number.isFinite(cost[r * nCols + c]!)) cols.push(c);
    rowPtr[r + 1] = cols.length;
  }
  return { nRows, nCols, rowPtr, colIdx: Int32Array.from(cols) };
}

/**
 * Why not every row can be matched, as Hall's condition fails: the rows reached by
 * alternating paths from a row left out by a maximum matching allow only the reached
 * columns, which are fewer (König's theorem).
 */
function infeasible(input: SolveInput): PairflowError {
  const g = graphOf(input);
  const m = maxCardinalityMatching(g);
  const cover = minVertexCover(g, m);
  const inCover = new Uint8Array(g.nRows);
  for (const r of cover.rows) inCover[r] = 1;
  const stuck: number[] = [];
  for (let r = 0; r < g.nRows; r++) if (!inCover[r]) stuck.push(r);
  const allowed = cover.cols.length === 0 ? 'no column at all' : `only column${cover.cols.length === 1 ? '' : 's'} ${listSome(cover.cols)}`;
  return pairflowError('PAIRFLOW_ERR_SOLVER_INFEASIBLE', {
    file: input.file,
    matchable: m.size,
    rows: g.nRows,
    detail:
      `${input.file}: only ${m.size} of ${g.nRows} rows can be matched: row${stuck.length === 1 ? '' : 's'} ${listSome(stuck)} ` +
      `allow ${allowed}; pass --unmatched-cost to let rows go unmatched`,
  });
}

/** The dense matrix in max form: a not-allowed cell is -Infinity there. */
function asWeights(a: Float64Array): Float64Array {
  const out = new Float64Array(a.length);
  for (let i = 0; i < a.length; i++) out[i] = Number.isFinite(a[i]!) ? a[i]! : -Infinity;
  return out;
}

/**
 * Solves a parsed instance as `pairflow solve` does and checks its certificate
 * (SPEC §5). `now` times the solver call alone.
 * @example solveInstance(readSolveInput('replay-logs/sample-matrix.csv'), {})
 */
export function solveInstance(input: SolveInput, opts: SolveCommandOptions, now: () => number = () => performance.now()): SolveReport {
  const maximize = opts.maximize === true;
  const nRows = input.instance.nRows;
  let delta = input.instance.unmatchedCost ?? null;
  if (opts.unmatchedCost !== undefined) delta = new Float64Array(nRows).fill(opts.unmatchedCost);

  let result: SolveResult;
  let t0 = 0;
  let t1 = 0;
  let certified: boolean;
  try {
    if (input.kind === 'dense') {
      const cost = maximize ? asWeights(input.instance.cost) : input.instance.cost;
      const inst: DenseInstance = { nRows, nCols: input.instance.nCols, cost, unmatchedCost: delta };
      t0 = now();
      result = maximize ? maximizeDense(inst) : solveDense(inst);
      t1 = now();
      certified = checkCertificate(inst, result, { maximize }).ok;
    } else {
      const inst: SparseInstance = { ...input.instance, unmatchedCost: delta };
      t0 = now();
      result = maximize ? maximizeSparse(inst) : solveSparse(inst);
      t1 = now();
      certified = checkCertificate(inst, result, { maximize }).ok;
    }
  } catch (err) {
    if (err instanceof PairflowError && err.code === 'PAIRFLOW_ERR_SOLVER_INFEASIBLE' && delta === null) throw infeasible(input);
    throw err;
  }
  if (!certified) throw pairflowError('PAIRFLOW_ERR_INTERNAL_BUG', { detail: `${input.file}: the solver's optimality certificate does not hold` });

  const pairs: [number, number][] = [];
  const unmatchedRows: number[] = [];
  for (let r = 0; r < nRows; r++) {
    const c = result.rowToCol[r]!;
    if (c >= 0) pairs.push([r, c]);
    else unmatchedRows.push(r);
  }
  if (delta === null && unmatchedRows.length > 0) throw infeasible(input);
  // `+ 0` prints a negative zero as 0.
  return {
    cost: result.cost + 0,
    pairs,
    rowDuals: Array.from(result.rowDuals, (x) => x + 0),
    colDuals: Array.from(result.colDuals, (x) => x + 0),
    solveMs: t1 - t0,
    unmatchedRows,
  };
}

const HUMAN_PAIRS = 50;

/** The short human table printed without `--json`. */
export function formatHuman(input: SolveInput, opts: SolveCommandOptions, report: SolveReport): string {
  const { nRows, nCols } = input.instance;
  const word = opts.maximize ? 'weight' : 'cost';
  const lines = [
    `${input.file}: ${nRows} rows × ${nCols} columns, ${report.pairs.length} pairs, ${report.unmatchedRows.length} rows unmatched`,
    `total ${word} ${report.cost} (solved in ${report.solveMs.toFixed(2)} ms)`,
    '',
    `  row    col  ${word}`,
  ];
  const cellOf = (r: number, c: number): number => {
    if (input.kind === 'dense') return input.instance.cost[r * nCols + c]!;
    const { rowPtr, colIdx, cost } = input.instance;
    for (let e = rowPtr[r]!; e < rowPtr[r + 1]!; e++) if (colIdx[e] === c) return cost[e]!;
    return NaN;
  };
  for (const [r, c] of report.pairs.slice(0, HUMAN_PAIRS)) {
    lines.push(`${String(r).padStart(5)}  ${String(c).padStart(5)}  ${cellOf(r, c)}`);
  }
  if (report.pairs.length > HUMAN_PAIRS) lines.push(`  … ${report.pairs.length - HUMAN_PAIRS} more pairs (use --json for all)`);
  if (report.unmatchedRows.length > 0) lines.push(`unmatched rows: ${listSome(report.unmatchedRows, 20)}`);
  return `${lines.join('\n')}\n`;
}

/** The `--json` line: exactly SPEC §6's fields. */
export function formatJson(report: SolveReport): string {
  const { cost, pairs, rowDuals, colDuals, solveMs } = report;
  return `${JSON.stringify({ cost, pairs, rowDuals, colDuals, solveMs })}\n`;
}

/** A cost option: a number within the solver's bound (SPEC §5). */
export function parseCost(text: string, option: string): number {
  const v = parseNumber(text, option);
  if (Math.abs(v) > MAX_COST) throw pairflowError('PAIRFLOW_ERR_CLI_OPTION', { option, detail: `'${text}' is beyond ${MAX_COST_TEXT}, the largest cost pairflow solves exactly` });
  return v;
}

/** Registers `pairflow solve` on the program. */
export function registerSolve(program: Command): void {
  program
    .command('solve')
    .description('Solve one min-cost assignment: a dense CSV cost matrix (rows = demand, columns = supply) or a JSON sparse instance.')
    .argument('<file>', 'CSV matrix (empty cell or inf = not allowed) or JSON {"rows","cols","pairs":[[row,col,cost],…],"unmatchedCost"?}')
    .option('--unmatched-cost <x>', 'cost of leaving a row unmatched (default: every row must be matched)')
    .option('--maximize', 'treat the numbers as weights and maximise (duals of the maximisation LP)', false)
    .option('--json', 'print {"cost","pairs","rowDuals","colDuals","solveMs"} on one line', false)
    .action(async (file: string, raw: { unmatchedCost?: string; maximize: boolean; json: boolean }) => {
      const opts: SolveCommandOptions = {
        maximize: raw.maximize,
        ...(raw.unmatchedCost === undefined ? {} : { unmatchedCost: parseCost(raw.unmatchedCost, '--unmatched-cost') }),
      };
      const input = readSolveInput(file);
      const report = solveInstance(input, opts);
      await writeOut(raw.json ? formatJson(report) : formatHuman(input, opts, report));
    });
}
