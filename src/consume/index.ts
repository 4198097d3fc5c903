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

/**
 * What was read from one input file (for manifests, the summary and its books).
 * Its counts close: `lines = blankLines + events + rejectedLines + lostRecords`.
 */
export interface LogInput {
  readonly file: string;
  /** Size of the file on disk (compressed size for `.jsonl.gz`). */
  readonly bytes: number;
  /** sha256 of the file's bytes on disk, hex. */
  readonly sha256: string;
  /** Lines (JSON Lines, blank ones included) or records (Avro, as far as they could be counted). */
  readonly lines: number;
  /** Blank lines (empty or only whitespace): skipped, not rejected. */
  readonly blankLines: number;
  /** Valid events, by kind. */
  readonly events: number;
  readonly arrivals: number;
  readonly withdraws: number;
  /** Lines or records rejected one by one (each is one reject). */
  readonly rejectedLines: number;
  /** Avro records inside damaged blocks, as their blocks declared them (one reject per block). */
  readonly lostRecords: number;
  /** Rejects that stand for damage rather than for one line: a gzip stream's end, an Avro block or header. */
  readonly damage: number;
  /** Damage whose loss could not be counted (an Avro header, framing that makes no sense). */
  readonly uncountedLoss: boolean;
  /** True when the file was read to its end without damage. */
  readonly complete: boolean;
  /** Guesses at a cause, for the error when no event could be read (gzip data in a .jsonl, the other metric). */
  readonly hints: readonly string[];
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
  const st = { blankLines: 0, events: 0, arrivals: 0, withdraws: 0, rejectedLines: 0, lostRecords: 0, damage: 0, uncountedLoss: false, otherMetric: 0 };
  const hints = new Set<string>();
  const flags = { otherMetric: false };
  const count = (item: LogItem): void => {
    if (item.kind === 'event') {
      st.events++;
      if (item.ev.event.type === 'withdraw') st.withdraws++;
      else st.arrivals++;
    } else st.rejectedLines++;
  };
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
            const item: LogItem = res.ok
              ? { kind: 'event', ev: { event: res.event, pos, seq: seq++ } }
              : { kind: 'reject', reject: { pos, reason: detach(res.reason), raw: detach(cut(renderRecord(piece.value))) } };
            if (!res.ok && res.hint === 'other-metric') st.otherMetric++;
            count(item);
            batch.push(item);
          } else if (piece.kind === 'corrupt') {
            const pos: SourcePosition = { file: path, line: records + 1, block: piece.block, record: 0 };
            const lost = piece.records === null ? 'an unknown number of records' : `${piece.records} records`;
            batch.push({ kind: 'reject', reject: { pos, reason: `Avro block ${piece.block} damaged: ${piece.reason}; ${lost} lost`, raw: '' } });
            st.damage++;
            if (piece.records !== null) {
              records += piece.records;
              st.lostRecords += piece.records;
            } else st.uncountedLoss = true;
          } else {
            batch.push({ kind: 'reject', reject: { pos: { file: path, line: records + 1 }, reason: piece.reason, raw: '' } });
            st.damage++;
            st.uncountedLoss = true;
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
            st.damage++;
            continue;
          }
          lines = piece.line;
          const sniffed = format === 'jsonl' && piece.line === 1 && piece.kind === 'line' ? sniff(piece.bytes) : null;
          const item = lineItem(path, piece, metric, seq, flags, sniffed);
          if (item === null) {
            st.blankLines++;
            continue;
          }
          if (sniffed !== null && item.kind === 'reject') hints.add(sniffed);
          if (item.kind === 'event') seq += 1;
          else if (flags.otherMetric) st.otherMetric++;
          count(item);
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
    if (st.otherMetric > 0 && st.arrivals === 0) {
      hints.add(`${st.otherMetric} arrivals carry the coordinates of the other metric: set "metric": "${metric === 'haversine' ? 'euclidean' : 'haversine'}" in the --config file`);
    }
    const { otherMetric: _o, ...counts } = st;
    done({ file: path, bytes, sha256: hash.digest('hex'), lines, ...counts, complete: st.damage === 0, hints: [...hints] });
  } finally {
    source.destroy();
  }
}

/**
 * What the first line of a `.jsonl` says about the whole file when it is not text:
 * gzip or Avro bytes under the wrong name are the common mistake.
 */
function sniff(bytes: Buffer): string | null {
  if (bytes.length >= 2 && bytes[0] === 0x1f && bytes[1] === 0x8b) return 'the file looks like gzip data: name it .jsonl.gz';
  if (bytes.length >= 4 && bytes.subarray(0, 4).equals(Buffer.from('Obj\x01', 'latin1'))) return 'the file looks like an Avro container: name it .avro';
  return null;
}

