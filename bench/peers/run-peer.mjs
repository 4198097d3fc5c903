// One npm assignment package on one dense instance, in its own process so the bench
// can stop it at the time cap. Usage: node run-peer.mjs PEER DIR NROWS NCOLS REPEATS BUDGET_MS
// Prints "ready" once the matrix is built and, for small ones, solved once untimed
// (loading and warm-up are not timed), then one JSON line
// {"ms", "cost"} per repeat; the cost is recomputed from the returned pairs. No new
// repeat starts once BUDGET_MS of solving is spent.
import { readFileSync } from 'node:fs';
import { createRequire } from 'node:module';
import { join } from 'node:path';
import { performance } from 'node:perf_hooks';

const [peer, dir, nRowsText, nColsText, repeatsText, budgetText] = process.argv.slice(2);
const nRows = Number(nRowsText);
const nCols = Number(nColsText);
const repeats = Number(repeatsText);
const budgetMs = Number(budgetText ?? Infinity);
const WARMUP_CELLS = 250_000;

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
// Small instances get one untimed solve first (JIT warm-up), as pairflow's child does.
if (nRows * nCols <= WARMUP_CELLS) solve(fresh());
process.stdout.write('ready\n');
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
