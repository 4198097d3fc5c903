/**
 * A streaming reader of Avro object container files that survives damage.
 *
 * avsc's own BlockDecoder stops at the first bad block. Here the container layout
 * (Avro 1.11 specification, "Object Container Files": magic `Obj\x01`, a metadata map,
 * a 16-byte sync marker, then blocks of `long count, long size, data, sync`) is
 * walked by hand, and each block's records are decoded with avsc's types. A block
 * whose framing, sync marker, compression or records are damaged becomes one
 * `corrupt` piece, and reading resumes after the next sync marker, so later blocks
 * still decode. Memory stays bounded by the largest block.
 */
import { inflateRawSync } from 'node:zlib';
import avro from 'avsc';

const MAGIC = Buffer.from('Obj\x01', 'latin1');
const SYNC_BYTES = 16;

/** Largest block (compressed or not) the reader accepts; larger sizes mean damage. */
export const MAX_BLOCK_BYTES = 64 << 20;

/** Largest decompressed block accepted (deflate codec): four times the largest block. */
export const MAX_INFLATED_BLOCK_BYTES = MAX_BLOCK_BYTES * 4;

/** Blocks with damaged markers followed in a row before the loss is called unknown. */
const MAX_CHAIN_BLOCKS = 16;

// A long read without avsc's "potential precision loss" exception: an absurd time
// (say 2^62 ms) is then a validation reject of one record, not a decode failure that
// loses its whole block. Values beyond 2^53 lose precision, but all of them lie far
// outside the range of dates and are rejected anyway.
const LenientLong = avro.types.LongType.__with({
  fromBuffer: (buf: Buffer) => Number(buf.readBigInt64LE(0)),
  toBuffer: (n: number) => {
    const buf = Buffer.alloc(8);
    buf.writeBigInt64LE(BigInt(Math.trunc(n)), 0);
    return buf;
  },
  fromJSON: (v: unknown) => Number(v),
  toJSON: (n: number) => n,
  isValid: (n: unknown) => typeof n === 'number' && Number.isInteger(n),
  compare: (a: number, b: number) => (a < b ? -1 : a > b ? 1 : 0),
});

/** The parts of avsc's internal Tap that the count guard below uses. */
interface Tap {
  buf: Buffer;
  pos: number;
  readLong(): number;
  skipLong(): void;
  readString(): string;
}

/**
 * The item count of one array or map block. A damaged count (say 2^31) would make
 * avsc allocate and fill an array that size — seconds of work, then out of memory —
 * so a count larger than the bytes left in the block is refused as damage. (An array
 * of nulls could legitimately exceed it; no event field is one.)
 */
function itemCount(tap: Tap): number {
  let n = tap.readLong();
  if (n < 0) {
    n = -n;
    tap.skipLong();
  }
  const left = tap.buf.length - tap.pos;
  if (n > left) throw new Error(`an array or map claims ${n} items with ${Math.max(0, left)} bytes left`);
  return n;
}

// avsc's array and map types with the count check; avsc freezes its type objects,
// so the check lives on subclasses that the schema's typeHook builds.
class GuardedArrayType extends avro.types.ArrayType {}
class GuardedMapType extends avro.types.MapType {}
interface ReadsTap {
  _read(tap: Tap): unknown;
}
(GuardedArrayType.prototype as unknown as ReadsTap)._read = function (this: { itemsType: ReadsTap }, tap: Tap): unknown[] {
  const out: unknown[] = [];
  for (let n = itemCount(tap); n !== 0; n = itemCount(tap)) {
    for (; n > 0; n -= 1) out.push(this.itemsType._read(tap));
  }
  return out;
};
(GuardedMapType.prototype as unknown as ReadsTap)._read = function (this: { valuesType: ReadsTap }, tap: Tap): Record<string, unknown> {
  const out: Record<string, unknown> = {};
  for (let n = itemCount(tap); n !== 0; n = itemCount(tap)) {
    for (; n > 0; n -= 1) {
      const key = tap.readString();
      out[key] = this.valuesType._read(tap);
    }
  }
  return out;
};

/** Builds the reading type of a writer schema: lenient longs, count-checked arrays and maps. */
function readingType(schema: unknown): avro.Type {
  return avro.Type.forSchema(schema as avro.Schema, {
    typeHook: (s, opts) => {
      // Logical types are not enabled, so a timestamp-millis long is a plain long too.
      if (s === 'long') return LenientLong;
      if (typeof s !== 'object' || s === null) return undefined;
      const kind = (s as { type?: unknown }).type;
      if (kind === 'long') return LenientLong;
      if (kind === 'array') return new GuardedArrayType(s, opts);
      if (kind === 'map') return new GuardedMapType(s, opts);
      return undefined;
    },
  });
}

