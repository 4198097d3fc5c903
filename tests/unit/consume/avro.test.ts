import { mkdtempSync, readFileSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import avro from 'avsc';
import { afterAll, describe, expect, it } from 'vitest';
import { MAX_BLOCK_BYTES, MAX_INFLATED_BLOCK_BYTES, readAvroContainer, type AvroPiece } from '../../../src/consume/avro.js';
import type { EventRecord } from '../../../src/consume/schema.js';
import { mulberry32, randInt } from '../../helpers/random.js';
import { blockLayout, writeAvro } from './avro-files.js';

const dir = mkdtempSync(join(tmpdir(), 'pairflow-avro-'));
afterAll(() => rmSync(dir, { recursive: true, force: true }));

function record(i: number, extra: Partial<EventRecord> = {}): EventRecord {
  return { type: i % 3 === 0 ? 'demand' : 'supply', id: `u${i}`, market: 'm', t: 1_700_000_000_000 + i * 1000, until: null, lat: 46.5, lon: -31.25, x: null, y: null, has: i % 5 === 0 ? ['cold-bag'] : null, needs: null, side: null, ...extra };
}

async function* fileChunks(buf: Buffer, size: number): AsyncGenerator<Buffer> {
  for (let i = 0; i < buf.length; i += size) yield buf.subarray(i, i + size);
}

async function pieces(buf: Buffer, size = 4096): Promise<AvroPiece[]> {
  const out: AvroPiece[] = [];
  for await (const batch of readAvroContainer(fileChunks(buf, size))) out.push(...batch);
  return out;
}

/** Records as avsc's own file decoder reads them (the reference reader). */
async function referenceRecords(path: string): Promise<unknown[]> {
  const out: unknown[] = [];
  await new Promise<void>((resolve, reject) => {
    avro.createFileDecoder(path).on('data', (v: unknown) => out.push(v)).on('end', resolve).on('error', reject);
  });
  return out;
}

const plain = (v: unknown): unknown => JSON.parse(JSON.stringify(v));

describe('readAvroContainer()', () => {
  for (const codec of ['null', 'deflate']) {
    it(`reads the same records as avsc's file decoder (codec ${codec}), with block and record indexes`, async () => {
      const path = join(dir, `ref-${codec}.avro`);
      const recs = Array.from({ length: 700 }, (_, i) => record(i));
      const buf = await writeAvro(path, recs, { codec, blockSize: 2048 });
      const got = await pieces(buf, 777);
      expect(got.every((p) => p.kind === 'record')).toBe(true);
      expect(got.map((p) => p.kind === 'record' && plain(p.value))).toEqual((await referenceRecords(path)).map(plain));
      const layout = blockLayout(buf);
      expect(layout.length).toBeGreaterThan(5);
      const expectedPos = layout.flatMap((b, k) => Array.from({ length: b.count }, (_, r) => [k, r]));
      expect(got.map((p) => (p.kind === 'record' ? [p.block, p.record] : null))).toEqual(expectedPos);
    });
  }

  it('rejects a block whose record count is damaged and still decodes every later block', async () => {
    const path = join(dir, 'count.avro');
    const buf = await writeAvro(path, Array.from({ length: 400 }, (_, i) => record(i)), { blockSize: 1024 });
    const layout = blockLayout(buf);
    const k = 2;
    const b = layout[k]!;
    // Rewrite the count varint as count+1, same width (counts stay < 64 at this block size).
    expect(b.count).toBeLessThan(63);
    const bad = Buffer.from(buf);
    bad[b.start] = (b.count + 1) * 2;
    const got = await pieces(bad);
    const corrupt = got.filter((p) => p.kind === 'corrupt');
    expect(corrupt).toHaveLength(1);
    expect(corrupt[0]).toMatchObject({ block: k, records: b.count + 1 });
    const blocksRead = new Set(got.flatMap((p) => (p.kind === 'record' ? [p.block] : [])));
    expect([...blocksRead].sort((a, c) => a - c)).toEqual(layout.map((_, i) => i).filter((i) => i !== k));
  });

  it('a damaged sync marker loses its block alone, counted exactly; the next block still decodes', async () => {
    const path = join(dir, 'sync.avro');
    const buf = await writeAvro(path, Array.from({ length: 400 }, (_, i) => record(i)), { blockSize: 1024 });
    const layout = blockLayout(buf);
    const bad = Buffer.from(buf);
    bad[layout[1]!.dataEnd + 3]! ^= 0xff;
    const got = await pieces(bad);
    expect(got.filter((p) => p.kind === 'corrupt')).toEqual([expect.objectContaining({ block: 1, records: layout[1]!.count })]);
    expect(got.filter((p) => p.kind === 'record')).toHaveLength(400 - layout[1]!.count);
    expect(new Set(got.flatMap((p) => (p.kind === 'record' ? [p.block] : []))).has(2)).toBe(true);
  });

  it('counts exactly what consecutive damaged sync markers lose (issue #10: two markers, 87 lost, the reject said 29)', async () => {
    const path = join(dir, 'sync2.avro');
    const buf = await writeAvro(path, Array.from({ length: 600 }, (_, i) => record(i)), { blockSize: 1024 });
    const layout = blockLayout(buf);
    for (const damagedBlocks of [[1, 2], [2, 3, 4], [layout.length - 2, layout.length - 1]]) {
      const bad = Buffer.from(buf);
      for (const k of damagedBlocks) bad[layout[k]!.dataEnd + 7]! ^= 0x5a;
      const got = await pieces(bad, 333);
      const corrupt = got.filter((p) => p.kind === 'corrupt');
      expect(corrupt.map((p) => p.kind === 'corrupt' && [p.block, p.records]), String(damagedBlocks)).toEqual(damagedBlocks.map((k) => [k, layout[k]!.count]));
      const lost = damagedBlocks.reduce((a, k) => a + layout[k]!.count, 0);
      expect(got.filter((p) => p.kind === 'record'), String(damagedBlocks)).toHaveLength(600 - lost);
      // Block indexes after the damage are the true ones.
      expect(got.flatMap((p) => (p.kind === 'record' ? [p.block] : [])).every((b) => !damagedBlocks.includes(b))).toBe(true);
    }
  });

  it('a marker damaged together with the next block\'s framing: the loss is reported as unknown, later blocks still decode', async () => {
    const path = join(dir, 'sync3.avro');
    const buf = await writeAvro(path, Array.from({ length: 400 }, (_, i) => record(i)), { blockSize: 1024 });
    const layout = blockLayout(buf);
    const bad = Buffer.from(buf);
    bad[layout[1]!.dataEnd + 3]! ^= 0xff;
    bad[layout[2]!.start] = 0x01; // a count of -1: framing that makes no sense
    const got = await pieces(bad);
    expect(got.filter((p) => p.kind === 'corrupt')).toEqual([expect.objectContaining({ block: 1, records: null })]);
    expect(got.filter((p) => p.kind === 'record')).toHaveLength(400 - layout[1]!.count - layout[2]!.count);
  });

  it('ends a truncated file with a corrupt piece and keeps the records of the complete blocks', async () => {
    const path = join(dir, 'trunc.avro');
    const buf = await writeAvro(path, Array.from({ length: 300 }, (_, i) => record(i)), { blockSize: 1024, codec: 'deflate' });
    const layout = blockLayout(buf);
    const last = layout[layout.length - 1]!;
    const got = await pieces(buf.subarray(0, last.dataStart + 5));
    const kept = layout.slice(0, -1).reduce((a, b) => a + b.count, 0);
    expect(got.filter((p) => p.kind === 'record')).toHaveLength(kept);
    expect(got[got.length - 1]).toMatchObject({ kind: 'corrupt', block: layout.length - 1 });
  });

  it('rejects damaged deflate data of one block', async () => {
    const path = join(dir, 'deflate.avro');
    const buf = await writeAvro(path, Array.from({ length: 300 }, (_, i) => record(i)), { blockSize: 1024, codec: 'deflate' });
    const layout = blockLayout(buf);
    const bad = Buffer.from(buf);
    // Overwrite the whole compressed body with 0xff: not a valid deflate stream.
    bad.fill(0xff, layout[0]!.dataStart, layout[0]!.dataEnd);
    const got = await pieces(bad);
    expect(got.filter((p) => p.kind === 'corrupt')).toEqual([expect.objectContaining({ block: 0 })]);
    expect(got.filter((p) => p.kind === 'record')).toHaveLength(300 - layout[0]!.count);
  });

  it('ends with one fatal piece for a file that is not an Avro container, or has an unsupported codec', async () => {
    expect(await pieces(Buffer.from('{"type":"supply"}\n'))).toEqual([{ kind: 'fatal', reason: expect.stringMatching(/magic/) }]);
    expect(await pieces(Buffer.from('Ob'))).toEqual([{ kind: 'fatal', reason: expect.stringMatching(/magic/) }]);
    const path = join(dir, 'ok.avro');
    const buf = await writeAvro(path, [record(1)]);
    expect(await pieces(buf.subarray(0, 40))).toEqual([{ kind: 'fatal', reason: expect.stringMatching(/header truncated/) }]);
    const snappy = Buffer.from(buf.toString('latin1').replace('avro.codec\x08null', 'avro.codec\x0csnappy'), 'latin1');
    expect(snappy.length).not.toBe(buf.length);
    const got = await pieces(snappy);
    expect(got[0]).toMatchObject({ kind: 'fatal', reason: expect.stringMatching(/snappy/) });
  });

  it('decodes a long beyond 2^53 as a number instead of failing its block', async () => {
    const path = join(dir, 'huge.avro');
    const schema = { type: 'record', name: 'L', fields: [{ name: 't', type: 'long' }] };
    // avsc refuses to write unsafe longs from numbers; write the bytes of 2^60 by hand
    // (zig-zag varint of 2^61, Avro 1.11 spec "Binary Encoding").
    const ok = await writeAvro(path, [{ t: 1 }, { t: 2 }], { schema });
    const layout = blockLayout(ok);
    const b = layout[0]!;
    let z = 2n ** 61n;
    const bytes: number[] = [];
    while (z >= 0x80n) {
      bytes.push(Number((z & 0x7fn) | 0x80n));
      z >>= 7n;
    }
    bytes.push(Number(z));
    const data = Buffer.concat([Buffer.from(bytes), Buffer.from([4])]); // 2^60, then 2
    const long = avro.Type.forSchema('long');
    const framed = Buffer.concat([ok.subarray(0, b.start), long.toBuffer(2), long.toBuffer(data.length), data, ok.subarray(b.dataEnd)]);
    writeFileSync(join(dir, 'huge-hand.avro'), framed);
    const got = await pieces(framed);
    expect(got.map((p) => (p.kind === 'record' ? (p.value as { t: number }).t : p.kind))).toEqual([2 ** 60, 2]);
  });

  it('rejects a block whose array count is damaged to 2^31 instead of allocating it', async () => {
    const path = join(dir, 'count31.avro');
    const ok = await writeAvro(path, [record(0, { has: ['a'] }), record(1)]);
    const b = blockLayout(ok)[0]!;
    const data = ok.subarray(b.dataStart, b.dataEnd);
    // has = ["a"] is encoded as: union branch 1, count 1, string "a", end of array
    // (zig-zag varints, Avro 1.11 spec "Binary Encoding").
    const at = data.indexOf(Buffer.from([0x02, 0x02, 0x02, 0x61, 0x00]));
    expect(at).toBeGreaterThanOrEqual(0);
    let z = 2n ** 32n; // zig-zag of 2^31
    const count: number[] = [];
    while (z >= 0x80n) {
      count.push(Number((z & 0x7fn) | 0x80n));
      z >>= 7n;
    }
    count.push(Number(z));
    const bad = Buffer.concat([data.subarray(0, at + 1), Buffer.from(count), data.subarray(at + 2)]);
    const long = avro.Type.forSchema('long');
    const file = Buffer.concat([ok.subarray(0, b.start), long.toBuffer(2), long.toBuffer(bad.length), bad, ok.subarray(b.dataEnd)]);
    const got = await pieces(file);
    expect(got).toEqual([expect.objectContaining({ kind: 'corrupt', block: 0, records: 2, reason: expect.stringMatching(/claims 2147483648 items/) })]);
  });

  it('never throws on randomly damaged files (seeded)', async () => {
    const seed = 99173;
    const rand = mulberry32(seed);
    const path = join(dir, 'random.avro');
    const buf = await writeAvro(path, Array.from({ length: 200 }, (_, i) => record(i)), { blockSize: 512, codec: rand() < 0.5 ? 'null' : 'deflate' });
    for (let round = 0; round < 60; round += 1) {
      const bad = Buffer.from(buf);
      for (let k = randInt(rand, 1, 6); k > 0; k -= 1) bad[randInt(rand, 0, bad.length - 1)] = randInt(rand, 0, 255);
      const cut = rand() < 0.3 ? bad.subarray(0, randInt(rand, 0, bad.length)) : bad;
      const got = await pieces(cut, randInt(rand, 1, 3000));
      // At most 200 records, and nothing after a fatal piece.
      expect(got.filter((p) => p.kind === 'record').length, `seed ${seed}, round ${round}`).toBeLessThanOrEqual(200);
      const fatal = got.findIndex((p) => p.kind === 'fatal');
      expect(fatal === -1 || fatal === got.length - 1, `seed ${seed}, round ${round}`).toBe(true);
    }
  });
});

describe('docs/events.md on Avro limits', () => {
  it('states the block limits the reader applies (issue #10: the deflate limit in the docs differed from the code)', () => {
    const doc = readFileSync(new URL('../../../docs/events.md', import.meta.url), 'utf8').replace(/\s+/g, ' ');
    expect(doc).toContain(`larger than ${MAX_BLOCK_BYTES / 2 ** 20} MiB, or one whose deflate data expands beyond ${MAX_INFLATED_BLOCK_BYTES / 2 ** 20} MiB`);
  });
});
