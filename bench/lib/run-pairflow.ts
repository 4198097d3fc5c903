/**
 * pairflow's solver on one instance file, in its own process so the bench can stop a
 * solve that runs past the time cap. Usage (under tsx):
 *   node --import tsx bench/lib/run-pairflow.ts dense|sparse DIR NROWS NCOLS REPEATS BUDGET_MS WARM_SOLVES WARM_MS
 * Prints "ready" once the instance is loaded, then "warm" after each untimed warm-up
 * solve of the instance (until WARM_SOLVES are done or WARM_MS of solving is spent:
 * the rule the npm peers' child and scipy follow too), then one JSON line
 * {"ms", "cost", "certified"} per repeat. No new repeat starts once BUDGET_MS of
 * solving is spent. A sparse run first solves a small instance (its JIT warm-up; the
 * sparse cases are given no warm-up solves, as scipy's are not).
 */

import { readFileSync } from 'node:fs';
import { join } from 'node:path';
import { performance } from 'node:perf_hooks';
import { checkCertificate, denseCosts, solveDense, solveSparse } from '../../src/matching/index.js';
import type { DenseInstance, SolveResult, SparseInstance } from '../../src/matching/types.js';
import { sparseWithPermutation } from './instances.js';

const [kind, dir, nRowsText, nColsText, repeatsText, budgetText, warmSolvesText, warmMsText] = process.argv.slice(2);
const nRows = Number(nRowsText);
const nCols = Number(nColsText);
const repeats = Number(repeatsText);
const budgetMs = Number(budgetText ?? Infinity);
const warmSolves = Number(warmSolvesText ?? 0);
const warmMs = Number(warmMsText ?? 0);

// Copied into fresh buffers so the typed arrays are aligned.
const f64 = (name: string) => new Float64Array(new Uint8Array(readFileSync(join(dir!, name))).buffer);
const i32 = (name: string) => new Int32Array(new Uint8Array(readFileSync(join(dir!, name))).buffer);

let solve: () => SolveResult;
let check: (r: SolveResult) => boolean;
if (kind === 'dense') {
  // Where `pairflow solve`'s parser puts a matrix (denseCosts), filled before the clock starts as the parser fills it.
  const cost = denseCosts(nRows, nCols);
  cost.set(f64('cost.f64'));
  const inst: DenseInstance = { nRows, nCols, cost };
  solve = () => solveDense(inst);
  check = (r) => checkCertificate(inst, r).ok;
} else {
  const inst: SparseInstance = { nRows, nCols, rowPtr: i32('rowptr.i32'), colIdx: i32('colidx.i32'), cost: f64('cost.f64') };
  solveSparse(sparseWithPermutation(1, 5000, 10, 'float'));
  solve = () => solveSparse(inst);
  check = (r) => checkCertificate(inst, r).ok;
}

process.stdout.write('ready\n');
let warmSpent = 0;
for (let k = 0; k < warmSolves && warmSpent < warmMs; k++) {
  const t0 = performance.now();
  solve();
  warmSpent += performance.now() - t0;
  process.stdout.write('warm\n');
}
let spent = 0;
for (let k = 0; k < repeats && spent < budgetMs; k++) {
  const t0 = performance.now();
  const result = solve();
  const ms = performance.now() - t0;
  spent += ms;
  process.stdout.write(`${JSON.stringify({ ms, cost: result.cost, certified: check(result) })}\n`);
}
