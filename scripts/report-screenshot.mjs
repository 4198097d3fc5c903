#!/usr/bin/env node
/**
 * Regenerates the screenshots of the report in docs/ (`npm run report:screenshot`):
 * replays the bundled demo day with the built CLI into a temporary run directory,
 * builds its report, and photographs it in Debian's chromium (playwright-core; no
 * browser download): docs/report.png (the head of the page) and docs/report-maps.png
 * (the maps). Needs `npm run build` first and /usr/bin/chromium.
 */
import { spawnSync } from 'node:child_process';
import { mkdtempSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { fileURLToPath, pathToFileURL } from 'node:url';
import { chromium } from 'playwright-core';

const root = fileURLToPath(new URL('..', import.meta.url));
const bin = join(root, 'bin', 'pairflow.js');
const work = mkdtempSync(join(tmpdir(), 'pairflow-shot-'));
const run = (args) => {
  const r = spawnSync(process.execPath, [bin, ...args], { stdio: ['ignore', 'ignore', 'inherit'] });
  if (r.status !== 0) throw new Error(`pairflow ${args.join(' ')} exited ${r.status}`);
};
run(['replay', join(root, 'replay-logs', 'demo-day.jsonl.gz'), '--out', join(work, 'demo-day')]);
const html = join(work, 'report.html');
run(['report', join(work, 'demo-day'), '--out', html]);

const ctx = await chromium.launchPersistentContext(mkdtempSync(join(tmpdir(), 'pairflow-chromium-')), {
  executablePath: process.env.PAIRFLOW_CHROMIUM ?? '/usr/bin/chromium',
  headless: true,
  viewport: { width: 1100, height: 1250 },
  args: ['--headless', '--no-sandbox', '--disable-gpu', '--disable-quic', '--no-first-run', '--disable-background-networking', '--disable-component-update', '--disable-sync'],
});
try {
  const page = await ctx.newPage();
  await page.goto(pathToFileURL(html).href, { waitUntil: 'load' });
  await page.screenshot({ path: join(root, 'docs', 'report.png') });
  // The maps: from their heading to the hour-block panels.
  const top = await page.locator('h3', { hasText: 'Where demand went unserved' }).first().boundingBox();
  const last = await page.locator('figure[id$="map-value-hours"]').first().boundingBox();
  await page.screenshot({ path: join(root, 'docs', 'report-maps.png'), fullPage: true, clip: { x: 0, y: top.y - 10, width: 1100, height: last.y + last.height - top.y + 20 } });
} finally {
  await ctx.close();
}
process.stdout.write('docs/report.png, docs/report-maps.png\n');
