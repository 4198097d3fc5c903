import { describe, expect, it } from 'vitest';
import { euclideanKm, haversineKm } from '../../../src/window/geo.js';
import { cellKmFor, SpatialGrid } from '../../../src/window/grid.js';
import { mulberry32 } from '../../helpers/random.js';

interface Pt { id: number; a: number; b: number }

function query(g: SpatialGrid, a: number, b: number, r: number): Array<[number, number]> {
  const ids: number[] = [];
  const dist: number[] = [];
  const n = g.queryInto(a, b, r, ids, dist);
  return ids.slice(0, n).map((id, i) => [id, dist[i]!] as [number, number]).sort((x, y) => x[0] - y[0]);
}

function brute(pts: Pt[], a: number, b: number, r: number, metric: 'haversine' | 'euclidean'): Array<[number, number]> {
  const out: Array<[number, number]> = [];
  for (const p of pts) {
    const d = metric === 'haversine' ? haversineKm(a, b, p.a, p.b) : euclideanKm(a, b, p.a, p.b);
    if (d <= r) out.push([p.id, d]);
  }
  return out.sort((x, y) => x[0] - y[0]);
}

/** Random lat/lon around a centre, spread over `spreadDeg`, wrapped into [-180, 180] and clamped to ±90. */
function spherePoints(seed: number, n: number, lat0: number, lon0: number, spreadDeg: number): Pt[] {
  const rand = mulberry32(seed);
  const pts: Pt[] = [];
  for (let i = 0; i < n; i++) {
    const lat = Math.max(-90, Math.min(90, lat0 + (rand() - 0.5) * 2 * spreadDeg));
    let lon = lon0 + (rand() - 0.5) * 2 * spreadDeg * 3;
    lon = ((((lon + 180) % 360) + 360) % 360) - 180;
    pts.push({ id: i * 3 + 1, a: lat, b: lon });
  }
  return pts;
}

describe('SpatialGrid (haversine)', () => {
  // Regions: a mid-latitude city, both sides of the ±180° meridian, near each pole.
  const regions: Array<[string, number, number, number]> = [
    ['mid-latitude', 48.8, 2.3, 0.3],
    ['date line', 10, 179.95, 0.3],
    ['date line, high latitude', 65, -179.9, 1],
    ['north pole', 89.7, 0, 0.5],
    ['south pole', -89.8, 120, 0.4],
  ];
  for (const [name, lat0, lon0, spread] of regions) {
    it(`queryInto() finds exactly the brute-force neighbours near the ${name}`, () => {
      for (let seed = 1; seed <= 6; seed++) {
        const pts = spherePoints(seed * 1009 + Math.round(lat0), 300, lat0, lon0, spread);
        const cellKm = 2 + seed * 1.5;
        const g = SpatialGrid.fromPoints({ metric: 'haversine', cellKm }, pts.map((p) => p.id), pts.map((p) => p.a), pts.map((p) => p.b));
        const qs = spherePoints(seed * 7919, 40, lat0, lon0, spread);
        for (const q of qs) {
          for (const r of [cellKm, cellKm / 3, cellKm * 2.5]) {
            expect(query(g, q.a, q.b, r), `seed ${seed} q=(${q.a},${q.b}) r=${r}`).toEqual(brute(pts, q.a, q.b, r, 'haversine'));
          }
        }
      }
    });
  }

  it('queryInto() counts a point at exactly the radius as inside', () => {
    const g = new SpatialGrid({ metric: 'haversine', cellKm: 5 });
    g.insert(0, 0, 179.99);
    const d = haversineKm(0, -179.99, 0, 179.99);
    expect(query(g, 0, -179.99, d)).toEqual([[0, d]]);
    expect(query(g, 0, -179.99, d * (1 - 1e-12))).toEqual([]);
  });

  it('insert() and remove() keep the grid equal to brute force over the points held', () => {
    const rand = mulberry32(42);
    const held = new Map<number, Pt>();
    const g = new SpatialGrid({ metric: 'haversine', cellKm: 3 });
    for (let step = 0; step < 3000; step++) {
      const id = Math.floor(rand() * 200);
      if (rand() < 0.6) {
        const p = { id, a: -33.9 + rand() * 0.2, b: 151.1 + rand() * 0.2 };
        g.insert(id, p.a, p.b);
        held.set(id, p);
      } else {
        expect(g.remove(id)).toBe(held.delete(id));
      }
      if (step % 50 === 0) {
        const q = { a: -33.9 + rand() * 0.2, b: 151.1 + rand() * 0.2 };
        expect(query(g, q.a, q.b, 3), `step ${step}`).toEqual(brute([...held.values()], q.a, q.b, 3, 'haversine'));
        expect(g.size).toBe(held.size);
      }
    }
    for (const id of held.keys()) expect(g.has(id)).toBe(true);
  });

  it('a point without a finite location is held but never found', () => {
    const g = new SpatialGrid({ metric: 'haversine', cellKm: 3 });
    g.insert(5, NaN, 0);
    expect(g.size).toBe(1);
    expect(query(g, 0, 0, 20_000)).toEqual([]);
    expect(g.remove(5)).toBe(true);
    expect(g.size).toBe(0);
  });

  it('a query radius of half the Earth finds every point', () => {
    const pts = spherePoints(5, 100, 0, 0, 60);
    const g = SpatialGrid.fromPoints({ metric: 'haversine', cellKm: 50 }, pts.map((p) => p.id), pts.map((p) => p.a), pts.map((p) => p.b));
    expect(query(g, 10, 10, 20_100).length).toBe(100);
  });
});

describe('SpatialGrid (euclidean)', () => {
  it('queryInto() finds exactly the brute-force neighbours, including far outside the cells', () => {
    for (let seed = 1; seed <= 8; seed++) {
      const rand = mulberry32(seed);
      const pts: Pt[] = [];
      for (let i = 0; i < 400; i++) pts.push({ id: i, a: (rand() - 0.5) * 40, b: (rand() - 0.5) * 40 });
      pts.push({ id: 400, a: 1e12, b: -1e12 });
      const cellKm = 0.5 + rand() * 4;
      const g = SpatialGrid.fromPoints({ metric: 'euclidean', cellKm }, pts.map((p) => p.id), pts.map((p) => p.a), pts.map((p) => p.b));
      for (let k = 0; k < 60; k++) {
        const q = { a: (rand() - 0.5) * 44, b: (rand() - 0.5) * 44 };
        for (const r of [0, cellKm, cellKm * 3, 100]) {
          expect(query(g, q.a, q.b, r), `seed ${seed}`).toEqual(brute(pts, q.a, q.b, r, 'euclidean'));
        }
      }
      expect(query(g, 1e12, -1e12, 1)).toEqual([[400, 0]]);
    }
  });

  it('a zero cell size still answers queries', () => {
    const g = new SpatialGrid({ metric: 'euclidean', cellKm: 0 });
    g.insert(1, 2, 3);
    g.insert(2, 2, 3.5);
    expect(query(g, 2, 3, 0)).toEqual([[1, 0]]);
    expect(query(g, 2, 3, 1).map((x) => x[0])).toEqual([1, 2]);
  });
});

describe('cellKmFor()', () => {
  it('is the largest allowed travel distance', () => {
    expect(cellKmFor({ maxTravelMin: 15, speedKmh: 25 })).toBeCloseTo(6.25, 12);
  });
});