/** One piece of a container file, in file order. `block` is 0-based. */
export type AvroPiece =
  | { readonly kind: 'record'; readonly block: number; readonly record: number; readonly value: unknown }
  | { readonly kind: 'corrupt'; readonly block: number; readonly records: number | null; readonly reason: string }
  | { readonly kind: 'fatal'; readonly reason: string };

/** Reads one zig-zag varint long at `pos`; null when the buffer ends first, NaN when over-long. */
function readLong(buf: Buffer, pos: number): { value: number; next: number } | null {
  let result = 0;
  let scale = 1;
  for (let i = 0; i < 10; i += 1) {
    if (pos + i >= buf.length) return null;
    const b = buf[pos + i]!;
    result += (b & 0x7f) * scale;
    scale *= 128;
    if ((b & 0x80) === 0) {
      // zig-zag: even → n/2, odd → -(n+1)/2; arithmetic stays exact up to 2^53.
      const value = result % 2 === 0 ? result / 2 : -(result + 1) / 2;
      return { value, next: pos + i + 1 };
    }
  }
  return { value: Number.NaN, next: pos + 10 };
}

interface Header {
  readonly type: avro.Type;
  readonly codec: string;
  readonly sync: Buffer;
  readonly end: number;
}

/** Largest header accepted: a real one is a schema of a few kB. */
const MAX_HEADER_BYTES = 4 << 20;

/**
 * Reads the header's metadata, an Avro `map<bytes>` (blocks of `long count`, a
 * negative count followed by a byte size, then key/value pairs; a zero count ends
 * it), bound-checking every length: a damaged count must not make a decoder spin
 * over billions of missing entries.
 */
function readMeta(buf: Buffer, start: number): { entries: Record<string, Buffer>; end: number } | 'more' | string {
  const entries: Record<string, Buffer> = {};
  let pos = start;
  const bytesAt = (): Buffer | 'more' | string => {
    const len = readLong(buf, pos);
    if (len === null) return 'more';
    if (Number.isNaN(len.value) || len.value < 0) return 'bad length in the metadata';
    if (len.value > MAX_HEADER_BYTES) return `metadata entry of ${len.value} bytes`;
    if (len.next + len.value > buf.length) return 'more';
    pos = len.next + len.value;
    return buf.subarray(len.next, pos);
  };
  for (;;) {
    const count = readLong(buf, pos);
    if (count === null) return 'more';
    if (Number.isNaN(count.value)) return 'bad map count in the metadata';
    pos = count.next;
    if (count.value === 0) return { entries, end: pos };
    let n = count.value;
    if (n < 0) {
      const size = readLong(buf, pos);
      if (size === null) return 'more';
      pos = size.next;
      n = -n;
    }
    // Each entry takes at least two bytes (two lengths).
    if (n > MAX_HEADER_BYTES / 2) return `metadata claims ${n} entries`;
    for (let i = 0; i < n; i += 1) {
      const key = bytesAt();
      if (typeof key === 'string') return key;
      const value = bytesAt();
      if (typeof value === 'string') return value;
      entries[key.toString('utf8')] = value;
    }
  }
}

function parseHeader(buf: Buffer, atEnd: boolean): Header | 'more' | string {
  if (buf.length < MAGIC.length) return atEnd ? 'not an Avro object container file (shorter than its magic bytes)' : 'more';
  if (!buf.subarray(0, MAGIC.length).equals(MAGIC)) return 'not an Avro object container file (bad magic bytes)';
  const meta = readMeta(buf, MAGIC.length);
  if (meta === 'more') {
    if (atEnd) return 'Avro header truncated';
    if (buf.length > MAX_HEADER_BYTES) return `damaged Avro header (no end within ${MAX_HEADER_BYTES} bytes)`;
    return 'more';
  }
  if (typeof meta === 'string') return `damaged Avro header: ${meta}`;
  if (buf.length < meta.end + SYNC_BYTES) return atEnd ? 'Avro header truncated' : 'more';
  const header = { meta: meta.entries, sync: buf.subarray(meta.end, meta.end + SYNC_BYTES) };
  const end = meta.end + SYNC_BYTES;
  const codec = header.meta['avro.codec']?.toString('utf8') || 'null';
  if (codec !== 'null' && codec !== 'deflate') return `Avro codec '${codec}' is not supported (expected null or deflate)`;
  const schemaText = header.meta['avro.schema'];
  if (!schemaText) return 'Avro header has no avro.schema';
  let type: avro.Type;
  try {
    type = readingType(JSON.parse(schemaText.toString('utf8')));
  } catch (err) {
    return `Avro header holds an unusable schema: ${(err as Error).message}`;
  }
  return { type, codec, sync: Buffer.from(header.sync), end };
}

