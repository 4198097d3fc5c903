import { createHash } from 'node:crypto';
import { mkdirSync, mkdtempSync, readFileSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { gzipSync } from 'node:zlib';
import { afterAll, describe, expect, it } from 'vitest';
import { checkLoadedLog, formatReject, loadLog, logFormatOf, readLogFile, type LogItem } from '../../../src/consume/index.js';
import { toEventRecord } from '../../../src/consume/schema.js';
import type { ArrivalEvent, PairflowEvent } from '../../../src/model.js';
import { writeAvro } from './avro-files.js';

const dir = mkdtempSync(join(tmpdir(), 'pairflow-consume-'));
afterAll(() => rmSync(dir, { recursive: true, force: true }));

const T0 = 1_772_409_600_000; // 2026-03-02T00:00:00Z
const sup = (id: string, t: number): ArrivalEvent => ({ type: 'supply', id, market: 'm', t, until: null, lat: 46.5, lon: -31.25 });
const dem = (id: string, t: number): ArrivalEvent => ({ type: 'demand', id, market: 'm', t, until: null, lat: 46.51, lon: -31.2 });

async function items(path: string, seqStart?: number): Promise<LogItem[]> {
  const out: LogItem[] = [];
  for await (const it of readLogFile(path, { metric: 'haversine', ...(seqStart === undefined ? {} : { seqStart }) })) out.push(it);
  return out;
}

function write(name: string, content: string | Buffer): string {
  const path = join(dir, name);
  writeFileSync(path, content);
  return path;
}

const mixed = [
  JSON.stringify(sup('s1', T0 + 5000)),
  '',
  '   ',
  '{"type":"demand","id":"d1","market":"m","t":"2026-03-02T00:00:01Z","lat":46.5,"lon":-31.25}',
  '{"type":"demand","id":"d2","market":"m","t":1,"lat":95,"lon":0}',
  'not json',
  '{"type":"withdraw","id":"d1","market":"m","t":1772409603000,"side":"demand"}',
].join('\n');

describe('readLogFile()', () => {
  it('streams JSON Lines as events and rejects in file order with 1-based lines, skipping blank lines', async () => {
    const got = await items(write('mixed.jsonl', `${mixed}\n`), 10);
    expect(got.map((it) => (it.kind === 'event' ? `e${it.ev.pos.line}:${it.ev.seq}` : `r${it.reject.pos.line}`))).toEqual(['e1:10', 'e4:11', 'r5', 'r6', 'e7:12']);
    const r5 = got[2]!;
    expect(r5.kind === 'reject' && r5.reject.reason).toMatch(/field 'lat'/);
    expect(r5.kind === 'reject' && r5.reject.raw).toBe('{"type":"demand","id":"d2","market":"m","t":1,"lat":95,"lon":0}');
    const e4 = got[1]!;
    expect(e4.kind === 'event' && e4.ev.event.t).toBe(T0 + 1000);
  });

  it('reads a .jsonl.gz file to the same items as the plain file, and CRLF the same as LF', async () => {
    const plain = await items(write('a.jsonl', mixed));
    const gz = await items(write('a.jsonl.gz', gzipSync(mixed.replaceAll('\n', '\r\n'))));
    const strip = (xs: LogItem[]): unknown[] => xs.map((it) => (it.kind === 'event' ? { e: it.ev.event, l: it.ev.pos.line } : { r: it.reject.reason, l: it.reject.pos.line }));
    expect(strip(gz)).toEqual(strip(plain));
  });

  it('reads empty files as no items, and strips a byte order mark', async () => {
    expect(await items(write('empty.jsonl', ''))).toEqual([]);
    const emptyAvro = join(dir, 'empty.avro');
    // avsc 5.7.9 writes a 0-byte file for zero records.
    await writeAvro(emptyAvro, []);
    expect(await items(emptyAvro)).toEqual([]);
    const bom = await items(write('bom.jsonl', `\ufeff${JSON.stringify(sup('s1', T0))}\n`));
    expect(bom.map((it) => it.kind)).toEqual(['event']);
  });

  it('rejects a 0-byte .jsonl.gz file at line 1 (gzip of nothing is 20 bytes, so 0 bytes means a failed write)', async () => {
    const got = await items(write('empty.jsonl.gz', ''));
    expect(got).toHaveLength(1);
    expect(got[0]!.kind === 'reject' && got[0]!.reject.pos.line).toBe(1);
    expect(await items(write('nothing.jsonl.gz', gzipSync('')))).toEqual([]);
  });

  it('reads concatenated gzip members as one stream', async () => {
    const a = `${JSON.stringify(sup('s1', T0))}\n`;
    const b = `${JSON.stringify(dem('d1', T0 + 1))}\n`;
    const got = await items(write('members.jsonl.gz', Buffer.concat([gzipSync(a), gzipSync(b)])));
    expect(got.map((it) => (it.kind === 'event' ? it.ev.event.id : 'reject'))).toEqual(['s1', 'd1']);
  });

  it('ends a truncated gzip file with a reject after the lines read before the damage', async () => {
    const lines = Array.from({ length: 3000 }, (_, i) => JSON.stringify(sup(`s${i}`, T0 + i)));
    const full = gzipSync(lines.join('\n'));
    const got = await items(write('cut.jsonl.gz', full.subarray(0, Math.floor(full.length * 0.6))));
    const rejects = got.filter((it) => it.kind === 'reject');
    const events = got.filter((it) => it.kind === 'event');
    expect(events.length).toBeGreaterThan(100);
    expect(events.length).toBeLessThan(3000);
    // The last reject reports the damage; a cut-off last line may be one reject before it.
    expect(rejects.length).toBeGreaterThanOrEqual(1);
    expect(rejects.length).toBeLessThanOrEqual(2);
    const last = got[got.length - 1]!;
    expect(last.kind === 'reject' && last.reject.reason).toMatch(/gzip/);
    // Every event kept is exactly the line it came from.
    for (const it of events) if (it.kind === 'event') expect(JSON.stringify(it.ev.event)).toBe(lines[it.ev.pos.line - 1]);
  });

  it('rejects a .jsonl.gz file that is not gzip at all, without throwing', async () => {
    const got = await items(write('fake.jsonl.gz', 'just text\n'));
    expect(got).toHaveLength(1);
    expect(got[0]!.kind === 'reject' && got[0]!.reject.pos.line).toBe(1);
  });

  it('rejects a line that is not UTF-8 and a line over 1 MiB, and goes on', async () => {
    const bad = Buffer.concat([Buffer.from([0xff, 0xfe, 0x7b, 0x0a]), Buffer.from(`${'x'.repeat((1 << 20) + 10)}\n`), Buffer.from(JSON.stringify(dem('d', T0)))]);
    const got = await items(write('bytes.jsonl', bad));
    expect(got.map((it) => it.kind)).toEqual(['reject', 'reject', 'event']);
    expect(got[0]!.kind === 'reject' && got[0]!.reject.reason).toMatch(/UTF-8/);
    expect(got[1]!.kind === 'reject' && got[1]!.reject.raw.length).toBe(2048);
  });

  it('reads an Avro file to the same events as the JSON Lines file of the same events', async () => {
    const evs: PairflowEvent[] = [sup('s1', T0), dem('d1', T0 + 1), { type: 'withdraw', id: 'd1', market: 'm', t: T0 + 2, side: 'demand' }, { ...sup('s2', T0 + 3), has: ['cold-bag'], until: T0 + 60_000 }];
    const avroPath = join(dir, 'same.avro');
    await writeAvro(avroPath, [...evs.map(toEventRecord), { ...toEventRecord(dem('d9', T0)), type: 'order' }]);
    const got = await items(avroPath);
    expect(got.flatMap((it) => (it.kind === 'event' ? [it.ev.event] : []))).toEqual(evs);
    const rej = got.find((it) => it.kind === 'reject');
    expect(rej?.kind === 'reject' && rej.reject.pos).toEqual({ file: avroPath, line: 5, block: 0, record: 4 });
  });

  it('reads an Avro file written with another schema of the same field names (enum type, timestamp-millis, string time)', async () => {
    const schema = {
      type: 'record', name: 'Other', fields: [
        { name: 'type', type: { type: 'enum', name: 'Kind', symbols: ['supply', 'demand', 'withdraw'] } },
        { name: 'id', type: 'string' }, { name: 'market', type: 'string' },
        { name: 't', type: { type: 'long', logicalType: 'timestamp-millis' } },
        { name: 'until', type: ['null', 'string'], default: null },
        { name: 'lat', type: 'double' }, { name: 'lon', type: 'double' },
      ],
    };
    const path = join(dir, 'other.avro');
    await writeAvro(path, [
      { type: 'demand', id: 'd1', market: 'm', t: T0, until: '2026-03-02T00:10:00Z', lat: 1, lon: 2 },
      { type: 'supply', id: 's1', market: 'm', t: T0 + 5, until: null, lat: 100, lon: 2 },
    ], { schema });
    const got = await items(path);
    expect(got.map((it) => it.kind)).toEqual(['event', 'reject']);
    expect(got[0]!.kind === 'event' && got[0]!.ev.event).toEqual({ type: 'demand', id: 'd1', market: 'm', t: T0, until: T0 + 600_000, lat: 1, lon: 2 });
  });

  it('sets input with size, sha256 and line count once iterated', async () => {
    const path = write('hash.jsonl.gz', gzipSync(`${mixed}\n`));
    const reader = readLogFile(path, { metric: 'haversine' });
    expect(reader.input).toBeNull();
    for await (const _ of reader) void _;
    const bytes = readFileSync(path);
    // Reference: node:crypto over the file read whole.
    expect(reader.input).toEqual({
      file: path, bytes: bytes.length, sha256: createHash('sha256').update(bytes).digest('hex'), lines: 7,
      // 2 blank lines, 3 events (2 arrivals, 1 withdraw), 2 rejected: the books of the file close.
      blankLines: 2, events: 3, arrivals: 2, withdraws: 1, rejectedLines: 2, lostRecords: 0, damage: 0, uncountedLoss: false, complete: true, hints: [],
    });
  });

  it('throws PAIRFLOW_ERR_INPUT_NOT_FOUND for a missing file, PAIRFLOW_ERR_INPUT_UNREADABLE for a directory, and PAIRFLOW_ERR_INPUT_UNSUPPORTED for an unknown extension', async () => {
    await expect(items(join(dir, 'nope.jsonl'))).rejects.toMatchObject({ code: 'PAIRFLOW_ERR_INPUT_NOT_FOUND' });
    mkdirSync(join(dir, 'd.jsonl'), { recursive: true });
    await expect(items(join(dir, 'd.jsonl'))).rejects.toMatchObject({ code: 'PAIRFLOW_ERR_INPUT_UNREADABLE' });
    await expect(items(write('x.csv', 'a,b\n'))).rejects.toMatchObject({ code: 'PAIRFLOW_ERR_INPUT_UNSUPPORTED' });
  });
});

describe('logFormatOf()', () => {
  it('chooses the format by extension, case-insensitively', () => {
    expect(logFormatOf('a/b.JSONL')).toBe('jsonl');
    expect(logFormatOf('x.jsonl.gz')).toBe('jsonl.gz');
    expect(logFormatOf('x.Avro')).toBe('avro');
    expect(() => logFormatOf('x.gz')).toThrow(expect.objectContaining({ code: 'PAIRFLOW_ERR_INPUT_UNSUPPORTED' }));
  });
});

describe('loadLog() limits and checkLoadedLog() (issue #10 items 5, 14)', () => {
  const lines = (n: number, bad: number): string =>
    [...Array.from({ length: n }, (_, i) => JSON.stringify(sup(`s${i}`, T0 + i))), ...Array.from({ length: bad }, () => 'bad')].join('\n');

  it('keepRejects: false hands every reject on and keeps none, awaiting a busy output between batches', async () => {
    const path = write('many.jsonl', lines(5, 3000));
    let seen = 0;
    let drains = 0;
    const out = { get pressure() { return seen > 0 && seen % 500 < 300; }, drain: async () => { drains++; } };
    const loaded = await loadLog([path], { metric: 'haversine', keepRejects: false, onReject: () => seen++, backpressure: out });
    expect(loaded.rejects).toEqual([]);
    expect([loaded.rejectCount, seen, loaded.events.length]).toEqual([3000, 3000, 5]);
    expect(loaded.firstReject?.pos.line).toBe(6);
    expect(drains).toBeGreaterThan(0);
  });

  it('maxRejects as a count stops reading at the reject that exceeds it; as a share it is checked at the end', async () => {
    const path = write('limit.jsonl', lines(90, 10));
    let seen = 0;
    await expect(loadLog([path], { metric: 'haversine', maxRejects: { count: 3 }, onReject: () => seen++ })).rejects.toMatchObject({ code: 'PAIRFLOW_ERR_INPUT_TOO_MANY_REJECTS' });
    expect(seen).toBe(4);
    const loaded = await loadLog([path], { metric: 'haversine', maxRejects: { count: 10 } });
    expect(() => checkLoadedLog(loaded, { count: 10 })).not.toThrow();
    expect(() => checkLoadedLog(loaded, { share: 0.1 })).not.toThrow(); // 10 of 100
    expect(() => checkLoadedLog(loaded, { share: 0.099 })).toThrow(expect.objectContaining({ code: 'PAIRFLOW_ERR_INPUT_TOO_MANY_REJECTS' }));
  });

  it('no valid arrival is PAIRFLOW_ERR_INPUT_NO_EVENTS, with the guessable causes as hints', async () => {
    const noEvents = async (path: string): Promise<{ code: string; hints: readonly string[] }> => {
      const loaded = await loadLog([path], { metric: 'haversine' });
      try {
        checkLoadedLog(loaded);
      } catch (err) {
        return { code: (err as { code: string }).code, hints: loaded.inputs[0]!.hints };
      }
      return { code: 'none', hints: [] };
    };
    const gz = await noEvents(write('gz.jsonl', gzipSync(lines(50, 0))));
    expect(gz.code).toBe('PAIRFLOW_ERR_INPUT_NO_EVENTS');
    expect(gz.hints).toHaveLength(1);
    const xy = await noEvents(write('xy.jsonl', JSON.stringify({ type: 'supply', id: 's', market: 'm', t: T0, x: 1, y: 2 })));
    expect(xy).toMatchObject({ code: 'PAIRFLOW_ERR_INPUT_NO_EVENTS', hints: [expect.stringContaining('euclidean')] });
    expect((await noEvents(write('blank.jsonl', '\n\n'))).code).toBe('PAIRFLOW_ERR_INPUT_NO_EVENTS');
    expect((await noEvents(write('w.jsonl', '{"type":"withdraw","id":"a","market":"m","t":5,"side":"supply"}'))).code).toBe('PAIRFLOW_ERR_INPUT_NO_EVENTS');
    expect((await noEvents(write('ok.jsonl', lines(1, 0)))).code).toBe('none');
  });
});

describe('loadLog()', () => {
  it('sorts events by t, ties in file order then seq, and keeps rejects in input order', async () => {
    const a = write('la.jsonl', [JSON.stringify(sup('a1', T0 + 30)), 'bad-a', JSON.stringify(sup('a2', T0 + 10)), JSON.stringify(dem('a3', T0 + 10))].join('\n'));
    const b = write('lb.jsonl', [JSON.stringify(dem('b1', T0 + 10)), JSON.stringify(dem('b2', T0)), 'bad-b'].join('\n'));
    const seen: number[] = [];
    const { events, rejects, inputs } = await loadLog([a, b], { metric: 'haversine', onReject: (r) => seen.push(r.pos.line) });
    expect(events.map((e) => e.event.id)).toEqual(['b2', 'a2', 'a3', 'b1', 'a1']);
    expect(events.map((e) => e.seq)).toEqual([4, 1, 2, 3, 0]);
    expect(rejects.map((r) => `${r.pos.file === a ? 'a' : 'b'}:${r.pos.line}`)).toEqual(['a:2', 'b:3']);
    expect(seen).toEqual([2, 3]);
    expect(inputs.map((i) => [i.file, i.lines])).toEqual([[a, 4], [b, 3]]);
  });

  it('with strict, throws PAIRFLOW_ERR_INPUT_REJECT naming the file and line of the first reject', async () => {
    const a = write('strict.jsonl', [JSON.stringify(sup('a1', T0)), '{"type":"supply"}', 'bad'].join('\n'));
    const err = await loadLog([a], { metric: 'haversine', strict: true }).catch((e: unknown) => e);
    expect(err).toMatchObject({ code: 'PAIRFLOW_ERR_INPUT_REJECT', params: { file: a, line: 2 } });
  });

  it('with strict, names the Avro record number of the first reject', async () => {
    const path = join(dir, 'strict.avro');
    await writeAvro(path, [toEventRecord(sup('s1', T0)), { ...toEventRecord(sup('s2', T0)), market: '' }]);
    const err = await loadLog([path], { metric: 'haversine', strict: true }).catch((e: unknown) => e);
    expect(err).toMatchObject({ code: 'PAIRFLOW_ERR_INPUT_REJECT', params: { file: path, line: 2 } });
  });

  it('checks every path before reading any', async () => {
    const a = write('first.jsonl', JSON.stringify(sup('a1', T0)));
    await expect(loadLog([a, join(dir, 'missing.avro')], { metric: 'haversine' })).rejects.toMatchObject({ code: 'PAIRFLOW_ERR_INPUT_NOT_FOUND' });
    await expect(loadLog([a, join(dir, 'x.txt')], { metric: 'haversine' })).rejects.toMatchObject({ code: 'PAIRFLOW_ERR_INPUT_UNSUPPORTED' });
  });

  it('applies the metric: euclidean logs need x/y', async () => {
    const a = write('xy.jsonl', ['{"type":"supply","id":"s","market":"m","t":5,"x":1,"y":2}', JSON.stringify(sup('s2', T0))].join('\n'));
    const eu = await loadLog([a], { metric: 'euclidean' });
    expect(eu.events.map((e) => e.event.id)).toEqual(['s']);
    expect(eu.rejects.map((r) => r.pos.line)).toEqual([2]);
  });
});

describe('formatReject()', () => {
  it('renders one JSON object per reject with the position, reason and raw text', () => {
    const line = formatReject({ pos: { file: 'f.avro', line: 3, block: 1, record: 0 }, reason: 'why', raw: '{"a":1}' });
    expect(JSON.parse(line)).toEqual({ file: 'f.avro', line: 3, block: 1, record: 0, reason: 'why', raw: '{"a":1}' });
    expect(line).not.toContain('\n');
    expect(JSON.parse(formatReject({ pos: { file: 'f.jsonl', line: 9 }, reason: 'r', raw: 'x\ny' }))).toEqual({ file: 'f.jsonl', line: 9, reason: 'r', raw: 'x\ny' });
  });
});
