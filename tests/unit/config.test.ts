import { describe, expect, it } from 'vitest';
import { validateConfig } from '../../src/config.js';
import { DEFAULT_CONFIG, reserveOf, untilOf } from '../../src/model.js';

describe('validateConfig()', () => {
  it('fills every omitted field with the SPEC §2 default', () => {
    const r = validateConfig({});
    expect('config' in r && r.config).toEqual(DEFAULT_CONFIG);
    const r2 = validateConfig({ windowMs: 10_000, commit: 'due', reserve: 3 });
    expect('config' in r2 && r2.config.windowMs).toBe(10_000);
    expect('config' in r2 && r2.config.commit).toBe('due');
    expect('config' in r2 && reserveOf(r2.config)).toBe(3);
  });

  it('names each bad field, its value and what was expected', () => {
    const r = validateConfig({ speedKmh: -1, metric: 'manhattan', windowMs: 2.5, colour: 'red' });
    expect('problems' in r).toBe(true);
    const problems = 'problems' in r ? r.problems.join('\n') : '';
    expect(problems).toContain("'speedKmh'");
    expect(problems).toContain('"manhattan"');
    expect(problems).toContain("'windowMs'");
    expect(problems).toContain("unknown field 'colour'");
  });

  it('rejects a non-object', () => {
    expect('problems' in validateConfig([1, 2])).toBe(true);
    expect('problems' in validateConfig(null)).toBe(true);
  });
});

describe('reserveOf() and untilOf()', () => {
  it('R defaults to P, and until defaults to t + patience of the side', () => {
    expect(reserveOf(DEFAULT_CONFIG)).toBe(DEFAULT_CONFIG.abandonPenalty);
    const base = { id: 'a', market: 'm', t: 1_000, until: null };
    expect(untilOf({ ...base, type: 'demand' }, DEFAULT_CONFIG)).toBe(1_000 + 10 * 60_000);
    expect(untilOf({ ...base, type: 'supply' }, DEFAULT_CONFIG)).toBe(1_000 + 30 * 60_000);
    expect(untilOf({ ...base, type: 'supply', until: 5_000 }, DEFAULT_CONFIG)).toBe(5_000);
  });
});
