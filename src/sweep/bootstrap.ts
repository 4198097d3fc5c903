/**
 * Uncertainty of a policy sweep: a percentile bootstrap over days (hours for logs
 * shorter than two days). Each policy's per-demand costs are summed per time bucket;
 * a resample draws as many buckets as there are, with replacement, and adds their
 * costs up for every policy at once (paired: the same days for every policy and the
 * hindsight). Days differ far more from each other than policies do on one day, so
 * the intervals that tell policies apart are those of the paired differences.
 * Pure and seeded.
 */
import { quantileLinear } from '../replay/summary.js';

export { bucketOf, bucketPlan, bucketSums, type BucketPlan } from '../replay/buckets.js';

/**
 * A seeded PRNG returning floats in [0, 1): a Weyl sequence (step 0x9e3779b9) through
 * the 32-bit murmur3 finaliser (common practice for small reproducible streams).
 */
export function seededRandom(seed: number): () => number {
  let state = seed >>> 0;
  return () => {
    state = (state + 0x9e3779b9) >>> 0;
    let z = state;
    z = Math.imul(z ^ (z >>> 16), 0x85ebca6b);
    z = Math.imul(z ^ (z >>> 13), 0xc2b2ae35);
    z ^= z >>> 16;
    return (z >>> 0) / 4294967296;
  };
}

/**
 * The resamples of a bootstrap over K buckets: B rows of K bucket indices drawn with
 * replacement, row r at `[r·K, (r+1)·K)`, in the order {@link seededRandom} gives them.
 * Every interval below is computed from these draws, so another implementation can be
 * handed the same indices and must find the same numbers.
 * @example resampleDraws(7, 1000, 1) // Int32Array of 7000 indices in 0..6
 */
export function resampleDraws(K: number, B: number, seed: number): Int32Array {
  const rand = seededRandom(seed);
  const draws = new Int32Array(K * B);
  for (let i = 0; i < draws.length; i++) draws[i] = Math.floor(rand() * K);
  return draws;
}

/** Options of {@link bootstrapPolicies} and {@link pairedDifference}. */
export interface BootstrapOptions {
  /** Resamples B. @default 1000 */
  resamples?: number;
  /** @default 1 */
  seed?: number;
  /** Central coverage of the percentile interval. @default 0.95 */
  level?: number;
}

export interface PolicyInterval {
  /** Percentile interval of the policy's online cost over resamples. */
  cost: [number, number];
  /** Percentile interval of online − hindsight over the same resamples. */
  regret: [number, number] | null;
  /**
   * Percentile interval of the paired difference `cost − reference cost` (the same
   * resampled buckets for both): [0, 0] for the reference itself.
   */
  diff: [number, number];
  /** Share of resamples in which this policy has the lowest online cost (ties: the earlier policy). */
  bestShare: number;
}

export interface BootstrapResult {
  resamples: number;
  seed: number;
  level: number;
  buckets: number;
  /** The policy the paired differences are taken against. */
  reference: number;
  policies: PolicyInterval[];
}

const percentileInterval = (v: Float64Array, level: number): [number, number] => {
  const lo = (1 - level) / 2;
  return [quantileLinear(v, lo) ?? NaN, quantileLinear(v, 1 - lo) ?? NaN];
};

/**
 * Percentile bootstrap of each policy's total cost (and regret), and of its paired
 * difference to a reference policy, from per-bucket costs. `policyBuckets[p][b]` is
 * policy p's cost in bucket b; `hindsightBuckets[b]` the hindsight's, or null. The
 * reference defaults to the policy with the lowest total (ties: the earlier one).
 */
