/**
 * Validation of one decoded event (SPEC §1). Pure: no I/O, no clock.
 *
 * Both readers (JSON Lines and Avro) hand a plain decoded value to
 * {@link validateEvent}; the same rules therefore hold for every source, and a reason
 * always names the field, the value (shortened) and what was expected.
 */
import { formatBound } from '../config.js';
import type { ArrivalEvent, Metric, PairflowEvent, Side, WithdrawEvent } from '../model.js';

/** The outcome of validating one decoded line or record. */
export type ValidationResult =
  | { ok: true; event: PairflowEvent }
  /** `hint: 'other-metric'`: an arrival without the metric's coordinates that has the other metric's. */
  | { ok: false; reason: string; hint?: 'other-metric' };

/** The largest |ms| a JavaScript Date can hold (ECMA-262 §21.4.1.1: ±8.64e15 ms). */
const MAX_TIME_MS = 8.64e15;

/**
 * The largest |x| or |y| (km) under the euclidean metric: 25 times round the Earth,
 * with room to spare for any map, while distances and travel costs stay finite and
 * exact to well under a metre (SPEC §5: a coordinate of 1e308 made every distance
 * Infinity and silently priced no pair).
 */
export const MAX_EUCLIDEAN_KM = 1e6;

/** Longest rendering of an offending value inside a reason. */
const VALUE_CHARS = 40;

/**
 * Renders a value for a reject reason, cut to a readable length. `undefined` and
 * non-JSON numbers get their own words because JSON.stringify would hide them.
 */
export function shortValue(v: unknown): string {
  let text: string;
  if (v === undefined) return 'nothing';
  if (typeof v === 'number') text = String(v);
  else if (typeof v === 'bigint') text = `${v}n`;
  else {
    try {
      text = JSON.stringify(v) ?? String(v);
    } catch {
      text = String(v);
    }
  }
  return text.length > VALUE_CHARS ? `${text.slice(0, VALUE_CHARS - 1)}…` : text;
}

function fail(field: string, value: unknown, expected: string): { ok: false; reason: string } {
  return { ok: false, reason: `field '${field}': got ${shortValue(value)}, expected ${expected}` };
}

// Days from 1970-01-01 to the given proleptic Gregorian date: the usual era-based
// civil-date arithmetic (400-year eras of 146097 days), written from memory.
function daysFromCivil(year: number, month: number, day: number): number {
  const y = month <= 2 ? year - 1 : year;
  const era = Math.floor(y / 400);
  const yoe = y - era * 400;
  const mp = (month + 9) % 12;
  const doy = Math.floor((153 * mp + 2) / 5) + day - 1;
  const doe = yoe * 365 + Math.floor(yoe / 4) - Math.floor(yoe / 100) + doy;
  return era * 146097 + doe - 719468;
}

function daysInMonth(year: number, month: number): number {
  if (month === 2) return (year % 4 === 0 && year % 100 !== 0) || year % 400 === 0 ? 29 : 28;
  return month === 4 || month === 6 || month === 9 || month === 11 ? 30 : 31;
}

// RFC 3339 §5.6 date-time: full-date "T" full-time, with a mandatory offset. "T"/"Z"
// may be lower case (§5.6 NOTE); a space instead of "T" is not accepted.
const RFC3339 = /^(\d{4})-(\d{2})-(\d{2})[Tt](\d{2}):(\d{2}):(\d{2})(?:\.(\d+))?(?:([Zz])|([+-])(\d{2}):(\d{2}))$/;

/**
 * Parses an RFC 3339 date-time with a time zone into whole ms since the Unix epoch,
 * or returns null. Strict: every field is range-checked (a 30 February or 24:00 is
 * refused), a leap second (`:60`) is refused because epoch milliseconds cannot hold
 * it, and fractional seconds beyond milliseconds are truncated toward the past.
 * @example parseRfc3339('2026-03-02T08:15:00.250+01:00') // 1772435700250
 */
export function parseRfc3339(text: string): number | null {
  const m = RFC3339.exec(text);
  if (!m) return null;
  const year = Number(m[1]);
  const month = Number(m[2]);
  const day = Number(m[3]);
  const hour = Number(m[4]);
  const minute = Number(m[5]);
  const second = Number(m[6]);
  if (month < 1 || month > 12 || day < 1 || day > daysInMonth(year, month)) return null;
  if (hour > 23 || minute > 59 || second > 59) return null;
  let offsetMin = 0;
  if (m[8] === undefined) {
    const oh = Number(m[10]);
    const om = Number(m[11]);
    if (oh > 23 || om > 59) return null;
    offsetMin = (m[9] === '-' ? -1 : 1) * (oh * 60 + om);
  }
  const frac = m[7] === undefined ? 0 : Number(m[7].slice(0, 3).padEnd(3, '0'));
  const days = daysFromCivil(year, month, day);
  return ((days * 24 + hour) * 60 + minute - offsetMin) * 60_000 + second * 1000 + frac;
}

/**
 * Reads a time field: an integer number of ms since the epoch, or an RFC 3339 string
 * with a time zone. A number with a fractional part is refused rather than rounded,
 * so that two files describing the same instant cannot disagree by a rounding rule.
 */
function readTime(obj: Record<string, unknown>, field: string): number | { ok: false; reason: string } {
  const v = obj[field];
  if (typeof v === 'number') {
    if (!Number.isFinite(v)) return fail(field, v, 'a finite time');
    if (!Number.isInteger(v)) return fail(field, v, 'whole ms since the epoch (no fraction)');
    if (Math.abs(v) > MAX_TIME_MS) return fail(field, v, `ms since the epoch within ±${MAX_TIME_MS} (a valid date)`);
    return v;
  }
  if (typeof v === 'string') {
    const ms = parseRfc3339(v);
    if (ms === null) return fail(field, v, 'an RFC 3339 date-time with a time zone, e.g. 2026-03-02T08:15:00Z');
    if (Math.abs(ms) > MAX_TIME_MS) return fail(field, v, 'a date within the range of epoch ms');
    return ms;
  }
  return fail(field, v, 'integer ms since the epoch or an RFC 3339 string');
}

