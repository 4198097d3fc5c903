import { describe, expect, it } from 'vitest';
import { gini, lorenz, topShare } from '../../../src/report/stats.js';
import { mulberry32 } from '../../helpers/random.js';

/**
 * The Gini coefficient by its definition, the mean absolute difference over twice the
 * mean: G = Σᵢ Σⱼ |xᵢ − xⱼ| / (2 n² μ) (Cowell, Measuring Inequality, 3rd ed. 2011,
 * ch. 2 — from memory). A double sum, independent of the sorted formula under test.
 */
function giniByDefinition(x: readonly number[]): number {
  const n = x.length;
  const mean = x.reduce((s, v) => s + v, 0) / n;
  let d = 0;
  for (const a of x) for (const b of x) d += Math.abs(a - b);
  return d / (2 * n * n * mean);
}

describe('gini()', () => {
  it('handbook values: equal shares 0; one unit with everything (n − 1)/n; the values 1..n give (n − 1)/(3n)', () => {
    // The last follows from the definition: Σ|i − j| over ordered pairs is n(n² − 1)/3
    // and the mean is (n + 1)/2, so G = (n − 1)/(3n) (a theorem with an exact value).
    expect(gini([4, 4, 4, 4])).toBe(0);
    expect(gini([0, 0, 0, 0, 10])).toBeCloseTo(4 / 5, 12);
    for (const n of [2, 5, 10, 101]) {
      expect(gini(Array.from({ length: n }, (_, i) => i + 1)), `n ${n}`).toBeCloseTo((n - 1) / (3 * n), 12);
    }
    // A worked example: incomes 1, 2, 3, 4, 10: Σ|xᵢ − xⱼ| = 2·(1+2+3+9+1+2+8+1+7+6) = 80, μ = 4, G = 80/(2·25·4) = 0.4.
    expect(gini([1, 2, 3, 4, 10])).toBeCloseTo(0.4, 12);
    expect(gini([])).toBeNull();
    expect(gini([0, 0])).toBe(0);
  });

  it('agrees with the definition on seeded random counts, in any order', () => {
    for (const seed of [1, 2, 3, 4, 5]) {
      const rand = mulberry32(seed);
      const x = Array.from({ length: 1 + Math.floor(rand() * 60) }, () => Math.floor(rand() * 20));
      if (x.every((v) => v === 0)) x.push(1);
      expect(gini(x), `seed ${seed}`).toBeCloseTo(giniByDefinition(x), 12);
      expect(gini([...x].reverse()), `seed ${seed}`).toBeCloseTo(giniByDefinition(x), 12);
    }
  });
});

describe('lorenz() and topShare()', () => {
  it('the curve runs from (0, 0) to (1, 1), never decreases and stays under the diagonal', () => {
    const rand = mulberry32(8);
    const x = Array.from({ length: 500 }, () => Math.floor(rand() * 30));
    const pts = lorenz(x);
    expect(pts[0]).toEqual({ units: 0, share: 0 });
    expect(pts[pts.length - 1]).toEqual({ units: 1, share: 1 });
    expect(pts.length).toBeLessThanOrEqual(101);
    for (let i = 1; i < pts.length; i++) {
      expect(pts[i]!.units).toBeGreaterThanOrEqual(pts[i - 1]!.units);
      expect(pts[i]!.share).toBeGreaterThanOrEqual(pts[i - 1]!.share);
      expect(pts[i]!.share).toBeLessThanOrEqual(pts[i]!.units + 1e-12);
    }
  });

  it('topShare() is the share of the largest tenth', () => {
    expect(topShare([1, 1, 1, 1, 1, 1, 1, 1, 1, 11], 0.1)).toBeCloseTo(11 / 20, 12);
    expect(topShare([5, 5], 0.1)).toBe(0.5);
    expect(topShare([], 0.1)).toBeNull();
  });
});
