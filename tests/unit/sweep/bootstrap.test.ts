import { describe, expect, it } from 'vitest';
import { bootstrapPolicies, bucketOf, bucketPlan, bucketSums, pairedDifference, resampleDraws, seededRandom } from '../../../src/sweep/bootstrap.js';
import { runPythonJson, scipyVersion } from '../../helpers/python.js';
import { mulberry32 } from '../../helpers/random.js';

const DAY = 86_400_000;
const HOUR = 3_600_000;

describe('bucketPlan()', () => {
  it('uses UTC days for logs spanning two days or more, hours for shorter ones', () => {
    const start = Date.UTC(2026, 2, 2, 6); // 06:00 on a Monday
    const week = bucketPlan(start, start + 7 * DAY - 1);
    expect(week).toEqual({ unit: 'day', unitMs: DAY, origin: Date.UTC(2026, 2, 2), count: 8 });
    const day = bucketPlan(Date.UTC(2026, 2, 2), Date.UTC(2026, 2, 2, 23, 59));
    expect(day).toEqual({ unit: 'hour', unitMs: HOUR, origin: Date.UTC(2026, 2, 2), count: 24 });
    expect(bucketPlan(start, start + 2 * DAY - 1).unit).toBe('hour');
    expect(bucketPlan(start, start + 2 * DAY).unit).toBe('day');
  });

  it('bucketOf() and bucketSums() put each cost in the bucket of its time', () => {
    const plan = bucketPlan(0, 5 * HOUR + 1);
    expect(plan.count).toBe(6);
    expect(bucketOf(plan, HOUR - 1)).toBe(0);
    expect(bucketOf(plan, HOUR)).toBe(1);
    expect([...bucketSums(plan, [0, 10, HOUR, 5 * HOUR], [1, 2, 3, 4])]).toEqual([3, 3, 0, 0, 0, 4]);
  });
});

describe('seededRandom()', () => {
  it('is reproducible from its seed, differs between seeds, and looks uniform', () => {
    const a = seededRandom(7);
    const b = seededRandom(7);
    const c = seededRandom(8);
    const xs = Array.from({ length: 20_000 }, () => a());
    expect(Array.from({ length: 20_000 }, () => b())).toEqual(xs);
    expect(Array.from({ length: 5 }, () => c())).not.toEqual(xs.slice(0, 5));
    expect(xs.every((x) => x >= 0 && x < 1)).toBe(true);
    // Common practice: the mean of n uniforms has sd 1/sqrt(12 n) ≈ 0.002 here; 5 sd bounds.
    const mean = xs.reduce((s, x) => s + x, 0) / xs.length;
    expect(Math.abs(mean - 0.5)).toBeLessThan(0.01);
    // Every tenth of [0, 1) gets about n/10 draws (binomial sd ≈ 42; 6 sd bounds).
    const bins = new Array(10).fill(0);
    for (const x of xs) bins[Math.floor(x * 10)] += 1;
    for (const n of bins) expect(Math.abs(n - 2000)).toBeLessThan(250);
  });
});

