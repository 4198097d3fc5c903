import { spawnSync } from 'node:child_process';
import { describe, expect, it } from 'vitest';
import { splitParts } from '../../../bench/lib/report.js';

// A run of the structured families alone rewrites only their ### part of the
// bench:solver section (bench/solver.ts, writePart): every line about their figures
// must sit in that part, or it keeps an older run's figures beside the new table.
const root = new URL('../../../', import.meta.url).pathname;

describe('bench/solver.ts: the structured families part', () => {
  it('holds every line that names a family case, its target lines included', () => {
    const r = spawnSync(process.execPath, ['--import', 'tsx', 'bench/solver.ts', '--quick', '--case', 'geometric-250,clustered-250', '--no-write'], {
      cwd: root,
      encoding: 'utf8',
      timeout: 110_000,
    });
    expect(r.status, r.stderr).toBe(0);
    const { head, parts } = splitParts(r.stdout);
    const families = parts.filter((p) => p.startsWith("### Dense, structured costs: a user's first solve\n"));
    expect(families).toHaveLength(1);
    expect(families[0]).toMatch(/^- Target, n = 250, .*geometric-250 .*clustered-250 /m);
    expect(families[0]).toMatch(/^- Every pairflow result of this table certified/m);
    for (const text of [head, ...parts.filter((p) => p !== families[0])]) {
      expect(text).not.toContain('geometric-250');
      expect(text).not.toContain('clustered-250');
    }
    // the Targets part points to the families' lines instead of repeating them
    expect(parts.find((p) => p.startsWith('### Targets\n'))).toContain('Structured dense families: see the target lines under their table');
  });
});
