/**
 * `pairflow gen`: writes a deterministic synthetic scenario of the invented city of
 * src/gen/city.ts as a log file (the generator itself is pure, in
 * src/gen/gen.ts). Invented data, for demos and benchmarks only.
 */
import { readFile, writeFile } from 'node:fs/promises';
import { basename, dirname, relative } from 'node:path';
import type { Command } from 'commander';
import { logFormatOf, toJsonLine } from '../../consume/index.js';
import { parseRfc3339 } from '../../consume/validate.js';
import { pairflowError } from '../../errors.js';
import type { PairflowEvent } from '../../model.js';
import { CITY_NAME } from '../../gen/city.js';
import { writeEventLog, type LogWriteFormat, type WrittenLog } from '../../gen/write.js';
import { generateEvents, GEN_DEFAULTS, resolveGenOptions, syncMarkerFor, type GenOptions } from '../../gen/gen.js';
import { packageVersion } from '../main.js';
import { parseNumber } from '../parse.js';
import { writeOut } from '../stdout.js';

interface RawGenOptions {
  out?: string;
  days: string;
  seed: string;
  format?: string;
  start?: string;
  scale: string;
  markets: string;
  shuffle: boolean;
  coords: string;
  manifest?: string;
  json: boolean;
}

function wholeNumber(text: string, option: string, min: number): number {
  const v = parseNumber(text, option);
  if (!Number.isInteger(v) || v < min) {
    throw pairflowError('PAIRFLOW_ERR_CLI_OPTION', { option, detail: `'${text}' is not a whole number >= ${min}` });
  }
  return v;
}

/** `--start`: a date `YYYY-MM-DD` (00:00 UTC) or an RFC 3339 date-time. */
export function parseStart(text: string): number {
  const ms = parseRfc3339(/^\d{4}-\d{2}-\d{2}$/.test(text) ? `${text}T00:00:00Z` : text);
  if (ms === null) {
    throw pairflowError('PAIRFLOW_ERR_CLI_OPTION', { option: '--start', detail: `'${text}' is not a date (expected e.g. 2026-03-02 or 2026-03-02T00:00:00Z)` });
  }
  return ms;
}

/** The output format from `--format` and the file extension; a mismatch is a usage error. */
export function outputFormat(out: string | undefined, format: string | undefined): LogWriteFormat {
  if (format !== undefined && format !== 'jsonl' && format !== 'avro') {
    throw pairflowError('PAIRFLOW_ERR_CLI_OPTION', { option: '--format', detail: `'${format}' is not a format (expected jsonl or avro)` });
  }
  if (out === undefined) {
    if (format === 'avro') throw pairflowError('PAIRFLOW_ERR_CLI_USAGE', { detail: '--format avro needs --out FILE.avro (Avro is not written to stdout)' });
    return 'jsonl';
  }
  let byExt: LogWriteFormat;
  try {
    byExt = logFormatOf(out);
  } catch {
    throw pairflowError('PAIRFLOW_ERR_CLI_OPTION', { option: '--out', detail: `'${out}' must end in .jsonl, .jsonl.gz or .avro` });
  }
  if (format !== undefined && (format === 'avro') !== (byExt === 'avro')) {
    throw pairflowError('PAIRFLOW_ERR_CLI_OPTION', { option: '--format', detail: `--format ${format} does not fit the extension of '${out}'` });
  }
  return byExt;
}

/** The canonical command line that reproduces a file (recorded in the manifest). */
export function commandLine(opts: GenOptions, out: string): string {
  const parts = ['pairflow gen', `--days ${opts.days}`, `--seed ${opts.seed}`, `--start ${new Date(opts.startMs).toISOString()}`, `--scale ${opts.scale}`, `--markets ${opts.markets}`];
  if (opts.shuffle) parts.push('--shuffle');
  if (opts.coords !== GEN_DEFAULTS.coords) parts.push(`--coords ${opts.coords}`);
  parts.push(`--out ${out}`);
  return parts.join(' ');
}

