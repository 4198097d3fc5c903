/**
 * Time buckets for per-demand costs: days when a log spans at least two days, hours
 * otherwise. The replay's statistics sink sums costs into them; the sweep's bootstrap
 * resamples them. Pure.
 */

const HOUR_MS = 3_600_000;
const DAY_MS = 24 * HOUR_MS;

/** How per-demand costs are grouped into resampling units. */
export interface BucketPlan {
  unit: 'day' | 'hour';
  unitMs: number;
  /** Start of the first bucket (a multiple of unitMs, so days are UTC days). */
  origin: number;
  count: number;
}

/**
 * Buckets covering [minT, maxT]: days when the log spans at least two days, hours
 * otherwise (one day holds too few days to resample).
 * @example bucketPlan(0, 3 * 86_400_000 - 1) // { unit: 'day', count: 3, … }
 */
export function bucketPlan(minT: number, maxT: number): BucketPlan {
  if (!(Number.isFinite(minT) && Number.isFinite(maxT)) || maxT < minT) {
    return { unit: 'hour', unitMs: HOUR_MS, origin: 0, count: 1 };
  }
  const unitMs = maxT - minT >= 2 * DAY_MS ? DAY_MS : HOUR_MS;
  const first = Math.floor(minT / unitMs);
  return {
    unit: unitMs === DAY_MS ? 'day' : 'hour',
    unitMs,
    origin: first * unitMs,
    count: Math.floor(maxT / unitMs) - first + 1,
  };
}

/** The bucket of time `t` under `plan`, clamped into range. */
export function bucketOf(plan: BucketPlan, t: number): number {
  const b = Math.floor((t - plan.origin) / plan.unitMs);
  return b < 0 ? 0 : b >= plan.count ? plan.count - 1 : b;
}

/** Sums `cost[i]` into the bucket of `t[i]`. */
export function bucketSums(plan: BucketPlan, t: ArrayLike<number>, cost: ArrayLike<number>): Float64Array {
  const out = new Float64Array(plan.count);
  for (let i = 0; i < t.length; i++) out[bucketOf(plan, t[i]!)]! += cost[i]!;
  return out;
}
