import { describe, expect, it } from 'vitest';
import { maxCardinalityMatching, minVertexCover, type BipartiteGraph, type CardinalityMatching } from '../../../src/matching/cardinality.js';
import { mulberry32, randInt } from '../../helpers/random.js';
import { runPythonJson, scipyVersion } from '../../helpers/python.js';
import { KernelArena } from '../../../src/matching/wasm/shared-memory.js';

function graphFromLists(nCols: number, lists: number[][]): BipartiteGraph {
  const rowPtr = new Int32Array(lists.length + 1);
  const cols: number[] = [];
  lists.forEach((l, r) => {
    cols.push(...l);
    rowPtr[r + 1] = cols.length;
  });
  return { nRows: lists.length, nCols, rowPtr, colIdx: Int32Array.from(cols) };
}

/** A random graph: each row gets 0..maxDeg distinct columns. */
function randomGraph(seed: number, nRows: number, nCols: number, maxDeg: number): BipartiteGraph {
  const rand = mulberry32(seed);
  const lists: number[][] = [];
  for (let r = 0; r < nRows; r++) {
    const deg = nCols === 0 ? 0 : randInt(rand, 0, Math.min(maxDeg, nCols));
    const set = new Set<number>();
    while (set.size < deg) set.add(randInt(rand, 0, nCols - 1));
    lists.push([...set]);
  }
  return graphFromLists(nCols, lists);
}

/** Checks the matching is a matching of g; returns its size counted independently. */
function expectValidMatching(g: BipartiteGraph, m: CardinalityMatching, seed: number): number {
  let size = 0;
  for (let r = 0; r < g.nRows; r++) {
    const c = m.rowToCol[r]!;
    if (c === -1) continue;
    size++;
    expect(m.colToRow[c], `seed ${seed}: row ${r}`).toBe(r);
    const cols = Array.from(g.colIdx.subarray(g.rowPtr[r]!, g.rowPtr[r + 1]!));
    expect(cols, `seed ${seed}: (${r}, ${c}) must be a pair`).toContain(c);
  }
  let colSide = 0;
  for (let c = 0; c < g.nCols; c++) if (m.colToRow[c] !== -1) colSide++;
  expect(colSide, `seed ${seed}`).toBe(size);
  expect(m.size, `seed ${seed}`).toBe(size);
  return size;
}

/**
 * A cover as large as a matching proves both optimal (weak LP duality: every
 * matched pair needs its own cover vertex) — König's theorem, standard textbook fact.
 */
function expectCoverCertifies(g: BipartiteGraph, m: CardinalityMatching, seed: number): void {
  const cover = minVertexCover(g, m);
  expect(cover.rows.length + cover.cols.length, `seed ${seed}: cover size`).toBe(m.size);
  const inRows = new Uint8Array(g.nRows);
  const inCols = new Uint8Array(g.nCols);
  for (const r of cover.rows) inRows[r] = 1;
  for (const c of cover.cols) inCols[c] = 1;
  for (let r = 0; r < g.nRows; r++) {
    for (let e = g.rowPtr[r]!; e < g.rowPtr[r + 1]!; e++) {
      const c = g.colIdx[e]!;
      if (!inRows[r] && !inCols[c]) expect.fail(`seed ${seed}: pair (${r}, ${c}) is not covered`);
    }
  }
}

