/**
 * Seeded randomness for tests: every random input is reproducible from its seed.
 * mulberry32 is a small 32-bit PRNG (common practice; public-domain algorithm by
 * Tommy Ettinger).
 */

import { mulberry32 } from '../../src/random.js';
export { mulberry32 };

/** A whole number in [lo, hi] (both inclusive) from `rand`. */
export function randInt(rand: () => number, lo: number, hi: number): number {
  return lo + Math.floor(rand() * (hi - lo + 1));
}
