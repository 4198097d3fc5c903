import { mkdirSync, mkdtempSync, readFileSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { describe, expect, it } from 'vitest';
import { DIGEST_FILE } from '../../../src/replay/digest.js';
import { runReplay } from '../../../src/replay/run.js';
import type { ReplaySummary } from '../../../src/replay/summary.js';
import { buildReport, tablePath } from '../../../src/report/report.js';
import type { SweepResult } from '../../../src/sweep/sweep.js';
import { csvObjects, makeFixture } from './fixture.js';

const fx = await makeFixture({ days: 2, seed: 7 });
const out = mkdtempSync(join(tmpdir(), 'pairflow-report-out-'));
const read = <T>(path: string): T => JSON.parse(readFileSync(path, 'utf8')) as T;

/** Each chart's SVG and how many drawn items its data marks (not axes or legends) hold. */
function chartMarks(html: string): Array<{ id: string; marks: number }> {
  const out: Array<{ id: string; marks: number }> = [];
  for (const m of html.matchAll(/<figure id="([^"]+)" class="chart">(.*?)<\/figure>/gs)) {
    let marks = 0;
    for (const g of m[2]!.matchAll(/<g class="mark-[a-z]+ role-mark[^"]*"[^>]*>(.*?)<\/g>/gs)) marks += (g[1]!.match(/<(path|line|text)\b/g) ?? []).length;
    out.push({ id: m[1]!, marks });
  }
  return out;
}

describe('buildReport()', () => {
  const file = join(out, 'report.html');
  const built = buildReport({ dirs: [fx.runA, fx.runB, fx.sweep], out: file, bootstrap: 300, seed: 2, command: ['pairflow', 'report'] });

  it('writes one self-contained page: no script, nothing fetched, a policy that forbids requests', async () => {
    const r = await built;
    const html = readFileSync(file, 'utf8');
    expect(r.bytes).toBe(Buffer.byteLength(html));
    expect(html).not.toMatch(/<script|<iframe|<img|<link|<object|<embed|@import|url\(http/i);
    expect(html).not.toMatch(/\s(src|srcset)=/i);
    // Links go only to the CSV tables beside the page and to anchors in it.
    for (const m of html.matchAll(/href="([^"]*)"/g)) expect(m[1]!, m[1]).toMatch(/^(#|report-[a-z]+\.csv$)/);
    expect(html).toContain(`content="default-src 'none'; style-src 'unsafe-inline'; img-src data:"`);
    expect(html).not.toContain('<!--chart:');
  });

  it('draws every chart with its marks', async () => {
    const r = await built;
    const charts = chartMarks(readFileSync(file, 'utf8'));
    expect(charts).toHaveLength(r.charts);
    expect(r.charts).toBeGreaterThanOrEqual(30);
    for (const c of charts) expect(c.marks, c.id).toBeGreaterThan(0);
    const ids = charts.map((c) => c.id);
    for (const part of ['cost-split', 'regret-hour', 'regret-day', 'waits', 'travel', 'work', 'lorenz', 'map-abandoned', 'map-value', 'map-value-hours', 'ceiling', 'cover-hour', 'map-cover', 'sweep-cost', 'sweep-diff', 'sweep-paired']) {
      expect(ids.some((id) => id.endsWith(part)), part).toBe(true);
    }
    expect(ids.filter((id) => id.startsWith('paired-'))).toHaveLength(2);
  });

  it('shows the headline numbers of summary.json and sweep.json exactly', async () => {
    await built;
    const html = readFileSync(file, 'utf8');
    const row = (run: string, market: string): Map<string, number> => {
      const m = html.match(new RegExp(`<tr class="[a-z]+" data-run="${run}" data-market="${market}">(.*?)</tr>`, 's'));
      expect(m, `${run} ${market}`).not.toBeNull();
      return new Map([...m![1]!.matchAll(/data-field="([^"]+)" data-value="([^"]+)"/g)].map((x) => [x[1]!, Number(x[2])]));
    };
    for (const [dir, key] of [[fx.runA, 'w5s'], [fx.runB, 'w30s']] as const) {
      const s = read<ReplaySummary>(join(dir, 'summary.json'));
      const all = row(key, '\\*');
      expect(all.get('online.cost')).toBe(s.online.cost);
      expect(all.get('hindsight.cost')).toBe(s.hindsight!.cost);
      expect(all.get('regret')).toBe(s.regret);
      expect(all.get('ratio')).toBe(s.ratio);
      expect(all.get('online.matched')).toBe(s.online.matched);
      expect(all.get('online.abandoned')).toBe(s.online.abandoned);
      expect(all.get('online.meanWaitMin')).toBe(s.online.meanWaitMin);
      expect(all.get('online.p95WaitMin')).toBe(s.online.p95WaitMin);
      for (const m of s.markets) {
        const r = row(key, m.market);
        expect(r.get('online.cost'), m.market).toBe(m.online.cost);
        expect(r.get('hindsight.cost'), m.market).toBe(m.hindsight!.cost);
        expect(r.get('online.matched'), m.market).toBe(m.online.matched);
      }
    }
    const sw = read<SweepResult>(join(fx.sweep, 'sweep.json'));
    const rec = sw.policies.find((p) => p.label === sw.recommendation.label)!;
    const key = html.match(/data-run="(sweep-[^"]+)" data-market="\*"/)![1]!;
    const all = row(key, '\\*');
    expect(all.get('online.cost')).toBe(rec.online.cost);
    expect(all.get('regret')).toBe(rec.regret);
    expect(all.get('hindsight.cost')).toBe(sw.hindsight.cost);
    expect(html).toContain(sw.recommendation.text.replace(/'/g, '&#39;'));
  });

  it('writes CSV tables beside it that add up to the summaries', async () => {
    const r = await built;
    expect(r.tables.map((t) => t.slice(out.length + 1)).sort()).toEqual(
      ['headline', 'hours', 'cells', 'supply', 'distributions', 'sweep', 'paired'].map((n) => `report-${n}.csv`).sort(),
    );
    const s = read<ReplaySummary>(join(fx.runA, 'summary.json'));
    const head = csvObjects(readFileSync(tablePath(file, 'headline'), 'utf8'));
    const all = head.find((h) => h.run === 'w5s' && h.market === 'all')!;
    expect(Number(all.online_cost)).toBe(s.online.cost);
    expect(Number(all.matched)).toBe(s.online.matched);
    const hours = csvObjects(readFileSync(tablePath(file, 'hours'), 'utf8')).filter((h) => h.run === 'w5s');
    const total = (rows: Array<Record<string, string>>, k: string): number => rows.reduce((a, h) => a + Number(h[k]), 0);
    expect(total(hours, 'online_cost')).toBeCloseTo(s.online.cost, 6);
    expect(total(hours, 'hindsight_cost')).toBeCloseTo(s.hindsight!.cost, 6);
    expect(total(hours, 'regret')).toBeCloseTo(s.regret!, 6);
    expect(total(hours, 'abandoned')).toBe(s.online.abandoned);
    const supply = csvObjects(readFileSync(tablePath(file, 'supply'), 'utf8')).filter((h) => h.run === 'w5s');
    expect(total(supply, 'assignments')).toBe(s.online.matched);
    const dists = csvObjects(readFileSync(tablePath(file, 'distributions'), 'utf8')).filter((h) => h.run === 'w5s' && h.measure === 'wait' && h.source === 'online');
    expect(total(dists, 'count')).toBe(s.online.matched);
    const sweep = csvObjects(readFileSync(tablePath(file, 'sweep'), 'utf8'));
    expect(sweep).toHaveLength(4);
    expect(sweep.filter((p) => p.recommended === '1')).toHaveLength(1);
  });

  it('is deterministic: the same directories give the same bytes', async () => {
    await built;
    const before = readFileSync(file, 'utf8');
    await buildReport({ dirs: [fx.runA, fx.runB, fx.sweep], out: file, bootstrap: 300, seed: 2, command: ['pairflow', 'report'] });
    expect(readFileSync(file, 'utf8')).toBe(before);
    // Every id on the page is unique, though many charts draw gradients.
    const ids = [...before.matchAll(/\bid="([^"]+)"/g)].map((m) => m[1]!);
    expect(new Set(ids).size).toBe(ids.length);
  });

  it('compares runs of the same log in pairs, and says so when the logs differ', async () => {
    const other = await makeFixture({ days: 2, seed: 8 });
    const f = join(out, 'mixed.html');
    await buildReport({ dirs: [fx.runA, other.runA], out: f, bootstrap: 100 });
    const html = readFileSync(f, 'utf8');
    expect(html).toContain('replayed other inputs than');
    expect(html).not.toMatch(/id="paired-/);
  });

  it('draws what it can for a run without hindsight or without a digest', async () => {
    const dir = join(out, 'nohind');
    await runReplay([fx.log], fx.config, { outDir: dir, hindsight: false, threads: 0 });
    const old = join(out, 'old');
    mkdirSync(old, { recursive: true });
    writeFileSync(join(old, 'summary.json'), readFileSync(join(fx.runA, 'summary.json')));
    const f = join(out, 'partial.html');
    const r = await buildReport({ dirs: [dir, old], out: f, bootstrap: 0 });
    const html = readFileSync(f, 'utf8');
    expect(html).toContain('hindsight optimum was not computed');
    expect(html).toContain('has no digest.json');
    for (const c of chartMarks(html)) expect(c.marks, c.id).toBeGreaterThan(0);
    expect(r.charts).toBeGreaterThan(0);
  });

  it('draws maps from x/y coordinates too', async () => {
    const xy = await makeFixture({ days: 1, seed: 3, coords: 'xy' });
    const f = join(out, 'xy.html');
    await buildReport({ dirs: [xy.runA], out: f });
    const ids = chartMarks(readFileSync(f, 'utf8')).filter((c) => c.id.includes('map-'));
    expect(ids.length).toBeGreaterThanOrEqual(3);
    for (const c of ids) expect(c.marks, c.id).toBeGreaterThan(0);
  });
});

describe('buildReport() errors', () => {
  it('checks the output before reading anything: not .html is a usage error, an unwritable path an output error', async () => {
    await expect(buildReport({ dirs: ['/nonexistent'], out: join(out, 'x.txt') })).rejects.toMatchObject({ code: 'PAIRFLOW_ERR_CLI_OPTION' });
    await expect(buildReport({ dirs: ['/nonexistent'], out: join(out, 'missing-dir', 'x.html') })).rejects.toMatchObject({ code: 'PAIRFLOW_ERR_OUTPUT_WRITE' });
  });

  it('names the directory that is not a run: missing, empty, a file, bad JSON, another digest version', async () => {
    const f = join(out, 'e.html');
    await expect(buildReport({ dirs: [join(out, 'nope')], out: f })).rejects.toMatchObject({ code: 'PAIRFLOW_ERR_REPORT_INPUT' });
    const empty = mkdtempSync(join(tmpdir(), 'pairflow-empty-'));
    await expect(buildReport({ dirs: [empty], out: f })).rejects.toMatchObject({ code: 'PAIRFLOW_ERR_REPORT_INPUT', params: { dir: empty } });
    await expect(buildReport({ dirs: [join(fx.runA, 'summary.json')], out: f })).rejects.toMatchObject({ code: 'PAIRFLOW_ERR_REPORT_INPUT' });
    const bad = mkdtempSync(join(tmpdir(), 'pairflow-bad-'));
    writeFileSync(join(bad, 'summary.json'), '{"online":');
    await expect(buildReport({ dirs: [bad], out: f })).rejects.toMatchObject({ code: 'PAIRFLOW_ERR_REPORT_INPUT' });
    const v2 = mkdtempSync(join(tmpdir(), 'pairflow-v2-'));
    writeFileSync(join(v2, 'summary.json'), readFileSync(join(fx.runA, 'summary.json')));
    writeFileSync(join(v2, DIGEST_FILE), JSON.stringify({ version: 99 }));
    await expect(buildReport({ dirs: [v2], out: f })).rejects.toMatchObject({ code: 'PAIRFLOW_ERR_REPORT_INPUT' });
    rmSync(empty, { recursive: true });
  });
});