describe('maxCardinalityMatching()', () => {
  it('finds the augmenting path a greedy choice misses (checked by hand)', () => {
    // Greedy puts row 0 on column 0, leaving row 1 nothing; the maximum is 2: 0→1, 1→0.
    const g = graphFromLists(2, [[0, 1], [0]]);
    const m = maxCardinalityMatching(g);
    expect(m.size).toBe(2);
    expect(Array.from(m.rowToCol)).toEqual([1, 0]);
    expect(Array.from(m.colToRow)).toEqual([1, 0]);
  });

  it('handles empty graphs, empty rows and more rows than columns', () => {
    expect(maxCardinalityMatching(graphFromLists(0, [])).size).toBe(0);
    expect(maxCardinalityMatching(graphFromLists(3, [[], [], []])).size).toBe(0);
    // Three rows compete for two columns (by hand: at most 2).
    const g = graphFromLists(2, [[0], [0, 1], [1]]);
    const m = maxCardinalityMatching(g);
    expect(expectValidMatching(g, m, 0)).toBe(2);
    expectCoverCertifies(g, m, 0);
  });

  it('tolerates a column listed twice in a row', () => {
    const g = graphFromLists(2, [[0, 0, 1], [0], [1, 1]]);
    const m = maxCardinalityMatching(g);
    expect(expectValidMatching(g, m, 0)).toBe(2);
    expectCoverCertifies(g, m, 0);
  });

  it('returns a valid matching with a König cover of equal size on seeded random graphs', () => {
    for (let seed = 1; seed <= 300; seed++) {
      const rand = mulberry32(seed * 7919);
      const nRows = randInt(rand, 0, 40);
      const nCols = randInt(rand, 0, 40);
      const g = randomGraph(seed, nRows, nCols, randInt(rand, 0, 5));
      const m = maxCardinalityMatching(g);
      expectValidMatching(g, m, seed);
      expectCoverCertifies(g, m, seed);
    }
  });

  it('hands Hopcroft–Karp over to depth-first passes on large graphs and still proves a maximum (König cover)', () => {
    // Large enough that the first phases augment many paths and the last ones few,
    // so both methods run; sparse rows with a few long-range columns make long paths.
    for (let seed = 2001; seed <= 2006; seed++) {
      const rand = mulberry32(seed);
      const nRows = randInt(rand, 3000, 6000);
      const nCols = randInt(rand, nRows - 500, nRows + 500);
      const lists: number[][] = [];
      for (let r = 0; r < nRows; r++) {
        const near = Math.floor((r * nCols) / nRows);
        const set = new Set<number>();
        const deg = randInt(rand, 0, 3);
        while (set.size < deg) set.add(Math.min(nCols - 1, Math.max(0, near + randInt(rand, -3, 3))));
        if (randInt(rand, 0, 9) === 0) set.add(randInt(rand, 0, nCols - 1));
        lists.push([...set]);
      }
      const g = graphFromLists(nCols, lists);
      const m = maxCardinalityMatching(g);
      expectValidMatching(g, m, seed);
      expectCoverCertifies(g, m, seed);
    }
  });

  it('with nearMaximumSeed (depth-first passes only) finds the same maximum as Hopcroft–Karp, from any seed', () => {
    // Far-from-maximum seeds too (the option is a hint: the passes run until one finds
    // no augmenting path, which proves the maximum whatever the seed).
    for (let seed = 3001; seed <= 3200; seed++) {
      const rand = mulberry32(seed);
      const nRows = randInt(rand, 0, 60);
      const nCols = randInt(rand, 0, 60);
      const g = randomGraph(seed, nRows, nCols, randInt(rand, 0, 6));
      const hk = maxCardinalityMatching(g);
      const df = maxCardinalityMatching(g, { nearMaximumSeed: true });
      expect(expectValidMatching(g, df, seed), `seed ${seed}`).toBe(hk.size);
      expectCoverCertifies(g, df, seed);
    }
    // A seed that is the maximum matching itself, each row's matched column first.
    const g = randomGraph(77, 300, 280, 4);
    const best = maxCardinalityMatching(g);
    const colIdx = Int32Array.from(g.colIdx);
    for (let r = 0; r < g.nRows; r++) {
      const c = best.rowToCol[r]!;
      if (c < 0) continue;
      const at = colIdx.indexOf(c, g.rowPtr[r]!);
      colIdx[at] = colIdx[g.rowPtr[r]!]!;
      colIdx[g.rowPtr[r]!] = c;
    }
    const seeded = { ...g, colIdx };
    expect(expectValidMatching(seeded, maxCardinalityMatching(seeded, { nearMaximumSeed: true }), 77)).toBe(best.size);
  });

  it('runs its depth-first passes in WebAssembly, over 16-bit columns in a kernel memory, to the same matching', () => {
    let augmented = 0;
    for (let seed = 5001; seed <= 5120; seed++) {
      const rand = mulberry32(seed);
      const nRows = randInt(rand, 1, 120);
      const nCols = randInt(rand, 1, 120);
      const g = randomGraph(seed, nRows, nCols, randInt(rand, 1, 8));
      // As the hindsight's store holds them: 16-bit columns less each row's lowest.
      const rowBase = new Int32Array(nRows);
      for (let r = 0; r < nRows; r++) {
        let lo = nCols;
        for (let e = g.rowPtr[r]!; e < g.rowPtr[r + 1]!; e++) lo = Math.min(lo, g.colIdx[e]!);
        rowBase[r] = g.rowPtr[r] === g.rowPtr[r + 1] ? 0 : lo;
      }
      const arena = KernelArena.create(1 << 20)!;
      expect(arena).not.toBeNull();
      const n = g.colIdx.length;
      const words = arena.i32(Math.ceil(n / 2) + 1);
      const cols16 = new Uint16Array(words.buffer, words.byteOffset, n);
      for (let r = 0; r < nRows; r++) for (let e = g.rowPtr[r]!; e < g.rowPtr[r + 1]!; e++) cols16[e] = g.colIdx[e]! - rowBase[r]!;
      // Leftover numbers where the passes' arrays will go: the kernel must not read them as its own.
      arena.i32(4 * (nRows + nCols) + 64).fill(1);
      const plain = maxCardinalityMatching({ ...g, colIdx: cols16, rowBase }, { nearMaximumSeed: true });
      const kernel = maxCardinalityMatching({ ...g, colIdx: cols16, rowBase }, { nearMaximumSeed: true, arena: KernelArena.within(arena.memory, words.byteOffset + 4 * words.length) });
      expect(kernel.size, `seed ${seed}`).toBe(plain.size);
      expect(Array.from(kernel.rowToCol), `seed ${seed}`).toEqual(Array.from(plain.rowToCol));
      expect(Array.from(kernel.colToRow), `seed ${seed}`).toEqual(Array.from(plain.colToRow));
      augmented += plain.size;
    }
    expect(augmented).toBeGreaterThan(1000);
  });

  it('checks the graph unless told not to', () => {
    const bad = { nRows: 1, nCols: 1, rowPtr: Int32Array.of(0, 1), colIdx: Int32Array.of(5) };
    expect(() => maxCardinalityMatching(bad)).toThrow(/outside 0\.\.0/);
    // Unchecked, the caller vouches for the graph; a sound one gives the same result.
    const g = randomGraph(5, 50, 50, 3);
    expect(maxCardinalityMatching(g, { check: false }).size).toBe(maxCardinalityMatching(g).size);
  });

  it('agrees in size with scipy.sparse.csgraph.maximum_bipartite_matching on seeded graphs', (ctx) => {
    // Reference: scipy.sparse.csgraph.maximum_bipartite_matching (scipy ≥ 1.4, Hopcroft–Karp).
    if (scipyVersion() === null) ctx.skip();
    const cases: BipartiteGraph[] = [];
    const seeds: number[] = [];
    for (let seed = 1001; seed <= 1040; seed++) {
      const rand = mulberry32(seed);
      const nRows = randInt(rand, 1, 400);
      const nCols = randInt(rand, 1, 400);
      cases.push(randomGraph(seed, nRows, nCols, randInt(rand, 1, 4)));
      seeds.push(seed);
    }
    const script = `
import sys, json
import numpy as np
from scipy.sparse import csr_matrix
from scipy.sparse.csgraph import maximum_bipartite_matching
out = []
for g in json.load(sys.stdin):
    ptr = np.array(g["rowPtr"], dtype=np.int32)
    idx = np.array(g["colIdx"], dtype=np.int32)
    a = csr_matrix((np.ones(len(idx)), idx, ptr), shape=(g["nRows"], g["nCols"]))
    m = maximum_bipartite_matching(a, perm_type="column")
    out.append(int((m >= 0).sum()))
print(json.dumps(out))
`;
    const sizes = runPythonJson<number[]>(
      script,
      cases.map((g) => ({ nRows: g.nRows, nCols: g.nCols, rowPtr: Array.from(g.rowPtr), colIdx: Array.from(g.colIdx) })),
    );
    cases.forEach((g, i) => {
      const m = maxCardinalityMatching(g);
      expect(m.size, `seed ${seeds[i]}`).toBe(sizes[i]);
      expectValidMatching(g, m, seeds[i]!);
      expectCoverCertifies(g, m, seeds[i]!);
    });
  });

  it('augments along a 300k-long chain without recursion limits', () => {
    // Row i lists column i+1 before column i, so the greedy seed shifts every row one
    // column right and leaves the last row free: its only augmenting path runs the
    // whole chain back to column 0.
    const n = 300_000;
    const rowPtr = new Int32Array(n + 1);
    const colIdx = new Int32Array(2 * n - 1);
    let k = 0;
    for (let r = 0; r < n; r++) {
      if (r < n - 1) colIdx[k++] = r + 1;
      colIdx[k++] = r;
      rowPtr[r + 1] = k;
    }
    const g: BipartiteGraph = { nRows: n, nCols: n, rowPtr, colIdx };
    const m = maxCardinalityMatching(g);
    expect(m.size).toBe(n);
    for (let r = 0; r < n; r++) if (m.rowToCol[r] !== r) expect.fail(`row ${r} on column ${m.rowToCol[r]}`);
    const cover = minVertexCover(g, m);
    expect(cover.rows.length + cover.cols.length).toBe(n);
  });

  it('rejects a malformed CSR with PAIRFLOW_ERR_SOLVER_INPUT', () => {
    const bad: BipartiteGraph[] = [
      { nRows: 2, nCols: 2, rowPtr: Int32Array.of(0, 1), colIdx: Int32Array.of(0) },
      { nRows: 1, nCols: 2, rowPtr: Int32Array.of(0, 1), colIdx: Int32Array.of(2) },
      { nRows: 2, nCols: 2, rowPtr: Int32Array.of(0, 2, 1), colIdx: Int32Array.of(0) },
      { nRows: -1, nCols: 2, rowPtr: new Int32Array(0), colIdx: new Int32Array(0) },
      // A row base of the wrong length, and one that puts a pair past the last column.
      { nRows: 1, nCols: 2, rowPtr: Int32Array.of(0, 1), colIdx: Uint16Array.of(0), rowBase: Int32Array.of(0, 0) },
      { nRows: 1, nCols: 2, rowPtr: Int32Array.of(0, 1), colIdx: Uint16Array.of(1), rowBase: Int32Array.of(1) },
    ];
    for (const g of bad) expect(() => maxCardinalityMatching(g)).toThrow(expect.objectContaining({ code: 'PAIRFLOW_ERR_SOLVER_INPUT' }));
  });
});