describe('bootstrapPolicies()', () => {
  const makeBuckets = (seed: number, nWindows: number, k: number): Float64Array[] => {
    const rand = mulberry32(seed);
    return Array.from({ length: nWindows }, (_, w) => Float64Array.from({ length: k }, () => 100 + 10 * w * rand() + 50 * rand()));
  };

  it('is deterministic for a seed and its intervals contain the point estimate', () => {
    for (const seed of [1, 2, 3, 17, 99]) {
      const windows = makeBuckets(seed, 4, 7);
      const hindsight = Float64Array.from({ length: 7 }, (_, i) => 80 + i);
      const r1 = bootstrapPolicies(windows, hindsight, { resamples: 500, seed });
      const r2 = bootstrapPolicies(windows, hindsight, { resamples: 500, seed });
      expect(r2, `seed ${seed}`).toEqual(r1);
      const h = hindsight.reduce((s, x) => s + x, 0);
      windows.forEach((b, w) => {
        const total = b.reduce((s, x) => s + x, 0);
        const iv = r1.policies[w]!;
        expect(iv.cost[0], `seed ${seed} window ${w}`).toBeLessThanOrEqual(total);
        expect(iv.cost[1], `seed ${seed} window ${w}`).toBeGreaterThanOrEqual(total);
        expect(iv.regret![0]).toBeLessThanOrEqual(total - h);
        expect(iv.regret![1]).toBeGreaterThanOrEqual(total - h);
      });
      const shares = r1.policies.reduce((s, w) => s + w.bestShare, 0);
      expect(shares).toBeCloseTo(1, 12);
      expect(bootstrapPolicies(windows, hindsight, { resamples: 500, seed: seed + 1000 })).not.toEqual(r1);
    }
  });

  it('a window cheaper on every day is best in every resample', () => {
    const base = Float64Array.of(10, 50, 20, 90, 40);
    const cheaper = base.map((x) => x - 1);
    const r = bootstrapPolicies([base, cheaper, base.map((x) => x + 5)], null, { resamples: 300, seed: 5 });
    expect(r.policies.map((w) => w.bestShare)).toEqual([0, 1, 0]);
    expect(r.policies[0]!.regret).toBeNull();
  });

  it('ties go to the earlier window, and identical days give a zero-width interval', () => {
    const flat = Float64Array.of(5, 5, 5);
    const r = bootstrapPolicies([flat, flat.slice()], null, { resamples: 100, seed: 3 });
    expect(r.policies[0]!.bestShare).toBe(1);
    expect(r.policies[0]!.cost).toEqual([15, 15]);
  });

  it('the interval width shrinks as the days agree more (percentile bootstrap, Efron & Tibshirani 1993 §13)', () => {
    const rand = mulberry32(11);
    const noisy = Float64Array.from({ length: 10 }, () => 100 + 80 * (rand() - 0.5));
    const calm = noisy.map((x) => 100 + (x - 100) / 10);
    const [a, b] = bootstrapPolicies([noisy, calm], null, { resamples: 1000, seed: 11 }).policies;
    expect(a!.cost[1] - a!.cost[0]).toBeGreaterThan(5 * (b!.cost[1] - b!.cost[0]));
  });
});

// An independent computation of the paired intervals: numpy (from PyPI) on the same
// per-day costs and the same resample indices (resampleDraws), percentiles by
// numpy.percentile's default linear method.
const NUMPY_PAIRED = `
import json, sys
import numpy as np
d = json.load(sys.stdin)
K, B = d['K'], d['B']
idx = np.array(d['draws'], dtype=np.int64).reshape(B, K)
out = []
for x, y in d['pairs']:
    diff = np.array(y) - np.array(x)
    sums = diff[idx].sum(axis=1)
    lo, hi = np.percentile(sums, [2.5, 97.5])
    out.append({'diff': float(diff.sum()), 'lo': float(lo), 'hi': float(hi), 'below': float((sums < 0).mean())})
print(json.dumps(out))
`;

