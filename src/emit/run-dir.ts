import { rename, writeFile } from 'node:fs/promises';
import { basename, join } from 'node:path';
import { pairflowError, PairflowError } from '../errors.js';
import { formatReject } from '../consume/index.js';
import type { Reject } from '../model.js';
import type { AssignmentRecord, EpochRecord, ExpiryRecord, OutputSink } from '../ports.js';
import { csvRow } from './csv.js';
import { stageDir } from './staged-dir.js';
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
 * The directory is written aside and appears whole (see ./staged-dir.ts): close the
 * sink, write `summary.json` and `manifest.json` with {@link RunDirSink.writeJson},
 * then {@link RunDirSink.commit}; on failure {@link RunDirSink.abort}.
 */
export interface RunDirSink extends OutputSink {
  /** The run directory as asked for; it exists (complete) only after `commit()`. */
  readonly dir: string;
  /** Where the files are written until `commit()`. */
  readonly workDir: string;
  /** Writes `name` (e.g. summary.json) whole, as pretty JSON, via a temporary file. */
  writeJson(name: string, value: unknown): Promise<void>;
  /** Moves the finished directory into place, replacing an earlier run directory there. */
  commit(): Promise<void>;
  /** Closes what is open and removes the unfinished directory; an earlier run at `dir` stays. Never throws. */
  abort(): Promise<void>;
}

/**
 * Opens the run directory `dir` (new, empty, or an earlier run directory to replace)
 * and its streamed files.
 * @example const sink = await openRunDir('runs/w5s'); … await sink.close(); await sink.commit();
 */
export async function openRunDir(dir: string, opts: TextFileWriterOptions = {}): Promise<RunDirSink> {
  const staged = await stageDir(dir, Object.values(RUN_FILES));
  const work = staged.workDir;
  const open = (name: string): TextFileWriter => new TextFileWriter(join(work, name), opts);
  const assignments = open(RUN_FILES.assignments);
  const assignmentsCsv = open(RUN_FILES.assignmentsCsv);
  const expired = open(RUN_FILES.expired);
  const epochs = open(RUN_FILES.epochs);
  const rejects = open(RUN_FILES.rejects);
  const all = [assignments, assignmentsCsv, expired, epochs, rejects];
  assignmentsCsv.write(csvRow(ASSIGNMENT_CSV_HEADER));
  // Errors name the file where it will be, not the work directory that is gone by then.
  const named = <T>(name: string, err: T): T => {
    if (err instanceof PairflowError && err.code === 'PAIRFLOW_ERR_OUTPUT_WRITE') {
      return pairflowError('PAIRFLOW_ERR_OUTPUT_WRITE', { ...err.params, file: join(dir, name) }, err.cause) as T;
    }
    return err;
  };

  return {
    dir,
    workDir: work,
    assignment(a) {
      assignments.write(assignmentLine(a));
      assignmentsCsv.write(assignmentCsvRow(a));
    },
    expiry(e) { expired.write(expiryLine(e)); },
    epoch(s) { epochs.write(epochLine(s)); },
    reject(r) { rejects.write(rejectLine(r)); },
    get pressure() { return all.some((w) => w.pressure); },
    async drain() {
      for (const w of all) {
        try {
          await w.drain();
        } catch (err) {
          throw named(basename(w.path), err);
        }
      }
    },
    async close() {
      // Close every file even when one fails, then report the first failure.
      const results = await Promise.allSettled(all.map((w) => w.close()));
      const i = results.findIndex((r) => r.status === 'rejected');
      if (i >= 0) throw named(basename(all[i]!.path), (results[i] as PromiseRejectedResult).reason);
    },
    async writeJson(name, value) {
      const path = join(work, name);
      const tmp = `${path}.tmp`;
      try {
        await writeFile(tmp, JSON.stringify(value, null, 2) + '\n', 'utf8');
        await rename(tmp, path);
      } catch (err) {
        const code = (err as NodeJS.ErrnoException).code ?? String(err);
        throw pairflowError('PAIRFLOW_ERR_OUTPUT_WRITE', { file: join(dir, name), detail: code }, err);
      }
    },
    commit: () => staged.commit(),
    async abort() {
      await Promise.allSettled(all.map((w) => w.close()));
      await staged.abort();
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
