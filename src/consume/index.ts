/**
 * Log sources: JSON Lines (`.jsonl`), gzip-compressed JSON Lines (`.jsonl.gz`) and
 * Avro object container files (`.avro`), read as streams with bounded memory.
 * Every line or record ends as an event or a reject (SPEC §1: nothing is lost).
 */
import { createHash } from 'node:crypto';
import { createReadStream } from 'node:fs';
import { access, constants, stat } from 'node:fs/promises';
import { pairflowError } from '../errors.js';
import type { Metric, Reject, SourcedEvent, SourcePosition } from '../model.js';
import { readAvroContainer } from './avro.js';
import { GzipDamage, gunzipChunks } from './gzip.js';
import { findDuplicateKey, keyMarks, printable } from './json-text.js';
import { splitLines, type LinePiece } from './lines.js';
import { shortValue, validateEvent } from './validate.js';

export { validateEvent, parseRfc3339 } from './validate.js';
export { EVENT_SCHEMA, toEventRecord, toJsonLine, type EventRecord } from './schema.js';

/** One item of a log file, in file order. */
export type LogItem = { kind: 'event'; ev: SourcedEvent } | { kind: 'reject'; reject: Reject };

/** What was read from one input file (for manifests and run reports). */
export interface LogInput {
  readonly file: string;
  /** Size of the file on disk (compressed size for `.jsonl.gz`). */
  readonly bytes: number;
  /** sha256 of the file's bytes on disk, hex. */
  readonly sha256: string;
  /** Lines (JSON Lines, blank ones included) or records (Avro, as far as they could be counted). */
  readonly lines: number;
}

/** The formats pairflow reads, chosen by file extension. */
export type LogFormat = 'jsonl' | 'jsonl.gz' | 'avro';

/** Options of {@link readLogFile}. */
export interface ReadLogOptions {
  /** Which coordinates an arrival must carry (SPEC §2). */
  readonly metric: Metric;
  /** `seq` of the first event of this file. @default 0 */
  readonly seqStart?: number;
}

/** A log file being read: iterate it once; `input` is set when iteration has finished. */
export interface LogFileReader extends AsyncIterable<LogItem> {
  readonly input: LogInput | null;
}

/** Longest `raw` text kept in a reject (SPEC: cut to 2 kB). */
const RAW_CHARS = 2048;

/**
 * The format of a log file from its extension (case-insensitive), or an input error
 * naming the accepted ones.
 * @example logFormatOf('day.jsonl.gz') // 'jsonl.gz'
 */
export function logFormatOf(path: string): LogFormat {
  const lower = path.toLowerCase();
  if (lower.endsWith('.jsonl.gz')) return 'jsonl.gz';
  if (lower.endsWith('.jsonl')) return 'jsonl';
  if (lower.endsWith('.avro')) return 'avro';
  throw pairflowError('PAIRFLOW_ERR_INPUT_UNSUPPORTED', {
    file: path,
    detail: 'unknown log file extension (expected .jsonl, .jsonl.gz or .avro)',
  });
}

/**
 * A missing path is `PAIRFLOW_ERR_INPUT_NOT_FOUND`; one that exists but is not a
 * readable regular file (a directory, a socket, no permission) is
 * `PAIRFLOW_ERR_INPUT_UNREADABLE` saying which.
 */
async function assertReadableFile(path: string): Promise<void> {
  let st;
  try {
    st = await stat(path);
    await access(path, constants.R_OK);
  } catch (err) {
    const code = (err as NodeJS.ErrnoException).code;
    if (code === 'ENOENT' || code === 'ENOTDIR') throw pairflowError('PAIRFLOW_ERR_INPUT_NOT_FOUND', { file: path }, err);
    throw pairflowError('PAIRFLOW_ERR_INPUT_UNREADABLE', { file: path, detail: code === 'EACCES' || code === 'EPERM' ? 'cannot be read (permission denied)' : `cannot be read (${code ?? String(err)})` }, err);
  }
  if (!st.isFile()) {
    throw pairflowError('PAIRFLOW_ERR_INPUT_UNREADABLE', { file: path, detail: st.isDirectory() ? 'is a directory, not a log file' : 'is not a regular file' });
  }
}

