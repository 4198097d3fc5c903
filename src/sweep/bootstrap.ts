/**
 * Uncertainty of a window sweep: a percentile bootstrap over days (hours for logs
 * shorter than two days). Each window's per-demand costs are summed per time bucket;
 * a resample draws as many buckets as there are, with replacement, and adds their
 * costs up for every window at once (paired: the same days for every window and the
 * hindsight), so intervals and "how often best" compare windows on equal footing.
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

/** Options of {@link bootstrapWindows}. */
export interface BootstrapOptions {
  /** Resamples B. @default 1000 */
  resamples?: number;
  /** @default 1 */
  seed?: number;
  /** Central coverage of the percentile interval. @default 0.95 */
  level?: number;
}

export interface WindowInterval {
  /** Percentile interval of the window's online cost over resamples. */
  cost: [number, number];
  /** Percentile interval of online − hindsight over the same resamples. */
  regret: [number, number] | null;
  /** Share of resamples in which this window has the lowest online cost (ties: the earlier window). */
  bestShare: number;
}

export interface BootstrapResult {
  resamples: number;
  seed: number;
  level: number;
  buckets: number;
  windows: WindowInterval[];
}

/**
 * Percentile bootstrap of each window's total cost (and regret) from per-bucket costs.
 * `windowBuckets[w][b]` is window w's cost in bucket b; `hindsightBuckets[b]` the
 * hindsight's, or null when there is none.
 */
export function bootstrapWindows(
  windowBuckets: readonly Float64Array[],
  hindsightBuckets: Float64Array | null,
  opts: BootstrapOptions = {},
): BootstrapResult {
  const B = opts.resamples ?? 1000;
  const seed = opts.seed ?? 1;
  const level = opts.level ?? 0.95;
  const nW = windowBuckets.length;
  const K = nW > 0 ? windowBuckets[0]!.length : 0;
  const rand = seededRandom(seed);
  const costs = Array.from({ length: nW }, () => new Float64Array(B));
  const regrets = Array.from({ length: nW }, () => new Float64Array(B));
  const wins = new Float64Array(nW);
  const draw = new Int32Array(K);
  for (let r = 0; r < B; r++) {
    for (let k = 0; k < K; k++) draw[k] = Math.floor(rand() * K);
    let h = 0;
    if (hindsightBuckets) for (let k = 0; k < K; k++) h += hindsightBuckets[draw[k]!]!;
    let best = -1;
    let bestCost = Infinity;
    for (let w = 0; w < nW; w++) {
      const buckets = windowBuckets[w]!;
      let c = 0;
      for (let k = 0; k < K; k++) c += buckets[draw[k]!]!;
      costs[w]![r] = c;
      regrets[w]![r] = c - h;
      if (c < bestCost) {
        bestCost = c;
        best = w;
      }
    }
    if (best >= 0) wins[best]! += 1;
  }
  const lo = (1 - level) / 2;
  const hi = 1 - lo;
  const interval = (v: Float64Array): [number, number] => [quantileLinear(v, lo) ?? NaN, quantileLinear(v, hi) ?? NaN];
  return {
    resamples: B,
    seed,
    level,
    buckets: K,
    windows: costs.map((c, w) => ({
      cost: B > 0 ? interval(c) : [NaN, NaN],
      regret: hindsightBuckets && B > 0 ? interval(regrets[w]!) : null,
      bestShare: B > 0 ? wins[w]! / B : 0,
    })),
  };
}
