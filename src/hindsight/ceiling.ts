/**
 * The match ceiling of a segment: the maximum-cardinality matching of its allowed
 * graph (no policy can match more pairs), seeded with the optimum's own pairs. Pure.
 */

import { maxCardinalityMatching, minVertexCover, type BipartiteGraph, type VertexCover } from '../matching/cardinality.js';
import type { KernelArena } from '../matching/wasm/shared-memory.js';
import { plainColumns, type CompactGraph } from './graph.js';

/**
 * Size of a maximum-cardinality matching of `g`, read straight from the graph's
 * 16-bit columns and row bases (graph.ts), so the ceiling needs no memory of its own
 * per pair; only a graph with wide rows is copied to plain columns first (4 bytes a
 * pair). The matching seeds itself greedily with each row's first free pair: with
 * the optimum's pair moved first in each row, that seed is the optimum's matching,
 * and depth-first passes augment the few rows it leaves short (no Hopcroft–Karp
 * phase: cardinality.ts, `nearMaximumSeed`). `g`'s columns are moved
 * within their rows and its codes are not: `g` is spent afterwards.
 *
 * With `wantCover`, also a minimum vertex cover of the graph (König: as many units as
 * the ceiling), in graph rows and columns. With `arena` (in the kernel memory that
 * holds the graph's pairs: graph.ts GraphStore.arena) the passes run in WebAssembly.
 *
 * @param rowToCol the optimum's column per graph row, -1 when unmatched
 */
export function matchCeiling(g: CompactGraph, rowToCol: Int32Array, wantCover = false, arena: KernelArena | null = null): { size: number; cover: VertexCover | null } {
  const { nRows, nCols, rowPtr } = g;
  const plain: BipartiteGraph = g.wide.size === 0 ? { nRows, nCols, rowPtr, colIdx: g.cols, rowBase: g.rowBase } : { nRows, nCols, rowPtr, colIdx: plainColumns(g) };
  const { colIdx } = plain;
  const rowBase = plain.rowBase;
  for (let r = 0; r < nRows; r++) {
    const c = rowToCol[r]!;
    if (c < 0) continue;
    const at = c - (rowBase?.[r] ?? 0);
    const first = rowPtr[r]!;
    const end = rowPtr[r + 1]!;
    for (let e = first; e < end; e++) {
      if (colIdx[e] !== at) continue;
      colIdx[e] = colIdx[first]!;
      colIdx[first] = at;
      break;
    }
  }
  // The graph is this module's own (columns in range by construction), and the
  // optimum's pairs seed it: depth-first passes from the start (cardinality.ts).
  const matching = maxCardinalityMatching(plain, { nearMaximumSeed: true, check: false, arena });
  return { size: matching.size, cover: wantCover ? minVertexCover(plain, matching) : null };
}
