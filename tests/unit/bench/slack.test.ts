import { mkdtempSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';

import { describe, expect, it } from 'vitest';

import { BANDS, BUCKETS, runSlackBench, slackFigures, type SlackInput } from '../../../bench/slack.js';

// One demand at the origin (u = 10), supplies on the x axis, 1 km a minute, every
// supply arriving at t = 0; costs are the distances, slacks worked out by hand.
function input(supplies: Array<{ x: number; v: number }>): SlackInput {
  const n = supplies.length;
  return {
    rowPtr: Int32Array.from([0, n]),
    colIdx: Int32Array.from(supplies.map((_, i) => i)),
    cost: Float64Array.from(supplies.map((s) => s.x)),
    u: Float64Array.from([10]),
    v: Float64Array.from(supplies.map((s) => s.v)),
    demandX: Float64Array.from([0]),
    demandY: Float64Array.from([0]),
    supplyX: Float64Array.from(supplies.map((s) => s.x)),
    supplyY: new Float64Array(n),
    supplyT: new Float64Array(n),
    kmPerMin: 1,
  };
}

describe('bench/slack.ts slackFigures', () => {
  it('puts each pair in its slack band and clears a bucket only when its nearest point and highest price prove it', () => {
    // Slacks: 0.6 − 10 + 9.5 = 0.1, 3.7 − 10 + 7 = 0.7.
    const f = slackFigures(input([{ x: 0.6, v: -9.5 }, { x: 3.7, v: -7 }]));
    expect(f.pairs).toBe(2);
    expect(f.bandShare).toEqual([0.5, 0.5, 0, 0, 0, 0]);
    const [half, one, two] = f.buckets;
    // 0.5 km cells: the near supply's cell starts 0.5 km out (0.495 − 10 + 9.5 < 0, read);
    // the far one's at 3.5 km (3.465 − 10 + 7 ≥ 0, cleared).
    expect(half).toMatchObject({ cellKm: 0.5, readShare: 0.5, groupsPerPair: 1 });
    // 1 km cells: the far cell starts at 3 km (2.97 − 10 + 7 < 0): both read.
    expect(one).toMatchObject({ cellKm: 1, readShare: 1, groupsPerPair: 1 });
    expect(two!.readShare).toBe(1);
  });

  it('bounds a bucket by its highest supply price: a shallow neighbour keeps a deep supply from being cleared', () => {
    // A third supply in the far 0.5 km cell at v = −6.5 (slack 3.8 − 10 + 6.5 = 0.3):
    // the cell's bound is now 3.465 − 10 + 6.5 < 0, so both far pairs are read, in one group.
    const f = slackFigures(input([{ x: 0.6, v: -9.5 }, { x: 3.7, v: -7 }, { x: 3.8, v: -6.5 }]));
    expect(f.bandShare[0]).toBeCloseTo(2 / 3, 12);
    expect(f.bandShare[1]).toBeCloseTo(1 / 3, 12);
    expect(f.buckets[0]!.readShare).toBe(1);
    expect(f.buckets[0]!.groupsPerPair).toBeCloseTo(2 / 3, 12);
  });

  it('runs end to end on a tiny generated city (the --quick smoke run): one row whose bands add up to all the pairs', async () => {
    const md = await runSlackBench({ scales: [0.02], write: false, outDir: mkdtempSync(join(tmpdir(), 'pairflow-slack-test-')) });
    const row = md.split('\n').find((l) => l.startsWith('| 0.02 |'));
    expect(row).toBeDefined();
    const cells = row!.split('|').slice(1, -1).map((c) => c.trim());
    expect(cells).toHaveLength(4 + BANDS.length + 1 + BUCKETS.length);
    expect(Number(cells[3])).toBeGreaterThan(0);
    const bands = cells.slice(4, 4 + BANDS.length + 1).map((c) => Number.parseFloat(c));
    expect(bands.reduce((a, b) => a + b, 0)).toBeCloseTo(100, 0);
    // A coarser bucket never clears more: its read share cannot be lower.
    const reads = cells.slice(4 + BANDS.length + 1).map((c) => Number.parseFloat(c));
    for (let i = 1; i < reads.length; i++) expect(reads[i]!).toBeGreaterThanOrEqual(reads[i - 1]! - 1e-9);
  }, 60_000);
});