/** Decodes every record of one block, or says why the block is damaged. */
function decodeBlock(header: Header, data: Buffer, count: number): unknown[] | string {
  let body = data;
  if (header.codec === 'deflate') {
    try {
      body = inflateRawSync(data, { maxOutputLength: MAX_INFLATED_BLOCK_BYTES });
    } catch (err) {
      return `deflate data damaged (${(err as Error).message})`;
    }
  }
  // Every event record takes at least one byte; a larger count is damage, and
  // refusing it keeps a zero-width writer schema from looping over a huge count.
  if (count > body.length) return `block claims ${count} records in ${body.length} bytes`;
  const values: unknown[] = [];
  let pos = 0;
  for (let i = 0; i < count; i += 1) {
    let res: { value: unknown; offset: number };
    try {
      res = header.type.decode(body, pos);
    } catch (err) {
      return `record ${i} of the block cannot be decoded (${(err as Error).message})`;
    }
    if (res.offset < 0) return `block data ends inside record ${i} of ${count}`;
    values.push(res.value);
    pos = res.offset;
  }
  if (pos !== body.length) return `${body.length - pos} bytes left over after ${count} records`;
  return values;
}

/**
 * Yields the records of a container file, given its bytes as a stream of chunks, one
 * array per block.
 * A damaged header ends the file with one `fatal` piece; a damaged block gives one
 * `corrupt` piece (with the block's declared record count when its framing could be
 * read) and decoding resumes at the next sync marker. A read error of the stream is
 * a `fatal` piece too; this generator never throws.
 */
