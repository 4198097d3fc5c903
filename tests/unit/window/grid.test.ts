import { describe, expect, it } from 'vitest';
import { euclideanKm, haversineKm } from '../../../src/window/geo.js';
import { cellKmFor, cosDeg, planeKm, SpatialGrid, sphereKm } from '../../../src/window/grid.js';
import { EARTH_RADIUS_KM } from '../../../src/window/geo.js';
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

/** What a caller of bucketsNear() finds by measuring every point of the cells it names. */
function viaBuckets(g: SpatialGrid, pts: Map<number, Pt>, a: number, b: number, r: number, metric: 'haversine' | 'euclidean'): Array<[number, number]> {
  const buckets: number[][] = [];
  const nb = g.bucketsNear(a, b, r, buckets);
  const out: Array<[number, number]> = [];
  const seen = new Set<number>();
  for (let k = 0; k < nb; k++) {
    expect(buckets[k]!.length).toBeGreaterThan(0);
    for (const id of buckets[k]!) {
      expect(seen.has(id), `id ${id} in two cells`).toBe(false);
      seen.add(id);
      const p = pts.get(id)!;
      const d = metric === 'haversine'
        ? sphereKm(a, b, cosDeg(a), p.a, p.b, cosDeg(p.a), 2 * EARTH_RADIUS_KM)
        : planeKm(a, b, p.a, p.b);
      if (d <= r) out.push([id, d]);
    }
  }
  return out.sort((x, y) => x[0] - y[0]);
}

describe('SpatialGrid.bucketsNear() and the distances it is scanned with', () => {
  it('scanning the cells it names finds exactly the brute-force neighbours, to the last bit (seeded)', () => {
    const regions: Array<[number, number, number]> = [[46.5, -31.2, 0.2], [10, 179.95, 0.3], [89.7, 0, 0.5]];
    for (const [lat0, lon0, spread] of regions) {
      for (let seed = 1; seed <= 4; seed++) {
        const pts = spherePoints(seed * 31 + Math.round(lat0), 250, lat0, lon0, spread);
        const byId = new Map(pts.map((p) => [p.id, p]));
        const cellKm = 1 + seed * 2;
        const g = SpatialGrid.fromPoints({ metric: 'haversine', cellKm }, pts.map((p) => p.id), pts.map((p) => p.a), pts.map((p) => p.b));
        for (const q of spherePoints(seed * 101, 30, lat0, lon0, spread)) {
          for (const r of [cellKm, cellKm / 4, cellKm * 3, 30_000]) {
            const want = brute(pts, q.a, q.b, r, 'haversine');
            expect(viaBuckets(g, byId, q.a, q.b, r, 'haversine'), `seed ${seed} q=(${q.a},${q.b}) r=${r}`).toEqual(want);
            expect(query(g, q.a, q.b, r)).toEqual(want);
          }
        }
      }
    }
    for (let seed = 1; seed <= 4; seed++) {
      const rand = mulberry32(seed + 500);
      const pts: Pt[] = [];
      for (let i = 0; i < 300; i++) pts.push({ id: i, a: (rand() - 0.5) * 30, b: (rand() - 0.5) * 30 });
      const byId = new Map(pts.map((p) => [p.id, p]));
      const g = SpatialGrid.fromPoints({ metric: 'euclidean', cellKm: 2 }, pts.map((p) => p.id), pts.map((p) => p.a), pts.map((p) => p.b));
      for (let k = 0; k < 40; k++) {
        const q = { a: (rand() - 0.5) * 34, b: (rand() - 0.5) * 34 };
        for (const r of [0.5, 2, 7, 100]) expect(viaBuckets(g, byId, q.a, q.b, r, 'euclidean'), `seed ${seed}`).toEqual(brute(pts, q.a, q.b, r, 'euclidean'));
      }
    }
  });

  it('sphereKm() equals haversineKm() bit for bit, from a few metres to antipodes, either way round (seeded)', () => {
    const rand = mulberry32(77);
    for (let k = 0; k < 20_000; k++) {
      const lat1 = (rand() - 0.5) * 180, lon1 = (rand() - 0.5) * 360;
      // Every scale of distance: log-uniform offsets from 1e-7° up to the whole sphere.
      const scale = 10 ** (rand() * 9.5 - 7);
      const lat2 = Math.max(-90, Math.min(90, lat1 + (rand() - 0.5) * scale));
      const lon2 = lon1 + (rand() - 0.5) * scale * 2;
      const want = haversineKm(lat1, lon1, lat2, lon2);
      expect(sphereKm(lat1, lon1, cosDeg(lat1), lat2, lon2, cosDeg(lat2), 2 * EARTH_RADIUS_KM), `(${lat1},${lon1})-(${lat2},${lon2})`).toBe(want);
      expect(sphereKm(lat2, lon2, cosDeg(lat2), lat1, lon1, cosDeg(lat1), 2 * EARTH_RADIUS_KM)).toBe(want);
    }
    expect(sphereKm(0, 0, 1, 0, 180, 1, 2 * EARTH_RADIUS_KM)).toBe(haversineKm(0, 0, 0, 180));
    expect(sphereKm(10, 20, cosDeg(10), 10, 20, cosDeg(10), 2 * EARTH_RADIUS_KM)).toBe(0);
  });

  it('cells emptied and filled again, or swept out, keep every query equal to brute force (seeded)', () => {
    const rand = mulberry32(9);
    const g = new SpatialGrid({ metric: 'euclidean', cellKm: 1 });
    const held = new Map<number, Pt>();
    for (let round = 0; round < 6; round++) {
      // Spread over ~400 cells, then thin out to a few: empty cells pile up and get swept.
      for (let i = 0; i < 400; i++) {
        const p = { id: i, a: rand() * 20, b: rand() * 20 };
        g.insert(p.id, p.a, p.b);
        held.set(p.id, p);
      }
      for (let i = 0; i < 400; i++) {
        if (rand() < 0.97) {
          expect(g.remove(i)).toBe(true);
          held.delete(i);
        }
      }
      const pts = [...held.values()];
      for (let k = 0; k < 30; k++) {
        const q = { a: rand() * 20, b: rand() * 20 };
        for (const r of [0.7, 3, 50]) {
          expect(query(g, q.a, q.b, r), `round ${round}`).toEqual(brute(pts, q.a, q.b, r, 'euclidean'));
          expect(viaBuckets(g, held, q.a, q.b, r, 'euclidean')).toEqual(brute(pts, q.a, q.b, r, 'euclidean'));
        }
      }
      expect(g.size).toBe(held.size);
    }
  });

  it('a point without a finite location is in no cell a query names', () => {
    const g = new SpatialGrid({ metric: 'haversine', cellKm: 3 });
    g.insert(1, NaN, 5);
    g.insert(2, 0, 0);
    const buckets: number[][] = [];
    const nb = g.bucketsNear(0, 0, 20_000, buckets);
    expect(buckets.slice(0, nb).flat()).toEqual([2]);
    expect(g.bucketsNear(NaN, 0, 5, buckets)).toBe(0);
  });
});

describe('cellKmFor()', () => {
  it('is the largest allowed travel distance', () => {
    expect(cellKmFor({ maxTravelMin: 15, speedKmh: 25 })).toBeCloseTo(6.25, 12);
  });
});
