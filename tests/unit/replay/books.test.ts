/**
 * Nothing is lost, provably (issue #10 item 18; docs/principles.md rule 4): the books
 * close from summary.json alone, on generated logs with injected bad lines, blank
 * lines, duplicate arrivals and repeated withdraws — and the counts of what was
 * injected come back exactly.
 */
import { mkdtempSync, readFileSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { gzipSync } from 'node:zlib';
import { describe, expect, it } from 'vitest';
import { toJsonLine } from '../../../src/consume/index.js';
import { RUN_FILES } from '../../../src/emit/index.js';
import { generateEvents } from '../../../src/gen/gen.js';
import { DEFAULT_CONFIG, type PairflowConfig, type PairflowEvent } from '../../../src/model.js';
import { runReplay } from '../../../src/replay/run.js';
import { booksErrors, type Books, type ReplaySummary } from '../../../src/replay/summary.js';
import { mulberry32, randInt } from '../../helpers/random.js';

const tmp = (): string => mkdtempSync(join(tmpdir(), 'pairflow-books-'));

interface Injected {
  lines: string[];
  blank: number;
  bad: number;
  duplicates: number;
  /** Demand withdraws repeated at the same millisecond: they apply again (a no-op, SPEC §1). */
  sameMs: number;
  /** Demand withdraws repeated a second later: they find no occurrence still available. */
  later: number;
}

/** A generated day with faults injected at seeded places. */
function inject(seed: number, events: PairflowEvent[]): Injected {
  const rand = mulberry32(seed);
  const lines = events.map(toJsonLine);
  const out: Injected = { lines: [], blank: 0, bad: 0, duplicates: 0, sameMs: 0, later: 0 };
  const bad = ['not json', '{"type":"demand","id":"","market":"m","t":1}', '{"type":"teleport","id":"x","market":"m","t":5}', '[1,2]', '{"type":"supply","id":"s","market":"m","t":1,"t":2,"lat":0,"lon":0}'];
  events.forEach((ev, i) => {
    out.lines.push(lines[i]!);
    const u = rand();
    if (u < 0.03) {
      out.lines.push(rand() < 0.5 ? '' : '  \t');
      out.blank++;
    } else if (u < 0.06) {
      out.lines.push(bad[randInt(rand, 0, bad.length - 1)]!);
      out.bad++;
    } else if (u < 0.09 && ev.type !== 'withdraw') {
      // The same side, id and t again, a little later in the file: a duplicate.
      out.lines.splice(out.lines.length - randInt(rand, 0, 1), 0, lines[i]!);
      out.duplicates++;
    }
    if (ev.type === 'withdraw' && ev.side === 'demand') {
      if (rand() < 0.5) {
        out.lines.push(lines[i]!);
        out.sameMs++;
      } else {
        out.lines.push(toJsonLine({ ...ev, t: ev.t + 1000 }));
        out.later++;
      }
    }
  });
  return out;
}

function expectBooksClose(s: ReplaySummary, label: string): Books {
  const b = s.books;
  expect(booksErrors(b), label).toEqual([]);
  // The summary's own figures are the books' figures.
  expect(b.rejects, label).toBe(s.rejects);
  expect(b.duplicates, label).toBe(s.duplicates);
  expect(b.ignoredWithdraws, label).toBe(s.ignoredWithdraws);
  expect(b.demandOccurrences, label).toBe(s.demandUnits);
  expect(b.supplyOccurrences, label).toBe(s.supplyUnits);
  expect(b.matched, label).toBe(s.online.matched);
  expect(b.demandExpired, label).toBe(s.online.abandoned);
  expect(b.lines, label).toBe(s.files.reduce((a, f) => a + f.lines, 0));
  return b;
}

describe('the books of a replay', () => {
  for (const [seed, commit, ext] of [[101, 'all', 'jsonl'], [202, 'due', 'jsonl.gz'], [303, 'all', 'jsonl.gz']] as const) {
    it(`close from summary.json alone and count every injected fault (seed ${seed}, commit ${commit}, .${ext})`, async () => {
      const config: PairflowConfig = { ...DEFAULT_CONFIG, commit, windowMs: 10_000 };
      const events = [...generateEvents({ days: 1, seed, scale: 0.01 })];
      const dir = tmp();
      const clean = join(dir, `clean.${ext}`);
      const text = (lines: string[]): Buffer => Buffer.from(`${lines.join('\n')}\n`);
      const write = (path: string, lines: string[]): void => writeFileSync(path, ext === 'jsonl' ? text(lines) : gzipSync(text(lines)));
      write(clean, events.map(toJsonLine));
      const base = await runReplay([clean], config, { hindsight: false });
      const b0 = expectBooksClose(base, `seed ${seed} clean`);
      expect(b0.duplicates, `seed ${seed}: the generator itself repeats no arrival`).toBe(0);

      const inj = inject(seed, events);
      expect(inj.blank * inj.bad * inj.duplicates * inj.sameMs * inj.later, `seed ${seed}: every kind injected`).toBeGreaterThan(0);
      const faulty = join(dir, `faulty.${ext}`);
      write(faulty, inj.lines);
      const out = join(dir, 'run');
      const s = await runReplay([faulty], config, { hindsight: false, outDir: out });
      const b = expectBooksClose(s, `seed ${seed}`);
      expect(b.lines, `seed ${seed}`).toBe(inj.lines.length);
      expect(b.blankLines, `seed ${seed}`).toBe(inj.blank);
      expect(b.rejectedLines, `seed ${seed}`).toBe(inj.bad);
      expect(b.duplicates, `seed ${seed}`).toBe(inj.duplicates);
      expect(b.withdraws, `seed ${seed}`).toBe(b0.withdraws + inj.sameMs + inj.later);
      expect(b.ignoredWithdraws, `seed ${seed}`).toBe(b0.ignoredWithdraws + inj.later);
      // Duplicates and repeated withdraws change nothing the policy sees.
      expect(b.demandOccurrences, `seed ${seed}`).toBe(b0.demandOccurrences);
      expect(s.online.cost, `seed ${seed}`).toBe(base.online.cost);
      // The run directory holds exactly what the books say.
      const count = (name: string): number => readFileSync(join(out, name), 'utf8').split('\n').filter((l) => l !== '').length;
      expect(count(RUN_FILES.assignments), `seed ${seed}`).toBe(b.matched);
      expect(count(RUN_FILES.expired), `seed ${seed}`).toBe(b.demandExpired + b.supplyExpired);
      expect(count(RUN_FILES.rejects), `seed ${seed}`).toBe(b.rejects);
      const stored = JSON.parse(readFileSync(join(out, RUN_FILES.summary), 'utf8')) as ReplaySummary;
      expect(booksErrors(stored.books), `seed ${seed}: from summary.json alone`).toEqual([]);
    });
  }

  it('booksErrors() names each identity that does not hold', () => {
    const b: Books = {
      lines: 10, blankLines: 1, events: 7, rejectedLines: 2, lostRecords: 0, damage: 0, rejects: 2, arrivals: 6, withdraws: 1,
      duplicates: 1, demandOccurrences: 3, supplyOccurrences: 2, appliedWithdraws: 1, ignoredWithdraws: 0, matched: 2, demandExpired: 1, supplyExpired: 0,
    };
    expect(booksErrors(b)).toEqual([]);
    expect(booksErrors({ ...b, lines: 11 })).toHaveLength(1);
    expect(booksErrors({ ...b, supplyExpired: 1 })).toHaveLength(1);
    expect(booksErrors({ ...b, duplicates: 0 })).toHaveLength(1);
  });
});
