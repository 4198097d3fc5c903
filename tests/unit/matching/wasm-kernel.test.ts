import { describe, expect, it } from 'vitest';
import { checkCertificate, denseCosts, solveDense } from '../../../src/matching/index.js';
import { greedyOnRowMinima, solveByKernel } from '../../../src/matching/dense.js';
import { readInPlace, WASM_NO_KERNEL, wasmRowMinima } from '../../../src/matching/wasm/dense-jv.js';
import { denseFamily } from '../../../bench/lib/instances.js';
import { scipyDenseCosts, scipyVersion } from '../../helpers/python.js';
import { bruteForce, mulberry32, randInt } from './gen.js';
import { readFileSync } from 'node:fs';
import { createRequire } from 'node:module';
import type { DenseInstance } from '../../../src/matching/types.js';

/*
 * The WebAssembly kernel of the dense solver (src/matching/wasm/dense-jv.wat), called
 * directly with no budget so that it runs on small matrices too, and through
 * solveDense() where `auto` picks it. References: the JS full search of the same
 * solver (strategy 'full'), exhaustive search over every assignment (common practice
 * for tiny instances) and scipy.optimize.linear_sum_assignment (version in the test
 * name); every result must also carry a certificate (checkCertificate).
 */

const version = scipyVersion();
const INPUT = expect.objectContaining({ code: 'PAIRFLOW_ERR_SOLVER_INPUT' });
const INFEASIBLE = expect.objectContaining({ code: 'PAIRFLOW_ERR_SOLVER_INFEASIBLE' });

type Kind = 'uniform' | 'ties' | 'negative' | 'allSame' | 'wideRange';

/** n × n costs of one kind; a share `forbidden` of the cells +Infinity, or NaN (also not allowed) when `nan`. */
function build(seed: number, n: number, kind: Kind, forbidden: number, nan = false): DenseInstance {
  const rand = mulberry32(seed);
  const cost = new Float64Array(n * n);
  for (let k = 0; k < cost.length; k++) {
    let c: number;
    if (kind === 'uniform') c = rand() * 100;
    else if (kind === 'ties') c = randInt(rand, 0, 3);
    else if (kind === 'negative') c = rand() * 200 - 100;
    else if (kind === 'allSame') c = 7;
    else c = (rand() - 0.5) * 10 ** randInt(rand, -3, 12);
    cost[k] = rand() < forbidden ? (nan ? NaN : Infinity) : c;
  }
  return { nRows: n, nCols: n, cost };
}

const noBudget = (inst: DenseInstance) => solveByKernel(inst, Infinity, inst.nRows);

function expectSameOptimum(inst: DenseInstance, label: string): void {
  const js = solveDense(inst, { strategy: 'full' });
  const res = noBudget(inst);
  expect(res, label).not.toBeNull();
  expect(res!.stats.wasmKernel, label).toBe(true);
  expect(checkCertificate(inst, res!).problems, label).toEqual([]);
  expect(Math.abs(res!.cost - js.cost), `${label}: ${res!.cost} vs ${js.cost}`).toBeLessThanOrEqual(1e-9 * Math.max(1, Math.abs(js.cost)));
}