/**
 * A copy of a string that shares no memory with the string it was cut from. V8 keeps
 * a slice (and an error message quoting input) pointing into its parent, so 2 kB of
 * a 900 kB rejected line kept the whole line alive until the end of the run.
 */
function detach(text: string): string {
  return Buffer.from(text, 'utf8').toString('utf8');
}

/**
 * The item of one JSON line: an event, a reject, or null for a blank line. `flags`
 * says whether a reject is an arrival carrying the other metric's coordinates; `hint`
 * is added to a reject's reason.
 */
function lineItem(path: string, piece: LinePiece & { kind: 'line' | 'long' }, metric: Metric, seq: number, flags: { otherMetric: boolean }, hint: string | null = null): LogItem | null {
  const pos: SourcePosition = { file: path, line: piece.line };
  flags.otherMetric = false;
  const reject = (reason: string, raw: string): LogItem =>
    ({ kind: 'reject', reject: { pos, reason: detach(hint === null ? reason : `${reason} (${hint})`), raw: detach(cut(raw)) } });
  if (piece.kind === 'long') {
    return reject(`line of ${piece.length} bytes exceeds the 1 MiB limit`, piece.head.toString('utf8'));
  }
  let text: string;
  try {
    text = utf8.decode(piece.bytes);
  } catch {
    return reject('line is not valid UTF-8', piece.bytes.subarray(0, RAW_CHARS * 4).toString('utf8'));
  }
  if (text.trim() === '') return null;
  let value: unknown;
  try {
    value = JSON.parse(text);
  } catch (err) {
    return reject(`bad JSON: ${reasonText((err as Error).message)}`, text);
  }
  // JSON.parse keeps the last of repeated keys; a line with more key marks than keys is checked exactly.
  if (value !== null && typeof value === 'object' && !Array.isArray(value) && keyMarks(text) > Object.keys(value).length) {
    const repeated = findDuplicateKey(text);
    if (repeated !== null) return reject(`bad JSON: key '${reasonText(repeated.key)}' appears twice in one object`, text);
  }
  const res = validateEvent(value, metric);
  if (res.ok) return { kind: 'event', ev: { event: res.event, pos, seq } };
  flags.otherMetric = res.hint === 'other-metric';
  return reject(res.reason, text);
}

/** A limit on rejects (`--max-rejects`): a count, or a share of the lines and records read. */
export type RejectLimit = { readonly count: number } | { readonly share: number };

/** Options of {@link loadLog}. */
export interface LoadLogOptions {
  /** Which coordinates an arrival must carry (SPEC §2). */
  readonly metric: Metric;
  /** Throw `PAIRFLOW_ERR_INPUT_REJECT` at the first reject instead of collecting it. @default false */
  readonly strict?: boolean;
  /** Called for every reject as it is found, in input order (e.g. to stream a rejects file). */
  readonly onReject?: (r: Reject) => void;
  /**
   * Keep every reject in the returned `rejects`. Off, rejects only go to `onReject`
   * and are counted, so a log of a million bad lines takes no memory for them.
   * @default true
   */
  readonly keepRejects?: boolean;
  /** Where `onReject` writes, when it buffers: awaited after a batch that raised its pressure. */
  readonly backpressure?: { readonly pressure: boolean; drain(): Promise<void> };
  /**
   * Stop with `PAIRFLOW_ERR_INPUT_TOO_MANY_REJECTS` at the reject that exceeds a count;
   * a share is checked by {@link checkLoadedLog} once every file is read. @default none
   */
  readonly maxRejects?: RejectLimit;
}