describe('resampleDraws(), pairedDifference() and the paired intervals of bootstrapPolicies()', () => {
  const haveNumpy = scipyVersion() !== null;

  it('draws B rows of K indices in 0..K-1, reproducibly', () => {
    const d = resampleDraws(7, 300, 5);
    expect(d).toHaveLength(2100);
    expect(d.every((i) => i >= 0 && i < 7)).toBe(true);
    expect(resampleDraws(7, 300, 5)).toEqual(d);
    expect(resampleDraws(7, 300, 6)).not.toEqual(d);
    // Each index is drawn about B·K/K = 300 times (binomial sd ≈ 16; 6 sd bounds).
    const counts = new Array(7).fill(0);
    for (const i of d) counts[i] += 1;
    for (const c of counts) expect(Math.abs(c - 300)).toBeLessThan(100);
  });

  it.skipIf(!haveNumpy)('pairedDifference() equals numpy on the same costs and resample indices', () => {
    for (const seed of [1, 4, 23]) {
      const rand = mulberry32(seed);
      const K = 5 + Math.floor(rand() * 10);
      const day = Array.from({ length: K }, () => 1000 + 4000 * rand());
      const a = Float64Array.from(day, (x) => x + 50 * rand());
      const b = Float64Array.from(day, (x) => x + 30 + 50 * rand());
      const B = 2000;
      const mine = pairedDifference(b, a, { resamples: B, seed });
      const [ref] = runPythonJson<Array<{ diff: number; lo: number; hi: number; below: number }>>(NUMPY_PAIRED, {
        // numpy takes (x, y) and resamples y − x: here b − a, as pairedDifference(b, a) does.
        K, B, draws: Array.from(resampleDraws(K, B, seed)), pairs: [[Array.from(a), Array.from(b)]],
      });
      expect(mine.diff, `seed ${seed}`).toBeCloseTo(ref!.diff, 6);
      expect(Math.abs(mine.interval![0] - ref!.lo), `seed ${seed}`).toBeLessThan(1e-9 * Math.abs(ref!.lo) + 1e-9);
      expect(Math.abs(mine.interval![1] - ref!.hi), `seed ${seed}`).toBeLessThan(1e-9 * Math.abs(ref!.hi) + 1e-9);
      expect(mine.aBelowShare, `seed ${seed}`).toBeCloseTo(ref!.below, 12);
    }
  });

  it.skipIf(!haveNumpy)('bootstrapPolicies() gives each policy the numpy interval of its difference to the reference', () => {
    const rand = mulberry32(77);
    const K = 7;
    const base = Array.from({ length: K }, () => 10_000 + 30_000 * rand());
    const policies = [0, 150, -80, 400].map((shift) => Float64Array.from(base, (x) => x + shift + 300 * rand()));
    const B = 1500;
    const r = bootstrapPolicies(policies, null, { resamples: B, seed: 9 });
    const ref = runPythonJson<Array<{ diff: number; lo: number; hi: number }>>(NUMPY_PAIRED, {
      K, B, draws: Array.from(resampleDraws(K, B, 9)), pairs: policies.map((p) => [Array.from(policies[r.reference]!), Array.from(p)]),
    });
    expect(r.reference).toBe(2);
    r.policies.forEach((p, i) => {
      expect(Math.abs(p.diff[0] - ref[i]!.lo), `policy ${i}`).toBeLessThan(1e-9 * Math.abs(ref[i]!.lo) + 1e-9);
      expect(Math.abs(p.diff[1] - ref[i]!.hi), `policy ${i}`).toBeLessThan(1e-9 * Math.abs(ref[i]!.hi) + 1e-9);
    });
    expect(r.policies[2]!.diff).toEqual([0, 0]);
  });

  it('the paired interval is far narrower than the unpaired one when days differ more than policies (why the sweep pairs)', () => {
    const rand = mulberry32(3);
    const base = Float64Array.from({ length: 7 }, () => 5000 + 40_000 * rand());
    const a = base.map((x) => x + 100 * rand());
    const b = base.map((x) => x + 500 + 100 * rand());
    const r = bootstrapPolicies([a, b], null, { resamples: 1000, seed: 1 });
    const costWidth = r.policies[1]!.cost[1] - r.policies[1]!.cost[0];
    const diffWidth = r.policies[1]!.diff[1] - r.policies[1]!.diff[0];
    expect(diffWidth * 20).toBeLessThan(costWidth);
    // b costs about 500 more every day: its difference is clear of zero.
    expect(r.policies[1]!.diff[0]).toBeGreaterThan(0);
    expect(r.policies[1]!.bestShare).toBe(0);
  });
});