describe('minVertexCover()', () => {
  it('names the bottleneck: two rows that only want one column are covered by that column', () => {
    const g = graphFromLists(3, [[0], [0], [1, 2]]);
    const m = maxCardinalityMatching(g);
    expect(m.size).toBe(2);
    const cover = minVertexCover(g, m);
    // By hand: column 0 covers both rows 0 and 1; row 2 covers its own pairs.
    expect(Array.from(cover.cols)).toEqual([0]);
    expect(Array.from(cover.rows)).toEqual([2]);
  });

  it('refuses a matching that is not maximum or not a matching of the graph', () => {
    const g = graphFromLists(2, [[0, 1], [0]]);
    const notMax: CardinalityMatching = { size: 1, rowToCol: Int32Array.of(0, -1), colToRow: Int32Array.of(0, -1) };
    expect(() => minVertexCover(g, notMax)).toThrow(expect.objectContaining({ code: 'PAIRFLOW_ERR_SOLVER_INPUT' }));
    const notPair: CardinalityMatching = { size: 1, rowToCol: Int32Array.of(-1, 1), colToRow: Int32Array.of(-1, 1) };
    expect(() => minVertexCover(g, notPair)).toThrow(expect.objectContaining({ code: 'PAIRFLOW_ERR_SOLVER_INPUT' }));
    const torn: CardinalityMatching = { size: 1, rowToCol: Int32Array.of(1, -1), colToRow: Int32Array.of(-1, 0) };
    expect(() => minVertexCover(g, torn)).toThrow(expect.objectContaining({ code: 'PAIRFLOW_ERR_SOLVER_INPUT' }));
  });
});

