import { spawnSync } from 'node:child_process';
import { describe, expect, it } from 'vitest';
import { scipyVersion } from '../../helpers/python.js';

// A benchmark that is not run rots: smoke-run the quick mode (no docs written) and
// check that it produced rows whose results agree. No timing is asserted.
const root = new URL('../../../', import.meta.url).pathname;

interface Timed {
  ms: number[];
  cost: number;
  certified: boolean;
}
interface Results {
  mode: string;
  dense: { name: string; pairflow: Timed; scipy: { cost: number } | null; ok: boolean | null; peers: Record<string, unknown> }[];
  sparse: { name: string; pairflow: Timed; scipy: { cost: number } | null; ok: boolean | null }[];
  warm: { name: string; coldMs: number[]; warmMs: number[]; sameCost: boolean; ok: boolean | null }[];
}

describe('bench/solver.ts --quick', () => {
  it('runs every group and reports pairflow results equal to scipy and certified', () => {
    const r = spawnSync(process.execPath, ['--import', 'tsx', 'bench/solver.ts', '--quick', '--no-write', '--json'], {
      cwd: root,
      encoding: 'utf8',
      timeout: 110_000,
      maxBuffer: 1 << 26,
    });
    expect(r.status, r.stderr).toBe(0);
    const res = JSON.parse(r.stdout) as Results;
    expect(res.mode).toBe('quick');
    expect(res.dense.length).toBeGreaterThan(0);
    expect(res.sparse.length).toBeGreaterThan(0);
    expect(res.warm.length).toBeGreaterThan(0);
    const withScipy = scipyVersion() !== null;
    for (const row of [...res.dense, ...res.sparse]) {
      expect(row.pairflow.certified, row.name).toBe(true);
      expect(row.pairflow.ms.length, row.name).toBeGreaterThan(0);
      if (withScipy) {
        expect(row.ok, row.name).toBe(true);
        const ref = row.scipy!.cost;
        expect(Math.abs(row.pairflow.cost - ref), `${row.name}: ${row.pairflow.cost} vs scipy ${ref}`).toBeLessThanOrEqual(1e-9 * Math.max(1, Math.abs(ref)));
      }
    }
    for (const row of res.dense) expect(Object.keys(row.peers).sort(), row.name).toEqual(['linear-sum-assignment', 'munkres', 'munkres-js']);
    for (const row of res.warm) {
      expect(row.sameCost, row.name).toBe(true);
      if (withScipy) expect(row.ok, row.name).toBe(true);
    }
  });
});
