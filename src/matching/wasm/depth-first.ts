import { WASM_BASE64 } from './depth-first.wasm.js';
import { instantiate, lazyModule, type KernelArena } from './shared-memory.js';

/*
 * The depth-first passes of a maximum-cardinality matching (cardinality.ts) in
 * WebAssembly: depth-first.wat, the JavaScript passes step for step, over a graph
 * whose 16-bit columns lie in a kernel memory already (the hindsight's pair store:
 * its match ceiling), the rest copied into an arena of the same memory. The same
 * matching comes out (tests/unit/matching/cardinality.test.ts holds them together).
 */

type SearchFn = (
  root: number, pass: number, forward: number, rowPtr: number, rowBase: number, colIdx: number, rowToCol: number, colToRow: number,
  look: number, next: number, stack: number, via: number, seen: number,
) => number;

const kernelModule = lazyModule(WASM_BASE64);

/**
 * Augments `rowToCol` / `colToRow` to a maximum matching of the graph (rows by
 * `rowPtr`, columns `rowBase[r] + colIdx[e]`, `colIdx` in `arena`'s memory) by the
 * kernel's depth-first passes; returns the augmentations, or -1 where the kernel
 * cannot run (the caller then runs the JavaScript passes).
 */
export function kernelDepthFirst(
  arena: KernelArena, nRows: number, nCols: number, rowPtr: Int32Array, rowBase: Int32Array, colIdx: Uint16Array, rowToCol: Int32Array, colToRow: Int32Array,
): number {
  const x = instantiate<{ search: SearchFn }>(kernelModule.get(), arena.memory);
  if (x === null) return -1;
  const ptr = arena.i32(nRows + 1);
  ptr.set(rowPtr.subarray(0, nRows + 1));
  const base = arena.i32(nRows);
  base.set(rowBase);
  const r2c = arena.i32(nRows);
  r2c.set(rowToCol);
  const c2r = arena.i32(nCols);
  c2r.set(colToRow);
  const look = arena.i32(nRows);
  look.set(rowPtr.subarray(0, nRows));
  const next = arena.i32(nRows);
  const stack = arena.i32(nRows);
  const via = arena.i32(nRows);
  // (The arena's bytes may hold an earlier user's numbers: a pass number among them would skip a column.)
  const seen = arena.i32(nCols).fill(0);
  // The passes and their roots here, one search a call (see depth-first.wat).
  const at = [ptr, base, colIdx, r2c, c2r, look, next, stack, via, seen].map((a) => a.byteOffset) as [number, number, number, number, number, number, number, number, number, number];
  let added = 0;
  for (let pass = 1; ; pass++) {
    const forward = pass & 1;
    let found = 0;
    for (let root = 0; root < nRows; root++) {
      if (r2c[root] !== -1 || rowPtr[root] === rowPtr[root + 1]) continue;
      found += x.search(root, pass, forward, at[0], at[1], at[2], at[3], at[4], at[5], at[6], at[7], at[8], at[9]);
    }
    added += found;
    if (found === 0) break;
  }
  rowToCol.set(r2c);
  colToRow.set(c2r);
  return added;
}
