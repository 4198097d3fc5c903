import { describe, expect, it } from 'vitest';
import { capabilitiesAllow, EARTH_RADIUS_KM, euclideanKm, haversineKm, travelMin } from '../../../src/window/geo.js';

describe('haversineKm()', () => {
  it('matches the published Nashville–Los Angeles worked value with R = 6371.0 km', () => {
    // Source: Rosetta Code, "Haversine formula": BNA (36.12, -86.67) to LAX (33.94, -118.40)
    // is 2886.444 km on a sphere of radius 6371.0 km.
    expect(haversineKm(36.12, -86.67, 33.94, -118.4, 6371.0)).toBeCloseTo(2886.444, 3);
  });

  it('defaults to the IUGG mean radius 6371.0088 km', () => {
    // Source: IUGG mean Earth radius R1 = 6371.0088 km (Moritz, Geodetic Reference System 1980).
    expect(EARTH_RADIUS_KM).toBe(6371.0088);
    const d = haversineKm(36.12, -86.67, 33.94, -118.4);
    expect(d).toBeCloseTo((2886.444 * 6371.0088) / 6371.0, 2);
  });

  it('gives a quarter circumference from the equator to the pole and half of it between antipodes', () => {
    // Geometry of the sphere (from memory): pole-to-equator arc is πR/2, antipodes πR.
    expect(haversineKm(0, 0, 90, 0, 1000)).toBeCloseTo((Math.PI / 2) * 1000, 9);
    // Near antipodes h rounds to 1 − ε and the arc is known only to ~√ε ≈ 1e-8 rad.
    expect(haversineKm(10, 20, -10, -160, 1000)).toBeCloseTo(Math.PI * 1000, 3);
    expect(Number.isNaN(haversineKm(0, 0, 0, 180))).toBe(false);
  });

  it('is short across the date line, not the long way round', () => {
    // One degree of longitude on the equator is 2πR/360 (from memory).
    expect(haversineKm(0, 179.5, 0, -179.5, 6371)).toBeCloseTo((2 * Math.PI * 6371) / 360, 6);
  });

  it('is zero for the same point and symmetric', () => {
    expect(haversineKm(48.85, 2.35, 48.85, 2.35)).toBe(0);
    expect(haversineKm(48.85, 2.35, 51.5, -0.12)).toBe(haversineKm(51.5, -0.12, 48.85, 2.35));
  });
});

describe('euclideanKm()', () => {
  it('is the plane distance (3-4-5 triangle)', () => {
    expect(euclideanKm(1, 1, 4, 5)).toBe(5);
    expect(euclideanKm(-2, 0, -2, 0)).toBe(0);
  });
});

describe('travelMin()', () => {
  it('converts km at km/h to minutes (SPEC §2)', () => {
    expect(travelMin(25, 25)).toBe(60);
    expect(travelMin(5, 30)).toBeCloseTo(10, 12);
    expect(travelMin(0, 25)).toBe(0);
  });
});

describe('capabilitiesAllow()', () => {
  it('allows a pair iff needs ⊆ has, a missing list being empty', () => {
    expect(capabilitiesAllow(undefined, undefined)).toBe(true);
    expect(capabilitiesAllow([], ['cold-bag'])).toBe(true);
    expect(capabilitiesAllow(['cold-bag'], undefined)).toBe(false);
    expect(capabilitiesAllow(['cold-bag'], [])).toBe(false);
    expect(capabilitiesAllow(['cold-bag'], ['cold-bag', 'van'])).toBe(true);
    expect(capabilitiesAllow(['cold-bag', 'van'], ['van'])).toBe(false);
    expect(capabilitiesAllow(['van', 'van'], ['van'])).toBe(true);
  });
});