describe('the dense wasm kernel', () => {
  it('matches exhaustive search on 200 tiny matrices (1–7 rows), ties and forbidden pairs included', () => {
    let feasible = 0;
    for (let seed = 0; seed < 200; seed++) {
      const rand = mulberry32(41_000 + seed);
      const n = randInt(rand, 1, 7);
      const kind = (['uniform', 'ties', 'negative', 'allSame', 'wideRange'] as const)[seed % 5]!;
      const inst = build(41_000 + seed, n, kind, seed % 3 === 0 ? 0.3 : 0, seed % 6 === 0);
      const want = bruteForce(inst);
      const label = `seed ${seed} n=${n} ${kind}`;
      const res = noBudget(inst);
      if (!(want < Infinity)) {
        // infeasible: the kernel leaves it to the JS paths, which report it
        expect(res, label).toBeNull();
        expect(() => solveDense(inst), label).toThrow(INFEASIBLE);
        continue;
      }
      feasible++;
      expect(res, label).not.toBeNull();
      expect(checkCertificate(inst, res!).problems, label).toEqual([]);
      expect(Math.abs(res!.cost - want), `${label}: ${res!.cost} vs ${want}`).toBeLessThanOrEqual(1e-9 * Math.max(1, Math.abs(want)));
    }
    expect(feasible).toBeGreaterThan(150);
  });

  it('matches the JS full search on 60 seeded matrices of 8–150 rows, sizes in any order (the memory is reused)', () => {
    for (let seed = 0; seed < 60; seed++) {
      const rand = mulberry32(42_000 + seed);
      // sizes on and off the kernel's multiple of 16, larger and smaller than the one before
      const n = randInt(rand, 8, 150);
      const kind = (['uniform', 'ties', 'negative', 'allSame', 'wideRange'] as const)[seed % 5]!;
      expectSameOptimum(build(42_000 + seed, n, kind, seed % 4 === 1 ? 0.2 : 0, seed % 8 === 1), `seed ${seed} n=${n} ${kind}`);
    }
  });

  it('matches the JS full search on the structured families (distances, clusters, few integers, i·j, rank one)', () => {
    for (const family of ['geometric', 'clustered', 'few-ints', 'machol-wien', 'rank-one'] as const) {
      for (const n of [50, 201]) expectSameOptimum(denseFamily(43_000 + n, n, family), `${family} n=${n}`);
    }
  });

  it('leaves an infeasible matrix to the JS paths: a column or a row with no allowed pair', () => {
    const col = build(44_001, 20, 'uniform', 0);
    for (let r = 0; r < 20; r++) col.cost[r * 20 + 13] = Infinity;
    const row = build(44_002, 33, 'uniform', 0);
    for (let j = 0; j < 33; j++) row.cost[17 * 33 + j] = NaN;
    // Hall's condition fails: rows 0–2 allow only columns 0–1
    const hall = build(44_003, 24, 'uniform', 0);
    for (let r = 0; r < 3; r++) for (let j = 2; j < 24; j++) hall.cost[r * 24 + j] = Infinity;
    for (const inst of [col, row, hall]) {
      expect(noBudget(inst)).toBeNull();
      expect(() => solveDense(inst)).toThrow(INFEASIBLE);
    }
  });

  it('names a -Infinity cell as an input error, wherever it is', () => {
    for (const at of [0, 37 * 37 - 1, 5 * 37 + 36]) {
      const inst = build(44_100 + at, 37, 'uniform', 0);
      inst.cost[at] = -Infinity;
      expect(() => noBudget(inst)).toThrow(INPUT);
    }
  });

  it('leaves a matrix too large for a wasm memory to the JS paths (null), and works again after', () => {
    // 24 000² cells take 4.6 GB, past a wasm32 memory's 4 GiB; only the length is read
    const huge = { nRows: 24_000, nCols: 24_000, cost: { length: 24_000 * 24_000 } as unknown as Float64Array };
    expect(solveByKernel(huge)).toBeNull();
    expectSameOptimum(build(44_150, 40, 'uniform', 0), 'after the huge one');
  });

  it('gives up (null) past its budgets: more free rows than allowed, or more pairs read', () => {
    const inst = denseFamily(44_200, 120, 'machol-wien');
    expect(solveByKernel(inst, Infinity, 0)).toBeNull();
    expect(solveByKernel(inst, 3 * 120 * 120, 120)).toBeNull();
    expect(noBudget(inst)).not.toBeNull();
  });
});

