/**
 * Writes the n = 1000 and 2000 structured families of bench:solver (the same seeds as
 * `npx tsx bench/solver.ts --case geometric,clustered,few-ints`) as raw Float64 files
 * into DIR/<name>/cost.f64, for the wasm probe (bench/wasm/probe-child.ts).
 * Usage: npx tsx bench/wasm/make-instances.ts DIR
 */
import { denseFamily, denseUniform, type DenseFamily } from '../lib/instances.js';
import { writeDense } from '../lib/children.js';
import { join } from 'node:path';

const SEED = 20_251_201;
const dir = process.argv[2] ?? '/tmp/pairflow-wasm-probe';
const families: DenseFamily[] = ['geometric', 'clustered', 'few-ints'];
let i = 0;
for (const n of [1000, 2000]) {
  for (const f of families) {
    writeDense(join(dir, `${f}-${n}`), denseFamily(SEED + 7919 * i, n, f));
    i++;
  }
}
process.stdout.write(`wrote ${i} instances to ${dir}\n`);
// The other dense cases at n = 1000, to see what the kernel does where it should not be used.
writeDense(join(dir, 'machol-wien-1000'), denseFamily(SEED + 7919 * 3, 1000, 'machol-wien'));
writeDense(join(dir, 'rank-one-1000'), denseFamily(SEED + 7919 * 4, 1000, 'rank-one'));
writeDense(join(dir, 'dense-int-1000'), denseUniform(SEED + 7919 * 4, 1000, 1000, 'int'));
writeDense(join(dir, 'dense-float-1000'), denseUniform(SEED + 7919 * 5, 1000, 1000, 'float'));
