import { mkdir, rename, writeFile } from 'node:fs/promises';
import { join } from 'node:path';
import { pairflowError } from '../errors.js';
import { formatReject } from '../consume/index.js';
import type { Reject } from '../model.js';
import type { AssignmentRecord, EpochRecord, ExpiryRecord, OutputSink } from '../ports.js';
import { csvRow } from './csv.js';
import { TextFileWriter, type TextFileWriterOptions } from './writer.js';

/** The files of a run directory (`--out DIR`), by role. */
export const RUN_FILES = {
  assignments: 'assignments.jsonl',
  assignmentsCsv: 'assignments.csv',
  expired: 'expired.jsonl',
  epochs: 'epochs.jsonl',
  rejects: 'rejects.jsonl',
  summary: 'summary.json',
  /** The tables `pairflow report` draws (src/replay/digest.ts). */
  digest: 'digest.json',
  manifest: 'manifest.json',
} as const;

/** Header of assignments.csv; one row per executed pair. */
export const ASSIGNMENT_CSV_HEADER = [
  'epoch', 'market', 'demand_id', 'supply_id', 'decided_at', 'travel_min', 'wait_min', 'cost',
] as const;

/** An assignment as one JSON line, keys in a fixed order so run directories compare byte for byte. */
export function assignmentLine(a: AssignmentRecord): string {
  return JSON.stringify({
    market: a.market, epoch: a.epoch, demandId: a.demandId, supplyId: a.supplyId,
    demandT: a.demandT, supplyT: a.supplyT, decidedAt: a.decidedAt,
    travelMin: a.travelMin, waitMin: a.waitMin, cost: a.cost,
  }) + '\n';
}

/** An assignment as one CSV record (RFC 4180); `decided_at` in RFC 3339 UTC. */
export function assignmentCsvRow(a: AssignmentRecord): string {
  return csvRow([
    a.epoch, a.market, a.demandId, a.supplyId, new Date(a.decidedAt).toISOString(),
    a.travelMin, a.waitMin, a.cost,
  ]);
}

export function expiryLine(e: ExpiryRecord): string {
  return JSON.stringify({
    market: e.market, side: e.side, id: e.id, t: e.t, end: e.end, epoch: e.epoch, cost: e.cost,
  }) + '\n';
}

export function epochLine(s: EpochRecord): string {
  return JSON.stringify({
    market: s.market, epoch: s.epoch, poolDemand: s.poolDemand, poolSupply: s.poolSupply,
    candidatePairs: s.candidatePairs, matched: s.matched, tentative: s.tentative,
    solveMs: s.solveMs, warm: s.warm, augmentations: s.augmentations,
    primalCost: s.primalCost, dualObjective: s.dualObjective,
    priceMin: s.priceMin, priceMean: s.priceMean, priceMax: s.priceMax,
  }) + '\n';
}

/** A reject as one line of a rejects file, in the one format `formatReject` defines (docs/events.md). */
export function rejectLine(r: Reject): string {
  return formatReject(r) + '\n';
}

/**
 * The sink of a replay run: every record streamed to its file in the run directory.
 * Close it, then write `summary.json` and `manifest.json` with {@link RunDirSink.writeJson}.
 */
export interface RunDirSink extends OutputSink {
  readonly dir: string;
  /** Writes `name` (e.g. summary.json) whole, as pretty JSON, via a temporary file. */
  writeJson(name: string, value: unknown): Promise<void>;
}

/**
 * Creates (or reuses) the run directory and opens its streamed files.
 * @example const sink = await openRunDir('runs/w5s'); … await sink.close();
 */
export async function openRunDir(dir: string, opts: TextFileWriterOptions = {}): Promise<RunDirSink> {
  try {
    await mkdir(dir, { recursive: true });
  } catch (err) {
    const code = (err as NodeJS.ErrnoException).code ?? String(err);
    throw pairflowError('PAIRFLOW_ERR_OUTPUT_WRITE', { file: dir, detail: `cannot create the run directory (${code})` }, err);
  }
  const open = (name: string): TextFileWriter => new TextFileWriter(join(dir, name), opts);
  const assignments = open(RUN_FILES.assignments);
  const assignmentsCsv = open(RUN_FILES.assignmentsCsv);
  const expired = open(RUN_FILES.expired);
  const epochs = open(RUN_FILES.epochs);
  const rejects = open(RUN_FILES.rejects);
  const all = [assignments, assignmentsCsv, expired, epochs, rejects];
  assignmentsCsv.write(csvRow(ASSIGNMENT_CSV_HEADER));

  return {
    dir,
    assignment(a) {
      assignments.write(assignmentLine(a));
      assignmentsCsv.write(assignmentCsvRow(a));
    },
    expiry(e) { expired.write(expiryLine(e)); },
    epoch(s) { epochs.write(epochLine(s)); },
    reject(r) { rejects.write(rejectLine(r)); },
    get pressure() { return all.some((w) => w.pressure); },
    async drain() { for (const w of all) await w.drain(); },
    async close() {
      // Close every file even when one fails, then report the first failure.
      const results = await Promise.allSettled(all.map((w) => w.close()));
      const failed = results.find((r): r is PromiseRejectedResult => r.status === 'rejected');
      if (failed) throw failed.reason;
    },
    async writeJson(name, value) {
      const path = join(dir, name);
      const tmp = `${path}.tmp`;
      try {
        await writeFile(tmp, JSON.stringify(value, null, 2) + '\n', 'utf8');
        await rename(tmp, path);
      } catch (err) {
        const code = (err as NodeJS.ErrnoException).code ?? String(err);
        throw pairflowError('PAIRFLOW_ERR_OUTPUT_WRITE', { file: path, detail: code }, err);
      }
    },
  };
}

/**
 * A sink that keeps only the rejects, as JSON Lines in `path`: what replay writes
 * with `--rejects FILE` when there is no run directory.
 */
export function openRejectsFile(path: string, opts: TextFileWriterOptions = {}): OutputSink {
  const w = new TextFileWriter(path, opts);
  return {
    assignment: () => {},
    expiry: () => {},
    epoch: () => {},
    reject: (r) => w.write(rejectLine(r)),
    get pressure() { return w.pressure; },
    drain: () => w.drain(),
    close: () => w.close(),
  };
}
