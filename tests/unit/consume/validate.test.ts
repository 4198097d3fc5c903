import { describe, expect, it } from 'vitest';
import { parseRfc3339, shortValue, validateEvent } from '../../../src/consume/validate.js';
import { mulberry32, randInt } from '../../helpers/random.js';

const supply = { type: 'supply', id: 's1', market: 'north', t: 1_700_000_000_000, lat: 46.5, lon: -31.25 };
const demand = { type: 'demand', id: 'd1', market: 'north', t: 1_700_000_000_000, lat: 46.5, lon: -31.25 };
const withdraw = { type: 'withdraw', id: 'd1', market: 'north', t: 1_700_000_000_000, side: 'demand' };

function reasonOf(obj: unknown, metric: 'haversine' | 'euclidean' = 'haversine'): string {
  const res = validateEvent(obj, metric);
  if (res.ok) throw new Error(`expected a reject for ${JSON.stringify(obj)}`);
  return res.reason;
}

describe('validateEvent()', () => {
  it('accepts a complete supply, demand and withdraw and keeps their fields', () => {
    const s = validateEvent({ ...supply, until: supply.t + 60_000, has: ['cold-bag'] }, 'haversine');
    expect(s).toEqual({ ok: true, event: { type: 'supply', id: 's1', market: 'north', t: supply.t, until: supply.t + 60_000, lat: 46.5, lon: -31.25, has: ['cold-bag'] } });
    const d = validateEvent({ ...demand, needs: ['cold-bag'] }, 'haversine');
    expect(d).toEqual({ ok: true, event: { type: 'demand', id: 'd1', market: 'north', t: demand.t, until: null, lat: 46.5, lon: -31.25, needs: ['cold-bag'] } });
    expect(validateEvent(withdraw, 'haversine')).toEqual({ ok: true, event: withdraw });
  });

  it('rejects a value that is not an object', () => {
    for (const v of [null, 3, 'x', [supply], true]) expect(reasonOf(v)).toMatch(/expected a JSON object/);
  });

  it('rejects an unknown or missing type, naming the field and the value', () => {
    expect(reasonOf({ ...supply, type: 'courier' })).toMatch(/field 'type': got "courier"/);
    const { type: _t, ...noType } = supply;
    expect(reasonOf(noType)).toMatch(/field 'type': got nothing/);
  });

  it('rejects an empty, missing or non-string id or market', () => {
    expect(reasonOf({ ...supply, id: '' })).toMatch(/field 'id'/);
    expect(reasonOf({ ...supply, id: 7 })).toMatch(/field 'id': got 7/);
    const { market: _m, ...noMarket } = supply;
    expect(reasonOf(noMarket)).toMatch(/field 'market'/);
    expect(reasonOf({ ...withdraw, market: '' })).toMatch(/field 'market'/);
  });

  it('rejects a missing, fractional, non-finite or out-of-range numeric time', () => {
    const { t: _t, ...noT } = supply;
    expect(reasonOf(noT)).toMatch(/field 't'/);
    expect(reasonOf({ ...supply, t: 1.5 })).toMatch(/field 't': got 1.5, expected whole ms/);
    expect(reasonOf({ ...supply, t: Number.NaN })).toMatch(/field 't'/);
    expect(reasonOf({ ...supply, t: Number.POSITIVE_INFINITY })).toMatch(/field 't'/);
    expect(reasonOf({ ...supply, t: 1e308 })).toMatch(/field 't'.*valid date/);
    expect(reasonOf({ ...supply, t: -8.64e15 - 1 })).toMatch(/field 't'/);
    expect(reasonOf({ ...supply, t: '1700000000000' })).toMatch(/field 't'.*RFC 3339/);
    // The edge of the Date range itself is a valid time (ECMA-262 §21.4.1.1).
    expect(validateEvent({ ...supply, t: 8.64e15 }, 'haversine').ok).toBe(true);
  });

  it('accepts an RFC 3339 time and converts it to epoch ms', () => {
    const res = validateEvent({ ...supply, t: '2026-03-02T08:15:00.250+01:00', until: '2026-03-02T08:45:00Z' }, 'haversine');
    // Reference: Node 20's Date.parse on the same strings.
    expect(res).toMatchObject({ ok: true, event: { t: Date.parse('2026-03-02T08:15:00.250+01:00'), until: Date.parse('2026-03-02T08:45:00Z') } });
  });

  it('rejects until before t, and a badly typed until; accepts until equal to t and a null until', () => {
    expect(reasonOf({ ...supply, until: supply.t - 1 })).toMatch(/field 'until'.*not before t/);
    expect(reasonOf({ ...demand, until: 'soon' })).toMatch(/field 'until'/);
    expect(reasonOf({ ...demand, until: true })).toMatch(/field 'until'/);
    expect(validateEvent({ ...demand, until: demand.t }, 'haversine')).toMatchObject({ ok: true, event: { until: demand.t } });
    expect(validateEvent({ ...demand, until: null }, 'haversine')).toMatchObject({ ok: true, event: { until: null } });
  });

  it('rejects latitude outside ±90 and longitude outside ±180, and accepts the bounds', () => {
    expect(reasonOf({ ...supply, lat: 90.000001 })).toMatch(/field 'lat'.*\[-90, 90\]/);
    expect(reasonOf({ ...supply, lat: -91 })).toMatch(/field 'lat'/);
    expect(reasonOf({ ...supply, lon: 180.5 })).toMatch(/field 'lon'.*\[-180, 180\]/);
    expect(reasonOf({ ...supply, lon: -181 })).toMatch(/field 'lon'/);
    expect(validateEvent({ ...supply, lat: -90, lon: 180 }, 'haversine').ok).toBe(true);
  });

  it('requires the coordinates of the metric only', () => {
    const { lat: _a, lon: _b, ...noLatLon } = supply;
    expect(reasonOf(noLatLon)).toMatch(/field 'lat': got nothing/);
    expect(reasonOf({ ...supply, lon: '12' })).toMatch(/field 'lon': got "12", expected a finite number/);
    expect(reasonOf({ ...supply, lat: null })).toMatch(/field 'lat'/);
    expect(reasonOf(supply, 'euclidean')).toMatch(/field 'x'/);
    const xy = validateEvent({ ...noLatLon, x: 3.5, y: -2 }, 'euclidean');
    expect(xy).toEqual({ ok: true, event: { type: 'supply', id: 's1', market: 'north', t: supply.t, until: null, x: 3.5, y: -2 } });
    // Euclidean x/y must be finite and within ±1e6 km, so every distance and cost stays finite (SPEC §5).
    expect(reasonOf({ ...noLatLon, x: Number('1e400'), y: 0 }, 'euclidean')).toMatch(/field 'x'/);
    for (const v of [1e308, -1e308, 1e6 + 1]) expect(validateEvent({ ...noLatLon, x: 0, y: v }, 'euclidean').ok, String(v)).toBe(false);
    expect(validateEvent({ ...noLatLon, x: -1e6, y: 1e6 }, 'euclidean').ok).toBe(true);
    // The other metric's coordinates instead of this one's: flagged, for the hint of an empty run.
    expect(validateEvent({ ...noLatLon, x: 1, y: 2 }, 'haversine')).toMatchObject({ ok: false, hint: 'other-metric' });
    expect(validateEvent(supply, 'euclidean')).toMatchObject({ ok: false, hint: 'other-metric' });
    expect(validateEvent({ ...supply, lat: 95 }, 'haversine')).not.toHaveProperty('hint');
  });

  it('rejects has/needs that are not arrays of strings', () => {
    expect(reasonOf({ ...supply, has: 'cold-bag' })).toMatch(/field 'has'.*array of strings/);
    expect(reasonOf({ ...supply, has: ['cold-bag', 3] })).toMatch(/field 'has'/);
    expect(reasonOf({ ...demand, needs: [null] })).toMatch(/field 'needs'/);
    expect(validateEvent({ ...supply, has: [] }, 'haversine')).toMatchObject({ ok: true, event: { has: [] } });
  });

  it('ignores has on a demand and needs on a supply', () => {
    const res = validateEvent({ ...demand, has: 5 }, 'haversine');
    expect(res.ok && 'has' in res.event).toBe(false);
    const res2 = validateEvent({ ...supply, needs: 'x' }, 'haversine');
    expect(res2.ok && 'needs' in res2.event).toBe(false);
  });

  it('rejects a withdraw without a valid side, and needs no coordinates for one', () => {
    const { side: _s, ...noSide } = withdraw;
    expect(reasonOf(noSide)).toMatch(/field 'side': got nothing/);
    expect(reasonOf({ ...withdraw, side: 'both' })).toMatch(/field 'side': got "both"/);
    expect(validateEvent({ ...withdraw, side: 'supply' }, 'euclidean').ok).toBe(true);
  });

  it('shortens a long offending value in the reason', () => {
    const reason = reasonOf({ ...supply, market: ['x'.repeat(5000)] });
    expect(reason).toMatch(/field 'market'/);
    expect(reason.length).toBeLessThan(200);
    expect(shortValue('y'.repeat(100))).toHaveLength(40);
  });
});

