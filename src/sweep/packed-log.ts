/**
 * A loaded log packed into shared memory for the sweep's worker threads. Handing each
 * worker the events as objects (a structured clone per worker) costs every worker a
 * full copy of the log: hundreds of MB for a week of a city. Packed once into
 * SharedArrayBuffers, the log is one copy that every thread reads, and a worker turns
 * an event back into an object only while replaying it.
 *
 * Events come back equal to the ones packed (same fields and values, same `pos` and
 * `seq`), in the same order.
 */
import { Buffer } from 'node:buffer';

import type { PairflowEvent, SourcedEvent } from '../model.js';
import type { EventSource } from '../ports.js';

/** Numbers per event: t, until (NaN = null), lat, lon, x, y (NaN = absent). */
const NUM = 6;
/** Integers per event: kind, id, market, file, line, block, record, seq, has, needs. */
const INT = 10;
const NONE = -1;

// kind: the event type, and for a withdraw its side.
const KIND_SUPPLY = 0;
const KIND_DEMAND = 1;
const KIND_WITHDRAW_SUPPLY = 2;
const KIND_WITHDRAW_DEMAND = 3;

/** A log packed by {@link packLog}: plain data over SharedArrayBuffers (clone-cheap). */
export interface PackedLog {
  readonly count: number;
  readonly num: Float64Array;
  readonly int: Int32Array;
  /** UTF-8 bytes of every distinct string; string q is `strBytes[strStart[q] .. strStart[q + 1])`. */
  readonly strBytes: Uint8Array;
  readonly strStart: Int32Array;
  /** Distinct capability lists: list q holds strings `listItems[listStart[q] .. listStart[q + 1])`. */
  readonly listStart: Int32Array;
  readonly listItems: Int32Array;
}

function shared<T extends Float64Array | Int32Array | Uint8Array>(Kind: { new (b: SharedArrayBuffer): T; BYTES_PER_ELEMENT: number }, n: number): T {
  return new Kind(new SharedArrayBuffer(Math.max(1, n) * Kind.BYTES_PER_ELEMENT));
}

/** Packs events (in their order) into shared memory. */
export function packLog(events: readonly SourcedEvent[]): PackedLog {
  const n = events.length;
  const num = shared(Float64Array, n * NUM);
  const int = shared(Int32Array, n * INT);
  const strings = new Map<string, number>();
  const strList: string[] = [];
  const str = (s: string): number => {
    let q = strings.get(s);
    if (q === undefined) {
      q = strList.length;
      strings.set(s, q);
      strList.push(s);
    }
    return q;
  };
  const lists = new Map<string, number>();
  const listList: number[][] = [];
  const list = (l: readonly string[] | undefined): number => {
    if (l === undefined) return NONE;
    const items = l.map(str);
    const key = items.join(',');
    let q = lists.get(key);
    if (q === undefined) {
      q = listList.length;
      lists.set(key, q);
      listList.push(items);
    }
    return q;
  };
  for (let i = 0; i < n; i++) {
    const { event: ev, pos, seq } = events[i]!;
    const f = i * NUM;
    const k = i * INT;
    num[f] = ev.t;
    num[f + 1] = NaN;
    num[f + 2] = NaN;
    num[f + 3] = NaN;
    num[f + 4] = NaN;
    num[f + 5] = NaN;
    int[k + 8] = NONE;
    int[k + 9] = NONE;
    if (ev.type === 'withdraw') {
      int[k] = ev.side === 'supply' ? KIND_WITHDRAW_SUPPLY : KIND_WITHDRAW_DEMAND;
    } else {
      int[k] = ev.type === 'supply' ? KIND_SUPPLY : KIND_DEMAND;
      if (ev.until !== null) num[f + 1] = ev.until;
      if (ev.lat !== undefined) num[f + 2] = ev.lat;
      if (ev.lon !== undefined) num[f + 3] = ev.lon;
      if (ev.x !== undefined) num[f + 4] = ev.x;
      if (ev.y !== undefined) num[f + 5] = ev.y;
      int[k + 8] = list(ev.has);
      int[k + 9] = list(ev.needs);
    }
    int[k + 1] = str(ev.id);
    int[k + 2] = str(ev.market);
    int[k + 3] = str(pos.file);
    int[k + 4] = pos.line;
    int[k + 5] = pos.block ?? NONE;
    int[k + 6] = pos.record ?? NONE;
    int[k + 7] = seq;
  }
  const encoded = strList.map((s) => Buffer.from(s, 'utf8'));
  const strStart = shared(Int32Array, strList.length + 1);
  for (let q = 0; q < encoded.length; q++) strStart[q + 1] = strStart[q]! + encoded[q]!.length;
  const strBytes = shared(Uint8Array, strStart[strList.length]!);
  for (let q = 0; q < encoded.length; q++) strBytes.set(encoded[q]!, strStart[q]!);
  const listStart = shared(Int32Array, listList.length + 1);
  for (let q = 0; q < listList.length; q++) listStart[q + 1] = listStart[q]! + listList[q]!.length;
  const listItems = shared(Int32Array, listStart[listList.length]!);
  for (let q = 0; q < listList.length; q++) listItems.set(listList[q]!, listStart[q]!);
  return { count: n, num, int, strBytes, strStart, listStart, listItems };
}

