/**
 * Seeded randomness for tests: every random input is reproducible from its seed.
 * mulberry32 is a small 32-bit PRNG (common practice; public-domain algorithm by
 * Tommy Ettinger).
 */

/** A PRNG returning floats in [0, 1), fully determined by `seed`. */
export function mulberry32(seed: number): () => number {
  let a = seed >>> 0;
  return () => {
    a = (a + 0x6d2b79f5) >>> 0;
    let t = a;
    t = Math.imul(t ^ (t >>> 15), t | 1);
    t ^= t + Math.imul(t ^ (t >>> 7), t | 61);
    return ((t ^ (t >>> 14)) >>> 0) / 4294967296;
  };
}

/** A whole number in [lo, hi] (both inclusive) from `rand`. */
export function randInt(rand: () => number, lo: number, hi: number): number {
  return lo + Math.floor(rand() * (hi - lo + 1));
}