describe('rows given as a base plus 16-bit offsets', () => {
  /** The same graph with each row's columns less its lowest, in two bytes each. */
  function offsetForm(g: BipartiteGraph): BipartiteGraph {
    const rowBase = new Int32Array(g.nRows);
    const colIdx = new Uint16Array(g.colIdx.length);
    for (let r = 0; r < g.nRows; r++) {
      let lo = Infinity;
      for (let e = g.rowPtr[r]!; e < g.rowPtr[r + 1]!; e++) lo = Math.min(lo, g.colIdx[e]!);
      rowBase[r] = lo === Infinity ? 0 : lo;
      for (let e = g.rowPtr[r]!; e < g.rowPtr[r + 1]!; e++) colIdx[e] = g.colIdx[e]! - rowBase[r]!;
    }
    return { nRows: g.nRows, nCols: g.nCols, rowPtr: g.rowPtr, colIdx, rowBase };
  }

  it('give matchings of the same size and covers that certify them (40 seeded graphs)', () => {
    for (let seed = 1; seed <= 40; seed++) {
      const plain = randomGraph(seed, 30 + seed * 3, 25 + seed * 2, 1 + (seed % 6));
      const g = offsetForm(plain);
      const m = maxCardinalityMatching(g);
      expect(m.size, `seed ${seed}`).toBe(maxCardinalityMatching(plain).size);
      // The matching is one of the plain graph's, and the cover, as large, covers its every pair.
      expectValidMatching(plain, m, seed);
      const cover = minVertexCover(g, m);
      expect(cover.rows.length + cover.cols.length, `seed ${seed}`).toBe(m.size);
      const rows = new Set(cover.rows);
      const cols = new Set(cover.cols);
      for (let r = 0; r < plain.nRows; r++) {
        for (let e = plain.rowPtr[r]!; e < plain.rowPtr[r + 1]!; e++) {
          expect(rows.has(r) || cols.has(plain.colIdx[e]!), `seed ${seed} pair (${r}, ${plain.colIdx[e]})`).toBe(true);
        }
      }
    }
  });
});