export async function* readAvroContainer(chunks: AsyncIterable<Buffer>): AsyncGenerator<AvroPiece[]> {
  const iterator = chunks[Symbol.asyncIterator]();
  let buf: Buffer = Buffer.alloc(0);
  let pos = 0;
  let ended = false;

  // Appends chunks until at least `need` more bytes arrived or the stream ended (one
  // concatenation per call, so waiting for a large block is not quadratic); false
  // when nothing could be added.
  async function more(need = 1): Promise<boolean> {
    if (ended) return false;
    const parts: Buffer[] = [buf.subarray(pos)];
    let added = 0;
    while (added < need) {
      const next = await iterator.next();
      if (next.done) {
        ended = true;
        break;
      }
      parts.push(next.value);
      added += next.value.length;
    }
    if (added === 0) return false;
    buf = Buffer.concat(parts);
    pos = 0;
    return true;
  }

  /** Makes at least `rel` bytes from `pos` on available; false at the end of the file. */
  async function ensure(rel: number): Promise<boolean> {
    while (buf.length - pos < rel) if (!(await more(rel - (buf.length - pos)))) return false;
    return true;
  }

  /**
   * Follows block framing from `rel` (bytes after `pos`) over blocks whose sync marker
   * is damaged too, up to the first block whose marker is intact (or the end of the
   * file). Returns the record counts of the damaged blocks passed and where the intact
   * block starts (relative to `pos`), or null when the framing stops making sense —
   * then the damage was not only in markers and the loss cannot be counted.
   */
  async function followChain(rel: number): Promise<{ counts: number[]; next: number } | null> {
    const counts: number[] = [];
    for (let k = 0; k < MAX_CHAIN_BLOCKS; k++) {
      await ensure(rel + 20);
      if (buf.length - pos === rel && ended) return { counts, next: rel };
      const c = readLong(buf, pos + rel);
      const z = c && !Number.isNaN(c.value) ? readLong(buf, c.next) : null;
      if (c === null || z === null || Number.isNaN(c.value) || Number.isNaN(z.value)) return null;
      if (c.value < 0 || z.value < 0 || z.value > MAX_BLOCK_BYTES || (c.value > 0 && z.value === 0)) return null;
      const end = z.next - pos + z.value;
      if (!(await ensure(end + SYNC_BYTES))) return null;
      if (buf.subarray(pos + end, pos + end + SYNC_BYTES).equals(header!.sync)) return { counts, next: rel };
      counts.push(c.value);
      rel = end + SYNC_BYTES;
    }
    return null;
  }

  let header: Header | null = null;
  try {
    while (header === null) {
      // avsc writes nothing at all for zero records: an empty file is an empty log.
      if (ended && buf.length === 0) return;
      const parsed = parseHeader(buf.subarray(pos), ended);
      if (parsed === 'more') {
        await more();
        continue;
      }
      if (typeof parsed === 'string') {
        yield [{ kind: 'fatal', reason: parsed }];
        return;
      }
      header = parsed;
      pos += parsed.end;
    }

    let block = 0;
    for (;;) {
      if (pos >= buf.length && !(await more())) return;
      // Framing: count and size, both varint longs.
      const count = readLong(buf, pos);
      const size = count && !Number.isNaN(count.value) ? readLong(buf, count.next) : count;
      if ((count === null || size === null) && (await more())) continue;
      let reason: string | null = null;
      if (count === null || size === null) reason = 'file ends inside a block header';
      else if (Number.isNaN(count.value) || Number.isNaN(size.value)) reason = 'block header holds an over-long varint';
      else if (count.value < 0 || size.value < 0) reason = `block header holds a negative ${count.value < 0 ? 'count' : 'size'}`;
      else if (size.value > MAX_BLOCK_BYTES) reason = `block size ${size.value} exceeds ${MAX_BLOCK_BYTES} bytes`;
      else if (count.value > 0 && size.value === 0) reason = `block of ${count.value} records has no data`;

      let records: number | null = reason === null && count !== null ? count.value : null;
      // Where the next block starts, when the damage does not hide it.
      let nextAt = -1;
      if (reason === null && count !== null && size !== null) {
        const dataStart = size.next;
        const dataEnd = dataStart + size.value;
        if (buf.length < dataEnd + SYNC_BYTES && (await more(dataEnd + SYNC_BYTES - buf.length))) continue;
        if (buf.length < dataEnd + SYNC_BYTES) {
          // A damaged size can point past the end; a later sync marker, if any, resyncs.
          reason = `file ends inside the block (${buf.length - pos} of ${dataEnd + SYNC_BYTES - pos} bytes)`;
        } else if (!buf.subarray(dataEnd, dataEnd + SYNC_BYTES).equals(header.sync)) {
          reason = 'sync marker after the block does not match the header';
          // The marker itself may be what is damaged: if the blocks framed from here on
          // lead to an intact marker, every block lost on the way is counted exactly
          // and reading resumes at the first intact one; otherwise the count is unknown.
          const chain = await followChain(dataEnd + SYNC_BYTES - pos);
          if (chain === null) records = null;
          else {
            yield [{ kind: 'corrupt', block, records, reason }];
            block += 1;
            for (const n of chain.counts) {
              yield [{ kind: 'corrupt', block, records: n, reason: 'sync marker after the block does not match the header' }];
              block += 1;
            }
            pos += chain.next;
            continue;
          }
        } else {
          nextAt = dataEnd + SYNC_BYTES;
          const decoded = decodeBlock(header, buf.subarray(dataStart, dataEnd), count.value);
          if (typeof decoded === 'string') reason = decoded;
          else {
            const batch: AvroPiece[] = new Array(decoded.length);
            for (let i = 0; i < decoded.length; i += 1) batch[i] = { kind: 'record', block, record: i, value: decoded[i] };
            if (batch.length > 0) yield batch;
            pos = dataEnd + SYNC_BYTES;
            block += 1;
            continue;
          }
        }
      }
      if (records !== null && records > MAX_BLOCK_BYTES) records = null;
      yield [{ kind: 'corrupt', block, records, reason: reason ?? 'damaged block' }];
      block += 1;
      if (nextAt >= 0) {
        // The block's own marker is intact: the next block starts right after it.
        pos = nextAt;
        continue;
      }
      // Resync: the next block starts right after the next sync marker.
      let from = pos + 1;
      for (;;) {
        const at = buf.indexOf(header.sync, from);
        if (at !== -1) {
          pos = at + SYNC_BYTES;
          break;
        }
        // Keep only a possible partial marker at the end, so scanning stays bounded.
        pos = Math.max(pos, buf.length - (SYNC_BYTES - 1));
        from = 0;
        if (!(await more())) return;
      }
    }
  } catch (err) {
    yield [{ kind: 'fatal', reason: `read failed: ${(err as Error).message}` }];
  } finally {
    await iterator.return?.();
  }
}
