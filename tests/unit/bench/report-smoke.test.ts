import { existsSync, mkdtempSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { describe, expect, it } from 'vitest';
import { runReportBench } from '../../../bench/report.js';

// The bench runs the built CLI (npm test builds first), so it cannot rot unnoticed.
const built = existsSync(new URL('../../../dist/cli/main.js', import.meta.url));

describe('bench/report.ts', () => {
  it.skipIf(!built && process.env.CI !== 'true')('--quick --no-write sweeps, builds the report three times and reports its size', () => {
    const outDir = mkdtempSync(join(tmpdir(), 'pairflow-bench-report-'));
    const r = runReportBench({ quick: true, write: false, outDir, log: () => {} });
    expect(r.policies).toBe(2);
    expect(r.reportMs).toHaveLength(3);
    expect(r.htmlBytes).toBeGreaterThan(100_000);
    expect(r.charts).toBeGreaterThan(10);
    expect(r.markdown.startsWith('<!-- bench:report:start -->')).toBe(true);
    expect(r.markdown.endsWith('<!-- bench:report:end -->')).toBe(true);
  });
});