function cut(text: string): string {
  return text.length > RAW_CHARS ? text.slice(0, RAW_CHARS) : text;
}

/** Longest piece of input text quoted inside a reason. */
const REASON_CHARS = 200;

/** Input text quoted in a reason: control characters escaped, cut to {@link REASON_CHARS}. */
function reasonText(text: string): string {
  return printable(text.length > REASON_CHARS ? `${text.slice(0, REASON_CHARS - 1)}…` : text);
}

// A JSON rendering of a decoded Avro record that keeps NaN and Infinity visible.
function renderRecord(value: unknown): string {
  try {
    return JSON.stringify(value, (_k, v: unknown) =>
      typeof v === 'number' && !Number.isFinite(v) ? String(v) : typeof v === 'bigint' ? String(v) : v,
    ) ?? String(value);
  } catch {
    return String(value);
  }
}

const utf8 = new TextDecoder('utf-8', { fatal: true });

/**
 * Streams one log file (`.jsonl`, `.jsonl.gz` or `.avro`, by extension) as events and
 * rejects in file order, with bounded memory. Line numbers are 1-based and count
 * blank lines, which are skipped; a truncated or damaged gzip stream ends with a
 * reject after the lines read before the damage. For Avro, `pos.line` is the 1-based
 * record number and `pos.block`/`pos.record` the 0-based block and index in it; a
 * damaged block is one reject and later blocks still decode. `seq` numbers events
 * (not rejects) from `seqStart`.
 *
 * A missing file throws `PAIRFLOW_ERR_INPUT_NOT_FOUND`, an unknown extension
 * `PAIRFLOW_ERR_INPUT_UNSUPPORTED` (both on the first `next()`); bad content never throws.
 * @example for await (const item of readLogFile('day.jsonl.gz', { metric: 'haversine' })) { … }
 */
export function readLogFile(path: string, opts: ReadLogOptions): LogFileReader {
  const batches = readLogBatches(path, opts);
  return {
    get input() {
      return batches.input;
    },
    async *[Symbol.asyncIterator]() {
      for await (const batch of batches) yield* batch;
    },
  };
}

/** A log file read in batches (one per chunk or Avro block); `input` is set at the end. */
export interface LogBatchReader extends AsyncIterable<LogItem[]> {
  readonly input: LogInput | null;
}

/**
 * {@link readLogFile} in batches of items, in file order: for consumers that handle
 * many items per await (one await per line would cost more than parsing the line).
 */
export function readLogBatches(path: string, opts: ReadLogOptions): LogBatchReader {
  const reader = {
    input: null as LogInput | null,
    [Symbol.asyncIterator]: () => iterate(path, opts, (input) => {
      reader.input = input;
    }),
  };
  return reader;
}

