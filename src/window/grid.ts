/**
 * A spatial index of points for "every point within r km of here" (candidate pairs).
 * Cells are about `cellKm` wide, so a query of radius `cellKm` looks at a 3×3 block;
 * every candidate found in a cell is then checked with the exact distance, so the
 * cells only decide speed, never the answer. Points can be inserted and removed one
 * at a time (the engine's pools change every epoch) or built in one go (hindsight).
 * Pure.
 *
 * Haversine layout: rows are bands of latitude `cellKm / R` radians high; each band is
 * cut into as many equal longitude cells as fit at its poleward edge (at least one, so
 * bands touching a pole are a single cell). A query covers the rows of
 * `[φ − ρ, φ + ρ]` and, in each, the longitudes `λ ± asin(sin ρ / cos φ)` — the widest
 * longitude offset of any point of the spherical cap of angular radius ρ (spherical
 * trigonometry, from memory) — taken modulo 360° so the ±180° meridian is seamless.
 * A cap that reaches a pole covers every longitude.
 */
import type { Metric } from '../model.js';
import { EARTH_RADIUS_KM } from './geo.js';

/** Options of a {@link SpatialGrid}. */
export interface GridOptions {
  /** `haversine`: points are (lat, lon) in degrees; `euclidean`: (x, y) in km. */
  readonly metric: Metric;
  /**
   * Cell size in km: the usual query radius, `maxTravelMin * speedKmh / 60`. Any
   * query radius is answered correctly; this one is answered fastest.
   */
  readonly cellKm: number;
  /** Sphere radius for haversine. @default EARTH_RADIUS_KM */
  readonly earthRadiusKm?: number;
}

const DEG = Math.PI / 180;
/** Smallest cell, so that a zero travel radius still gives a finite grid. */
const MIN_CELL_DEG = 1e-3;
const MIN_CELL_KM = 1e-6;
/** Column field width in a haversine cell key: row * COLS + col. */
const COLS = 2 ** 22;
const MAX_COLS = 2 ** 21;
/** Euclidean cell indices are clamped to ±HALF so a key fits a double exactly. */
const HALF = 2 ** 25;
/** Rounding slack on the cell ranges (degrees); the exact distance check follows. */
const PAD_DEG = 1e-9;
/** Placeholder for emptied scratch entries. */
const EMPTY_BUCKET: number[] = [];

/**
 * Points with non-negative integer ids (occurrence indices) in cells.
 * @example
 * const g = new SpatialGrid({ metric: 'haversine', cellKm: 6.25 });
 * g.insert(7, 52.52, 13.40);
 * const n = g.queryInto(52.53, 13.41, 6.25, ids, dists); // ids[0] === 7
 */
export class SpatialGrid {
  private readonly haversine: boolean;
  private readonly radius: number;
  private readonly cellKm: number;
  /** Haversine: band height in degrees and number of bands. */
  private readonly dLat: number;
  private readonly nRows: number;
  /** Haversine: longitude cells per band, filled lazily. */
  private readonly rowCols: Int32Array;

  /**
   * Points by cell key. A cell that empties keeps its (empty) array, so points moving
   * in and out of a cell allocate nothing; empty cells are swept out when they
   * outnumber the occupied ones (see {@link remove}).
   */
  private readonly cells = new Map<number, number[]>();
  /** Cells in `cells` holding at least one point. */
  private occupied = 0;
  /** Points without a finite location (held, never found). */
  private readonly unplaced: number[] = [];
  /** Per id: coordinates, cos(lat) for haversine, cell key (NaN = absent, -1 = no location), slot in its cell. */
  private pa: Float64Array = new Float64Array(0);
  private pb: Float64Array = new Float64Array(0);
  private pc: Float64Array = new Float64Array(0);
  private key: Float64Array = new Float64Array(0);
  private slot: Int32Array = new Int32Array(0);
  private count = 0;

  constructor(opts: GridOptions) {
    this.haversine = opts.metric === 'haversine';
    this.radius = opts.earthRadiusKm ?? EARTH_RADIUS_KM;
    this.cellKm = Math.max(Number.isFinite(opts.cellKm) ? opts.cellKm : 0, MIN_CELL_KM);
    this.dLat = Math.min(180, Math.max((this.cellKm / this.radius) / DEG, MIN_CELL_DEG));
    this.nRows = this.haversine ? Math.ceil(180 / this.dLat) : 0;
    this.rowCols = new Int32Array(this.nRows);
  }

