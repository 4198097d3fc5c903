/**
 * Splits a byte stream into lines with bounded memory: a line longer than the limit
 * is not kept whole (only its head, for the reject), so one runaway line cannot make
 * a reader hold a 100 MB string.
 */

/** One piece of a split stream. `line` is 1-based. */
export type LinePiece =
  | { readonly kind: 'line'; readonly line: number; readonly bytes: Buffer }
  | { readonly kind: 'long'; readonly line: number; readonly head: Buffer; readonly length: number }
  | { readonly kind: 'error'; readonly line: number; readonly error: unknown };

/** Longest line kept whole, in bytes. @default 1 MiB */
export const MAX_LINE_BYTES = 1 << 20;

/** Bytes of an over-long line kept for its reject. */
const HEAD_BYTES = 2048;

/**
 * Yields the lines of `chunks`, split at `\n` (a trailing `\r` is dropped, so CRLF
 * files read the same), in batches: one array per input chunk, because one await
 * per line would cost more than parsing it. A last line without a newline is still
 * a line. If the stream fails (a truncated gzip member, a read error), the bytes
 * received before the failure are yielded as a line and then one `error` piece
 * follows; it never throws.
 */
export async function* splitLines(chunks: AsyncIterable<Buffer>, maxBytes: number = MAX_LINE_BYTES): AsyncGenerator<LinePiece[]> {
  let parts: Buffer[] = [];
  let partBytes = 0;
  let overlong = false;
  let head: Buffer = Buffer.alloc(0);
  let line = 0;

  function take(tail: Buffer): LinePiece {
    line += 1;
    if (overlong) {
      const piece: LinePiece = { kind: 'long', line, head, length: partBytes + tail.length };
      overlong = false;
      head = Buffer.alloc(0);
      parts = [];
      partBytes = 0;
      return piece;
    }
    let bytes = parts.length === 0 ? tail : Buffer.concat([...parts, tail]);
    parts = [];
    partBytes = 0;
    if (bytes.length > 0 && bytes[bytes.length - 1] === 0x0d) bytes = bytes.subarray(0, bytes.length - 1);
    return { kind: 'line', line, bytes };
  }

  function keep(piece: Buffer): void {
    if (piece.length === 0) return;
    if (overlong) {
      if (head.length < HEAD_BYTES) head = Buffer.concat([head, piece.subarray(0, HEAD_BYTES - head.length)]);
      partBytes += piece.length;
      return;
    }
    parts.push(piece);
    partBytes += piece.length;
    if (partBytes > maxBytes) {
      head = Buffer.concat(parts).subarray(0, HEAD_BYTES);
      overlong = true;
      parts = [];
    }
  }

  try {
    for await (const chunk of chunks) {
      const batch: LinePiece[] = [];
      let start = 0;
      let nl = chunk.indexOf(0x0a, start);
      while (nl !== -1) {
        if (overlong) {
          keep(chunk.subarray(start, nl));
          batch.push(take(Buffer.alloc(0)));
        } else if (partBytes + (nl - start) > maxBytes) {
          keep(chunk.subarray(start, nl));
          batch.push(take(Buffer.alloc(0)));
        } else {
          batch.push(take(chunk.subarray(start, nl)));
        }
        start = nl + 1;
        nl = chunk.indexOf(0x0a, start);
      }
      // Copy the unfinished tail so the stream's chunk can be freed.
      if (start < chunk.length) keep(Buffer.from(chunk.subarray(start)));
      if (batch.length > 0) yield batch;
    }
  } catch (error) {
    const last: LinePiece[] = partBytes > 0 || overlong ? [take(Buffer.alloc(0))] : [];
    last.push({ kind: 'error', line: line + 1, error });
    yield last;
    return;
  }
  if (partBytes > 0 || overlong) yield [take(Buffer.alloc(0))];
}
