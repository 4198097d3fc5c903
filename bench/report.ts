/**
 * `npm run bench:report`: how long `pairflow report` takes and how big its page is,
 * on the target case of issue #12 — the sweep directory of a 7-day log of the demo
 * city (about 300k orders) over six policies (windows 5 s, 10 s, 30 s × reserves P
 * and 10), reported with `pairflow report DIR --out FILE.html`. The built CLI runs in
 * child processes, as users run it; the report is built three times and the median
 * kept. Writes its table between the bench:report markers of docs/benchmarks.md, with
 * the 1-minute load average at the start and end. `--quick` runs a tiny log (smoke
 * test); `--no-write` prints only.
 */
import { existsSync, mkdirSync, readFileSync, rmSync, statSync, writeFileSync } from 'node:fs';
import { cpus, loadavg, totalmem } from 'node:os';
import { join } from 'node:path';
import { fileURLToPath } from 'node:url';
import { runChild } from './replay.js';

const ROOT = fileURLToPath(new URL('..', import.meta.url));
const DOC = join(ROOT, 'docs', 'benchmarks.md');
const START = '<!-- bench:report:start -->';
const END = '<!-- bench:report:end -->';

/** Options of {@link runReportBench}. */
export interface ReportBenchOptions {
  /** A one-day log at a small scale and two policies, for the smoke test. @default false */
  quick?: boolean;
  /** Rewrite the section of docs/benchmarks.md. @default true */
  write?: boolean;
  /** Where logs and directories are kept between runs. @default bench/out */
  outDir?: string;
  /** Progress lines. @default stderr */
  log?: (line: string) => void;
}

export interface ReportBenchResult {
  days: number;
  policies: number;
  demandUnits: number;
  sweepWallMs: number;
  /** Wall time of each build of the report (whole process). */
  reportMs: number[];
  medianMs: number;
  /** Peak RSS of each build, when /usr/bin/time -v can tell. */
  rssMb: Array<number | null>;
  htmlBytes: number;
  tablesBytes: number;
  charts: number;
  load: [number, number];
  markdown: string;
}

