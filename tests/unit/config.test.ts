import { describe, expect, it } from 'vitest';
import { CONFIG_RANGES, configWarnings, MAX_DURATION_MS, MAX_REACH_KM, validateConfig } from '../../src/config.js';
import { MAX_COST } from '../../src/matching/validate.js';
import { DEFAULT_CONFIG, reserveOf, untilOf } from '../../src/model.js';
import { mulberry32 } from '../helpers/random.js';

/** The largest |ms| of an event time (docs/events.md): the range of a JavaScript date. */
const MAX_TIME_MS = 8.64e15;

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

  it('refuses the hostile values of issue #10: negative P, a window of 1e300 ms, a speed of 1e200, P of 1e308', () => {
    for (const bad of [
      { abandonPenalty: -1 }, { abandonPenalty: 1e308 }, { windowMs: 1e300 }, { speedKmh: 1e200 }, { speedKmh: 0 },
      { reserve: -5 }, { maxTravelMin: 1e308 }, { waitWeight: 1e300 }, { demandPatienceMin: 1e20 }, { idleMs: 0 },
      { allowedLatenessMs: MAX_DURATION_MS + 1 }, { windowMs: 2 ** 53 + 2 },
    ]) {
      const r = validateConfig(bad);
      expect('problems' in r, JSON.stringify(bad)).toBe(true);
      expect('problems' in r && r.problems[0]).toContain(`'${Object.keys(bad)[0]}'`);
    }
  });

  it('accepts each range bound itself (except an open lower bound) and nothing beyond it', () => {
    for (const [field, range] of Object.entries(CONFIG_RANGES)) {
      // euclidean: its farthest trip allows the largest maxTravelMin at the default speed
      const ok = (v: number): boolean => 'config' in validateConfig({ metric: 'euclidean', [field]: v });
      expect(ok(range.max), `${field} = max`).toBe(true);
      expect(ok(range.max * (1 + 1e-9) + 1), `${field} > max`).toBe(false);
      expect(ok(range.min), `${field} = min`).toBe(!('openMin' in range && range.openMin));
      expect(ok(range.min - 1), `${field} < min`).toBe(false);
    }
  });

  it('every accepted config keeps every cost finite and within the solver bound (seeded; SPEC §5)', () => {
    const seed = 20260310;
    const rand = mulberry32(seed);
    const hostile = [0, -0, 1e-300, 1e-9, 1, 7.5, 1e6, 1e9, 1e15, 1e200, 1e308, -1, -1e308, Number.MAX_SAFE_INTEGER + 2];
    let accepted = 0;
    for (let i = 0; i < 2000; i++) {
      const raw: Record<string, number> = {};
      for (const field of Object.keys(CONFIG_RANGES)) {
        if (rand() < 0.25) raw[field] = rand() < 0.5 ? hostile[Math.floor(rand() * hostile.length)]! : (rand() - 0.2) * 10 ** Math.floor(rand() * 12);
      }
      if (rand() < 0.5) (raw as Record<string, unknown>).metric = 'euclidean';
      const r = validateConfig(raw);
      if (!('config' in r)) continue;
      accepted++;
      const c = r.config;
      // The largest pair cost: the longest allowed travel plus the longest possible wait
      // (an order whose until lies at the far end of the date range); then P per order.
      const maxWaitMin = (2 * MAX_TIME_MS) / 60_000;
      const pairCost = c.maxTravelMin + c.waitWeight * maxWaitMin;
      expect(Number.isFinite(pairCost) && pairCost < MAX_COST, `seed ${seed}, config ${JSON.stringify(raw)}`).toBe(true);
      expect(reserveOf(c) <= MAX_COST && c.abandonPenalty <= MAX_COST).toBe(true);
      expect(Number.isSafeInteger(untilOf({ type: 'demand', id: 'd', market: 'm', t: MAX_TIME_MS, until: null }, c))).toBe(true);
      expect(Number.isSafeInteger(Math.ceil(MAX_TIME_MS / c.windowMs) * c.windowMs), `seed ${seed}`).toBe(true);
    }
    expect(accepted).toBeGreaterThan(100);
  });

  it('refuses a farthest trip (maxTravelMin × speedKmh / 60) beyond the farthest two points can be apart', () => {
    // Half the circumference of the haversine sphere: π · 6371.0088 km ≈ 20,015 km (from memory: ~20,000 km pole to pole).
    expect(MAX_REACH_KM.haversine).toBeCloseTo(20_015.1, 0);
    const at = (maxTravelMin: number, metric = 'haversine'): boolean => 'config' in validateConfig({ maxTravelMin, metric });
    expect(at(48_036)).toBe(true); // 48,036 min at 25 km/h = 20,015 km
    expect(at(48_037)).toBe(false);
    expect(at(100_000)).toBe(false); // the reach at which the hindsight priced no pair
    expect(at(100_000, 'euclidean')).toBe(true);
    const r = validateConfig({ speedKmh: 10_000, maxTravelMin: 200 });
    expect('problems' in r && r.problems[0]).toContain("'maxTravelMin'");
  });
});

describe('configWarnings()', () => {
  it('warns when the window is longer than every patience, and only then', () => {
    expect(configWarnings(DEFAULT_CONFIG)).toEqual([]);
    expect(configWarnings({ ...DEFAULT_CONFIG, windowMs: 30 * 60_000 })).toEqual([]);
    expect(configWarnings({ ...DEFAULT_CONFIG, windowMs: 30 * 60_000 + 1 })).toHaveLength(1);
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
