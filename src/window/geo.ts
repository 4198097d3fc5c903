/**
 * Distances and travel times of the cost model (SPEC §2). Pure.
 */

/** IUGG mean Earth radius in km (SPEC §2). */
export const EARTH_RADIUS_KM = 6371.0088;

const DEG = Math.PI / 180;

/**
 * Great-circle distance in km between two points given in degrees, by the haversine
 * formula on a sphere of radius `radiusKm`.
 * @default radiusKm EARTH_RADIUS_KM
 * @example haversineKm(36.12, -86.67, 33.94, -118.40, 6371.0) // ≈ 2886.444
 */
export function haversineKm(lat1: number, lon1: number, lat2: number, lon2: number, radiusKm = EARTH_RADIUS_KM): number {
  const sLat = Math.sin(((lat2 - lat1) * DEG) / 2);
  const sLon = Math.sin(((lon2 - lon1) * DEG) / 2);
  const h = sLat * sLat + Math.cos(lat1 * DEG) * Math.cos(lat2 * DEG) * sLon * sLon;
  // atan2 rather than asin(√h): asin loses half the digits near antipodes (h → 1),
  // and rounding can push h a hair above 1 where asin would give NaN.
  const hc = Math.min(1, h);
  return 2 * radiusKm * Math.atan2(Math.sqrt(hc), Math.sqrt(1 - hc));
}

/** Plane distance in km between two points given in km (metric `euclidean`). */
export function euclideanKm(x1: number, y1: number, x2: number, y2: number): number {
  return Math.hypot(x2 - x1, y2 - y1);
}

/** Travel time in minutes for a distance in km at `speedKmh` (SPEC §2: `distance / speed * 60`). */
export function travelMin(distKm: number, speedKmh: number): number {
  return (distKm / speedKmh) * 60;
}

/**
 * Whether a supply with capabilities `has` may serve a demand requiring `needs`
 * (SPEC §2: `needs ⊆ has`). A missing list is the empty set.
 */
export function capabilitiesAllow(needs: readonly string[] | undefined, has: readonly string[] | undefined): boolean {
  if (needs === undefined || needs.length === 0) return true;
  if (has === undefined || has.length === 0) return false;
  // Lists are short (a handful of tags), so a linear scan beats building a Set.
  for (let i = 0; i < needs.length; i++) {
    if (!has.includes(needs[i]!)) return false;
  }
  return true;
}
