import { describe, expect, it } from 'vitest';
import { splitLines, type LinePiece } from '../../../src/consume/lines.js';
import { mulberry32, randInt } from '../../helpers/random.js';

async function* chunksOf(buf: Buffer, sizes: () => number, failAfter?: Error): AsyncGenerator<Buffer> {
  let pos = 0;
  while (pos < buf.length) {
    const n = Math.max(1, sizes());
    yield buf.subarray(pos, pos + n);
    pos += n;
  }
  if (failAfter) throw failAfter;
}

async function collect(it: AsyncIterable<LinePiece[]>): Promise<LinePiece[]> {
  const out: LinePiece[] = [];
  for await (const batch of it) {
    expect(batch.length).toBeGreaterThan(0);
    out.push(...batch);
  }
  return out;
}

const texts = (pieces: LinePiece[]): string[] => pieces.map((p) => (p.kind === 'line' ? p.bytes.toString('utf8') : `<${p.kind}>`));

describe('splitLines()', () => {
  it('gives the same lines as String.split for any chunking (seeded)', async () => {
    const seed = 7001;
    const rand = mulberry32(seed);
    for (let round = 0; round < 40; round += 1) {
      const lines = Array.from({ length: randInt(rand, 0, 30) }, () => 'é€x'.repeat(randInt(rand, 0, 20)) + (rand() < 0.2 ? '' : String(randInt(rand, 0, 1e6))));
      const trailing = rand() < 0.5;
      const text = lines.join('\n') + (trailing && lines.length > 0 ? '\n' : '');
      // Reference: String.prototype.split, dropping the empty piece after a final newline.
      const expected = text === '' ? [] : text.split('\n');
      if (trailing && lines.length > 0) expected.pop();
      const got = await collect(splitLines(chunksOf(Buffer.from(text), () => randInt(rand, 1, 17))));
      expect(texts(got), `seed ${seed}, round ${round}`).toEqual(expected);
      expect(got.map((p) => p.line)).toEqual(expected.map((_, i) => i + 1));
    }
  });

  it('drops a trailing carriage return, so CRLF files read like LF files', async () => {
    const got = await collect(splitLines(chunksOf(Buffer.from('a\r\nb\r\n\r\nc'), () => 2)));
    expect(texts(got)).toEqual(['a', 'b', '', 'c']);
  });

  it('reports a line over the limit as long, with its length and head, and keeps counting lines', async () => {
    const long = 'x'.repeat(5000);
    const got = await collect(splitLines(chunksOf(Buffer.from(`ok\n${long}\nafter\n${long}`), () => 333), 1000));
    expect(got.map((p) => p.kind)).toEqual(['line', 'long', 'line', 'long']);
    const p = got[1]!;
    expect(p.kind === 'long' && p.length).toBe(5000);
    expect(p.kind === 'long' && p.head.length).toBe(2048);
    expect(got.map((x) => x.line)).toEqual([1, 2, 3, 4]);
    expect(texts(got)[2]).toBe('after');
  });

  it('yields the bytes before a stream failure as a line, then one error piece, without throwing', async () => {
    const err = new Error('unexpected end of file');
    const got = await collect(splitLines(chunksOf(Buffer.from('one\ntwo\nthr'), () => 4, err)));
    expect(texts(got)).toEqual(['one', 'two', 'thr', '<error>']);
    const last = got[3]!;
    expect(last.kind === 'error' && last.error).toBe(err);
    expect(last.line).toBe(4);
  });
});
