import { existsSync, mkdtempSync, readFileSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { describe, expect, it } from 'vitest';
import { runChildCapped, runReplayBench, writeSection } from '../../../bench/replay.js';

// The bench runs the built CLI (npm test builds first), so it cannot rot unnoticed.
const built = existsSync(new URL('../../../dist/cli/main.js', import.meta.url));

describe('bench/replay.ts', () => {
  it.skipIf(!built && process.env.CI !== 'true')('--quick --no-write runs every step and reports consistent figures', () => {
    const outDir = mkdtempSync(join(tmpdir(), 'pairflow-bench-'));
    const r = runReplayBench({ quick: true, write: false, outDir, log: () => {} });
    expect(r.sizes).toHaveLength(1);
    const row = r.sizes[0]!;
    expect(row.demandUnits).toBeGreaterThan(0);
    expect(row.pairsPriced).toBeGreaterThanOrEqual(row.pairsSolved);
    expect(row.hindsightCost).toBeLessThanOrEqual(row.onlineCost);
    expect(r.largest.sweep.best === 5000 || r.largest.sweep.best === 30_000).toBe(true);
    expect(r.markdown.startsWith('<!-- bench:replay:start -->')).toBe(true);
    expect(r.markdown.endsWith('<!-- bench:replay:end -->')).toBe(true);
  });

  it.skipIf(!built && process.env.CI !== 'true')('a growth run past its cap is stopped and reported as capped; one within it gives its figures', () => {
    const sample = new URL('../../../replay-logs/demo-day.jsonl.gz', import.meta.url).pathname;
    const stopped = runChildCapped(['replay', sample, '--window', '10s', '--json'], 0.05);
    expect(stopped.capped).toBe(true);
    expect(stopped.json).toEqual({});
    const done = runChildCapped(['replay', sample, '--window', '10s', '--json', '--no-hindsight'], 120);
    expect(done.capped).toBeUndefined();
    expect(Number((done.json.online as { matched: number }).matched)).toBeGreaterThan(0);
  });

  it('writeSection() replaces only its own marked section', () => {
    const doc = join(mkdtempSync(join(tmpdir(), 'pairflow-bench-doc-')), 'benchmarks.md');
    writeFileSync(doc, '# Benchmarks\n\n<!-- bench:solver:start -->\nsolver table\n<!-- bench:solver:end -->\n');
    writeSection('<!-- bench:replay:start -->\nfirst\n<!-- bench:replay:end -->', doc);
    writeSection('<!-- bench:replay:start -->\nsecond\n<!-- bench:replay:end -->', doc);
    const text = readFileSync(doc, 'utf8');
    expect(text).toContain('solver table');
    expect(text).toContain('second');
    expect(text).not.toContain('first');
    expect(text.match(/bench:replay:start/g)).toHaveLength(1);
  });

  it('writeSection() keeps the growth tables already written when a run has none of its own (--no-growth)', () => {
    const doc = join(mkdtempSync(join(tmpdir(), 'pairflow-bench-doc-')), 'benchmarks.md');
    const growth = '### Growth with density and with length\n\nRun 2026-01-01 of abc.\n\n| scale | wall s |\n|---|---|\n| 1 | 6.3 |\n';
    writeFileSync(doc, `# Benchmarks\n\nabove\n\n<!-- bench:replay:start -->\n## Replay\n\nold days table\n\n### Other part\n\nold other\n\n${growth}<!-- bench:replay:end -->\n\nbelow\n`);
    const written = writeSection('<!-- bench:replay:start -->\n## Replay\n\nnew days table\n<!-- bench:replay:end -->', doc, true);
    const text = readFileSync(doc, 'utf8');
    expect(written).toContain('new days table');
    expect(text).toContain(growth.trimEnd());
    expect(text).not.toContain('old days table');
    expect(text).not.toContain('old other');
    expect(text.startsWith('# Benchmarks\n\nabove\n\n')).toBe(true);
    expect(text.endsWith('<!-- bench:replay:end -->\n\nbelow\n')).toBe(true);
    expect(text.indexOf('new days table')).toBeLessThan(text.indexOf('### Growth'));
    // Without keepGrowth (a run that measured its own growth, or none wanted) the old tables go.
    writeSection('<!-- bench:replay:start -->\n## Replay\n\nnewer\n<!-- bench:replay:end -->', doc);
    expect(readFileSync(doc, 'utf8')).not.toContain('### Growth');
  });
});
