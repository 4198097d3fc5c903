/**
 * gzip decompression that keeps everything before the damage.
 *
 * Node's Gunzip checks each member's trailer (CRC-32 and length, RFC 1952 §2.3)
 * inside the same zlib call that produces the member's last output, and on a
 * mismatch — or on bytes after the last member that are not another member — it
 * reports the error and drops that call's output: up to 16 kB of intact lines
 * before a bad trailer or trailing garbage were lost, and the damage was placed
 * before them. Here the members are framed by hand: the header is parsed, the
 * deflate data goes through a raw inflater whose `bytesWritten` says where the
 * deflate stream ended, and the trailer is checked against a CRC-32 of the output
 * computed on the way. So every byte the compressed data holds is passed on before
 * the damage is reported, and the damage is named: a bad checksum, a truncated
 * member, trailing bytes, damaged deflate data.
 */
import * as zlib from 'node:zlib';

/** Damage found in a gzip stream; everything decoded before it has been yielded. */
export class GzipDamage extends Error {
  /** True when every byte of data before the damage is intact (e.g. trailing bytes after the last member). */
  readonly dataIntact: boolean;
  constructor(message: string, dataIntact = false) {
    super(message);
    this.name = 'GzipDamage';
    this.dataIntact = dataIntact;
  }
}

/** Compressed bytes handed to the inflater at a time: bounds the output held at once. */
const SLICE_BYTES = 16 << 10;

const FHCRC = 2;
const FEXTRA = 4;
const FNAME = 8;
const FCOMMENT = 16;

// CRC-32 (ISO 3309, the polynomial 0xEDB88320 reflected), as RFC 1952 §8 specifies it;
// zlib.crc32 (Node ≥ 20.15) computes the same in C.
let table: Int32Array | null = null;
function crc32js(data: Buffer, crc: number): number {
  if (table === null) {
    table = new Int32Array(256);
    for (let n = 0; n < 256; n++) {
      let c = n;
      for (let k = 0; k < 8; k++) c = c & 1 ? 0xedb88320 ^ (c >>> 1) : c >>> 1;
      table[n] = c;
    }
  }
  let c = ~crc;
  for (let i = 0; i < data.length; i++) c = table[(c ^ data[i]!) & 0xff]! ^ (c >>> 8);
  return ~c >>> 0;
}
const nativeCrc = (zlib as { crc32?: (data: Buffer, value?: number) => number }).crc32;
/** CRC-32 of `data` continuing from `crc` (0 to start). */
export const crc32: (data: Buffer, crc: number) => number = nativeCrc ? (data, crc) => nativeCrc(data, crc) : crc32js;

/**
 * Decompresses a gzip stream (one or more members) given as chunks, yielding the
 * decompressed bytes. Damage ends the stream with a {@link GzipDamage} thrown after
 * everything before it was yielded; a read error of `chunks` is thrown as it is.
 */
