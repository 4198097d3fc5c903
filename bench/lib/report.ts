/**
 * Shared by the benchmarks: summary statistics, machine facts, and rewriting one
 * marked section of docs/benchmarks.md (each bench owns its own markers; the rest of
 * the file is left as it is).
 */

import { existsSync, readFileSync, writeFileSync } from 'node:fs';
import { cpus, loadavg, totalmem } from 'node:os';

/** Median of a non-empty list (mean of the middle two for an even count). */
export function median(xs: readonly number[]): number {
  const s = [...xs].sort((a, b) => a - b);
  const m = s.length >> 1;
  return s.length % 2 === 1 ? s[m]! : (s[m - 1]! + s[m]!) / 2;
}

/** `median (min–max)` in ms, with precision that suits the magnitude. */
export function fmtMs(xs: readonly number[]): string {
  if (xs.length === 0) return '—';
  const f = (x: number) => (x >= 100 ? x.toFixed(0) : x >= 10 ? x.toFixed(1) : x >= 1 ? x.toFixed(2) : x.toFixed(3));
  if (xs.length === 1) return f(xs[0]!);
  return `${f(median(xs))} (${f(Math.min(...xs))}–${f(Math.max(...xs))})`;
}

export function fmtRatio(x: number | undefined): string {
  if (x === undefined || !Number.isFinite(x)) return '—';
  return `${x >= 10 ? x.toFixed(1) : x.toFixed(2)}×`;
}

export interface MachineInfo {
  readonly cpu: string;
  readonly cores: number;
  readonly memoryGb: number;
  readonly node: string;
  readonly loadAtStart: number;
}

export function machineInfo(): MachineInfo {
  const list = cpus();
  return {
    cpu: list[0]?.model.trim() ?? 'unknown',
    cores: list.length,
    memoryGb: Math.round(totalmem() / 2 ** 30),
    node: process.version,
    loadAtStart: loadavg()[0] ?? 0,
  };
}

const HEADER = `# Benchmarks

Every table below is written by a benchmark in \`bench/\` from a run; nobody types
numbers into this file. Rerun one with its npm script (e.g. \`npm run bench:solver\`);
each bench rewrites only its own marked section.
`;

/** Markdown split at its `###` subsections: what precedes the first, then each (title line first). */
export function splitParts(text: string): { head: string; parts: string[] } {
  const [head, ...parts] = text.split(/\n(?=### )/);
  return { head: head ?? '', parts };
}

/**
 * Replaces one `###` subsection (the one whose title line is `title`) of section
 * `name` in `file` with `body`, leaving the rest of the section as the last run wrote
 * it. Returns false, writing nothing, when the section or the subsection is missing.
 */
export function writePart(file: string, name: string, title: string, body: string): boolean {
  const start = `<!-- bench:${name}:start -->`;
  const end = `<!-- bench:${name}:end -->`;
  const text = existsSync(file) ? readFileSync(file, 'utf8') : '';
  const a = text.indexOf(start);
  const b = text.indexOf(end);
  if (a < 0 || b < a) return false;
  const { head, parts } = splitParts(text.slice(a + start.length, b));
  const at = parts.findIndex((p) => p.slice(0, p.indexOf('\n')) === title);
  if (at < 0) return false;
  parts[at] = `${body.trimEnd()}\n`;
  writeFileSync(file, `${text.slice(0, a + start.length)}${[head, ...parts].join('\n')}${text.slice(b)}`);
  return true;
}

/**
 * Replaces the text between `<!-- bench:NAME:start -->` and `<!-- bench:NAME:end -->`
 * in `file` (creating the file with a short header, or appending the section, when
 * missing). The file is re-read right before writing, as other benches share it.
 */
export function writeSection(file: string, name: string, body: string): void {
  const start = `<!-- bench:${name}:start -->`;
  const end = `<!-- bench:${name}:end -->`;
  const block = `${start}\n${body.trimEnd()}\n${end}`;
  const text = existsSync(file) ? readFileSync(file, 'utf8') : HEADER;
  const a = text.indexOf(start);
  const b = text.indexOf(end);
  let next: string;
  if (a >= 0 && b > a) next = text.slice(0, a) + block + text.slice(b + end.length);
  else next = `${text.trimEnd()}\n\n<!-- bench:${name} -->\n${block}\n`;
  writeFileSync(file, next);
}