async function* iterate(path: string, opts: ReadLogOptions, done: (input: LogInput) => void): AsyncGenerator<LogItem[]> {
  const format = logFormatOf(path);
  await assertReadableFile(path);
  let seq = opts.seqStart ?? 0;
  const metric = opts.metric;
  const hash = createHash('sha256');
  let bytes = 0;
  const source = createReadStream(path, { highWaterMark: 1 << 16 });
  const raw = source[Symbol.asyncIterator]() as AsyncIterator<Buffer>;
  // Every chunk is hashed on its way to the reader. A reader may stop early (damage);
  // its return() is then a no-op and the rest of the file is hashed below, so the
  // manifest's checksum stays whole.
  const hashed: AsyncIterator<Buffer> = {
    async next() {
      const r = await raw.next();
      if (!r.done) {
        hash.update(r.value);
        bytes += r.value.length;
      }
      return r;
    },
    async return() {
      return { done: true, value: undefined };
    },
  };
  const chunks: AsyncIterable<Buffer> = { [Symbol.asyncIterator]: () => hashed };
  const body: AsyncIterable<Buffer> = format === 'jsonl.gz' ? gunzipChunks(chunks) : chunks;
  let lines = 0;
  try {
    if (format === 'avro') {
      let records = 0;
      for await (const pieces of readAvroContainer(body)) {
        const batch: LogItem[] = [];
        for (const piece of pieces) {
          if (piece.kind === 'record') {
            records += 1;
            const pos: SourcePosition = { file: path, line: records, block: piece.block, record: piece.record };
            const res = validateEvent(piece.value, metric);
            if (res.ok) batch.push({ kind: 'event', ev: { event: res.event, pos, seq: seq++ } });
            else batch.push({ kind: 'reject', reject: { pos, reason: res.reason, raw: cut(renderRecord(piece.value)) } });
          } else if (piece.kind === 'corrupt') {
            const pos: SourcePosition = { file: path, line: records + 1, block: piece.block, record: 0 };
            const lost = piece.records === null ? 'an unknown number of records' : `${piece.records} records`;
            batch.push({ kind: 'reject', reject: { pos, reason: `Avro block ${piece.block} damaged: ${piece.reason}; ${lost} lost`, raw: '' } });
            if (piece.records !== null) records += piece.records;
          } else {
            batch.push({ kind: 'reject', reject: { pos: { file: path, line: records + 1 }, reason: piece.reason, raw: '' } });
          }
        }
        if (batch.length > 0) yield batch;
      }
      lines = records;
    } else {
      for await (const pieces of splitLines(body)) {
        const batch: LogItem[] = [];
        for (const piece of pieces) {
          if (piece.kind === 'error') {
            const err = piece.error;
            const message = err instanceof Error ? err.message : String(err);
            const reason = err instanceof GzipDamage
              ? err.dataIntact ? `gzip: ${message}` : `gzip stream truncated or damaged: ${message}; nothing after this point was read`
              : `read failed (${message}); nothing after this point was read`;
            batch.push({ kind: 'reject', reject: { pos: { file: path, line: piece.line }, reason: printable(reason), raw: '' } });
            continue;
          }
          lines = piece.line;
          const item = lineItem(path, piece, metric, seq);
          if (item === null) continue;
          if (item.kind === 'event') seq += 1;
          batch.push(item);
        }
        if (batch.length > 0) yield batch;
      }
    }
    try {
      for (let r = await hashed.next(); !r.done; r = await hashed.next());
    } catch {
      // A read error was reported where it happened; the checksum covers what could be read.
    }
    done({ file: path, bytes, sha256: hash.digest('hex'), lines });
  } finally {
    source.destroy();
  }
}

/** The item of one JSON line: an event, a reject, or null for a blank line. */
function lineItem(path: string, piece: LinePiece & { kind: 'line' | 'long' }, metric: Metric, seq: number): LogItem | null {
  const pos: SourcePosition = { file: path, line: piece.line };
  if (piece.kind === 'long') {
    return { kind: 'reject', reject: { pos, reason: `line of ${piece.length} bytes exceeds the 1 MiB limit`, raw: cut(piece.head.toString('utf8')) } };
  }
  let text: string;
  try {
    text = utf8.decode(piece.bytes);
  } catch {
    return { kind: 'reject', reject: { pos, reason: 'line is not valid UTF-8', raw: cut(piece.bytes.toString('utf8')) } };
  }
  if (text.trim() === '') return null;
  let value: unknown;
  try {
    value = JSON.parse(text);
  } catch (err) {
    return { kind: 'reject', reject: { pos, reason: `bad JSON: ${reasonText((err as Error).message)}`, raw: cut(text) } };
  }
  // JSON.parse keeps the last of repeated keys; a line with more key marks than keys is checked exactly.
  if (value !== null && typeof value === 'object' && !Array.isArray(value) && keyMarks(text) > Object.keys(value).length) {
    const repeated = findDuplicateKey(text);
    if (repeated !== null) {
      return { kind: 'reject', reject: { pos, reason: `bad JSON: key '${reasonText(repeated.key)}' appears twice in one object`, raw: cut(text) } };
    }
  }
  const res = validateEvent(value, metric);
  if (res.ok) return { kind: 'event', ev: { event: res.event, pos, seq } };
  return { kind: 'reject', reject: { pos, reason: res.reason, raw: cut(text) } };
}

