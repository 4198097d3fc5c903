/**
 * The Avro event schema and the canonical renderings of an event (JSON Lines line,
 * Avro record). `schemas/event.avsc` holds the same schema for other tools; a test
 * checks that the two agree. Pure: no I/O.
 */
import type { PairflowEvent } from '../model.js';

const nullable = (type: unknown): unknown[] => ['null', type];

/** The Avro schema of one event (see docs/events.md, field by field). */
export const EVENT_SCHEMA = Object.freeze({
  type: 'record',
  name: 'Event',
  namespace: 'io.pairflow',
  doc: 'One pairflow event: a supply or demand arrival, or a withdraw (docs/events.md).',
  fields: [
    { name: 'type', type: 'string', doc: 'supply, demand or withdraw; a string so that an unknown type is a validation reject, not a decode failure' },
    { name: 'id', type: 'string', doc: 'unit id, unique per side' },
    { name: 'market', type: 'string', doc: 'market key; markets never match across each other' },
    { name: 't', type: 'long', doc: 'event time, ms since the Unix epoch' },
    { name: 'until', type: nullable('long'), default: null, doc: 'last instant the unit is available, ms since the epoch; null means t + patience of its side' },
    { name: 'lat', type: nullable('double'), default: null, doc: 'latitude in degrees (metric haversine)' },
    { name: 'lon', type: nullable('double'), default: null, doc: 'longitude in degrees (metric haversine)' },
    { name: 'x', type: nullable('double'), default: null, doc: 'x in km (metric euclidean)' },
    { name: 'y', type: nullable('double'), default: null, doc: 'y in km (metric euclidean)' },
    { name: 'has', type: nullable({ type: 'array', items: 'string' }), default: null, doc: 'supply capabilities' },
    { name: 'needs', type: nullable({ type: 'array', items: 'string' }), default: null, doc: 'demand requirements, allowed only if needs is a subset of has' },
    { name: 'side', type: nullable('string'), default: null, doc: 'withdraw only: supply or demand' },
  ],
});

/** One event as an Avro record of {@link EVENT_SCHEMA}: absent fields are null. */
export interface EventRecord {
  type: string;
  id: string;
  market: string;
  t: number;
  until: number | null;
  lat: number | null;
  lon: number | null;
  x: number | null;
  y: number | null;
  has: string[] | null;
  needs: string[] | null;
  side: string | null;
}

/** Converts a validated event to its Avro record. */
export function toEventRecord(ev: PairflowEvent): EventRecord {
  if (ev.type === 'withdraw') {
    return { type: ev.type, id: ev.id, market: ev.market, t: ev.t, until: null, lat: null, lon: null, x: null, y: null, has: null, needs: null, side: ev.side };
  }
  return {
    type: ev.type,
    id: ev.id,
    market: ev.market,
    t: ev.t,
    until: ev.until,
    lat: ev.lat ?? null,
    lon: ev.lon ?? null,
    x: ev.x ?? null,
    y: ev.y ?? null,
    has: ev.has ? [...ev.has] : null,
    needs: ev.needs ? [...ev.needs] : null,
    side: null,
  };
}

/**
 * Renders an event as one JSON Lines line (no newline), fields in a fixed order and
 * absent fields left out, so the same event always gives the same bytes.
 * @example toJsonLine({ type: 'withdraw', id: 'o1', market: 'm', t: 5, side: 'demand' })
 * // '{"type":"withdraw","id":"o1","market":"m","t":5,"side":"demand"}'
 */
export function toJsonLine(ev: PairflowEvent): string {
  if (ev.type === 'withdraw') {
    return JSON.stringify({ type: ev.type, id: ev.id, market: ev.market, t: ev.t, side: ev.side });
  }
  const out: Record<string, unknown> = { type: ev.type, id: ev.id, market: ev.market, t: ev.t };
  if (ev.until !== null) out.until = ev.until;
  if (ev.lat !== undefined) out.lat = ev.lat;
  if (ev.lon !== undefined) out.lon = ev.lon;
  if (ev.x !== undefined) out.x = ev.x;
  if (ev.y !== undefined) out.y = ev.y;
  if (ev.has !== undefined) out.has = ev.has;
  if (ev.needs !== undefined) out.needs = ev.needs;
  return JSON.stringify(out);
}