  /**
   * Builds a grid from parallel arrays: `a`/`b` are lat/lon (haversine) or x/y.
   * @example SpatialGrid.fromPoints({ metric: 'euclidean', cellKm: 2 }, [0, 1], [0, 5], [0, 5])
   */
  static fromPoints(opts: GridOptions, ids: ArrayLike<number>, a: ArrayLike<number>, b: ArrayLike<number>): SpatialGrid {
    const g = new SpatialGrid(opts);
    let maxId = -1;
    for (let i = 0; i < ids.length; i++) if (ids[i]! > maxId) maxId = ids[i]!;
    g.ensure(maxId);
    for (let i = 0; i < ids.length; i++) g.insert(ids[i]!, a[i]!, b[i]!);
    return g;
  }

  /** The sphere radius distances are measured on (haversine). */
  get earthRadiusKm(): number {
    return this.radius;
  }

  /** Number of points held. */
  get size(): number {
    return this.count;
  }

  /** Whether id is held. */
  has(id: number): boolean {
    return id < this.key.length && !Number.isNaN(this.key[id]!);
  }

  /**
   * Adds a point (replacing the id's earlier point, if any). A point with a
   * non-finite coordinate is held but never found by a query.
   */
  insert(id: number, a: number, b: number): void {
    if (this.has(id)) this.remove(id);
    this.ensure(id);
    let k: number;
    if (this.haversine) {
      this.pa[id] = a;
      this.pb[id] = b;
      this.pc[id] = cosDeg(a);
      k = Number.isFinite(a) && Number.isFinite(b) ? this.cellKeyDeg(a, b) : -1;
    } else {
      this.pa[id] = a;
      this.pb[id] = b;
      k = Number.isFinite(a) && Number.isFinite(b) ? this.cellKeyKm(a, b) : -1;
    }
    let bucket = k < 0 ? this.unplaced : this.cells.get(k);
    if (bucket === undefined) {
      bucket = [];
      this.cells.set(k, bucket);
    }
    if (bucket.length === 0 && k >= 0) this.occupied++;
    this.key[id] = k;
    this.slot[id] = bucket.length;
    bucket.push(id);
    this.count++;
  }

  /** Removes a point; false when the id was not held. */
  remove(id: number): boolean {
    if (!this.has(id)) return false;
    const k = this.key[id]!;
    const bucket = k < 0 ? this.unplaced : this.cells.get(k)!;
    const at = this.slot[id]!;
    const last = bucket.pop()!;
    if (last !== id) {
      bucket[at] = last;
      this.slot[last] = at;
    }
    if (bucket.length === 0 && k >= 0) {
      this.occupied--;
      if (this.cells.size > 2 * this.occupied + 64) {
        for (const [ck, b] of this.cells) if (b.length === 0) this.cells.delete(ck);
      }
    }
    this.key[id] = NaN;
    this.count--;
    return true;
  }

  /**
   * Every point within `radiusKm` (inclusive) of (a, b): writes ids and exact distances
   * in km to `outIds`/`outDist` from index 0 (the arrays grow as needed) and returns
   * how many. Order is unspecified but deterministic for the same history of inserts
   * and removes.
   */
  queryInto(a: number, b: number, radiusKm: number, outIds: number[], outDist: number[]): number {
    const buckets = this.scratch;
    const nb = this.bucketsNear(a, b, radiusKm, buckets);
    let found = 0;
    if (this.haversine) {
      const cosLat = Math.cos(a * DEG);
      const twoR = 2 * this.radius;
      const pa = this.pa, pb = this.pb, pc = this.pc;
      for (let k = 0; k < nb; k++) {
        const bucket = buckets[k]!;
        for (let i = 0; i < bucket.length; i++) {
          const id = bucket[i]!;
          const d = sphereKm(a, b, cosLat, pa[id]!, pb[id]!, pc[id]!, twoR);
          if (d <= radiusKm) {
            outIds[found] = id;
            outDist[found] = d;
            found++;
          }
        }
      }
    } else {
      const pa = this.pa, pb = this.pb;
      for (let k = 0; k < nb; k++) {
        const bucket = buckets[k]!;
        for (let i = 0; i < bucket.length; i++) {
          const id = bucket[i]!;
          const d = planeKm(a, b, pa[id]!, pb[id]!);
          if (d <= radiusKm) {
            outIds[found] = id;
            outDist[found] = d;
            found++;
          }
        }
      }
    }
    buckets.fill(EMPTY_BUCKET, 0, nb);
    return found;
  }