describe('solveDense() auto and the kernel', () => {
  it('uses the kernel on square geometric costs of 600 rows and on uniform ones; gives i·j costs back to the JS paths', () => {
    const geo = denseFamily(45_000, 600, 'geometric');
    const a = solveDense(geo);
    expect(a.stats.wasmKernel).toBe(true);
    expect(checkCertificate(geo, a).problems).toEqual([]);
    expect(a.cost).toBeCloseTo(solveDense(geo, { strategy: 'full' }).cost, 6);
    const uni = build(45_001, 700, 'uniform', 0);
    const b = solveDense(uni);
    expect(b.stats.wasmKernel).toBe(true);
    expect(checkCertificate(uni, b).problems).toEqual([]);
    // c_ij = i·j leaves nearly every row free after the reductions: the kernel gives up
    const mw = denseFamily(45_002, 600, 'machol-wien');
    const c = solveDense(mw);
    expect(c.stats.wasmKernel).toBeUndefined();
    expect(checkCertificate(mw, c).problems).toEqual([]);
  });

  it('above 1600 rows, sends distances in the plane (geometric, clustered) to the kernel first, keeps uniform costs with the candidates, and gives crowded clusters of other costs to the kernel after the candidates are picked', () => {
    const n = 1700;
    const kernelAlone = (inst: DenseInstance) => solveByKernel(inst)!.stats.scannedPairs;
    for (const family of ['clustered', 'geometric'] as const) {
      const inst = denseFamily(45_030, n, family);
      const r = solveDense(inst);
      expect(r.stats.wasmKernel, family).toBe(true);
      expect(checkCertificate(inst, r).problems, family).toEqual([]);
      // no candidates picked before: the pairs read are the kernel's alone
      expect(r.stats.scannedPairs, family).toBe(kernelAlone(inst));
    }
    // squared distances grow like uniform costs (the k-th nearest about k away), so the
    // candidates are picked first; the clusters crowd, and the kernel takes over
    const clu = denseFamily(45_030, n, 'clustered');
    const squared = { ...clu, cost: clu.cost.map((c) => c * c) };
    const q = solveDense(squared);
    expect(q.stats.wasmKernel).toBe(true);
    expect(q.stats.auctionBids).toBeUndefined();
    expect(checkCertificate(squared, q).problems).toEqual([]);
    expect(q.stats.scannedPairs).toBeGreaterThan(kernelAlone(squared) + n * n - 1);
    const uni = build(45_032, n, 'uniform', 0);
    const u = solveDense(uni);
    expect(u.stats.wasmKernel).toBeUndefined();
    expect(checkCertificate(uni, u).problems).toEqual([]);
  });

  it('names a -Infinity cell in the last row as an input error on the kernel\'s path', () => {
    const geo = denseFamily(45_050, 600, 'geometric');
    geo.cost[600 * 600 - 2] = -Infinity;
    expect(() => solveDense(geo)).toThrow(INPUT);
  });

  it('keeps the JS paths for few distinct costs (the row-minima start), wide matrices, unmatched costs and warm starts', () => {
    const few = denseFamily(45_100, 600, 'few-ints');
    expect(solveDense(few).stats.wasmKernel).toBeUndefined();
    const geo = denseFamily(45_101, 600, 'geometric');
    const withDelta = { ...geo, unmatchedCost: new Float64Array(600).fill(50) };
    expect(solveDense(withDelta).stats.wasmKernel).toBeUndefined();
    const first = solveDense(geo);
    const warm = { colPrices: first.colDuals, rowPrices: first.rowDuals, rowToCol: first.rowToCol };
    expect(solveDense(geo, { warm }).stats.wasmKernel).toBeUndefined();
    expect(solveDense(geo, { strategy: 'full' }).stats.wasmKernel).toBeUndefined();
  });
});

