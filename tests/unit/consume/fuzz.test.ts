/**
 * Seeded fuzzing of the log readers: malformed lines and records interleaved with
 * valid ones. Nothing may crash, every bad line or record must come back as a reject
 * at its place, and every valid one as an event at its place.
 */
import { mkdtempSync, readFileSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { gzipSync } from 'node:zlib';
import { afterAll, describe, expect, it } from 'vitest';
import { loadLog, readLogFile, type LogItem } from '../../../src/consume/index.js';
import type { EventRecord } from '../../../src/consume/schema.js';
import { mulberry32, randInt } from '../../helpers/random.js';
import { blockLayout, writeAvro } from './avro-files.js';

const dir = mkdtempSync(join(tmpdir(), 'pairflow-fuzz-'));
afterAll(() => rmSync(dir, { recursive: true, force: true }));

type Rand = () => number;
const T0 = 1_772_409_600_000;
const pickOf = <T>(rand: Rand, xs: readonly T[]): T => xs[Math.floor(rand() * xs.length)]!;

function validObject(rand: Rand, i: number): Record<string, unknown> {
  const kind = pickOf(rand, ['supply', 'demand', 'withdraw'] as const);
  const t = T0 + randInt(rand, 0, 86_400_000);
  const base: Record<string, unknown> = { type: kind, id: `u${i}`, market: pickOf(rand, ['north', 'south', 'm-3']), t: rand() < 0.2 ? new Date(t).toISOString() : t };
  if (kind === 'withdraw') {
    base.side = pickOf(rand, ['supply', 'demand']);
    return base;
  }
  base.lat = Math.round((rand() * 180 - 90) * 1e6) / 1e6;
  base.lon = Math.round((rand() * 360 - 180) * 1e6) / 1e6;
  const u = rand();
  if (u < 0.3) base.until = t + randInt(rand, 0, 3_600_000);
  else if (u < 0.4) base.until = null;
  if (kind === 'supply' && rand() < 0.3) base.has = pickOf(rand, [[], ['cold-bag'], ['cold-bag', 'large-box']]);
  if (kind === 'demand' && rand() < 0.3) base.needs = pickOf(rand, [['cold-bag'], ['large-box']]);
  if (rand() < 0.1) base.note = 'extra fields are ignored';
  return base;
}

/** One malformed line, of a randomly chosen kind; each is invalid by construction. */
function badLine(rand: Rand, i: number): { text: string; kind: string } {
  const obj = validObject(rand, i);
  const isArrival = obj.type !== 'withdraw';
  const json = JSON.stringify(obj);
  const kinds = ['truncated', 'nan', 'wrongType', 'range', 'untilBefore', 'unknownType', 'huge', 'bytes', 'missing', 'empty', 'fraction', 'badTime', 'notObject', 'badSide', 'dupKey', 'control'] as const;
  const kind = pickOf(rand, kinds);
  switch (kind) {
    case 'truncated': // any proper prefix of an object text is not JSON
      return { kind, text: json.slice(0, randInt(rand, 1, json.length - 1)) };
    case 'nan': {
      const lit = pickOf(rand, ['NaN', 'Infinity', '-Infinity']);
      return { kind, text: json.replace(/"t":("[^"]*"|-?\d+)/, `"t":${lit}`) };
    }
    case 'wrongType': {
      const field = pickOf(rand, isArrival ? ['id', 'market', 't', 'lat', 'lon', 'has'] : ['id', 'market', 't', 'side']);
      const value = field === 'has' ? (obj.type === 'supply' ? 'cold-bag' : undefined) : pickOf(rand, [[], {}, true, '12.5x']);
      if (field === 'has' && obj.type !== 'supply') return { kind, text: JSON.stringify({ ...obj, needs: [1, 2] }) };
      if ((field === 'id' || field === 'market' || field === 'side') && typeof value === 'string') return { kind, text: JSON.stringify({ ...obj, [field]: 42 }) };
      return { kind, text: JSON.stringify({ ...obj, [field]: value }) };
    }
    case 'range':
      if (!isArrival) return { kind, text: JSON.stringify({ ...obj, side: 'neither' }) };
      return rand() < 0.5
        ? { kind, text: JSON.stringify({ ...obj, lat: (rand() < 0.5 ? -1 : 1) * (90 + 1e-6 + rand() * 1000) }) }
        : { kind, text: JSON.stringify({ ...obj, lon: (rand() < 0.5 ? -1 : 1) * (180 + 1e-6 + rand() * 1e6) }) };
    case 'untilBefore': {
      const t = typeof obj.t === 'number' ? obj.t : Date.parse(obj.t as string);
      return { kind, text: JSON.stringify({ ...obj, type: pickOf(rand, ['supply', 'demand']), lat: 1, lon: 1, until: t - randInt(rand, 1, 1e6) }) };
    }
    case 'unknownType':
      return { kind, text: JSON.stringify({ ...obj, type: pickOf(rand, ['order', 'courier', 'SUPPLY', '', 'withdrawn']) }) };
    case 'huge':
      return { kind, text: json.replace(/"t":("[^"]*"|-?\d+)/, `"t":${pickOf(rand, ['1e308', '9e15', '-1e20', '1e400', '123456789012345678901234567890'])}`) };
    case 'bytes': {
      const n = randInt(rand, 1, 200);
      const bytes = Buffer.alloc(n);
      for (let k = 0; k < n; k += 1) {
        let b = randInt(rand, 0, 255);
        if (b === 0x0a) b = 0x0b;
        bytes[k] = b;
      }
      bytes[0] = 0x21 + randInt(rand, 0, 0x59); // a visible ASCII byte, so the line is never blank
      if (bytes[0] === 0x7b) bytes[0] = 0x7c; // and never starts an object
      return { kind, text: bytes.toString('latin1') };
    }
    case 'missing': {
      const field = pickOf(rand, isArrival ? ['id', 'market', 't', 'lat', 'lon', 'type'] : ['id', 'market', 't', 'side', 'type']);
      const copy = { ...obj };
      delete copy[field];
      return { kind, text: JSON.stringify(copy) };
    }
    case 'empty':
      return { kind, text: JSON.stringify({ ...obj, [pickOf(rand, ['id', 'market'])]: '' }) };
    case 'fraction':
      return { kind, text: JSON.stringify({ ...obj, t: T0 + 0.5 + randInt(rand, 0, 1000) }) };
    case 'badTime':
      return { kind, text: JSON.stringify({ ...obj, t: pickOf(rand, ['2026-03-02T08:15:00', '2026-02-30T00:00:00Z', 'yesterday', '2026-03-02 08:15:00Z', '']) }) };
    case 'notObject':
      return { kind, text: pickOf(rand, ['[1,2,3]', '42', '"supply"', 'null', 'true', `[${json}]`]) };
    case 'badSide':
      return { kind, text: JSON.stringify({ ...obj, type: 'withdraw', side: pickOf(rand, [null, 'both', 3, 'Supply']) }) };
    case 'dupKey': {
      // Issue #10: a repeated key silently took the last value; both values here are valid.
      const field = pickOf(rand, ['t', 'id', 'market', 'type']);
      const again = field === 't' ? String(T0) : JSON.stringify(field === 'type' ? obj.type : 'other');
      return { kind, text: `${json.slice(0, -1)},"${field}":${again}}` };
    }
    case 'control': {
      // Raw control bytes inside a string are not JSON; the reason must not carry them.
      const at = json.indexOf(':"') + 2; // inside the first string value
      return { kind, text: json.slice(0, at) + pickOf(rand, ['\u0000', '\u001b[2J', '\r', '\u0007']) + json.slice(at) };
    }
  }
}

interface Planted {
  readonly lines: string[];
  readonly valid: Set<number>;
  readonly bad: Map<number, string>;
}

function plant(seed: number, n: number): Planted {
  const rand = mulberry32(seed);
  const lines: string[] = [];
  const valid = new Set<number>();
  const bad = new Map<number, string>();
  for (let i = 0; i < n; i += 1) {
    const u = rand();
    if (u < 0.05) lines.push(rand() < 0.5 ? '' : ' \t ');
    else if (u < 0.5) {
      valid.add(lines.length + 1);
      lines.push(JSON.stringify(validObject(rand, i)) + (rand() < 0.1 ? '\r' : ''));
    } else {
      const b = badLine(rand, i);
      bad.set(lines.length + 1, b.kind);
      lines.push(b.text);
    }
  }
  return { lines, valid, bad };
}

async function collect(path: string): Promise<LogItem[]> {
  const out: LogItem[] = [];
  for await (const it of readLogFile(path, { metric: 'haversine' })) out.push(it);
  return out;
}

describe('log readers under fuzzing', () => {
  for (const ext of ['jsonl', 'jsonl.gz'] as const) {
    it(`reject every planted bad line at its line and keep every valid one (${ext}, 2400 lines)`, async () => {
      const seed = ext === 'jsonl' ? 424242 : 515151;
      const p = plant(seed, 2400);
      expect(p.bad.size, `seed ${seed}`).toBeGreaterThan(1000);
      const text = Buffer.from(p.lines.join('\n'), 'latin1');
      const path = join(dir, `fuzz.${ext}`);
      writeFileSync(path, ext === 'jsonl' ? text : gzipSync(text));
      const got = await collect(path);
      const eventLines = got.flatMap((it) => (it.kind === 'event' ? [it.ev.pos.line] : []));
      const rejectLines = got.flatMap((it) => (it.kind === 'reject' ? [it.reject.pos.line] : []));
      const missedBad = [...p.bad.keys()].filter((l) => !rejectLines.includes(l)).map((l) => `${l}:${p.bad.get(l)}`);
      expect(missedBad, `seed ${seed}: bad lines not rejected`).toEqual([]);
      expect(eventLines, `seed ${seed}`).toEqual([...p.valid].sort((a, b) => a - b));
      expect(rejectLines, `seed ${seed}`).toEqual([...p.bad.keys()].sort((a, b) => a - b));
      expect(got.every((it) => (it.kind === 'event' ? it.ev.pos.file : it.reject.pos.file) === path), `seed ${seed}`).toBe(true);
      expect(got.every((it) => it.kind === 'event' || it.reject.reason.length > 0), `seed ${seed}`).toBe(true);
      // eslint-disable-next-line no-control-regex
      expect(got.filter((it) => it.kind === 'reject' && /[\u0000-\u001f]/.test(it.reject.reason)), `seed ${seed}: raw control characters in a reason`).toEqual([]);
    });
  }

  it('loadLog counts add up over several fuzzed files', async () => {
    const seeds = [11, 12, 13];
    const paths = seeds.map((seed) => {
      const p = plant(seed, 400);
      const path = join(dir, `multi-${seed}.jsonl`);
      writeFileSync(path, Buffer.from(p.lines.join('\n'), 'latin1'));
      return { path, p };
    });
    const res = await loadLog(paths.map((x) => x.path), { metric: 'haversine' });
    expect(res.events.length).toBe(paths.reduce((a, x) => a + x.p.valid.size, 0));
    expect(res.rejects.length).toBe(paths.reduce((a, x) => a + x.p.bad.size, 0));
    for (let i = 1; i < res.events.length; i += 1) {
      const a = res.events[i - 1]!;
      const b = res.events[i]!;
      expect(a.event.t < b.event.t || (a.event.t === b.event.t && a.seq < b.seq)).toBe(true);
    }
  });

  it('reads randomly damaged Avro and gzip files to items without throwing, each with a place (seeded)', async () => {
    const seed = 2718281;
    const rand = mulberry32(seed);
    const recs: EventRecord[] = Array.from({ length: 300 }, (_, i) => ({ type: pickOf(rand, ['supply', 'demand', 'withdraw']), id: `u${i}`, market: 'm', t: T0 + i, until: rand() < 0.5 ? null : T0 + i + 60_000, lat: 46.5, lon: -31.2, x: null, y: null, has: rand() < 0.3 ? ['cold-bag'] : null, needs: rand() < 0.2 ? ['cold-bag'] : null, side: rand() < 0.5 ? 'demand' : null }));
    const avroFile = await writeAvro(join(dir, 'rnd.avro'), recs, { blockSize: 1024, codec: 'deflate' });
    const plainAvro = await writeAvro(join(dir, 'rnd-null.avro'), recs, { blockSize: 1024 });
    const gz = gzipSync(recs.map((r) => JSON.stringify(r)).join('\n'));
    for (let round = 0; round < 45; round += 1) {
      const [src, ext] = pickOf(rand, [[avroFile, 'avro'], [plainAvro, 'avro'], [gz, 'jsonl.gz']] as const);
      const bad = Buffer.from(src);
      for (let k = randInt(rand, 1, 8); k > 0; k -= 1) bad[randInt(rand, 0, bad.length - 1)] = randInt(rand, 0, 255);
      const path = join(dir, `rnd-${round}.${ext}`);
      writeFileSync(path, rand() < 0.3 ? bad.subarray(0, randInt(rand, 0, bad.length)) : bad);
      const got = await collect(path);
      for (const it of got) {
        const pos = it.kind === 'event' ? it.ev.pos : it.reject.pos;
        expect(pos.file, `seed ${seed}, round ${round}`).toBe(path);
        expect(pos.line >= 1, `seed ${seed}, round ${round}`).toBe(true);
      }
      expect(got.filter((it) => it.kind === 'event').length, `seed ${seed}, round ${round}`).toBeLessThanOrEqual(300);
    }
  });

  it('rejects every planted bad Avro record at its block and record, and loses only damaged blocks (seeded)', async () => {
    const seed = 8675309;
    const rand = mulberry32(seed);
    const records: EventRecord[] = [];
    const badKinds: (string | null)[] = [];
    for (let i = 0; i < 1500; i += 1) {
      const t = T0 + randInt(rand, 0, 86_400_000);
      const rec: EventRecord = { type: rand() < 0.5 ? 'supply' : 'demand', id: `u${i}`, market: 'north', t, until: null, lat: 46.5 + rand() * 0.1, lon: -31.25 + rand() * 0.1, x: null, y: null, has: null, needs: null, side: null };
      let kind: string | null = null;
      if (rand() < 0.55) {
        kind = pickOf(rand, ['type', 'id', 'market', 'lat', 'lon', 'nan', 'inf', 'noCoord', 'untilBefore', 'hugeT', 'negT', 'side']);
        if (kind === 'type') rec.type = pickOf(rand, ['order', '', 'Demand']);
        if (kind === 'id') rec.id = '';
        if (kind === 'market') rec.market = '';
        if (kind === 'lat') rec.lat = 90.5 + rand() * 100;
        if (kind === 'lon') rec.lon = -(180.5 + rand() * 100);
        if (kind === 'nan') rec.lat = Number.NaN;
        if (kind === 'inf') rec.lon = Number.POSITIVE_INFINITY;
        if (kind === 'noCoord') rec.lat = null;
        if (kind === 'untilBefore') rec.until = t - randInt(rand, 1, 1e6);
        if (kind === 'hugeT') rec.t = 9e15; // a safe long, yet beyond any date (±8.64e15 ms)
        if (kind === 'negT') rec.t = -9e15;
        if (kind === 'side') {
          rec.type = 'withdraw';
          rec.side = pickOf(rand, [null, 'both']);
        }
      }
      records.push(rec);
      badKinds.push(kind);
    }
    const path = join(dir, 'fuzz.avro');
    const intact = await writeAvro(path, records, { blockSize: 2048, codec: 'null' });
    const layout = blockLayout(intact);
    expect(layout.length).toBeGreaterThan(20);
    // Damage some blocks in ways a reader can always detect: a count off by one (same
    // varint width), or a size pointing elsewhere, whose sync check then fails.
    const damaged = new Set<number>();
    const file = Buffer.from(intact);
    for (let k = 1; k < layout.length - 1; k += 1) {
      if (rand() >= 0.2) continue;
      const b = layout[k]!;
      if (rand() < 0.5 && b.count >= 2 && b.count < 63) file[b.start] = (b.count + (rand() < 0.5 ? 1 : -1)) * 2;
      else {
        const sizeAt = b.start + 1;
        file[sizeAt] = file[sizeAt]! ^ 0x04; // flips bit 1 of the size: ±2 bytes
      }
      damaged.add(k);
    }
    expect(damaged.size, `seed ${seed}`).toBeGreaterThan(2);
    // The block framing of this writer: count < 64 is one byte, so the size starts at start + 1.
    for (const k of damaged) expect(layout[k]!.dataStart - layout[k]!.start, `seed ${seed}`).toBeGreaterThanOrEqual(2);
    writeFileSync(path, file);

    const got = await collect(path);
    const pos = (k: number, r: number): string => `${k}/${r}`;
    const expectEvents: string[] = [];
    const expectRejects: string[] = [];
    let idx = 0;
    layout.forEach((b, k) => {
      for (let r = 0; r < b.count; r += 1, idx += 1) {
        if (damaged.has(k)) continue;
        (badKinds[idx] === null ? expectEvents : expectRejects).push(pos(k, r));
      }
      if (damaged.has(k)) expectRejects.push(pos(k, 0));
    });
    const events = got.flatMap((it) => (it.kind === 'event' ? [pos(it.ev.pos.block!, it.ev.pos.record!)] : []));
    const rejects = got.flatMap((it) => (it.kind === 'reject' ? [pos(it.reject.pos.block!, it.reject.pos.record!)] : []));
    expect(events, `seed ${seed}`).toEqual(expectEvents);
    expect(rejects, `seed ${seed}`).toEqual(expectRejects);
    const blockRejects = got.filter((it) => it.kind === 'reject' && /damaged/.test(it.reject.reason));
    expect(blockRejects.length, `seed ${seed}`).toBe(damaged.size);
    // Sanity: the file really was changed where we think.
    expect(readFileSync(path).equals(intact)).toBe(false);
  });

  it('counts exactly the records of every block whose sync marker is damaged, in runs of any length (seeded)', async () => {
    const seed = 16016;
    const rand = mulberry32(seed);
    const records: EventRecord[] = Array.from({ length: 1200 }, (_, i) => ({ type: 'supply', id: `s${i}`, market: 'm', t: T0 + i, until: null, lat: 46.5, lon: -31.2, x: null, y: null, has: null, needs: null, side: null }));
    const intact = await writeAvro(join(dir, 'markers.avro'), records, { blockSize: 1024, codec: pickOf(rand, ['null', 'deflate']) });
    const layout = blockLayout(intact);
    for (let round = 0; round < 12; round++) {
      const file = Buffer.from(intact);
      const damaged = new Set<number>();
      for (let k = 0; k < layout.length; k++) if (rand() < 0.25) damaged.add(k);
      for (const k of damaged) file[layout[k]!.dataEnd + randInt(rand, 0, 15)]! ^= randInt(rand, 1, 255);
      const path = join(dir, `markers-${round}.avro`);
      writeFileSync(path, file);
      const got = await collect(path);
      const lost = got.flatMap((it) => (it.kind === 'reject' ? [[it.reject.pos.block, Number(/; (\d+) records lost/.exec(it.reject.reason)?.[1])]] : []));
      expect(lost, `seed ${seed} round ${round}`).toEqual([...damaged].map((k) => [k, layout[k]!.count]));
      const kept = layout.reduce((a, b, k) => a + (damaged.has(k) ? 0 : b.count), 0);
      expect(got.filter((it) => it.kind === 'event').length, `seed ${seed} round ${round}`).toBe(kept);
      // Record numbers stay true after the damage: the last record is record 1200.
      const lastEvent = got.filter((it) => it.kind === 'event').at(-1);
      if (lastEvent?.kind === 'event' && !damaged.has(layout.length - 1)) expect(lastEvent.ev.pos.line, `seed ${seed} round ${round}`).toBe(1200);
    }
  });
});
