/**
 * One fresh process, one instance: times the first solve (then EXTRA more) and prints
 * {"ms": [...], "cost", "certified", "scanned", "aug", "wasm"} as JSON.
 * Usage: node --import tsx bench/wasm/probe-child.ts SOLVER DIR N [EXTRA]
 *   SOLVER: js (solveDense of this tree, auto: the kernel where it applies),
 *           jsfull (strategy 'full'), kernel (the wasm kernel alone, no budget),
 *           main (solveDense of another checkout at $MAIN_TREE, e.g. one of the solver before the kernel)
 */
import { readFileSync } from 'node:fs';
import { join } from 'node:path';
import { performance } from 'node:perf_hooks';
import { checkCertificate, denseCosts, solveDense } from '../../src/matching/index.js';
import { solveByKernel } from '../../src/matching/dense.js';
import type { DenseInstance, SolveResult } from '../../src/matching/types.js';

const [solver, dir, nText, extraText] = process.argv.slice(2);
const n = Number(nText);
const extra = Number(extraText ?? 0);
const read = new Float64Array(new Uint8Array(readFileSync(join(dir!, 'cost.f64'))).buffer);
// This tree's solvers get the matrix where `pairflow solve`'s parser puts it (denseCosts:
// the kernel reads it in place); another checkout's gets a plain array, as its CLI did.
const cost = solver === 'main' ? read : denseCosts(n, n);
if (cost !== read) cost.set(read);
const inst: DenseInstance = { nRows: n, nCols: n, cost };

let solve: () => SolveResult;
if (solver === 'js') solve = () => solveDense(inst);
else if (solver === 'jsfull') solve = () => solveDense(inst, { strategy: 'full' });
else if (solver === 'kernel') {
  solve = () => {
    const r = solveByKernel(inst, Infinity, n);
    if (r === null) throw new Error('kernel gave up');
    return r;
  };
} else if (solver === 'main') {
  const tree = process.env.MAIN_TREE;
  if (tree === undefined) throw new Error('solver main needs MAIN_TREE, the path of another checkout');
  const mod = (await import(join(tree, 'src/matching/index.ts'))) as { solveDense: typeof solveDense };
  solve = () => mod.solveDense(inst);
} else throw new Error(`unknown solver ${solver}`);

const ms: number[] = [];
let last: SolveResult | null = null;
for (let k = 0; k <= extra; k++) {
  const t0 = performance.now();
  last = solve();
  ms.push(performance.now() - t0);
}
const cert = checkCertificate(inst, last!);
const s = last!.stats;
process.stdout.write(`${JSON.stringify({ ms, cost: last!.cost, certified: cert.ok, scanned: s.scannedPairs, aug: s.augmentations, wasm: s.wasmKernel === true })}\n`);
