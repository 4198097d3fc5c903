/**
 * Veloria, the invented city of `pairflow gen`. Its centre lies in open ocean on
 * purpose (46.5° N, 31.25° W) so no generated point can be mistaken for a real
 * address. Every name, district, hotspot and neighbourhood here is made up and the
 * data is for demos and benchmarks only. Pure data: no I/O.
 */

/** A place where units gather: offset from its district's centre, spread and weight. */
export interface Spot {
  readonly name: string;
  /** km east of the district centre */
  readonly dx: number;
  /** km north of the district centre */
  readonly dy: number;
  /** standard deviation of points around the spot, km */
  readonly spreadKm: number;
  /** relative weight among the spots of its kind */
  readonly weight: number;
}

/** One district of the city; each is one market. */
export interface District {
  /** The market key written into events. */
  readonly market: string;
  /** Short code used in unit ids. */
  readonly code: string;
  /** km east / north of the city centre */
  readonly dx: number;
  readonly dy: number;
  /** share of the city's demand, relative */
  readonly weight: number;
  /** restaurant and shop clusters: where most demand (pickups) appears */
  readonly hotspots: readonly Spot[];
  /** residential areas: where couriers start shifts and end jobs */
  readonly neighbourhoods: readonly Spot[];
}

export const CITY_NAME = 'Veloria';
export const CITY_CENTRE = Object.freeze({ lat: 46.5, lon: -31.25 });

const spot = (name: string, dx: number, dy: number, spreadKm: number, weight: number): Spot => ({ name, dx, dy, spreadKm, weight });

/** The named districts, in the order `--markets N` takes them. */
export const DISTRICTS: readonly District[] = Object.freeze([
  {
    market: 'veloria-saltreach', code: 'sr', dx: 0, dy: 0, weight: 1.35,
    hotspots: [spot('Lantern Row', 0.4, 0.2, 0.35, 3), spot('Fishmarket Steps', -0.8, -0.5, 0.3, 2), spot('Old Tidehall', 1.1, -0.9, 0.4, 1)],
    neighbourhoods: [spot('Gullwharf', -1.6, 1.2, 0.8, 2), spot('Brinecourt', 1.8, 1.5, 0.9, 2), spot('Netmenders', 0.2, -2.1, 0.7, 1)],
  },
  {
    market: 'veloria-quillmoor', code: 'qm', dx: 5.5, dy: 3.0, weight: 1.0,
    hotspots: [spot('Inkwell Square', 0.1, 0.3, 0.3, 3), spot('Scriveners Arcade', -0.9, 0.8, 0.35, 2)],
    neighbourhoods: [spot('Featherfold', 1.5, -1.2, 1.0, 2), spot('Parchment Hill', -1.8, -0.6, 0.9, 2), spot('Vellum Green', 0.4, 2.0, 0.8, 1)],
  },
  {
    market: 'veloria-ambercross', code: 'ac', dx: -4.8, dy: 2.4, weight: 0.9,
    hotspots: [spot('Resin Yard', 0.0, 0.0, 0.4, 2), spot('Amber Gate Market', 1.0, -0.6, 0.3, 2), spot('Pinecone Lane', -1.1, 0.9, 0.35, 1)],
    neighbourhoods: [spot('Sapwood', -2.0, -1.4, 1.0, 2), spot('Goldleaf Terraces', 1.7, 1.6, 0.9, 1), spot('Cinder Close', 0.3, -2.4, 0.8, 1)],
  },
  {
    market: 'veloria-tessel-hill', code: 'th', dx: 0.8, dy: -5.6, weight: 0.75,
    hotspots: [spot('Tessel Crown', 0.2, 0.4, 0.3, 3), spot('Mosaic Walk', -0.7, -0.8, 0.35, 1)],
    neighbourhoods: [spot('Tilers Rise', 1.4, -1.6, 1.0, 2), spot('Grout End', -1.9, 0.7, 0.9, 1), spot('Kilnside', 0.6, 1.9, 0.7, 1)],
  },
  {
    market: 'veloria-lanternford', code: 'lf', dx: 9.5, dy: -2.0, weight: 0.6,
    hotspots: [spot('Wickmarket', 0.0, 0.2, 0.35, 2), spot('Ferry Kitchens', -1.2, -0.4, 0.3, 1)],
    neighbourhoods: [spot('Oilcloth', 1.3, 1.1, 0.9, 1), spot('Glimmer Fields', -0.5, -1.8, 1.0, 1)],
  },
  {
    market: 'veloria-orrin-vale', code: 'ov', dx: -8.7, dy: -3.5, weight: 0.55,
    hotspots: [spot('Orrin Cross', 0.3, 0.0, 0.35, 2), spot('Millpond Stalls', -0.8, 1.0, 0.3, 1)],
    neighbourhoods: [spot('Reedbank', -1.5, -1.0, 1.0, 1), spot('Upper Orrin', 1.2, 1.8, 0.9, 1)],
  },
  {
    market: 'veloria-copperwick', code: 'cw', dx: 3.6, dy: 8.8, weight: 0.5,
    hotspots: [spot('Verdigris Court', 0.0, 0.0, 0.3, 2), spot('Foundry Eats', 1.0, 0.6, 0.35, 1)],
    neighbourhoods: [spot('Patina Row', -1.4, -0.9, 0.9, 1), spot('Wirewound', 1.1, -1.7, 1.0, 1)],
  },
  {
    market: 'veloria-mistral-bay', code: 'mb', dx: -2.5, dy: 9.4, weight: 0.45,
    hotspots: [spot('Gustpier', 0.2, -0.3, 0.35, 2), spot('Sailcloth Parade', -0.9, 0.5, 0.3, 1)],
    neighbourhoods: [spot('Windward Flats', 1.3, 1.2, 1.0, 1), spot('Leeside', -1.2, -1.5, 0.9, 1)],
  },
]);

/**
 * The first `n` districts; beyond the eight named ones, numbered districts are
 * placed on a ring around the centre so any market count works.
 */
export function districtsFor(n: number): District[] {
  const out: District[] = DISTRICTS.slice(0, n);
  for (let i = DISTRICTS.length; i < n; i += 1) {
    const angle = (i * 2.399963) % (2 * Math.PI); // golden angle: spreads the ring evenly
    const r = 14 + 3 * Math.floor(i / 8);
    out.push({
      market: `veloria-district-${i + 1}`,
      code: `d${i + 1}`,
      dx: r * Math.cos(angle),
      dy: r * Math.sin(angle),
      weight: 0.4,
      hotspots: [spot('High Street', 0, 0, 0.4, 2), spot('Depot Yard', 1.0, -0.5, 0.3, 1)],
      neighbourhoods: [spot('North Estate', -1.2, 1.3, 1.0, 1), spot('South Estate', 1.1, -1.6, 1.0, 1)],
    });
  }
  return out;
}
