/**
 * The match ceiling of a segment: the maximum-cardinality matching of its allowed
 * graph (no policy can match more pairs), seeded with the optimum's own pairs. Pure.
 */

import { maxCardinalityMatching, minVertexCover, type VertexCover } from '../matching/cardinality.js';
import { columnsInPlace, type CompactGraph } from './graph.js';

/**
 * Size of a maximum-cardinality matching of `g`. The graph's words become plain
 * columns in place first (graph.ts), so the ceiling needs no memory of its own per
 * pair; `g` is spent afterwards. Hopcroft–Karp seeds itself greedily with each row's
 * first free pair: with the optimum's pair moved first in each row, that seed is the
 * optimum's matching, and only the few rows it leaves short need augmenting.
 *
 * With `wantCover`, also a minimum vertex cover of the graph (König: as many units as
 * the ceiling), in graph rows and columns.
 *
 * @param rowToCol the optimum's column per graph row, -1 when unmatched
 */
export function matchCeiling(g: CompactGraph, rowToCol: Int32Array, wantCover = false): { size: number; cover: VertexCover | null } {
  const { nRows, nCols, rowPtr } = g;
  const colIdx = columnsInPlace(g);
  for (let r = 0; r < nRows; r++) {
    const c = rowToCol[r]!;
    if (c < 0) continue;
    const first = rowPtr[r]!;
    const end = rowPtr[r + 1]!;
    for (let e = first; e < end; e++) {
      if (colIdx[e] !== c) continue;
      colIdx[e] = colIdx[first]!;
      colIdx[first] = c;
      break;
    }
  }
  const plain = { nRows, nCols, rowPtr, colIdx };
  const matching = maxCardinalityMatching(plain);
  return { size: matching.size, cover: wantCover ? minVertexCover(plain, matching) : null };
}
