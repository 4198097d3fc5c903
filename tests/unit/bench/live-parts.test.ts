import { describe, expect, it } from 'vitest';
import { keptParts } from '../../../bench/live.js';

describe('bench/live.ts keptParts()', () => {
  const section = (head: string, parts: string[]): string =>
    `# Benchmarks\n\n<!-- bench:live:start -->\n${[head, ...parts].join('\n\n')}\n<!-- bench:live:end -->\n`;

  it('returns each ### part of the bench:live section by its title line, as written', () => {
    const doc = section('## Live mode on Kafka', [
      '### Backlog throughput\n\nRun 2026-12-01 10:00 UTC, 1-minute load 0.50 at its start, 0.70 at its end.\n\n| a |',
      '### Restore\n\nRun 2026-12-01 11:00 UTC, 1-minute load 0.20 at its start, 0.30 at its end.\n\n| b |',
    ]);
    const kept = keptParts(doc);
    expect([...kept.keys()]).toEqual(['### Backlog throughput', '### Restore']);
    expect(kept.get('### Restore')).toContain('| b |');
    expect(kept.get('### Restore')).toContain('Run 2026-12-01 11:00 UTC');
  });

  it('gives parts of a section written with one run line for all that run line, and finds nothing without a section', () => {
    const doc = section('## Live mode on Kafka\n\nRun 2026-11-30 09:15 UTC, quick. 1-minute load at start 1.25, at end 0.75.', ['### Paced run\n\n| m |']);
    expect(keptParts(doc).get('### Paced run')).toBe(
      '### Paced run\n\nRun 2026-11-30 09:15 UTC with the other parts of that run, 1-minute load 1.25 at the run\'s start, 0.75 at its end.\n\n| m |',
    );
    expect(keptParts('# Benchmarks\n').size).toBe(0);
  });
});
