/**
 * Reading the directories a report is built from: replay run directories
 * (`summary.json`, `digest.json`, `manifest.json`) and sweep directories
 * (`sweep.json`, `manifest.json`, `policies/N.json`). Every problem is a
 * `PAIRFLOW_ERR_REPORT_INPUT` naming the directory and the file.
 */
import { readFile, stat } from 'node:fs/promises';
import { basename, join, resolve } from 'node:path';
import type { RunManifest } from '../emit/manifest.js';
import { pairflowError } from '../errors.js';
import { DIGEST_FILE, DIGEST_VERSION, type RunDigest } from '../replay/digest.js';
import type { ReplaySummary } from '../replay/summary.js';
import { SWEEP_FILES, type SweepResult } from '../sweep/sweep.js';

/** One replay run directory. */
export interface ReplayInput {
  kind: 'replay';
  dir: string;
  name: string;
  summary: ReplaySummary;
  /** null for a directory written without a digest (an older pairflow): only the headline is drawn. */
  digest: RunDigest | null;
  manifest: RunManifest | null;
}

/** One sweep directory, with the digests of its policies (null where missing). */
export interface SweepInput {
  kind: 'sweep';
  dir: string;
  name: string;
  sweep: SweepResult;
  digests: (RunDigest | null)[];
  manifest: RunManifest | null;
}

export type ReportInput = ReplayInput | SweepInput;

async function readJson<T>(dir: string, file: string, required: boolean): Promise<T | null> {
  const path = join(dir, file);
  let text: string;
  try {
    text = await readFile(path, 'utf8');
  } catch (err) {
    const code = (err as NodeJS.ErrnoException).code;
    if (code === 'ENOENT' && !required) return null;
    throw pairflowError('PAIRFLOW_ERR_REPORT_INPUT', { dir, detail: `cannot read ${file} (${code ?? String(err)})` }, err);
  }
  try {
    return JSON.parse(text) as T;
  } catch (err) {
    throw pairflowError('PAIRFLOW_ERR_REPORT_INPUT', { dir, detail: `${file} is not valid JSON (${(err as Error).message})` }, err);
  }
}

function checkDigest(dir: string, file: string, d: RunDigest | null): RunDigest | null {
  if (d === null) return null;
  if (typeof d !== 'object' || d.version !== DIGEST_VERSION || !d.hours || !d.cells || !d.supply || !d.histograms) {
    throw pairflowError('PAIRFLOW_ERR_REPORT_INPUT', {
      dir, detail: `${file} is not a digest of format version ${DIGEST_VERSION} (found ${JSON.stringify((d as { version?: unknown })?.version ?? null)}); replay again with this pairflow`,
    });
  }
  return d;
}

/**
 * Reads one directory: a sweep directory when it holds sweep.json, a replay run
 * directory when it holds summary.json.
 */
export async function loadInput(dirArg: string): Promise<ReportInput> {
  const dir = resolve(dirArg);
  const st = await stat(dir).catch(() => null);
  if (!st) throw pairflowError('PAIRFLOW_ERR_REPORT_INPUT', { dir: dirArg, detail: 'no such directory' });
  if (!st.isDirectory()) throw pairflowError('PAIRFLOW_ERR_REPORT_INPUT', { dir: dirArg, detail: 'is a file; give the --out directory of pairflow replay or pairflow sweep' });
  const name = basename(dir);
  const manifest = await readJson<RunManifest>(dir, 'manifest.json', false);
  const sweep = await readJson<SweepResult>(dir, SWEEP_FILES.result, false);
  if (sweep !== null) {
    if (!Array.isArray(sweep.policies) || !sweep.recommendation || !sweep.buckets) {
      throw pairflowError('PAIRFLOW_ERR_REPORT_INPUT', { dir: dirArg, detail: `${SWEEP_FILES.result} has no policy grid (written by an older pairflow?); sweep again with this version` });
    }
    const digests: (RunDigest | null)[] = [];
    for (const p of sweep.policies) {
      digests.push(p.digest ? checkDigest(dirArg, p.digest, await readJson<RunDigest>(dir, p.digest, false)) : null);
    }
    return { kind: 'sweep', dir, name, sweep, digests, manifest };
  }
  const summary = await readJson<ReplaySummary>(dir, 'summary.json', false);
  if (summary === null) {
    throw pairflowError('PAIRFLOW_ERR_REPORT_INPUT', {
      dir: dirArg, detail: 'holds neither summary.json (pairflow replay --out) nor sweep.json (pairflow sweep --out)',
    });
  }
  if (typeof summary !== 'object' || !summary.online || typeof summary.online.cost !== 'number') {
    throw pairflowError('PAIRFLOW_ERR_REPORT_INPUT', { dir: dirArg, detail: 'summary.json has no online figures' });
  }
  const digest = checkDigest(dirArg, DIGEST_FILE, await readJson<RunDigest>(dir, DIGEST_FILE, false));
  return { kind: 'replay', dir, name, summary, digest, manifest };
}

/** Reads every directory, in order; two with the same name are told apart by a number. */
export async function loadInputs(dirs: readonly string[]): Promise<ReportInput[]> {
  if (dirs.length === 0) throw pairflowError('PAIRFLOW_ERR_CLI_USAGE', { detail: 'report needs at least one run or sweep directory' });
  const out: ReportInput[] = [];
  const seen = new Map<string, number>();
  for (const d of dirs) {
    const input = await loadInput(d);
    const n = (seen.get(input.name) ?? 0) + 1;
    seen.set(input.name, n);
    if (n > 1) input.name = `${input.name} (${n})`;
    out.push(input);
  }
  return out;
}