  /**
   * The cells a query of `radiusKm` around (a, b) must look at: writes their id lists
   * (the grid's own arrays: read them, never change them, and drop them before the next
   * insert or remove) to `out` from index 0 and returns how many. Every point within the
   * radius is in one of them, others may be too: a caller that checks each point with
   * {@link sphereKm} or {@link planeKm} against the radius finds exactly what
   * {@link queryInto} finds, to the last bit of each distance. Empty cells are left out.
   */
  bucketsNear(a: number, b: number, radiusKm: number, out: number[][]): number {
    if (!(radiusKm >= 0) || !Number.isFinite(a) || !Number.isFinite(b)) return 0;
    return this.haversine ? this.cellsOfCap(a, b, radiusKm, out) : this.cellsOfSquare(a, b, radiusKm, out);
  }

  /** Reused by {@link queryInto}; emptied after each query so it keeps no bucket alive. */
  private readonly scratch: number[][] = [];

  private ensure(id: number): void {
    if (id < this.key.length) return;
    const n = Math.max(id + 1, this.key.length * 2, 64);
    const grow = (old: Float64Array): Float64Array => {
      const x = new Float64Array(n);
      x.set(old);
      return x;
    };
    this.pa = grow(this.pa);
    this.pb = grow(this.pb);
    this.pc = grow(this.pc);
    const key = new Float64Array(n).fill(NaN);
    key.set(this.key);
    this.key = key;
    const slot = new Int32Array(n);
    slot.set(this.slot);
    this.slot = slot;
  }

  private rowOf(latDeg: number): number {
    const r = Math.floor((latDeg + 90) / this.dLat);
    return r < 0 ? 0 : r >= this.nRows ? this.nRows - 1 : r;
  }

  private colsOf(row: number): number {
    let n = this.rowCols[row]!;
    if (n === 0) {
      const lo = -90 + row * this.dLat;
      const hi = Math.min(90, lo + this.dLat);
      const poleward = Math.max(Math.abs(lo), Math.abs(hi));
      const c = Math.cos(poleward * DEG);
      n = Math.floor((360 * c) / this.dLat);
      n = n < 1 || !Number.isFinite(n) ? 1 : n > MAX_COLS ? MAX_COLS : n;
      this.rowCols[row] = n;
    }
    return n;
  }

  private colOf(lonDeg: number, n: number): number {
    const c = Math.floor(((lonDeg + 180) * n) / 360) % n;
    return c < 0 ? c + n : c;
  }

  private cellKeyDeg(latDeg: number, lonDeg: number): number {
    const row = this.rowOf(latDeg);
    return row * COLS + this.colOf(lonDeg, this.colsOf(row));
  }

  private cellIndexKm(v: number): number {
    const i = Math.floor(v / this.cellKm);
    return i < -HALF + 1 ? -HALF + 1 : i > HALF - 1 ? HALF - 1 : i;
  }

  private cellKeyKm(x: number, y: number): number {
    return (this.cellIndexKm(x) + HALF) * 2 * HALF + (this.cellIndexKm(y) + HALF);
  }

  private cellsOfCap(lat: number, lon: number, r: number, out: number[][]): number {
    const rho = r / this.radius;
    const rhoDeg = rho / DEG + PAD_DEG;
    const latLo = lat - rhoDeg;
    const latHi = lat + rhoDeg;
    const r0 = this.rowOf(latLo);
    const r1 = this.rowOf(latHi);
    // Longitude half-width of the cap; the whole circle when the cap reaches a pole.
    let dLon = 360;
    if (rho < Math.PI && latLo > -90 && latHi < 90) {
      const s = Math.sin(rho) / Math.cos(lat * DEG);
      if (s < 1) dLon = Math.asin(s) / DEG * (1 + 1e-9) + PAD_DEG;
    }
    let nb = 0;
    // A huge radius over few points: taking the occupied cells beats walking the range.
    let visits = 0;
    for (let row = r0; row <= r1; row++) visits += this.colRange(row, lon, dLon, 1);
    if (visits > 4 * this.occupied) return this.occupiedCells(out);
    for (let row = r0; row <= r1; row++) {
      const n = this.colsOf(row);
      const c0 = this.colRange(row, lon, dLon, 0);
      const c1 = this.colRange(row, lon, dLon, 2);
      for (let c = c0; c <= c1; c++) {
        const col = ((c % n) + n) % n;
        const bucket = this.cells.get(row * COLS + col);
        if (bucket !== undefined && bucket.length > 0) out[nb++] = bucket;
      }
    }
    return nb;
  }