describe('parseRfc3339()', () => {
  it('agrees with Date.parse on seeded valid date-times with offsets and fractions', () => {
    // Reference: ECMAScript Date.parse (Node 20 / V8) on the ISO subset of RFC 3339.
    const seed = 20260302;
    const rand = mulberry32(seed);
    const pad = (n: number, w = 2): string => String(n).padStart(w, '0');
    for (let i = 0; i < 500; i += 1) {
      const year = randInt(rand, 1, 9999);
      const month = randInt(rand, 1, 12);
      const day = randInt(rand, 1, 28);
      const frac = rand() < 0.5 ? '' : `.${pad(randInt(rand, 0, 999), 3)}`;
      const zone = rand() < 0.3 ? 'Z' : `${rand() < 0.5 ? '+' : '-'}${pad(randInt(rand, 0, 14))}:${pad(randInt(rand, 0, 59))}`;
      const text = `${pad(year, 4)}-${pad(month)}-${pad(day)}T${pad(randInt(rand, 0, 23))}:${pad(randInt(rand, 0, 59))}:${pad(randInt(rand, 0, 59))}${frac}${zone}`;
      expect(parseRfc3339(text), `seed ${seed}, ${text}`).toBe(Date.parse(text));
    }
  });

  it('handles leap days by the Gregorian rule', () => {
    expect(parseRfc3339('2024-02-29T00:00:00Z')).toBe(Date.UTC(2024, 1, 29));
    expect(parseRfc3339('2000-02-29T00:00:00Z')).toBe(Date.UTC(2000, 1, 29));
    expect(parseRfc3339('1900-02-29T00:00:00Z')).toBeNull();
    expect(parseRfc3339('2023-02-29T00:00:00Z')).toBeNull();
  });

  it('truncates fractional seconds beyond milliseconds and accepts lower-case t and z', () => {
    expect(parseRfc3339('2026-03-02t08:15:00.123999z')).toBe(Date.UTC(2026, 2, 2, 8, 15, 0, 123));
    expect(parseRfc3339('1969-12-31T23:59:59.9999Z')).toBe(-1);
  });

  it('refuses strings that are not strict RFC 3339 date-times with a zone', () => {
    for (const text of [
      '2026-03-02T08:15:00', // no zone
      '2026-03-02 08:15:00Z', // space separator
      '2026-3-2T08:15:00Z',
      '2026-13-02T08:15:00Z',
      '2026-04-31T08:15:00Z',
      '2026-03-02T24:00:00Z',
      '2026-03-02T08:60:00Z',
      '2026-03-02T08:15:60Z', // leap second
      '2026-03-02T08:15:00+24:00',
      '2026-03-02T08:15:00+0100',
      '2026-03-02T08:15:00.Z',
      '2026-03-02',
      ' 2026-03-02T08:15:00Z',
      '',
    ]) {
      expect(parseRfc3339(text), text).toBeNull();
    }
  });
});
