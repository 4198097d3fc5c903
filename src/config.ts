import { DEFAULT_CONFIG, type PairflowConfig } from './model.js';

/** The longest window, lateness or idle time accepted: 365 days, in ms. */
export const MAX_DURATION_MS = 365 * 86_400_000;

/** The range of one numeric config field. */
export interface ConfigRange {
  readonly min: number;
  readonly max: number;
  /** The lower bound itself is not allowed (e.g. a speed of 0). @default false */
  readonly openMin?: boolean;
  /** Whole numbers only (milliseconds). @default false */
  readonly integer?: boolean;
}

/**
 * The range of every numeric config field (`reserve` when it is not null). The bounds
 * keep every cost the model computes finite and well inside double precision (SPEC
 * §5): with them a pair cost is at most about 3·10¹⁷ and a run's total stays far
 * from overflow, so the dual certificate can be checked to its relative tolerance.
 * Beyond them a value is a typo, not a policy: a speed of 10,000 km/h is faster
 * than any aircraft, a window or lateness of a year longer than any log.
 */
export const CONFIG_RANGES = {
  speedKmh: { min: 0, max: 10_000, openMin: true },
  maxTravelMin: { min: 0, max: 1e6 },
  waitWeight: { min: 0, max: 1e6 },
  abandonPenalty: { min: 0, max: 1e9 },
  reserve: { min: 0, max: 1e9 },
  demandPatienceMin: { min: 0, max: 1e7 },
  supplyPatienceMin: { min: 0, max: 1e7 },
  windowMs: { min: 0, max: MAX_DURATION_MS, openMin: true, integer: true },
  allowedLatenessMs: { min: 0, max: MAX_DURATION_MS, integer: true },
  idleMs: { min: 0, max: MAX_DURATION_MS, openMin: true, integer: true },
} as const satisfies Partial<Record<keyof PairflowConfig, ConfigRange>>;

/**
 * The farthest two points can be apart, per metric (km): half the circumference of
 * the haversine sphere (π · 6371.0088), and the diagonal of the euclidean square of
 * ±1e6 km that coordinates are held to. A farthest allowed trip
 * (`maxTravelMin · speedKmh / 60`) beyond it allows nothing more and is refused:
 * such reaches made the hindsight's spatial search price no pair at all.
 */
export const MAX_REACH_KM = { haversine: Math.PI * 6371.0088, euclidean: 2 * Math.SQRT2 * 1e6 } as const;

/** A bound as people read it: 1e9 rather than 1000000000, 31536000000 (365 days). */
export function formatBound(v: number): string {
  if (v === MAX_DURATION_MS) return `${v} (365 days)`;
  const exp = Math.log10(v);
  return v >= 1e5 && Number.isInteger(exp) ? `1e${exp}` : String(v);
}

/**
 * A range in interval notation, as README's configuration table and messages give
 * it: `(0, 10000]`, `[0, 1e9]`, `[0, 31536000000 (365 days)]`.
 */
export function intervalOf(r: ConfigRange): string {
  return `${r.openMin ? '(' : '['}${formatBound(r.min)}, ${formatBound(r.max)}]`;
}

/** How a range reads in a message: `a number in (0, 10000]`, `a whole number of ms in [0, …]`. */
export function describeRange(r: ConfigRange): string {
  return `${r.integer ? 'a whole number of ms' : 'a number'} in ${intervalOf(r)}`;
}

function inRange(v: number, r: ConfigRange): boolean {
  if (r.integer && !Number.isInteger(v)) return false;
  return (r.openMin ? v > r.min : v >= r.min) && v <= r.max;
}

/**
 * Validates a parsed config object (SPEC §2: every field optional, defaults applied).
 * Returns the full config or a list of problems, each naming the field, the value and
 * what was expected; numeric fields must lie in {@link CONFIG_RANGES}. Pure; the CLI
 * reads the file and wraps problems in an error.
 */
export function validateConfig(raw: unknown): { config: PairflowConfig } | { problems: string[] } {
  const problems: string[] = [];
  if (raw === null || typeof raw !== 'object' || Array.isArray(raw)) {
    return { problems: ['expected a JSON object'] };
  }
  const obj = raw as Record<string, unknown>;
  const out: Record<string, unknown> = { ...DEFAULT_CONFIG };
  const known = new Set(Object.keys(DEFAULT_CONFIG));
  for (const key of Object.keys(obj)) {
    if (!known.has(key)) problems.push(`unknown field '${key}' (known: ${[...known].join(', ')})`);
  }
  for (const [key, range] of Object.entries(CONFIG_RANGES) as [keyof typeof CONFIG_RANGES, ConfigRange][]) {
    if (!(key in obj)) continue;
    const v = obj[key];
    if (key === 'reserve' && v === null) {
      out[key] = null;
      continue;
    }
    if (typeof v !== 'number' || !Number.isFinite(v) || !inRange(v, range)) {
      problems.push(`field '${key}': got ${JSON.stringify(v)}, expected ${key === 'reserve' ? 'null or ' : ''}${describeRange(range)}`);
    } else out[key] = v;
  }
  if ('metric' in obj) {
    const v = obj.metric;
    if (v !== 'haversine' && v !== 'euclidean') {
      problems.push(`field 'metric': got ${JSON.stringify(v)}, expected "haversine" or "euclidean"`);
    } else out.metric = v;
  }
  if ('commit' in obj) {
    const v = obj.commit;
    if (v !== 'all' && v !== 'due') problems.push(`field 'commit': got ${JSON.stringify(v)}, expected "all" or "due"`);
    else out.commit = v;
  }
  if (problems.length === 0) {
    const metric = out.metric as PairflowConfig['metric'];
    const reach = ((out.maxTravelMin as number) * (out.speedKmh as number)) / 60;
    const limit = MAX_REACH_KM[metric];
    if (reach > limit) {
      const field = 'maxTravelMin' in obj || !('speedKmh' in obj) ? 'maxTravelMin' : 'speedKmh';
      problems.push(
        `field '${field}': the farthest allowed trip, maxTravelMin × speedKmh / 60 = ${Math.round(reach)} km, exceeds ${Math.round(limit)} km, ` +
          `the farthest two points can be apart under ${metric} (so it allows no more pairs); expected maxTravelMin <= ${Math.floor((limit * 60) / (out.speedKmh as number))} at ${out.speedKmh as number} km/h`,
      );
    }
  }
  return problems.length > 0 ? { problems } : { config: Object.freeze(out) as unknown as PairflowConfig };
}

/**
 * Settings that are valid but probably not meant, as sentences for a warning on
 * stderr. Today one: a window longer than both patiences, where a unit that arrives
 * just after a decision and takes its side's default `until` is gone before the
 * next one — it can never be matched.
 * @example configWarnings({ ...DEFAULT_CONFIG, windowMs: 3_600_000 })
 */
export function configWarnings(config: PairflowConfig): string[] {
  const longest = Math.max(config.demandPatienceMin, config.supplyPatienceMin) * 60_000;
  if (config.windowMs <= longest) return [];
  return [
    `the window (${config.windowMs} ms) is longer than every patience (demand ${config.demandPatienceMin} min, supply ${config.supplyPatienceMin} min): ` +
      'a unit without an explicit until that arrives just after a decision is gone before the next one and can never be matched',
  ];
}