describe('the row-minima start\'s pass in the kernel', () => {
  /** Few-ints costs (0..9) with a share of the cells +Infinity or NaN, shifted by `shift`. */
  const fewInts = (seed: number, n: number, forbidden: number, shift = 0): DenseInstance => {
    const inst = denseFamily(seed, n, 'few-ints');
    const rand = mulberry32(seed + 1);
    for (let k = 0; k < inst.cost.length; k++) {
      const x = rand();
      inst.cost[k] = x < forbidden / 2 ? Infinity : x < forbidden ? NaN : inst.cost[k]! + shift;
    }
    return inst;
  };

  it('runs in the kernel, a few rows at a time', () => {
    const inst = fewInts(47_000, 700, 0);
    const out = wasmRowMinima(inst.cost, 700, 32, 700 >> 5, () => false);
    expect(out.status).not.toBe(WASM_NO_KERNEL);
    expect(out.status).toBeGreaterThanOrEqual(0);
  });

  it('gives the JS pass\'s prices, pairs and rows left over exactly, or gives up where it does', () => {
    const cases: { label: string; inst: DenseInstance }[] = [];
    // sizes off the SIMD width and past one batch of rows (n = 700: 46 rows a batch; the
    // smallest give up: more than 2 + r/64 of the first r rows left free)
    for (const [k, n] of [33, 257, 600, 700, 1100].entries()) {
      cases.push({ label: `few-ints n=${n}`, inst: fewInts(47_100 + k, n, 0) });
      cases.push({ label: `few-ints n=${n}, forbidden, shifted`, inst: fewInts(47_200 + k, n, 0.15, -4.5) });
      cases.push({ label: `ties 0..3 n=${n}`, inst: build(47_300 + k, n, 'ties', k % 2 === 0 ? 0.1 : 0, k % 2 === 0) });
    }
    // a column no row has at its minimum, and a row with a single allowed pair
    const col = fewInts(47_400, 600, 0);
    for (let r = 0; r < 600; r++) col.cost[r * 600 + 17] = 9;
    cases.push({ label: 'column 17 all nines', inst: col });
    const lone = fewInts(47_401, 600, 0);
    for (let j = 0; j < 600; j++) lone.cost[250 * 600 + j] = j === 3 ? 5 : Infinity;
    cases.push({ label: 'row 250 allows one pair', inst: lone });
    // gives up: few ties (distances), a row with no allowed pair (late, past the first batches)
    cases.push({ label: 'geometric', inst: denseFamily(47_402, 300, 'geometric') });
    const dead = fewInts(47_403, 600, 0);
    for (let j = 0; j < 600; j++) dead.cost[555 * 600 + j] = j % 2 === 0 ? NaN : Infinity;
    cases.push({ label: 'row 555 allows nothing', inst: dead });
    let passed = 0;
    for (const { label, inst } of cases) {
      const wasm = greedyOnRowMinima(inst, true);
      const js = greedyOnRowMinima(inst, false);
      expect(wasm, label).toEqual(js);
      if (js === null) continue;
      passed++;
      // the pass's pairs are tight at its prices (column prices 0) and every price a row minimum
      for (let r = 0; r < inst.nRows; r++) {
        let m = Infinity;
        for (let j = 0; j < inst.nCols; j++) if (inst.cost[r * inst.nCols + j]! < m) m = inst.cost[r * inst.nCols + j]!;
        expect(js.u[r], `${label} row ${r}`).toBe(m);
        const j = js.rowToCol[r]!;
        if (j >= 0) expect(inst.cost[r * inst.nCols + j], `${label} row ${r}`).toBe(m);
      }
    }
    expect(passed).toBe(12);
    // no row has column 17 at its minimum: a row is left over for the searches
    expect(greedyOnRowMinima(col, true)!.nFree).toBeGreaterThan(0);
    expect(greedyOnRowMinima(cases.find((c) => c.label === 'geometric')!.inst, true)).toBeNull();
    expect(greedyOnRowMinima(dead, true)).toBeNull();
  });

  it('names a -Infinity cell as an input error, in the first batch or a later one', () => {
    for (const at of [5, 599 * 600 + 598]) {
      const inst = fewInts(47_500 + at, 600, 0);
      inst.cost[at] = -Infinity;
      expect(() => greedyOnRowMinima(inst, true)).toThrow(INPUT);
      expect(() => solveDense(inst)).toThrow(INPUT);
    }
  });

  it('through solveDense(): exhaustive search\'s optimum on tiny tied matrices, and the JS full search\'s on larger ones, each certified', () => {
    let viaStart = 0;
    for (let seed = 0; seed < 120; seed++) {
      const rand = mulberry32(47_600 + seed);
      const n = randInt(rand, 1, 7);
      const inst = build(47_600 + seed, n, 'ties', seed % 4 === 0 ? 0.2 : 0, seed % 8 === 0);
      const want = bruteForce(inst);
      if (!(want < Infinity)) continue;
      const label = `seed ${seed} n=${n}`;
      // 'candidates' tries the row-minima start first on a square matrix of any size
      const res = solveDense(inst, { strategy: 'candidates' });
      if (greedyOnRowMinima(inst, true) !== null) viaStart++;
      expect(checkCertificate(inst, res).problems, label).toEqual([]);
      expect(Math.abs(res.cost - want), `${label}: ${res.cost} vs ${want}`).toBeLessThanOrEqual(1e-9);
    }
    expect(viaStart).toBeGreaterThan(30);
    for (const [k, n] of [520, 777].entries()) {
      const inst = fewInts(47_700 + k, n, 0.1, k === 0 ? -3 : 0.25);
      const res = solveDense(inst);
      expect(checkCertificate(inst, res).problems, `n=${n}`).toEqual([]);
      expect(res.cost).toBeCloseTo(solveDense(inst, { strategy: 'full' }).cost, 6);
      expect(res.stats.scannedPairs, `n=${n}: the matrix read about once`).toBeLessThan(2 * n * n);
    }
  });
});

describe.skipIf(version === null)(`the dense wasm kernel against scipy ${version}`, () => {
  it('reaches linear_sum_assignment’s optimum on the structured families and uniform costs, n = 257 and 640', () => {
    const cases = (['geometric', 'clustered', 'rank-one'] as const).flatMap((family, f) =>
      [257, 640].map((n) => ({ label: `${family} n=${n}`, inst: denseFamily(46_000 + 10 * f + n, n, family) })),
    );
    cases.push({ label: 'ties n=300', inst: build(46_500, 300, 'ties', 0) });
    cases.push({ label: 'uniform with forbidden pairs n=400', inst: build(46_501, 400, 'uniform', 0.1) });
    const want = scipyDenseCosts(cases.map((c) => c.inst));
    cases.forEach(({ label, inst }, k) => {
      const ref = want[k]!;
      expect(ref, label).not.toBeNull();
      const res = noBudget(inst);
      expect(res, label).not.toBeNull();
      expect(checkCertificate(inst, res!).problems, label).toEqual([]);
      expect(Math.abs(res!.cost - ref), `${label}: ${res!.cost} vs ${ref}`).toBeLessThanOrEqual(1e-9 * Math.max(1, Math.abs(ref)));
    });
  });
});

