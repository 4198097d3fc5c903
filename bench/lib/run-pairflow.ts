/**
 * pairflow's solver on one instance file, in its own process so the bench can stop a
 * solve that runs past the time cap. Usage (under tsx):
 *   node --import tsx bench/lib/run-pairflow.ts dense|sparse DIR NROWS NCOLS REPEATS BUDGET_MS
 * Prints "ready" once the instance is loaded and the JIT warmed on a small instance,
 * then one JSON line {"ms", "cost", "certified"} per repeat. No new repeat starts once
 * BUDGET_MS of solving is spent.
 */

import { readFileSync } from 'node:fs';
import { join } from 'node:path';
import { performance } from 'node:perf_hooks';
import { checkCertificate, solveDense, solveSparse } from '../../src/matching/index.js';
import type { DenseInstance, SolveResult, SparseInstance } from '../../src/matching/types.js';
import { denseUniform, sparseWithPermutation } from './instances.js';

const [kind, dir, nRowsText, nColsText, repeatsText, budgetText] = process.argv.slice(2);
const nRows = Number(nRowsText);
const nCols = Number(nColsText);
const repeats = Number(repeatsText);
const budgetMs = Number(budgetText ?? Infinity);
const WARMUP_CELLS = 250_000;

// Copied into fresh buffers so the typed arrays are aligned.
const f64 = (name: string) => new Float64Array(new Uint8Array(readFileSync(join(dir!, name))).buffer);
const i32 = (name: string) => new Int32Array(new Uint8Array(readFileSync(join(dir!, name))).buffer);

let solve: () => SolveResult;
let check: (r: SolveResult) => boolean;
if (kind === 'dense') {
  const inst: DenseInstance = { nRows, nCols, cost: f64('cost.f64') };
  solveDense(denseUniform(1, 200, 200, 'float'));
  solve = () => solveDense(inst);
  check = (r) => checkCertificate(inst, r).ok;
} else {
  const inst: SparseInstance = { nRows, nCols, rowPtr: i32('rowptr.i32'), colIdx: i32('colidx.i32'), cost: f64('cost.f64') };
  solveSparse(sparseWithPermutation(1, 5000, 10, 'float'));
  solve = () => solveSparse(inst);
  check = (r) => checkCertificate(inst, r).ok;
}

// Small instances get one untimed solve first (JIT warm-up), as the peers' child does.
if (nRows * nCols <= WARMUP_CELLS) solve();
process.stdout.write('ready\n');
let spent = 0;
for (let k = 0; k < repeats && spent < budgetMs; k++) {
  const t0 = performance.now();
  const result = solve();
  const ms = performance.now() - t0;
  spent += ms;
  process.stdout.write(`${JSON.stringify({ ms, cost: result.cost, certified: check(result) })}\n`);
}
