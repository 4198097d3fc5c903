import { DEFAULT_CONFIG, type PairflowConfig } from './model.js';

/**
 * Validates a parsed config object (SPEC §2: every field optional, defaults applied).
 * Returns the full config or a list of problems, each naming the field, the value and
 * what was expected. Pure; the CLI reads the file and wraps problems in an error.
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
  const num = (key: keyof PairflowConfig, check: (v: number) => boolean, expected: string): void => {
    if (!(key in obj)) return;
    const v = obj[key];
    if (typeof v !== 'number' || !Number.isFinite(v) || !check(v)) {
      problems.push(`field '${key}': got ${JSON.stringify(v)}, expected ${expected}`);
    } else out[key] = v;
  };
  num('speedKmh', (v) => v > 0, 'a number > 0');
  num('maxTravelMin', (v) => v >= 0, 'a number >= 0');
  num('waitWeight', (v) => v >= 0, 'a number >= 0');
  num('abandonPenalty', () => true, 'a finite number');
  num('demandPatienceMin', (v) => v >= 0, 'a number >= 0');
  num('supplyPatienceMin', (v) => v >= 0, 'a number >= 0');
  num('windowMs', (v) => Number.isInteger(v) && v > 0, 'a whole number of ms > 0');
  num('allowedLatenessMs', (v) => Number.isInteger(v) && v >= 0, 'a whole number of ms >= 0');
  num('idleMs', (v) => Number.isInteger(v) && v > 0, 'a whole number of ms > 0');
  if ('reserve' in obj) {
    const v = obj.reserve;
    if (v !== null && (typeof v !== 'number' || !Number.isFinite(v))) {
      problems.push(`field 'reserve': got ${JSON.stringify(v)}, expected null or a finite number`);
    } else out.reserve = v;
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
  return problems.length > 0 ? { problems } : { config: Object.freeze(out) as unknown as PairflowConfig };
}