export async function* gunzipChunks(chunks: AsyncIterable<Buffer>): AsyncGenerator<Buffer> {
  const source = chunks[Symbol.asyncIterator]();
  let buf: Buffer = Buffer.alloc(0);
  let ended = false;
  let consumed = 0; // compressed bytes before `buf`

  async function fill(need: number): Promise<boolean> {
    while (buf.length < need && !ended) {
      const next = await source.next();
      if (next.done) ended = true;
      else buf = buf.length === 0 ? next.value : Buffer.concat([buf, next.value]);
    }
    return buf.length >= need;
  }
  function take(n: number): void {
    buf = buf.subarray(n);
    consumed += n;
  }
  async function drainRest(): Promise<number> {
    let n = buf.length;
    for (let next = await source.next(); !next.done; next = await source.next()) n += next.value.length;
    return n;
  }

  try {
    for (let member = 0; ; member++) {
      if (!(await fill(1))) {
        if (member === 0) throw new GzipDamage('the file is empty (a gzip stream of nothing is 20 bytes, so an empty file means a failed write)');
        return;
      }
      const header = await readHeader();
      if (typeof header === 'string') {
        if (member === 0) throw new GzipDamage(header);
        const rest = await drainRest();
        throw new GzipDamage(`${rest} bytes after the last gzip member (at byte ${consumed}) are not gzip data; every line before them was read`, true);
      }
      take(header);
      yield* inflateMember(member);
    }
  } finally {
    await source.return?.();
  }

  /** Parses a member header at the start of `buf`: its length, or why it is not one. */
  async function readHeader(): Promise<number | string> {
    await fill(10);
    if (buf.length < 2 || buf[0] !== 0x1f || buf[1] !== 0x8b) return 'not gzip data (bad magic bytes)';
    if (buf.length < 10) return 'gzip header truncated';
    if (buf[2] !== 8) return `gzip compression method ${buf[2]} is not deflate`;
    const flags = buf[3]!;
    if (flags & 0xe0) return 'gzip header damaged (reserved flag bits set)';
    let at = 10;
    if (flags & FEXTRA) {
      if (!(await fill(at + 2))) return 'gzip header truncated';
      at += 2 + buf.readUInt16LE(at);
    }
    for (const flag of [FNAME, FCOMMENT]) {
      if (!(flags & flag)) continue;
      for (;;) {
        if (!(await fill(at + 1))) return 'gzip header truncated';
        const zero = buf.indexOf(0, at);
        if (zero !== -1) {
          at = zero + 1;
          break;
        }
        // A name without its end: refuse more than a megabyte of it.
        if (buf.length > (1 << 20)) return 'gzip header damaged (a name field without an end)';
        if (!(await fill(buf.length + 1))) return 'gzip header truncated';
      }
    }
    if (flags & FHCRC) at += 2;
    if (!(await fill(at))) return 'gzip header truncated';
    return at;
  }

  /** Inflates one member's deflate data from `buf` on, yields its output, checks its trailer. */
  async function* inflateMember(member: number): AsyncGenerator<Buffer> {
    const inflater = zlib.createInflateRaw({ finishFlush: zlib.constants.Z_SYNC_FLUSH });
    const out: Buffer[] = [];
    let failure: Error | null = null;
    let crc = 0;
    let size = 0;
    inflater.on('data', (chunk: Buffer) => {
      out.push(chunk);
      crc = crc32(chunk, crc);
      size += chunk.length;
    });
    inflater.on('error', (err: Error) => { failure ??= err; });
    const where = (): string => `member ${member + 1}, near byte ${consumed}`;
    let fed = 0;
    let streamEnd = -1;
    try {
      while (streamEnd < 0) {
        if (buf.length === 0 && !(await fill(1))) break;
        const slice = buf.subarray(0, SLICE_BYTES);
        // A damaged stream reports an error and may never call the write back.
        await new Promise<void>((resolve) => {
          const done = (): void => {
            inflater.off('error', done);
            resolve();
          };
          inflater.once('error', done);
          inflater.write(slice, done);
        });
        fed += slice.length;
        take(slice.length);
        if (failure) break;
        // The inflater stops taking input at the end of the deflate stream.
        if (inflater.bytesWritten < fed) {
          streamEnd = inflater.bytesWritten;
          const back = fed - streamEnd;
          buf = Buffer.concat([slice.subarray(slice.length - back), buf]);
          consumed -= back;
        }
        while (out.length > 0) yield out.shift()!;
      }
      if (!failure) {
        // 'close' follows both the flush and an error; 'end' may have come already,
        // when the inflater met the end of the deflate stream.
        await new Promise<void>((resolve) => {
          if (inflater.closed) {
            resolve();
            return;
          }
          inflater.once('close', () => resolve());
          inflater.end();
        });
      }
      while (out.length > 0) yield out.shift()!;
      if (failure) throw new GzipDamage(`deflate data damaged (${(failure as Error).message}; ${where()})`);
      if (streamEnd < 0) throw new GzipDamage(`truncated: the file ends inside the compressed data (${where()})`);
      if (!(await fill(8))) throw new GzipDamage(`truncated: the file ends inside the gzip trailer (${where()})`);
      const wantCrc = buf.readUInt32LE(0);
      const wantSize = buf.readUInt32LE(4);
      take(8);
      if (wantCrc !== crc) {
        throw new GzipDamage(`CRC-32 check failed (${where()}): the member's data does not match its checksum, so lines read from it may be altered`);
      }
      if (wantSize !== size % 2 ** 32) throw new GzipDamage(`length check failed (${where()}): the trailer says ${wantSize} bytes, the data held ${size}`);
    } finally {
      inflater.destroy();
    }
  }
}
