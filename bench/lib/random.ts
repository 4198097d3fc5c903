/**
 * Seeded randomness for the benchmarks, so every run times the same instances.
 * mulberry32: a small 32-bit PRNG (common practice; public-domain algorithm).
 */

import { mulberry32 } from '../../src/random.js';
export { mulberry32 };

/** A uniformly random permutation of 0..n-1 (Fisher–Yates). */
export function permutation(rand: () => number, n: number): Int32Array {
  const p = new Int32Array(n);
  for (let i = 0; i < n; i++) p[i] = i;
  for (let i = n - 1; i > 0; i--) {
    const j = Math.floor(rand() * (i + 1));
    const t = p[i]!;
    p[i] = p[j]!;
    p[j] = t;
  }
  return p;
}