  /** For a band: what 0 = first column, 1 = column count, 2 = last column (unwrapped) a query covers. */
  private colRange(row: number, lon: number, dLon: number, what: 0 | 1 | 2): number {
    const n = this.colsOf(row);
    let c0 = 0;
    let c1 = n - 1;
    if (dLon < 180) {
      c0 = Math.floor(((lon - dLon + 180) * n) / 360);
      c1 = Math.floor(((lon + dLon + 180) * n) / 360);
      if (c1 - c0 + 1 >= n) {
        c0 = 0;
        c1 = n - 1;
      }
    }
    return what === 0 ? c0 : what === 2 ? c1 : c1 - c0 + 1;
  }

  /** Every occupied cell (a query wider than the points held). */
  private occupiedCells(out: number[][]): number {
    let nb = 0;
    for (const bucket of this.cells.values()) if (bucket.length > 0) out[nb++] = bucket;
    return nb;
  }

  private cellsOfSquare(x: number, y: number, r: number, out: number[][]): number {
    const ix0 = this.cellIndexKm(x - r), ix1 = this.cellIndexKm(x + r);
    const iy0 = this.cellIndexKm(y - r), iy1 = this.cellIndexKm(y + r);
    let nb = 0;
    // A huge radius over few points: taking every occupied cell beats walking the key range.
    if ((ix1 - ix0 + 1) * (iy1 - iy0 + 1) > 4 * this.occupied) return this.occupiedCells(out);
    for (let ix = ix0; ix <= ix1; ix++) {
      const base = (ix + HALF) * 2 * HALF + HALF;
      for (let iy = iy0; iy <= iy1; iy++) {
        const bucket = this.cells.get(base + iy);
        if (bucket !== undefined && bucket.length > 0) out[nb++] = bucket;
      }
    }
    return nb;
  }
}

/**
 * Great-circle distance in km from a query point (lat, lon) in degrees, with
 * `cosLat = Math.cos(lat · π/180)`, to a point (pLat, pLon) with `pCos` likewise, on a
 * sphere of diameter `twoR`: haversineKm(lat, lon, pLat, pLon) term by term, so that
 * a grid query and a brute-force scan agree to the last bit at the radius boundary.
 */
export function sphereKm(lat: number, lon: number, cosLat: number, pLat: number, pLon: number, pCos: number, twoR: number): number {
  const sLat = Math.sin(((pLat - lat) * DEG) / 2);
  const sLon = Math.sin(((pLon - lon) * DEG) / 2);
  let h = sLat * sLat + cosLat * pCos * sLon * sLon;
  if (h > 1) h = 1;
  // For 0 ≤ y ≤ x (h ≤ 1/2: every distance up to a quarter of the circumference),
  // fdlibm's atan2 (V8's Math.atan2) reduces to atan(y / x) and returns it unchanged
  // (from memory of fdlibm's e_atan2.c); calling atan directly gives the same bits at
  // about half the cost. Tests hold this to haversineKm bit for bit.
  return twoR * (h <= 0.5 ? Math.atan(Math.sqrt(h) / Math.sqrt(1 - h)) : Math.atan2(Math.sqrt(h), Math.sqrt(1 - h)));
}

/** Plane distance in km from (x, y) to (px, py), as the grid measures it. */
export function planeKm(x: number, y: number, px: number, py: number): number {
  return Math.hypot(px - x, py - y);
}

/** `Math.cos(latDeg · π/180)`, as the grid keeps it per point for {@link sphereKm}. */
export function cosDeg(latDeg: number): number {
  return Math.cos(latDeg * DEG);
}

/**
 * The cell size for a configuration: the largest allowed travel distance,
 * `maxTravelMin * speedKmh / 60` km.
 */
export function cellKmFor(config: { readonly maxTravelMin: number; readonly speedKmh: number }): number {
  return (config.maxTravelMin * config.speedKmh) / 60;
}