/** Runs the benchmark and returns its figures and the markdown section. */
export function runReportBench(opts: ReportBenchOptions = {}): ReportBenchResult {
  const quick = opts.quick ?? false;
  const log = opts.log ?? ((line: string) => process.stderr.write(`${line}\n`));
  const outDir = opts.outDir ?? join(ROOT, 'bench', 'out');
  mkdirSync(outDir, { recursive: true });
  const days = quick ? 1 : 7;
  const scale = quick ? 0.01 : 1;
  const windows = quick ? '5s,30s' : '5s,10s,30s';
  const reserves = quick ? 'P' : 'P,10';
  const loadStart = loadavg()[0]!;
  const file = join(outDir, `city-${days}d-s${scale}.jsonl.gz`);
  if (!existsSync(file)) {
    log(`bench:report: generating ${days} day(s) at scale ${scale}`);
    runChild(['gen', '--days', String(days), '--seed', '1', '--scale', String(scale), '--out', file], false);
  }
  const sweepDir = join(outDir, `report-sweep-${days}d-s${scale}`);
  rmSync(sweepDir, { recursive: true, force: true });
  log(`bench:report: sweep ${windows} x reserves ${reserves} with --out (the report's input)`);
  const sweep = runChild(['sweep', file, '--windows', windows, '--reserves', reserves, '--json', '--bootstrap', quick ? '100' : '1000', '--out', sweepDir]);
  const policies = (sweep.json.policies as unknown[]).length;
  const html = join(outDir, `report-${days}d.html`);
  const reportMs: number[] = [];
  const rssMb: Array<number | null> = [];
  let charts = 0;
  for (let i = 0; i < 3; i++) {
    log(`bench:report: building the report (${i + 1} of 3)`);
    const r = runChild(['report', sweepDir, '--out', html], false);
    reportMs.push(r.wallMs);
    rssMb.push(r.peakRssMb);
    charts = (readFileSync(html, 'utf8').match(/<figure id="[^"]+" class="chart">/g) ?? []).length;
  }
  const sorted = [...reportMs].sort((a, b) => a - b);
  const medianMs = sorted[1]!;
  const htmlBytes = statSync(html).size;
  let tablesBytes = 0;
  for (const n of ['headline', 'hours', 'cells', 'supply', 'distributions', 'sweep', 'paired']) {
    const p = html.replace(/\.html$/, `-${n}.csv`);
    if (existsSync(p)) tablesBytes += statSync(p).size;
  }
  const loadEnd = loadavg()[0]!;
  const mb = (b: number): string => (b / 1e6).toFixed(2);
  const s1 = (ms: number): string => (ms / 1000).toFixed(1);
  const ok = (v: number, limit: number): string => (v <= limit ? 'met' : 'MISSED');
  const md = [
    START,
    '## Report (`npm run bench:report`)',
    '',
    `Machine: ${cpus().length} cores (${cpus()[0]?.model.trim() ?? '?'}), ${(totalmem() / 2 ** 30).toFixed(0)} GB, Node ${process.version}; ` +
      `1-minute load average ${loadStart.toFixed(1)} at the start, ${loadEnd.toFixed(1)} at the end${quick ? ' (quick mode: a tiny log, not the target case)' : ''}.`,
    '',
    `Input: the sweep directory of a ${days}-day log of the demo city (${Number(sweep.json.demandUnits).toLocaleString('en-US')} orders), ${policies} policies (windows ${windows} × reserves ${reserves}), written by \`pairflow sweep --out\` in ${s1(sweep.wallMs)} s.`,
    '',
    '| build | wall time (s) | peak RSS (MB) | page (MB) | CSV tables beside it (MB) | charts |',
    '|---|---:|---:|---:|---:|---:|',
    ...reportMs.map((ms, i) => `| ${i + 1} | ${s1(ms)} | ${rssMb[i] === null ? '–' : rssMb[i]!.toFixed(0)} | ${mb(htmlBytes)} | ${mb(tablesBytes)} | ${charts} |`),
    '',
    quick
      ? 'Quick mode checks that the bench runs; the targets below apply to the 7-day case only.'
      : `Targets (issue #12): the report builds in ≤ 20 s — median ${s1(medianMs)} s for the whole process (${ok(medianMs, 20_000)}); the page is ≤ 5 MB — ${mb(htmlBytes)} MB (${ok(htmlBytes, 5e6)}).` +
        (loadStart > 1.5 || loadEnd > 1.5 ? ' Measured on a shared machine under the load shown above.' : ''),
    '',
    END,
  ];
  const markdown = md.join('\n');
  if (opts.write ?? true) writeSection(markdown);
  return {
    days, policies, demandUnits: Number(sweep.json.demandUnits), sweepWallMs: sweep.wallMs, reportMs, medianMs, rssMb,
    htmlBytes, tablesBytes, charts, load: [loadStart, loadEnd], markdown,
  };
}

/** Replaces the bench:report section of docs/benchmarks.md (creating it if missing). */
export function writeSection(markdown: string, doc = DOC): void {
  let text = readFileSync(doc, 'utf8');
  const a = text.indexOf(START);
  const b = text.indexOf(END);
  if (a >= 0 && b > a) text = text.slice(0, a) + markdown + text.slice(b + END.length);
  else text = `${text.trimEnd()}\n\n<!-- bench:report -->\n${markdown}\n`;
  writeFileSync(doc, text);
}

const isMain = process.argv[1] !== undefined && fileURLToPath(import.meta.url) === process.argv[1];
if (isMain) {
  const args = process.argv.slice(2);
  const result = runReportBench({ quick: args.includes('--quick'), write: !args.includes('--no-write') });
  process.stdout.write(`${result.markdown}\n`);
}
