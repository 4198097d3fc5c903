/**
 * Run directories for the report's tests, made once per test file from a small
 * generated log of the demo city (invented data): two replays of the same log with
 * different windows, and a sweep of four policies.
 */
import { mkdirSync, mkdtempSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { toJsonLine } from '../../../src/consume/index.js';
import { generateEvents } from '../../../src/gen/gen.js';
import { DEFAULT_CONFIG, type PairflowConfig } from '../../../src/model.js';
import { runReplay } from '../../../src/replay/run.js';
import { runSweep } from '../../../src/sweep/sweep.js';

export interface ReportFixture {
  root: string;
  log: string;
  runA: string;
  runB: string;
  sweep: string;
  config: PairflowConfig;
}

/** A log of `days` days at a small scale, replayed at 5 s and 30 s, and swept over 2 windows × 2 reserves. */
export async function makeFixture(opts: { days?: number; seed?: number; scale?: number; coords?: 'latlon' | 'xy' } = {}): Promise<ReportFixture> {
  const root = mkdtempSync(join(tmpdir(), 'pairflow-report-'));
  const coords = opts.coords ?? 'latlon';
  const log = join(root, 'log.jsonl');
  writeFileSync(log, [...generateEvents({ days: opts.days ?? 2, seed: opts.seed ?? 5, scale: opts.scale ?? 0.01, markets: 2, coords })].map(toJsonLine).join('\n') + '\n');
  const config: PairflowConfig = { ...DEFAULT_CONFIG, metric: coords === 'xy' ? 'euclidean' : 'haversine' };
  const runA = join(root, 'w5s');
  const runB = join(root, 'w30s');
  const sweep = join(root, 'sweep');
  mkdirSync(root, { recursive: true });
  await runReplay([log], { ...config, windowMs: 5000 }, { outDir: runA, threads: 0, command: ['test', 'replay', '5s'] });
  await runReplay([log], { ...config, windowMs: 30_000 }, { outDir: runB, threads: 0, command: ['test', 'replay', '30s'] });
  await runSweep([log], config, { windows: [5000, 30_000], reserves: [null, 5], threads: 1, bootstrap: 200, seed: 3, outDir: sweep, command: ['test', 'sweep'] });
  return { root, log, runA, runB, sweep, config };
}

/** Parses RFC 4180 CSV text (as the report writes it) into rows of fields. */
export function parseCsv(text: string): string[][] {
  const rows: string[][] = [];
  let row: string[] = [];
  let field = '';
  let quoted = false;
  for (let i = 0; i < text.length; i++) {
    const ch = text[i]!;
    if (quoted) {
      if (ch === '"' && text[i + 1] === '"') {
        field += '"';
        i++;
      } else if (ch === '"') quoted = false;
      else field += ch;
    } else if (ch === '"') quoted = true;
    else if (ch === ',') {
      row.push(field);
      field = '';
    } else if (ch === '\r' && text[i + 1] === '\n') {
      row.push(field);
      rows.push(row);
      row = [];
      field = '';
      i++;
    } else field += ch;
  }
  if (field !== '' || row.length > 0) {
    row.push(field);
    rows.push(row);
  }
  return rows;
}

/** CSV rows as objects keyed by the header. */
export function csvObjects(text: string): Array<Record<string, string>> {
  const [head, ...rows] = parseCsv(text);
  return rows.map((r) => Object.fromEntries(head!.map((h, i) => [h, r[i] ?? ''])));
}
