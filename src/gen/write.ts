/**
 * Writes a stream of events to a log file (`.jsonl`, `.jsonl.gz`, `.avro`) with
 * bounded memory and byte-identical output for identical input on the same Node.js
 * build: JSON lines in a fixed field order, gzip without a timestamp, Avro with a
 * sync marker derived from the caller's seed instead of a random one. Compressed
 * bytes (gzip, Avro deflate) can differ between zlib builds, so every write also
 * reports `eventsSha256`, a checksum of the events themselves.
 */
import { createHash } from 'node:crypto';
import { createReadStream, createWriteStream } from 'node:fs';
import { rename, rm } from 'node:fs/promises';
import { Readable } from 'node:stream';
import { pipeline } from 'node:stream/promises';
import { createGzip } from 'node:zlib';
import avro from 'avsc';
import { EVENT_SCHEMA, toEventRecord, toJsonLine } from '../consume/schema.js';
import { pairflowError } from '../errors.js';
import type { PairflowEvent } from '../model.js';

export type LogWriteFormat = 'jsonl' | 'jsonl.gz' | 'avro';

/** What was written, for the manifest and the command's summary. */
export interface WrittenLog {
  readonly file: string;
  readonly format: LogWriteFormat;
  readonly bytes: number;
  readonly sha256: string;
  /**
   * sha256 of the events as canonical JSON Lines ({@link toJsonLine} + `\n`), whatever
   * the format: compressed bytes may differ between zlib builds, the events may not.
   */
  readonly eventsSha256: string;
  readonly events: number;
  readonly counts: { supply: number; demand: number; withdrawSupply: number; withdrawDemand: number };
  readonly markets: string[];
  /** Earliest and latest event time, ms (null when no event). */
  readonly firstT: number | null;
  readonly lastT: number | null;
}

/** Options of {@link writeEventLog}. */
export interface WriteLogOptions {
  /** 16 bytes for the Avro sync marker (`avro` only); same marker → same file. */
  readonly syncMarker?: Uint8Array;
  /** Records per Avro block are bounded by this many bytes before compression. @default 65536 */
  readonly avroBlockBytes?: number;
  /** gzip level for `.jsonl.gz`. @default 9 */
  readonly gzipLevel?: number;
}

/** Where the JSON text of many lines is cut into one write. */
const CHUNK_CHARS = 1 << 18;

/** sha256 and size of a file, streamed. */
export async function hashFile(path: string): Promise<{ sha256: string; bytes: number }> {
  const hash = createHash('sha256');
  let bytes = 0;
  for await (const chunk of createReadStream(path)) {
    hash.update(chunk as Buffer);
    bytes += (chunk as Buffer).length;
  }
  return { sha256: hash.digest('hex'), bytes };
}

/**
 * Writes `events` to `path` in `format`; the file appears whole or not at all (it is
 * written beside the target and renamed). Throws `PAIRFLOW_ERR_OUTPUT_WRITE` on an
 * I/O failure.
 */
export async function writeEventLog(path: string, format: LogWriteFormat, events: Iterable<PairflowEvent>, opts: WriteLogOptions = {}): Promise<WrittenLog> {
  const counts = { supply: 0, demand: 0, withdrawSupply: 0, withdrawDemand: 0 };
  const markets = new Set<string>();
  let n = 0;
  let firstT: number | null = null;
  let lastT: number | null = null;
  const eventsHash = createHash('sha256');
  // Each event with its canonical line, counted and hashed on the way through.
  function* counted(): Generator<[PairflowEvent, string]> {
    for (const ev of events) {
      n += 1;
      const line = `${toJsonLine(ev)}\n`;
      eventsHash.update(line);
      if (ev.type === 'withdraw') {
        if (ev.side === 'supply') counts.withdrawSupply += 1;
        else counts.withdrawDemand += 1;
      } else counts[ev.type] += 1;
      markets.add(ev.market);
      firstT = firstT === null ? ev.t : Math.min(firstT, ev.t);
      lastT = lastT === null ? ev.t : Math.max(lastT, ev.t);
      yield [ev, line];
    }
  }
  function* jsonChunks(): Generator<string> {
    let buf = '';
    for (const [, line] of counted()) {
      buf += line;
      if (buf.length >= CHUNK_CHARS) {
        yield buf;
        buf = '';
      }
    }
    if (buf.length > 0) yield buf;
  }
  function* records(): Generator<unknown> {
    for (const [ev] of counted()) yield toEventRecord(ev);
  }

  const tmp = `${path}.tmp-${process.pid}`;
  try {
    if (format === 'avro') {
      const encoder = new avro.streams.BlockEncoder(EVENT_SCHEMA as unknown as avro.Schema, {
        codec: 'deflate',
        blockSize: opts.avroBlockBytes ?? 65_536,
        ...(opts.syncMarker ? { syncMarker: Buffer.from(opts.syncMarker) } : {}),
      });
      await pipeline(Readable.from(records()), encoder, createWriteStream(tmp));
    } else if (format === 'jsonl.gz') {
      await pipeline(Readable.from(jsonChunks()), createGzip({ level: opts.gzipLevel ?? 9 }), createWriteStream(tmp));
    } else {
      await pipeline(Readable.from(jsonChunks()), createWriteStream(tmp));
    }
    await rename(tmp, path);
  } catch (err) {
    await rm(tmp, { force: true }).catch(() => undefined);
    throw pairflowError('PAIRFLOW_ERR_OUTPUT_WRITE', { file: path, detail: (err as Error).message }, err);
  }
  const { sha256, bytes } = await hashFile(path);
  return { file: path, format, bytes, sha256, eventsSha256: eventsHash.digest('hex'), events: n, counts, markets: [...markets].sort(), firstT, lastT };
}