/** What {@link loadLog} returns. */
export interface LoadedLog {
  /** Valid events sorted by `t`, ties in input order. */
  readonly events: SourcedEvent[];
  /** Rejects in input order (empty with `keepRejects: false`). */
  readonly rejects: Reject[];
  /** Rejects found, kept or not. */
  readonly rejectCount: number;
  /** The first reject, kept or not (for messages). */
  readonly firstReject: Reject | null;
  /** Per file, in the order given: bytes, checksum and what was read (see {@link LogInput}). */
  readonly inputs: LogInput[];
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
export async function loadLog(paths: string[], opts: LoadLogOptions): Promise<LoadedLog> {
  for (const path of paths) logFormatOf(path);
  for (const path of paths) await assertReadableFile(path);
  const events: SourcedEvent[] = [];
  const rejects: Reject[] = [];
  const inputs: LogInput[] = [];
  const keep = opts.keepRejects ?? true;
  const maxCount = opts.maxRejects && 'count' in opts.maxRejects ? opts.maxRejects.count : Infinity;
  let rejectCount = 0;
  let firstReject: Reject | null = null;
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
          const r = item.reject;
          if (opts.strict) {
            throw pairflowError('PAIRFLOW_ERR_INPUT_REJECT', {
              file: r.pos.file,
              line: r.pos.line,
              detail: `${r.pos.block === undefined ? '' : `${describePosition(r.pos)}: `}${r.reason}`,
            });
          }
          rejectCount += 1;
          firstReject ??= r;
          if (keep) rejects.push(r);
          opts.onReject?.(r);
          if (rejectCount > maxCount) {
            throw pairflowError('PAIRFLOW_ERR_INPUT_TOO_MANY_REJECTS', {
              detail: `${rejectCount} lines or records rejected, more than --max-rejects ${maxCount} allows; the last at ${r.pos.file}:${r.pos.line}: ${r.reason}`,
            });
          }
        }
      }
      if (opts.backpressure?.pressure) await opts.backpressure.drain();
    }
    if (reader.input) inputs.push(reader.input);
  }
  // seq grows with input order, so (t, seq) is the stable order; most logs are
  // already sorted and skip the sort.
  if (!sorted) events.sort((a, b) => a.event.t - b.event.t || a.seq - b.seq);
  return { events, rejects, rejectCount, firstReject, inputs };
}

/**
 * How much of a file was read, in words, for messages and the human summary:
 * `day.jsonl: 1,204 lines (3 blank), 1,190 events, 11 rejected`.
 */
export function describeInput(i: Pick<LogInput, 'file' | 'lines' | 'blankLines' | 'events' | 'rejectedLines' | 'lostRecords' | 'complete'>): string {
  const n = (v: number): string => v.toLocaleString('en-US');
  const unit = i.file.toLowerCase().endsWith('.avro') ? 'records' : 'lines';
  const parts = [`${n(i.events)} events`];
  if (i.rejectedLines > 0) parts.push(`${n(i.rejectedLines)} rejected`);
  if (i.lostRecords > 0) parts.push(`${n(i.lostRecords)} lost in damaged blocks`);
  const text = `${i.file}: ${n(i.lines)} ${unit}${i.blankLines > 0 ? ` (${n(i.blankLines)} blank)` : ''}, ${parts.join(', ')}`;
  return i.complete ? text : `${text}; damaged, read up to the damage (see the rejects)`;
}

/**
 * Checks a loaded log against SPEC §6: a log from which no valid event could be read
 * (empty, every line rejected, undecodable) — or no arrival, only withdraws, which
 * leave nothing to match — is `PAIRFLOW_ERR_INPUT_NO_EVENTS`, saying
 * what each file held and any guess at the cause; more rejects than `maxRejects`
 * allows (as a share of the lines and records read, blank lines aside) is
 * `PAIRFLOW_ERR_INPUT_TOO_MANY_REJECTS`. Call it before the work starts.
 * @example checkLoadedLog(await loadLog(paths, { metric }), { share: 0.01 })
 */
export function checkLoadedLog(loaded: LoadedLog, maxRejects?: RejectLimit): void {
  const arrivals = loaded.inputs.reduce((a, i) => a + i.arrivals, 0);
  if (arrivals === 0) {
    const hints = [...new Set(loaded.inputs.flatMap((i) => i.hints))];
    const first = loaded.firstReject;
    const what = loaded.events.length === 0 ? 'no valid event could be read' : `no valid supply or demand event could be read, only ${loaded.events.length} withdraws`;
    throw pairflowError('PAIRFLOW_ERR_INPUT_NO_EVENTS', {
      detail: `${what} (${loaded.inputs.map(describeInput).join('; ')})` +
        (hints.length > 0 ? `; hint: ${hints.join('; ')}` : '') +
        (hints.length === 0 && first ? `; the first reject: ${first.pos.file}:${first.pos.line}: ${first.reason}` : ''),
    });
  }
  if (maxRejects && 'share' in maxRejects) {
    const read = loaded.inputs.reduce((a, i) => a + i.lines - i.blankLines, 0);
    const share = read > 0 ? loaded.rejectCount / read : 0;
    if (share > maxRejects.share) {
      throw pairflowError('PAIRFLOW_ERR_INPUT_TOO_MANY_REJECTS', {
        detail: `${loaded.rejectCount} of ${read} lines or records rejected (${(share * 100).toFixed(2)} %), more than --max-rejects ${+(maxRejects.share * 100).toFixed(6)}%`,
      });
    }
  }
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
