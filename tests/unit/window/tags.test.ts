import { describe, expect, it } from 'vitest';
import { capabilitiesAllow } from '../../../src/window/geo.js';
import { TagBits } from '../../../src/window/tags.js';
import { mulberry32, randInt } from '../../helpers/random.js';

function randomTags(rand: () => number, pool: readonly string[], max: number): string[] | undefined {
  if (rand() < 0.2) return undefined;
  const out: string[] = [];
  const n = randInt(rand, 0, max);
  for (let i = 0; i < n; i++) out.push(pool[randInt(rand, 0, pool.length - 1)]!);
  return out;
}

describe('TagBits', () => {
  it('maskOf(): (needs AND NOT has) is 0 exactly when capabilitiesAllow(needs, has) (seeded)', () => {
    for (let seed = 1; seed <= 20; seed++) {
      const rand = mulberry32(seed);
      const pool = Array.from({ length: randInt(rand, 1, 31) }, (_, i) => `tag-${seed}-${i}`);
      const bits = new TagBits();
      for (let k = 0; k < 400; k++) {
        const needs = randomTags(rand, pool, 3);
        const has = randomTags(rand, pool, 6);
        const allowed = (bits.maskOf(needs) & ~bits.maskOf(has)) === 0;
        expect(allowed, `seed ${seed}: needs ${JSON.stringify(needs)} has ${JSON.stringify(has)}`).toBe(capabilitiesAllow(needs, has));
      }
      expect(bits.overflow).toBe(false);
    }
  });

  it('gives each of the first 31 distinct tags its own bit, and sets overflow at the 32nd', () => {
    const bits = new TagBits();
    const seen = new Set<number>();
    for (let i = 0; i < 31; i++) {
      const m = bits.maskOf([`t${i}`]);
      expect(m > 0 && (m & (m - 1)) === 0, `t${i}`).toBe(true);
      expect(seen.has(m)).toBe(false);
      seen.add(m);
      expect(bits.maskOf([`t${i}`, `t${i}`])).toBe(m);
    }
    expect(bits.overflow).toBe(false);
    expect(bits.maskOf(['t3', 't32'])).toBe(bits.maskOf(['t3']));
    expect(bits.overflow).toBe(true);
    // Masks of tags that got a bit stay what they were.
    expect(bits.maskOf(['t30'])).toBe(2 ** 30);
    expect(bits.maskOf([])).toBe(0);
    expect(bits.maskOf(undefined)).toBe(0);
  });
});