/** Whether the `wabt` dev dependency is installed (it is after `npm install` / `npm ci`). */
const wabtFound = ((): boolean => {
  try {
    createRequire(new URL('../../../scripts/', import.meta.url)).resolve('wabt');
    return true;
  } catch {
    return false;
  }
})();

describe.skipIf(!wabtFound)('the committed kernel bytes', () => {
  it('are the assembly of dense-jv.wat (wabt\'s wat2wasm, via scripts/build-wasm.mjs)', async () => {
    const { assembledModuleText } = (await import('../../../scripts/build-wasm.mjs')) as { assembledModuleText: (dir: string, name: string) => Promise<string> };
    const dir = new URL('../../../src/matching/wasm/', import.meta.url).pathname;
    expect(await assembledModuleText(dir, 'dense-jv')).toBe(readFileSync(`${dir}dense-jv.wasm.ts`, 'utf8'));
  });

  it.each([
    ['matching', 'sparse-search'],
    ['matching', 'depth-first'],
    ['hindsight', 'pricing-scan'],
    ['hindsight', 'graph-rows'],
  ])('of src/%s/wasm/%s are the assembly of its .wat', async (area, name) => {
    const { assembledModuleText } = (await import('../../../scripts/build-wasm.mjs')) as { assembledModuleText: (dir: string, name: string) => Promise<string> };
    const dir = new URL(`../../../src/${area}/wasm/`, import.meta.url).pathname;
    expect(await assembledModuleText(dir, name)).toBe(readFileSync(`${dir}${name}.wasm.ts`, 'utf8'));
  });
});

describe('denseCosts(): a matrix that lives in the kernel\'s memory', () => {
  /** The instance's costs written into a matrix from denseCosts, as the CLI's parser writes them. */
  const placed = (inst: DenseInstance): DenseInstance => {
    const cost = denseCosts(inst.nRows, inst.nCols);
    cost.set(inst.cost);
    return { ...inst, cost };
  };

  it('solves as the same costs in a plain array do, by the kernel and by the row-minima start, and is only read', () => {
    const cases: Array<[string, DenseInstance]> = [
      ['geometric n=400', denseFamily(46_000, 400, 'geometric')],
      ['clustered n=300', denseFamily(46_001, 300, 'clustered')],
      ['few-ints n=300', denseFamily(46_002, 300, 'few-ints')],
      ['ties with forbidden cells n=256', build(46_003, 256, 'ties', 0.1)],
    ];
    for (const [label, plain] of cases) {
      const inKernel = placed(plain);
      expect(readInPlace(inKernel.cost, inKernel.nRows), label).toBe(true);
      expect(readInPlace(plain.cost, plain.nRows), label).toBe(false);
      const before = inKernel.cost.slice();
      const a = solveDense(plain);
      const b = solveDense(inKernel);
      expect(b.stats.wasmKernel ?? false, label).toBe(a.stats.wasmKernel ?? false);
      expect(Array.from(b.rowToCol), label).toEqual(Array.from(a.rowToCol));
      expect(b.cost, label).toBe(a.cost);
      expect(checkCertificate(inKernel, b).problems, label).toEqual([]);
      expect(inKernel.cost, label).toEqual(before);
    }
  });

  it('keeps matrices apart: two alive at once and a plain one between them solve as alone', () => {
    const one = denseFamily(46_100, 500, 'geometric');
    const two = denseFamily(46_101, 500, 'clustered');
    const three = denseFamily(46_102, 500, 'geometric');
    const alone = [one, two, three].map((inst) => solveDense(inst).cost);
    const p1 = placed(one);
    const p2 = placed(two);
    for (let round = 0; round < 2; round++) {
      expect(solveDense(p1).cost).toBe(alone[0]);
      expect(solveDense(three).cost).toBe(alone[2]);
      expect(solveDense(p2).cost).toBe(alone[1]);
    }
    expect(p1.cost).toEqual(one.cost);
    expect(p2.cost).toEqual(two.cost);
    expect(readInPlace(p1.cost, 500) && readInPlace(p2.cost, 500)).toBe(true);
  });

  it('is a plain array where the kernel would not take the matrix (not square, or small)', () => {
    expect(readInPlace(denseCosts(300, 301), 300)).toBe(false);
    expect(readInPlace(denseCosts(10, 10), 10)).toBe(false);
    expect(readInPlace(denseCosts(300, 300), 300)).toBe(true);
  });
});