export function bootstrapPolicies(
  policyBuckets: readonly Float64Array[],
  hindsightBuckets: Float64Array | null,
  opts: BootstrapOptions & { reference?: number } = {},
): BootstrapResult {
  const B = opts.resamples ?? 1000;
  const seed = opts.seed ?? 1;
  const level = opts.level ?? 0.95;
  const nP = policyBuckets.length;
  const K = nP > 0 ? policyBuckets[0]!.length : 0;
  let reference = opts.reference ?? -1;
  if (reference < 0) {
    let bestTotal = Infinity;
    policyBuckets.forEach((b, p) => {
      const total = b.reduce((s, x) => s + x, 0);
      if (total < bestTotal) {
        bestTotal = total;
        reference = p;
      }
    });
  }
  const draws = resampleDraws(K, B, seed);
  const costs = Array.from({ length: nP }, () => new Float64Array(B));
  const regrets = Array.from({ length: nP }, () => new Float64Array(B));
  const diffs = Array.from({ length: nP }, () => new Float64Array(B));
  const wins = new Float64Array(nP);
  for (let r = 0; r < B; r++) {
    const row = draws.subarray(r * K, (r + 1) * K);
    let h = 0;
    if (hindsightBuckets) for (let k = 0; k < K; k++) h += hindsightBuckets[row[k]!]!;
    let best = -1;
    let bestCost = Infinity;
    for (let p = 0; p < nP; p++) {
      const buckets = policyBuckets[p]!;
      let c = 0;
      for (let k = 0; k < K; k++) c += buckets[row[k]!]!;
      costs[p]![r] = c;
      regrets[p]![r] = c - h;
      if (c < bestCost) {
        bestCost = c;
        best = p;
      }
    }
    if (best >= 0) wins[best]! += 1;
    if (reference >= 0) {
      // Summed bucket by bucket, so the reference's own difference is exactly 0.
      const ref = policyBuckets[reference]!;
      for (let p = 0; p < nP; p++) {
        const buckets = policyBuckets[p]!;
        let d = 0;
        for (let k = 0; k < K; k++) d += buckets[row[k]!]! - ref[row[k]!]!;
        diffs[p]![r] = d;
      }
    }
  }
  return {
    resamples: B,
    seed,
    level,
    buckets: K,
    reference,
    policies: costs.map((c, p) => ({
      cost: B > 0 ? percentileInterval(c, level) : [NaN, NaN],
      regret: hindsightBuckets && B > 0 ? percentileInterval(regrets[p]!, level) : null,
      diff: B > 0 ? percentileInterval(diffs[p]!, level) : [NaN, NaN],
      bestShare: B > 0 ? wins[p]! / B : 0,
    })),
  };
}

/** The paired difference of two runs over the same buckets, with its bootstrap interval. */
export interface PairedDifference {
  /** Σ (a − b) over the buckets. */
  diff: number;
  /** Percentile interval of Σ (a − b) over resamples; null without resamples. */
  interval: [number, number] | null;
  /** Share of resamples in which a costs less than b. */
  aBelowShare: number | null;
  /** Per bucket a − b, in bucket order. */
  byBucket: number[];
  level: number;
  resamples: number;
  seed: number;
}

/**
 * The paired bootstrap of two runs on the same log: per bucket (day or hour) their
 * cost difference, resampled with the draws of {@link resampleDraws} (Efron &
 * Tibshirani 1993, the bootstrap of a mean difference of paired data, §13 percentile
 * interval).
 * @example pairedDifference(Float64Array.of(10, 12), Float64Array.of(9, 13)).diff // 0
 */
export function pairedDifference(a: Float64Array, b: Float64Array, opts: BootstrapOptions = {}): PairedDifference {
  const B = opts.resamples ?? 1000;
  const seed = opts.seed ?? 1;
  const level = opts.level ?? 0.95;
  const K = Math.min(a.length, b.length);
  const byBucket = Array.from({ length: K }, (_, k) => a[k]! - b[k]!);
  const diff = byBucket.reduce((s, x) => s + x, 0);
  if (B <= 0 || K === 0) return { diff, interval: null, aBelowShare: null, byBucket, level, resamples: 0, seed };
  const draws = resampleDraws(K, B, seed);
  const sums = new Float64Array(B);
  let below = 0;
  for (let r = 0; r < B; r++) {
    let d = 0;
    for (let k = r * K; k < (r + 1) * K; k++) d += byBucket[draws[k]!]!;
    sums[r] = d;
    if (d < 0) below++;
  }
  return { diff, interval: percentileInterval(sums, level), aBelowShare: below / B, byBucket, level, resamples: B, seed };
}
