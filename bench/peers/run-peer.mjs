// One npm assignment package on one dense instance, in its own process so the bench
// can stop it at the time cap. Usage:
//   node run-peer.mjs PEER DIR NROWS NCOLS REPEATS BUDGET_MS WARM_SOLVES WARM_MS
// Prints "ready" once the matrix is loaded, then "warm" after each untimed warm-up
// solve (until WARM_SOLVES are done or WARM_MS of solving is spent: the rule
// pairflow's child and scipy follow too), then one JSON line {"ms", "cost"} per
// repeat; the cost is recomputed from the returned pairs. No new repeat starts once
// BUDGET_MS of solving is spent.
import { readFileSync } from 'node:fs';
import { createRequire } from 'node:module';
import { join } from 'node:path';
import { performance } from 'node:perf_hooks';

const [peer, dir, nRowsText, nColsText, repeatsText, budgetText, warmSolvesText, warmMsText] = process.argv.slice(2);
const nRows = Number(nRowsText);
const nCols = Number(nColsText);
const repeats = Number(repeatsText);
const budgetMs = Number(budgetText ?? Infinity);
const warmSolves = Number(warmSolvesText ?? 0);
const warmMs = Number(warmMsText ?? 0);

const bytes = readFileSync(join(dir, 'cost.f64'));
// Copied out so the Float64Array is aligned whatever offset the Buffer pool chose.
const flat = new Float64Array(new Uint8Array(bytes).buffer, 0, nRows * nCols);
const fresh = () => Array.from({ length: nRows }, (_, r) => Array.from(flat.subarray(r * nCols, (r + 1) * nCols)));

async function loadSolver() {
  if (peer === 'munkres') {
    const { munkres } = await import('munkres');
    return (m) => munkres(m);
  }
  if (peer === 'munkres-js') {
    const computeMunkres = createRequire(import.meta.url)('munkres-js');
    return (m) => computeMunkres(m);
  }
  if (peer === 'linear-sum-assignment') {
    const { linearSumAssignment } = await import('linear-sum-assignment');
    return (m) => {
      const res = linearSumAssignment(m, { maximaze: false });
      const pairs = [];
      for (let r = 0; r < nRows; r++) if (res.rowAssignments[r] >= 0) pairs.push([r, res.rowAssignments[r]]);
      return pairs;
    };
  }
  throw new Error(`unknown peer ${peer}`);
}

const solve = await loadSolver();
process.stdout.write('ready\n');
let warmSpent = 0;
for (let k = 0; k < warmSolves && warmSpent < warmMs; k++) {
  // A fresh copy per solve (some peers pad or modify their input); building it is not timed.
  const m = fresh();
  const t0 = performance.now();
  solve(m);
  warmSpent += performance.now() - t0;
  process.stdout.write('warm\n');
}
let spent = 0;
for (let i = 0; i < repeats && spent < budgetMs; i++) {
  // A fresh copy per repeat: some peers pad or modify their input.
  const m = fresh();
  const t0 = performance.now();
  const pairs = solve(m);
  const ms = performance.now() - t0;
  spent += ms;
  let cost = 0;
  let matched = 0;
  for (const [r, c] of pairs) {
    if (r < nRows && c < nCols) {
      cost += flat[r * nCols + c];
      matched++;
    }
  }
  process.stdout.write(`${JSON.stringify({ ms, cost, matched })}\n`);
}
