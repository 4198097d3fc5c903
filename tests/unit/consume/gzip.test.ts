/**
 * gzip damage keeps every line before it (issue #10 item 15): Node's Gunzip dropped
 * the output of the zlib call that met a bad trailer or trailing bytes — about 16 kB
 * of intact lines — and placed the damage before them. `gzip -t` and `zcat` keep them.
 */
import { spawnSync } from 'node:child_process';
import { mkdtempSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { gzipSync } from 'node:zlib';
import { afterAll, describe, expect, it } from 'vitest';
import { crc32, gunzipChunks, GzipDamage } from '../../../src/consume/gzip.js';
import { readLogFile, type LogItem } from '../../../src/consume/index.js';
import { mulberry32, randInt } from '../../helpers/random.js';

const dir = mkdtempSync(join(tmpdir(), 'pairflow-gzip-'));
afterAll(() => rmSync(dir, { recursive: true, force: true }));
const T0 = 1_772_409_600_000;

const eventLines = (n: number, from = 0): string =>
  Array.from({ length: n }, (_, i) => `{"type":"demand","id":"o${from + i}","market":"m","t":${T0 + from + i},"lat":46.5,"lon":-31.2}\n`).join('');

async function read(name: string, bytes: Buffer): Promise<{ events: number; rejects: { line: number; reason: string }[]; lines: number | undefined }> {
  const path = join(dir, name);
  writeFileSync(path, bytes);
  const reader = readLogFile(path, { metric: 'haversine' });
  const items: LogItem[] = [];
  for await (const item of reader) items.push(item);
  return {
    events: items.filter((i) => i.kind === 'event').length,
    rejects: items.flatMap((i) => (i.kind === 'reject' ? [{ line: i.reject.pos.line, reason: i.reject.reason }] : [])),
    lines: reader.input?.lines,
  };
}

async function gunzipAll(bytes: Buffer): Promise<{ text: string; damage: GzipDamage | null }> {
  const parts: Buffer[] = [];
  async function* one(): AsyncGenerator<Buffer> {
    for (let i = 0; i < bytes.length; i += 1000) yield bytes.subarray(i, i + 1000);
  }
  try {
    for await (const part of gunzipChunks(one())) parts.push(part);
    return { text: Buffer.concat(parts).toString('utf8'), damage: null };
  } catch (err) {
    if (!(err instanceof GzipDamage)) throw err;
    return { text: Buffer.concat(parts).toString('utf8'), damage: err };
  }
}

describe('gunzipChunks()', () => {
  const text = eventLines(3000);
  const gz = gzipSync(text);

  it('decompresses one member, several members, and headers with a name, a comment and extra fields', async () => {
    expect(await gunzipAll(gz)).toEqual({ text, damage: null });
    expect(await gunzipAll(Buffer.concat([gz, gzipSync('x\n'), gz]))).toEqual({ text: `${text}x\n${text}`, damage: null });
    // A header written by gzip(1) with the file name (FNAME), by Python with a comment-free header: outside writers.
    const path = join(dir, 'named.jsonl');
    writeFileSync(path, text);
    const gzip1 = spawnSync('gzip', ['-N', '-c', path]);
    if (gzip1.status === 0) expect(await gunzipAll(gzip1.stdout)).toEqual({ text, damage: null });
    // FEXTRA + FCOMMENT + FHCRC by hand (RFC 1952 §2.3): flags 4 | 16 | 2.
    const extra = Buffer.concat([Buffer.from([0x1f, 0x8b, 8, 4 | 16 | 2, 0, 0, 0, 0, 0, 255]), Buffer.from([3, 0, 1, 2, 3]), Buffer.from('a comment\0'), Buffer.from([0, 0]), gz.subarray(10)]);
    expect(await gunzipAll(extra)).toEqual({ text, damage: null });
  });

  it('checks the CRC-32 it computes against zlib\'s own (outside check: zlib.crc32 / RFC 1952 §8 test value)', () => {
    expect(crc32(Buffer.from('123456789'), 0)).toBe(0xcbf43926); // the standard check value of CRC-32 (common practice)
    expect(crc32(Buffer.from('456789'), crc32(Buffer.from('123'), 0))).toBe(0xcbf43926);
  });

  it('a bad CRC, a bad length, trailing bytes and truncation: every byte before the damage is passed on', async () => {
    const badCrc = Buffer.from(gz);
    badCrc[gz.length - 8]! ^= 0xff;
    const badLen = Buffer.from(gz);
    badLen[gz.length - 1]! ^= 0x01;
    for (const bytes of [badCrc, badLen, Buffer.concat([gz, Buffer.from('garbage!garbage!')]), Buffer.concat([gz, Buffer.alloc(512)])]) {
      const got = await gunzipAll(bytes);
      expect(got.text).toBe(text);
      expect(got.damage).toBeInstanceOf(GzipDamage);
    }
    const cut = await gunzipAll(gz.subarray(0, gz.length - 200));
    expect(text.startsWith(cut.text) && cut.text.length > text.length - 20_000).toBe(true);
    expect(cut.damage).toBeInstanceOf(GzipDamage);
    expect((await gunzipAll(gz.subarray(0, gz.length - 4))).text).toBe(text); // the trailer is cut, the data is whole
  });
});

describe('.jsonl.gz damage in the log reader', () => {
  const n = 3000;
  const gz = gzipSync(eventLines(n));

  it('keeps every intact line before a bad trailer or trailing garbage and places the damage after them', async () => {
    const badCrc = Buffer.from(gz);
    badCrc[gz.length - 6]! ^= 0xff;
    for (const [name, bytes] of [['crc', badCrc], ['garbage', Buffer.concat([gz, Buffer.from('\x00\x01garbage')])]] as const) {
      const got = await read(`${name}.jsonl.gz`, bytes);
      expect(got.events, name).toBe(n);
      expect(got.rejects.map((r) => r.line), name).toEqual([n + 1]);
      expect(got.lines, name).toBe(n);
    }
  });

  it('a damaged second member keeps the whole first member', async () => {
    const second = gzipSync(eventLines(500, n));
    const bad = Buffer.from(second);
    bad[second.length - 5]! ^= 0x10;
    const got = await read('two.jsonl.gz', Buffer.concat([gz, bad]));
    expect(got.events).toBe(n + 500);
    expect(got.rejects).toHaveLength(1);
  });

  it('seeded: whatever the damage, no line of an intact member before it is lost (every finding a case)', async () => {
    const seed = 1515;
    const rand = mulberry32(seed);
    const members = Array.from({ length: 4 }, (_, k) => gzipSync(eventLines(400, k * 400)));
    for (let round = 0; round < 30; round++) {
      const k = randInt(rand, 0, 3); // the member that is damaged
      const damaged = Buffer.from(members[k]!);
      const kind = randInt(rand, 0, 2);
      if (kind === 0) damaged[damaged.length - randInt(rand, 1, 8)]! ^= randInt(rand, 1, 255); // trailer
      else if (kind === 1) damaged[randInt(rand, 10, damaged.length - 9)]! ^= randInt(rand, 1, 255); // data
      const bytes = Buffer.concat([...members.slice(0, k), kind === 2 ? damaged.subarray(0, randInt(rand, 1, damaged.length - 1)) : damaged, ...members.slice(k + 1)]);
      const got = await read(`r${round}.jsonl.gz`, bytes);
      expect(got.events, `seed ${seed} round ${round}`).toBeGreaterThanOrEqual(400 * k);
      expect(got.rejects.length, `seed ${seed} round ${round}`).toBeGreaterThanOrEqual(1);
      expect(got.rejects.at(-1)!.reason, `seed ${seed} round ${round}`).toMatch(/gzip/);
    }
  });
});
