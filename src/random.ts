/**
 * The one seeded PRNG of pairflow's generator, tests and benchmarks: mulberry32, a
 * small 32-bit generator (common practice; a public-domain algorithm, written from
 * memory). Every random choice takes an explicit seed, so runs are reproducible.
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
