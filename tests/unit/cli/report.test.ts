import { spawnSync } from 'node:child_process';
import { existsSync, mkdtempSync, readFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { describe, expect, it } from 'vitest';
import { makeFixture } from '../report/fixture.js';

const bin = new URL('../../../bin/pairflow.js', import.meta.url).pathname;
const run = (args: string[]) => spawnSync(process.execPath, [bin, ...args], { encoding: 'utf8' });
const fx = await makeFixture({ days: 1, seed: 9 });
const out = mkdtempSync(join(tmpdir(), 'pairflow-cli-report-'));

describe('pairflow report', () => {
  it('writes the page and its tables, prints their paths, and records its command line', () => {
    const html = join(out, 'r.html');
    const r = run(['report', fx.runA, fx.sweep, '--out', html, '--bootstrap', '100', '--seed', '4']);
    expect(r.status, r.stderr).toBe(0);
    expect(r.stdout.split('\n')[0]).toMatch(new RegExp(`^pairflow report: ${html} \\(\\d+ kB, \\d+ charts, 2 runs\\)$`));
    expect(r.stdout).toContain(join(out, 'r-headline.csv'));
    expect(existsSync(join(out, 'r-sweep.csv'))).toBe(true);
    expect(readFileSync(html, 'utf8')).toContain(`pairflow report ${fx.runA} ${fx.sweep} --out ${html}`);
  });

  it('exit 2 naming the directory when it is not a run; --out is required', () => {
    const r = run(['report', out, '--out', join(out, 'x.html')]);
    expect(r.status).toBe(2);
    expect(r.stderr).toContain('PAIRFLOW_ERR_REPORT_INPUT');
    expect(r.stderr).toContain(out);
    const missing = run(['report', fx.runA]);
    expect(missing.status).toBe(2);
  });
});