/**
 * The events of a packed log, decoded one at a time, in order. Strings that many
 * events share (markets, files) and capability lists are decoded once.
 */
export function* unpackLog(log: PackedLog): Generator<SourcedEvent> {
  const { num, int, strBytes, strStart, listStart, listItems } = log;
  const bytes = Buffer.from(strBytes.buffer, strBytes.byteOffset, strBytes.byteLength);
  const text = (q: number): string => bytes.toString('utf8', strStart[q]!, strStart[q + 1]!);
  const common = new Map<number, string>();
  const shared = (q: number): string => {
    let s = common.get(q);
    if (s === undefined) common.set(q, (s = text(q)));
    return s;
  };
  const lists: string[][] = [];
  for (let q = 0; q + 1 < listStart.length; q++) {
    const items: string[] = [];
    for (let t = listStart[q]!; t < listStart[q + 1]!; t++) items.push(shared(listItems[t]!));
    lists.push(items);
  }
  for (let i = 0; i < log.count; i++) {
    const f = i * NUM;
    const k = i * INT;
    const kind = int[k]!;
    const id = text(int[k + 1]!);
    const market = shared(int[k + 2]!);
    const t = num[f]!;
    let event: PairflowEvent;
    if (kind === KIND_WITHDRAW_SUPPLY || kind === KIND_WITHDRAW_DEMAND) {
      event = { type: 'withdraw', id, market, t, side: kind === KIND_WITHDRAW_SUPPLY ? 'supply' : 'demand' };
    } else {
      const until = num[f + 1]!;
      const ev: { -readonly [K in keyof PairflowEvent]?: unknown } & Record<string, unknown> = {
        type: kind === KIND_SUPPLY ? 'supply' : 'demand',
        id,
        market,
        t,
        until: Number.isNaN(until) ? null : until,
      };
      if (!Number.isNaN(num[f + 2]!)) ev.lat = num[f + 2]!;
      if (!Number.isNaN(num[f + 3]!)) ev.lon = num[f + 3]!;
      if (!Number.isNaN(num[f + 4]!)) ev.x = num[f + 4]!;
      if (!Number.isNaN(num[f + 5]!)) ev.y = num[f + 5]!;
      // A fresh array per event: the engine may hold on to it.
      if (int[k + 8]! !== NONE) ev.has = lists[int[k + 8]!]!.slice();
      if (int[k + 9]! !== NONE) ev.needs = lists[int[k + 9]!]!.slice();
      event = ev as unknown as PairflowEvent;
    }
    const block = int[k + 5]!;
    const record = int[k + 6]!;
    const pos = block === NONE && record === NONE
      ? { file: shared(int[k + 3]!), line: int[k + 4]! }
      : { file: shared(int[k + 3]!), line: int[k + 4]!, ...(block !== NONE ? { block } : {}), ...(record !== NONE ? { record } : {}) };
    yield { event, pos, seq: int[k + 7]! };
  }
}

/** An event source over a packed log: its events in packed order, decoded one at a time. */
export function packedSource(log: PackedLog): EventSource {
  return {
    expected: log.count,
    async *items() {
      for (const ev of unpackLog(log)) yield { kind: 'event', ev };
    },
    close: async () => {},
  };
}