function readKey(obj: Record<string, unknown>, field: string): string | { ok: false; reason: string } {
  const v = obj[field];
  if (typeof v !== 'string' || v.length === 0) return fail(field, v, 'a non-empty string');
  return v;
}

function readCoord(obj: Record<string, unknown>, field: string, limit: number): number | { ok: false; reason: string } {
  const v = obj[field];
  if (typeof v !== 'number' || !Number.isFinite(v)) return fail(field, v, 'a finite number');
  if (v < -limit || v > limit) return fail(field, v, `a number in [-${formatBound(limit)}, ${formatBound(limit)}]`);
  return v;
}

function readTags(obj: Record<string, unknown>, field: string): readonly string[] | undefined | { ok: false; reason: string } {
  const v = obj[field];
  if (v === undefined || v === null) return undefined;
  if (!Array.isArray(v) || !v.every((x) => typeof x === 'string')) return fail(field, v, 'an array of strings');
  return Object.freeze([...(v as string[])]);
}

function isFailure(v: unknown): v is { ok: false; reason: string } {
  return typeof v === 'object' && v !== null && (v as { ok?: unknown }).ok === false;
}

/**
 * Validates one decoded line or record against SPEC §1 for the given metric.
 *
 * Rules, in the order they are checked (the first failure is the reason):
 * - the value is an object (not an array, not null);
 * - `type` is `"supply"`, `"demand"` or `"withdraw"`;
 * - `id` and `market` are non-empty strings;
 * - `t` is whole ms since the epoch or an RFC 3339 date-time with a zone;
 * - withdraw: `side` is `"supply"` or `"demand"`; nothing else is required;
 * - arrival: the metric's coordinates are finite numbers (`lat` in ±90 and `lon` in
 *   ±180 for haversine, `x`/`y` in ±1e6 km for euclidean); `until`, when present and not null,
 *   is a time not before `t`; `has` (supply) / `needs` (demand), when present and not
 *   null, are arrays of strings.
 *
 * Fields that do not apply (the other metric's coordinates, `has` on a demand,
 * `needs` on a supply, unknown fields) are ignored and not carried into the event.
 *
 * @example validateEvent({ type: 'withdraw', id: 'o1', market: 'm', t: 5, side: 'demand' }, 'haversine')
 */
export function validateEvent(obj: unknown, metric: Metric): ValidationResult {
  if (obj === null || typeof obj !== 'object' || Array.isArray(obj)) {
    return { ok: false, reason: `expected a JSON object per event, got ${shortValue(obj)}` };
  }
  const o = obj as Record<string, unknown>;
  const type = o.type;
  if (type !== 'supply' && type !== 'demand' && type !== 'withdraw') {
    return fail('type', type, '"supply", "demand" or "withdraw"');
  }
  const id = readKey(o, 'id');
  if (isFailure(id)) return id;
  const market = readKey(o, 'market');
  if (isFailure(market)) return market;
  const t = readTime(o, 't');
  if (isFailure(t)) return t;

  if (type === 'withdraw') {
    const side = o.side;
    if (side !== 'supply' && side !== 'demand') return fail('side', side, '"supply" or "demand"');
    const ev: WithdrawEvent = { type, id, market, t, side: side as Side };
    return { ok: true, event: ev };
  }

  let until: number | null = null;
  if (o.until !== undefined && o.until !== null) {
    const u = readTime(o, 'until');
    if (isFailure(u)) return u;
    if (u < t) return fail('until', o.until, `a time not before t (${shortValue(o.t)})`);
    until = u;
  }

  const ev: { -readonly [K in keyof ArrivalEvent]: ArrivalEvent[K] } = { type, id, market, t, until };
  // Coordinates of the other metric instead of this one's: say so, it is the likely cause.
  const otherMetric = (res: { ok: false; reason: string }): ValidationResult => {
    const [a, b, name] = metric === 'haversine' ? ['x', 'y', 'euclidean'] : ['lat', 'lon', 'haversine'];
    if (typeof o[a] !== 'number' || typeof o[b] !== 'number') return res;
    return { ok: false, reason: `${res.reason} (the event has ${a}/${b}: is the metric ${name}?)`, hint: 'other-metric' };
  };
  if (metric === 'haversine') {
    const lat = readCoord(o, 'lat', 90);
    if (isFailure(lat)) return o.lat === undefined ? otherMetric(lat) : lat;
    const lon = readCoord(o, 'lon', 180);
    if (isFailure(lon)) return o.lon === undefined ? otherMetric(lon) : lon;
    ev.lat = lat;
    ev.lon = lon;
  } else {
    const x = readCoord(o, 'x', MAX_EUCLIDEAN_KM);
    if (isFailure(x)) return o.x === undefined ? otherMetric(x) : x;
    const y = readCoord(o, 'y', MAX_EUCLIDEAN_KM);
    if (isFailure(y)) return o.y === undefined ? otherMetric(y) : y;
    ev.x = x;
    ev.y = y;
  }
  const tagField = type === 'supply' ? 'has' : 'needs';
  const tags = readTags(o, tagField);
  if (isFailure(tags)) return tags;
  if (tags !== undefined) {
    if (type === 'supply') ev.has = tags;
    else ev.needs = tags;
  }
  return { ok: true, event: ev };
}
