/**
 * Small statistics of the report: inequality of work over supply units. Pure.
 */

/**
 * The Gini coefficient of non-negative values (population form, no small-sample
 * correction): G = Σᵢ Σⱼ |xᵢ − xⱼ| / (2 n² μ), computed on the sorted values as
 * G = 2 Σᵢ i·x₍ᵢ₎ / (n Σ x) − (n + 1) / n with i = 1..n. 0 when every value is the
 * same (or all are 0), (n − 1)/n when one unit has everything. Null for no values.
 * @example gini([1, 2, 3, 4, 5]) // 0.2666… = (n − 1)/(3n) for 1..n
 */
export function gini(values: ArrayLike<number>): number | null {
  const n = values.length;
  if (n === 0) return null;
  const x = Float64Array.from(values as ArrayLike<number>).sort();
  let total = 0;
  let weighted = 0;
  for (let i = 0; i < n; i++) {
    total += x[i]!;
    weighted += (i + 1) * x[i]!;
  }
  if (total === 0) return 0;
  return (2 * weighted) / (n * total) - (n + 1) / n;
}

/**
 * Points of the Lorenz curve: after sorting ascending, the share of units (x) and the
 * share of the total they hold (y), from (0, 0) to (1, 1), thinned to at most
 * `maxPoints` (always keeping both ends).
 */
export function lorenz(values: ArrayLike<number>, maxPoints = 101): Array<{ units: number; share: number }> {
  const n = values.length;
  const x = Float64Array.from(values as ArrayLike<number>).sort();
  const total = x.reduce((s, v) => s + v, 0);
  const cum = new Float64Array(n + 1);
  for (let i = 0; i < n; i++) cum[i + 1] = cum[i]! + x[i]!;
  const steps = Math.max(1, Math.min(n, maxPoints - 1));
  const out: Array<{ units: number; share: number }> = [];
  for (let k = 0; k <= steps; k++) {
    const i = Math.round((k / steps) * n);
    out.push({ units: n === 0 ? k / steps : i / n, share: total > 0 ? cum[i]! / total : i / Math.max(1, n) });
  }
  return out;
}

/** Share of the total held by the top `fraction` of units (at least one unit). */
export function topShare(values: ArrayLike<number>, fraction: number): number | null {
  const n = values.length;
  if (n === 0) return null;
  const x = Float64Array.from(values as ArrayLike<number>).sort().reverse();
  const k = Math.max(1, Math.ceil(n * fraction));
  let top = 0;
  let total = 0;
  for (let i = 0; i < n; i++) {
    total += x[i]!;
    if (i < k) top += x[i]!;
  }
  return total > 0 ? top / total : null;
}

/** One bar of a histogram: [lo, hi) with its count. */
export interface Bin {
  lo: number;
  hi: number;
  count: number;
}
