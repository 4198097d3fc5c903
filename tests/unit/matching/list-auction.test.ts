import { describe, expect, it } from 'vitest';
import { listAuction, type AuctionLists } from '../../../src/matching/list-auction.js';
import { denseFamily } from '../../../bench/lib/instances.js';
import { denseAuction } from '../../../src/matching/dense-auction.js';
import { bruteForce, mulberry32, randInt } from './gen.js';

/*
 * The list auction (src/matching/list-auction.ts) on its own: lists of each row's k
 * cheapest allowed columns, bound = the dearest of them (every column left out costs
 * at least that, and prices start at 0). References: exhaustive search over every
 * assignment (common practice for tiny instances), and the auction's own guarantees
 * (Bertsekas' auction algorithm, from memory): every bid keeps ε-complementary
 * slackness, and on integer costs a square assignment ending at ε < 1/n is optimal.
 */

function cheapestLists(cost: Float64Array, nRows: number, nCols: number, k: number): AuctionLists {
  const col = new Int32Array(nRows * k);
  const val = new Float64Array(nRows * k);
  const len = new Int32Array(nRows);
  const bound = new Float64Array(nRows);
  for (let r = 0; r < nRows; r++) {
    const allowed: number[] = [];
    for (let j = 0; j < nCols; j++) if (cost[r * nCols + j]! < Infinity) allowed.push(j);
    allowed.sort((a, b) => cost[r * nCols + a]! - cost[r * nCols + b]! || a - b);
    const m = Math.min(k, allowed.length);
    for (let t = 0; t < m; t++) {
      col[r * k + t] = allowed[t]!;
      val[r * k + t] = cost[r * nCols + allowed[t]!]!;
    }
    len[r] = m;
    bound[r] = allowed.length > k ? val[r * k + k - 1]! : Infinity;
  }
  return { k, stride: k, col, val, len, bound };
}

/** Whether each row's column is within ε (plus rounding) of its best offer c + p over the whole row. */
function epsilonSlack(cost: Float64Array, nRows: number, nCols: number, price: Float64Array, rowToCol: Int32Array, eps: number): string[] {
  const problems: string[] = [];
  for (let r = 0; r < nRows; r++) {
    const j = rowToCol[r]!;
    if (j < 0) {
      problems.push(`row ${r} unassigned`);
      continue;
    }
    let best = Infinity;
    for (let q = 0; q < nCols; q++) best = Math.min(best, cost[r * nCols + q]! + price[q]!);
    const own = cost[r * nCols + j]! + price[j]!;
    if (own > best + eps + 1e-9 * Math.max(1, Math.abs(best))) problems.push(`row ${r}: ${own} > ${best} + ${eps}`);
  }
  return problems;
}

function isMatching(rowToCol: Int32Array, nCols: number): boolean {
  const seen = new Uint8Array(nCols);
  for (const j of rowToCol) {
    if (j < 0 || j >= nCols || seen[j]) return false;
    seen[j] = 1;
  }
  return true;
}

describe('listAuction', () => {
  it('ends at an optimal assignment on 300 seeded square integer instances (n ≤ 8, lists of 3), against exhaustive search', () => {
    const rand = mulberry32(4242);
    let feasible = 0;
    for (let t = 0; t < 300; t++) {
      const n = randInt(rand, 4, 8);
      const cost = new Float64Array(n * n);
      for (let q = 0; q < cost.length; q++) cost[q] = rand() < 0.15 ? Infinity : randInt(rand, 0, 20);
      const want = bruteForce({ nRows: n, nCols: n, cost });
      const price = new Float64Array(n);
      const rowToCol = new Int32Array(n);
      const lists = cheapestLists(cost, n, n, 3);
      const out = listAuction(cost, n, n, lists, price, rowToCol, 8, 1 / (n + 1), 4, 200_000);
      const label = `case ${t}, n = ${n}`;
      if (want === Infinity) {
        expect(out.finished, label).toBe(false);
        continue;
      }
      feasible++;
      expect(out.finished, label).toBe(true);
      expect(isMatching(rowToCol, n), label).toBe(true);
      expect(epsilonSlack(cost, n, n, price, rowToCol, 1 / (n + 1)), label).toEqual([]);
      let total = 0;
      for (let r = 0; r < n; r++) total += cost[r * n + rowToCol[r]!]!;
      expect(total, label).toBe(want);
    }
    expect(feasible).toBeGreaterThan(150);
  });

  it('keeps ε-complementary slackness on rectangular real-cost instances with forbidden pairs', () => {
    const rand = mulberry32(777);
    for (let t = 0; t < 60; t++) {
      const nRows = randInt(rand, 20, 60);
      const nCols = nRows + randInt(rand, 0, 6);
      const cost = new Float64Array(nRows * nCols);
      for (let q = 0; q < cost.length; q++) cost[q] = rand() < 0.1 ? Infinity : rand() * 100;
      // a planted perfect matching keeps every instance feasible
      for (let r = 0; r < nRows; r++) cost[r * nCols + r] = rand() * 100;
      const price = new Float64Array(nCols);
      const rowToCol = new Int32Array(nRows);
      const eps = 0.01;
      const out = listAuction(cost, nRows, nCols, cheapestLists(cost, nRows, nCols, 5), price, rowToCol, 25, eps, 5, 1e8);
      const label = `case ${t}, ${nRows} × ${nCols}`;
      expect(out.finished, label).toBe(true);
      expect(isMatching(rowToCol, nCols), label).toBe(true);
      expect(epsilonSlack(cost, nRows, nCols, price, rowToCol, eps), label).toEqual([]);
    }
  });

  it('on clustered costs reads fewer cells than the auction over whole rows at the same ε, and its lists end with the rows’ best offers', () => {
    for (const [seed, n] of [[5, 400], [7, 600]] as const) {
      const inst = denseFamily(seed, n, 'clustered');
      const k = 22;
      const eps = 1500 / 16;
      const price = new Float64Array(n);
      const rowToCol = new Int32Array(n);
      const lists = cheapestLists(inst.cost, n, n, k);
      const out = listAuction(inst.cost, n, n, lists, price, rowToCol, eps, eps, 2, 16 * n * n);
      const label = `clustered n=${n} seed ${seed}`;
      expect(out.finished, label).toBe(true);
      expect(isMatching(rowToCol, n), label).toBe(true);
      expect(epsilonSlack(inst.cost, n, n, price, rowToCol, eps), label).toEqual([]);
      const full = denseAuction(inst.cost, n, new Float64Array(n), new Int32Array(n), eps, eps, 2, Infinity);
      expect(out.rowReads, label).toBeLessThan(out.bids);
      expect(out.scanned, label).toBeLessThan(full.scanned);
      // every row's column is on its list, and the list's bound still holds at the end
      for (let r = 0; r < n; r++) {
        const at = r * lists.stride;
        const onList = new Set(lists.col.subarray(at, at + lists.len[r]!));
        expect(onList.has(rowToCol[r]!), `${label} row ${r}`).toBe(true);
        for (let j = 0; j < n; j++) {
          if (onList.has(j)) continue;
          expect(inst.cost[r * n + j]! + price[j]!, `${label} row ${r} column ${j}`).toBeGreaterThanOrEqual(lists.bound[r]!);
        }
      }
    }
  });
});
