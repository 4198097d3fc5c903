/**
 * docs/run-directory.md lists every file of a run directory and every field in it;
 * this test runs a replay and compares what the files hold with what the page lists
 * (issue #10 item 3: the run directory's files and fields were undocumented).
 */
import { mkdtempSync, readdirSync, readFileSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { describe, expect, it } from 'vitest';
import { toJsonLine } from '../../../src/consume/index.js';
import { RUN_FILES } from '../../../src/emit/index.js';
import { generateEvents } from '../../../src/gen/gen.js';
import { DEFAULT_CONFIG } from '../../../src/model.js';
import { runReplay } from '../../../src/replay/run.js';

const doc = readFileSync(new URL('../../../docs/run-directory.md', import.meta.url), 'utf8');

/** The fields the page lists for one file: first-column names of the table under its heading. */
function documented(file: string): string[] {
  const at = doc.indexOf(`### \`${file}\``);
  expect(at, `docs/run-directory.md has no section for ${file}`).toBeGreaterThanOrEqual(0);
  const next = doc.indexOf('\n### ', at + 1);
  const section = doc.slice(at, next < 0 ? undefined : next);
  return [...section.matchAll(/^\| `([^`]+)` \|/gm)].map((m) => m[1]!);
}

/** Every key path of a JSON value: `a.b`, `list[].c`; objects within arrays merged. */
function paths(value: unknown, prefix = ''): string[] {
  if (Array.isArray(value)) return [...new Set(value.flatMap((v) => paths(v, `${prefix}[]`)))];
  if (value === null || typeof value !== 'object') return [prefix];
  return Object.entries(value).flatMap(([k, v]) => paths(v, prefix === '' ? k : `${prefix}.${k}`));
}

describe('docs/run-directory.md', () => {
  it('lists exactly the files of a run directory and the fields each holds', async () => {
    const dir = mkdtempSync(join(tmpdir(), 'pairflow-rundoc-'));
    const lines = [...generateEvents({ days: 1, seed: 8, scale: 0.01 })].map(toJsonLine);
    lines.splice(3, 0, 'not json');
    const log = join(dir, 'day.jsonl');
    writeFileSync(log, lines.join('\n'));
    const avro = join(dir, 'day.avro');
    writeFileSync(avro, ''); // an empty Avro file is an empty log: the Avro fields of a reject come from below
    const out = join(dir, 'run');
    await runReplay([log, avro], { ...DEFAULT_CONFIG, commit: 'due' }, { outDir: out, threads: 0, command: ['pairflow', 'replay', log, '--max-rejects', '10'], maxRejects: { count: 10 } });

    expect(readdirSync(out).sort()).toEqual(Object.values(RUN_FILES).sort());
    for (const name of Object.values(RUN_FILES)) expect(doc, name).toContain(`### \`${name}\``);
    // digest.json is the report's, documented field by field in docs/report.md.

    const jsonl = (name: string): string[] => readFileSync(join(out, name), 'utf8').trimEnd().split('\n').flatMap((l) => paths(JSON.parse(l)));
    const set = (xs: string[]): string[] => [...new Set(xs)].sort();
    expect(set(jsonl(RUN_FILES.assignments))).toEqual(set(documented(RUN_FILES.assignments)));
    expect(set(jsonl(RUN_FILES.expired))).toEqual(set(documented(RUN_FILES.expired)));
    expect(set(jsonl(RUN_FILES.epochs))).toEqual(set(documented(RUN_FILES.epochs)));
    // Avro rejects add block and record to the JSON Lines fields.
    expect(set([...jsonl(RUN_FILES.rejects), 'block', 'record'])).toEqual(set(documented(RUN_FILES.rejects)));
    const csvHeader = readFileSync(join(out, RUN_FILES.assignmentsCsv), 'utf8').split('\r\n')[0]!.split(',');
    expect(csvHeader).toEqual(documented(RUN_FILES.assignmentsCsv));
    expect(set(paths(JSON.parse(readFileSync(join(out, RUN_FILES.summary), 'utf8'))))).toEqual(set(documented(RUN_FILES.summary)));
    // The config is one entry (its fields are README's "Configuration" table).
    const manifest = JSON.parse(readFileSync(join(out, RUN_FILES.manifest), 'utf8')) as Record<string, unknown>;
    // --max-rejects is either a count (this run) or a share.
    expect(set([...paths({ ...manifest, config: null }), 'options.maxRejects.share'])).toEqual(set(documented(RUN_FILES.manifest)));
  });
});
