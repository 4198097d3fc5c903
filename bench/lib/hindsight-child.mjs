/**
 * The exact hindsight optimum of one log alone, in its own process, for
 * bench/replay.ts: where its time goes (phases summed over markets), its wall time on
 * the worker threads, and the process's peak memory. Plain JavaScript that imports
 * the compiled `dist/` of the checkout given, so the same bench can measure an older
 * build (`--root`).
 *
 *   node bench/lib/hindsight-child.mjs ROOT LOG [THREADS]
 *
 * Prints one JSON line: {ms, phases, pairsPriced, pairsSolved, pricingRounds, cost,
 * ceiling, matched, peakRssMb}.
 */
import { resourceUsage } from 'node:process';
import { pathToFileURL } from 'node:url';
import { join } from 'node:path';

const [root, log, threadsText] = process.argv.slice(2);
const dist = (p) => pathToFileURL(join(root, 'dist', p)).href;
const { loadLog } = await import(dist('consume/index.js'));
const { DEFAULT_CONFIG } = await import(dist('model.js'));
const { solveHindsight } = await import(dist('hindsight/hindsight.js'));

const config = { ...DEFAULT_CONFIG, windowMs: 10_000 };
const { events } = await loadLog([log], { metric: config.metric });
const h = await solveHindsight(events, config, { threads: Number(threadsText ?? 2) });
process.stdout.write(
  `${JSON.stringify({
    ms: h.ms,
    phases: h.phases,
    pairsPriced: h.pairsPriced,
    pairsSolved: h.pairsSolved,
    pricingRounds: h.pricingRounds,
    cost: h.cost,
    ceiling: h.ceiling,
    matched: h.matched,
    peakRssMb: resourceUsage().maxRSS / 1024,
  })}\n`,
);