/** Adds or replaces the entry of one written file in a manifest JSON file. */
async function updateManifest(manifestPath: string, opts: GenOptions, written: WrittenLog): Promise<void> {
  let manifest: { files?: Record<string, unknown> } & Record<string, unknown> = {};
  try {
    manifest = JSON.parse(await readFile(manifestPath, 'utf8')) as typeof manifest;
  } catch {
    manifest = {};
  }
  const rel = relative(dirname(manifestPath), written.file) || basename(written.file);
  const files = { ...(manifest.files ?? {}) };
  files[rel] = {
    command: commandLine(opts, written.file),
    seed: opts.seed,
    days: opts.days,
    start: new Date(opts.startMs).toISOString(),
    scale: opts.scale,
    markets: opts.markets,
    shuffle: opts.shuffle,
    coords: opts.coords,
    format: written.format,
    bytes: written.bytes,
    sha256: written.sha256,
    eventsSha256: written.eventsSha256,
    events: written.events,
    counts: written.counts,
    marketKeys: written.markets,
    firstT: written.firstT === null ? null : new Date(written.firstT).toISOString(),
    lastT: written.lastT === null ? null : new Date(written.lastT).toISOString(),
  };
  const sorted = Object.fromEntries(Object.entries(files).sort(([a], [b]) => (a < b ? -1 : a > b ? 1 : 0)));
  const out = {
    about: `Synthetic event logs of ${CITY_NAME}, an invented city (all names and places made up); demo and benchmark data only. Regenerate any file with its command.`,
    generator: 'pairflow gen',
    pairflowVersion: packageVersion(),
    files: sorted,
  };
  try {
    await writeFile(manifestPath, `${JSON.stringify(out, null, 2)}\n`);
  } catch (err) {
    throw pairflowError('PAIRFLOW_ERR_OUTPUT_WRITE', { file: manifestPath, detail: (err as Error).message }, err);
  }
}

/** Streams the events to stdout as JSON Lines; stops at the first failed write (see ../stdout.ts). */
async function writeStdout(events: Iterable<PairflowEvent>): Promise<void> {
  let buf = '';
  for (const ev of events) {
    buf += `${toJsonLine(ev)}\n`;
    if (buf.length > 1 << 18) {
      await writeOut(buf);
      buf = '';
    }
  }
  if (buf.length > 0) await writeOut(buf);
}

/** Registers `pairflow gen`. */
export function registerGen(program: Command): void {
  program
    .command('gen')
    .description(`Write a deterministic synthetic log of ${CITY_NAME}, an invented city: orders on a daily curve, courier shifts, re-arrivals, cancellations.`)
    .option('--out <file>', 'output .jsonl, .jsonl.gz or .avro (default: JSON Lines on stdout)')
    .option('--days <n>', 'number of days', String(GEN_DEFAULTS.days))
    .option('--seed <s>', 'PRNG seed; the same seed writes the same bytes', String(GEN_DEFAULTS.seed))
    .option('--format <f>', 'jsonl or avro (default: from the --out extension)')
    .option('--start <date>', 'first day, YYYY-MM-DD (00:00 UTC) or RFC 3339 (default: 2026-03-02)')
    .option('--scale <x>', 'demand multiplier (at most 20): about 43000·x demand and as many supply occurrences per day', String(GEN_DEFAULTS.scale))
    .option('--markets <n>', 'number of markets (districts)', String(GEN_DEFAULTS.markets))
    .option('--shuffle', "shuffle each day's events (to test the engine's sorting)", false)
    .option('--coords <c>', 'latlon (metric haversine) or xy (km, metric euclidean)', GEN_DEFAULTS.coords)
    .option('--manifest <file>', 'add the written file (command, seed, version, sha256, counts) to this manifest JSON')
    .option('--json', 'print a JSON summary of the written file', false)
    .action(async (raw: RawGenOptions) => {
      const format = outputFormat(raw.out, raw.format);
      if (raw.coords !== 'latlon' && raw.coords !== 'xy') {
        throw pairflowError('PAIRFLOW_ERR_CLI_OPTION', { option: '--coords', detail: `'${raw.coords}' is not latlon or xy` });
      }
      const opts: GenOptions = resolveGenOptions({
        days: wholeNumber(raw.days, '--days', 1),
        seed: wholeNumber(raw.seed, '--seed', 0),
        markets: wholeNumber(raw.markets, '--markets', 1),
        scale: parseNumber(raw.scale, '--scale'),
        startMs: raw.start === undefined ? GEN_DEFAULTS.startMs : parseStart(raw.start),
        shuffle: raw.shuffle,
        coords: raw.coords,
      });
      if (raw.out === undefined) {
        if (raw.manifest !== undefined) throw pairflowError('PAIRFLOW_ERR_CLI_USAGE', { detail: '--manifest needs --out FILE' });
        await writeStdout(generateEvents(opts));
        return;
      }
      const written = await writeEventLog(raw.out, format, generateEvents(opts), { syncMarker: syncMarkerFor(opts.seed) });
      if (raw.manifest !== undefined) await updateManifest(raw.manifest, opts, written);
      if (raw.json) await writeOut(`${JSON.stringify(written)}\n`);
      else {
        const c = written.counts;
        await writeOut(
          `wrote ${written.file}: ${written.events} events (${c.demand} demand, ${c.supply} supply, ${c.withdrawDemand + c.withdrawSupply} withdraws) in ${written.markets.length} markets, ${written.bytes} bytes, sha256 ${written.sha256}\n`,
        );
      }
    });
}
