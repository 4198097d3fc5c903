import { spawnSync } from 'node:child_process';
import { mkdtempSync, readFileSync, statSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { pathToFileURL } from 'node:url';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import type { BrowserContext, Page } from 'playwright-core';
import type { ReplaySummary } from '../../src/replay/summary.js';
import { buildReport, tablePath } from '../../src/report/report.js';
import type { SweepResult } from '../../src/sweep/sweep.js';
import { PYTHON } from '../helpers/python.js';
import { makeFixture } from '../unit/report/fixture.js';
import { haveChromium, launch } from './chromium.js';

const ok = haveChromium();

describe.skipIf(!ok)('the report in a real browser (Debian chromium)', () => {
  let ctx: BrowserContext;
  let page: Page;
  let html: string;
  let fx: Awaited<ReturnType<typeof makeFixture>>;
  const consoleErrors: string[] = [];
  const requests: string[] = [];

  beforeAll(async () => {
    fx = await makeFixture({ days: 2, seed: 21 });
    html = join(mkdtempSync(join(tmpdir(), 'pairflow-browser-')), 'report.html');
    await buildReport({ dirs: [fx.runA, fx.runB, fx.sweep], out: html, bootstrap: 200, seed: 1 });
    ctx = await launch();
    page = await ctx.newPage();
    page.on('console', (m) => { if (m.type() === 'error' || m.type() === 'warning') consoleErrors.push(`${m.type()}: ${m.text()}`); });
    page.on('pageerror', (e) => consoleErrors.push(`pageerror: ${e.message}`));
    page.on('request', (r) => requests.push(r.url()));
    await page.goto(pathToFileURL(html).href, { waitUntil: 'load' });
  });

  afterAll(async () => {
    await ctx?.close();
  });

  it('opens with no console error and no request but the file itself', () => {
    expect(consoleErrors).toEqual([]);
    expect(requests).toEqual([pathToFileURL(html).href]);
  });

  it('every chart is drawn with its marks, on screen and in print', async () => {
    const check = async (): Promise<Array<{ id: string; width: number; marks: number; drawn: number }>> => page.$$eval('figure.chart', (figs) => figs.map((f) => {
      const svg = f.querySelector('svg')!;
      const items = [...svg.querySelectorAll('g.role-mark > path, g.role-mark > line, g.role-mark > text')] as SVGGraphicsElement[];
      // A mark is drawn when it has an area (rects, bars, symbols) or a length (lines, rules).
      const drawn = items.filter((el) => {
        const b = el.getBBox();
        return b.width > 0 || b.height > 0;
      }).length;
      return { id: f.id, width: svg.getBoundingClientRect().width, marks: items.length, drawn };
    }));
    const screen = await check();
    expect(screen.length).toBeGreaterThanOrEqual(30);
    for (const c of screen) {
      expect(c.width, c.id).toBeGreaterThan(100);
      expect(c.drawn, c.id).toBeGreaterThan(0);
    }
    await page.emulateMedia({ media: 'print' });
    const printed = await check();
    expect(printed.map((c) => c.id)).toEqual(screen.map((c) => c.id));
    for (const c of printed) expect(c.drawn, c.id).toBeGreaterThan(0);
    await page.emulateMedia({ media: 'screen' });
  });

  it('the headline numbers on the page equal summary.json and sweep.json', async () => {
    const rows = await page.$$eval('table.headline tr[data-run]', (trs) => trs.map((tr) => ({
      run: tr.getAttribute('data-run')!,
      market: tr.getAttribute('data-market')!,
      cells: Object.fromEntries([...tr.querySelectorAll('td[data-field]')].map((td) => [td.getAttribute('data-field')!, { text: (td as HTMLElement).innerText, value: td.getAttribute('data-value') }])),
    })));
    // What a reader sees: the number rounded as shown (costs whole, ratio to 3, waits to 2 places).
    const shown = (text: string): number => Number(text.replace(/,/g, '').replace(' min', ''));
    const agree = (text: string, v: number, places: number, what: string): void => {
      expect(Math.abs(shown(text) - v), `${what}: "${text}" against ${v}`).toBeLessThanOrEqual(0.5 * 10 ** -places + 1e-9);
    };
    for (const [dir, run] of [[fx.runA, 'w5s'], [fx.runB, 'w30s']] as const) {
      const s = JSON.parse(readFileSync(join(dir, 'summary.json'), 'utf8')) as ReplaySummary;
      const all = rows.find((r) => r.run === run && r.market === '*')!;
      agree(all.cells['online.cost']!.text, s.online.cost, 0, `${run} online cost`);
      agree(all.cells['hindsight.cost']!.text, s.hindsight!.cost, 0, `${run} hindsight cost`);
      agree(all.cells['regret']!.text, s.regret!, 0, `${run} regret`);
      agree(all.cells['ratio']!.text, s.ratio!, 3, `${run} ratio`);
      agree(all.cells['online.matched']!.text, s.online.matched, 0, `${run} matched`);
      agree(all.cells['online.abandoned']!.text, s.online.abandoned, 0, `${run} abandoned`);
      agree(all.cells['online.meanWaitMin']!.text, s.online.meanWaitMin!, 2, `${run} mean wait`);
      agree(all.cells['online.p95WaitMin']!.text, s.online.p95WaitMin!, 2, `${run} p95 wait`);
      expect(Number(all.cells['online.cost']!.value)).toBe(s.online.cost);
      for (const m of s.markets) {
        const r = rows.find((x) => x.run === run && x.market === m.market)!;
        agree(r.cells['online.cost']!.text, m.online.cost, 0, `${run} ${m.market} cost`);
        agree(r.cells['online.abandoned']!.text, m.online.abandoned, 0, `${run} ${m.market} abandoned`);
      }
    }
    const sw = JSON.parse(readFileSync(join(fx.sweep, 'sweep.json'), 'utf8')) as SweepResult;
    const rec = sw.policies.find((p) => p.label === sw.recommendation.label)!;
    const all = rows.find((r) => r.run.startsWith('sweep-') && r.market === '*')!;
    agree(all.cells['online.cost']!.text, rec.online.cost, 0, 'sweep online cost');
    agree(all.cells['regret']!.text, rec.regret, 0, 'sweep regret');
    expect(await page.locator('p.advice').first().innerText()).toBe(sw.recommendation.text);
  });

  it('the CSV tables parse (Python\'s csv module) and add up to the summaries', () => {
    // An outside reader: Python's standard csv module, summing per run.
    const script = `
import csv, json, sys
paths = json.load(sys.stdin)
def rows(name):
    with open(paths[name], newline='') as f:
        return list(csv.DictReader(f))
out = {}
for r in rows('hours'):
    o = out.setdefault(r['run'], {'online_cost': 0.0, 'hindsight_cost': 0.0, 'matched': 0, 'abandoned': 0, 'jobs': 0, 'waits': 0})
    o['online_cost'] += float(r['online_cost']); o['hindsight_cost'] += float(r['hindsight_cost'])
    o['matched'] += int(r['matched']); o['abandoned'] += int(r['abandoned'])
for r in rows('supply'):
    out[r['run']]['jobs'] += int(r['assignments'])
for r in rows('distributions'):
    if r['measure'] == 'wait' and r['source'] == 'online':
        out[r['run']]['waits'] += int(r['count'])
heads = {(r['run'], r['market']): r for r in rows('headline')}
for run in out:
    out[run]['headline_cost'] = float(heads[(run, 'all')]['online_cost'])
print(json.dumps(out))
`;
    const names = ['hours', 'supply', 'distributions', 'headline'];
    const r = spawnSync(PYTHON, ['-c', script], { input: JSON.stringify(Object.fromEntries(names.map((n) => [n, tablePath(html, n)]))), encoding: 'utf8' });
    expect(r.status, r.stderr).toBe(0);
    const sums = JSON.parse(r.stdout) as Record<string, { online_cost: number; hindsight_cost: number; matched: number; abandoned: number; jobs: number; waits: number; headline_cost: number }>;
    for (const [dir, run] of [[fx.runA, 'w5s'], [fx.runB, 'w30s']] as const) {
      const s = JSON.parse(readFileSync(join(dir, 'summary.json'), 'utf8')) as ReplaySummary;
      const t = sums[run]!;
      expect(t.online_cost).toBeCloseTo(s.online.cost, 6);
      expect(t.hindsight_cost).toBeCloseTo(s.hindsight!.cost, 6);
      expect(t.matched).toBe(s.online.matched);
      expect(t.abandoned).toBe(s.online.abandoned);
      expect(t.jobs).toBe(s.online.matched);
      expect(t.waits).toBe(s.online.matched);
      expect(t.headline_cost).toBe(s.online.cost);
    }
  });

  it('takes a screenshot', async () => {
    const png = join(tmpdir(), `pairflow-report-${process.pid}.png`);
    await page.screenshot({ path: png, fullPage: false });
    expect(statSync(png).size).toBeGreaterThan(20_000);
  });
});