/** Options of {@link loadLog}. */
export interface LoadLogOptions {
  /** Which coordinates an arrival must carry (SPEC §2). */
  readonly metric: Metric;
  /** Throw `PAIRFLOW_ERR_INPUT_REJECT` at the first reject instead of collecting it. @default false */
  readonly strict?: boolean;
  /** Called for every reject as it is found, in input order (e.g. to stream a rejects file). */
  readonly onReject?: (r: Reject) => void;
}

/** Where a reject is, in the words of an error message: `line 7` or `record 12 (block 0, record 11)`. */
export function describePosition(pos: SourcePosition): string {
  if (pos.block === undefined) return `line ${pos.line}`;
  return `record ${pos.line} (block ${pos.block}, record ${pos.record ?? 0})`;
}

/**
 * Reads several log files. Events come back sorted by `t`, ties in input order (file
 * order, then `seq`); rejects in input order. Every path is checked before any is
 * read, so a missing second file fails fast. With `strict`, the first reject throws
 * `PAIRFLOW_ERR_INPUT_REJECT` naming the file, line and reason.
 * @example const { events, rejects } = await loadLog(['a.jsonl', 'b.avro'], { metric: 'haversine' })
 */
export async function loadLog(paths: string[], opts: LoadLogOptions): Promise<{ events: SourcedEvent[]; rejects: Reject[]; inputs: LogInput[] }> {
  for (const path of paths) logFormatOf(path);
  for (const path of paths) await assertReadableFile(path);
  const events: SourcedEvent[] = [];
  const rejects: Reject[] = [];
  const inputs: LogInput[] = [];
  let sorted = true;
  let lastT = -Infinity;
  for (const path of paths) {
    const reader = readLogBatches(path, { metric: opts.metric, seqStart: events.length });
    for await (const batch of reader) {
      for (const item of batch) {
        if (item.kind === 'event') {
          if (item.ev.event.t < lastT) sorted = false;
          lastT = item.ev.event.t;
          events.push(item.ev);
        } else {
          if (opts.strict) {
            const r = item.reject;
            throw pairflowError('PAIRFLOW_ERR_INPUT_REJECT', {
              file: r.pos.file,
              line: r.pos.line,
              detail: `${r.pos.block === undefined ? '' : `${describePosition(r.pos)}: `}${r.reason}`,
            });
          }
          rejects.push(item.reject);
          opts.onReject?.(item.reject);
        }
      }
    }
    if (reader.input) inputs.push(reader.input);
  }
  // seq grows with input order, so (t, seq) is the stable order; most logs are
  // already sorted and skip the sort.
  if (!sorted) events.sort((a, b) => a.event.t - b.event.t || a.seq - b.seq);
  return { events, rejects, inputs };
}

/**
 * Renders a reject as one line of a rejects file (JSON Lines, see docs/events.md):
 * `{"file","line","block"?,"record"?,"reason","raw"}`, without the newline.
 */
export function formatReject(r: Reject): string {
  const out: Record<string, unknown> = { file: r.pos.file, line: r.pos.line };
  if (r.pos.block !== undefined) out.block = r.pos.block;
  if (r.pos.record !== undefined) out.record = r.pos.record;
  out.reason = r.reason;
  out.raw = r.raw;
  return JSON.stringify(out);
}

/** A short rendering of a value for messages, as used in reject reasons. */
export { shortValue };
