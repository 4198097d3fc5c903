/**
 * Charts to SVG at build time: a Vega-Lite spec compiled by vega-lite, parsed and run
 * by a headless Vega view (no renderer, no DOM, no canvas), and its scene written out
 * as SVG text. The report then needs no script to be viewed.
 */
import { parse, View } from 'vega';
import { compile } from 'vega-lite';
import { pairflowError } from '../errors.js';
import type { Chart } from './charts.js';

/**
 * Vega numbers the gradients and clip paths of every SVG it writes from one counter
 * per process. Many SVGs share one page, and the same report must give the same bytes
 * however many were drawn before: each id is renamed after its chart and numbered
 * from 0 in order of appearance.
 */
export function localIds(svg: string, chartId: string): string {
  const names = new Map<string, string>();
  for (const m of svg.matchAll(/\bid="((?:gradient|clip|pattern)_\d+)"/g)) {
    if (!names.has(m[1]!)) names.set(m[1]!, `${chartId}-${m[1]!.replace(/_\d+$/, '')}-${names.size}`);
  }
  if (names.size === 0) return svg;
  return svg.replace(/\b(?:gradient|clip|pattern)_\d+\b/g, (id) => names.get(id) ?? id);
}

/**
 * Renders one chart to an SVG string. Data is inline, so the view's loader is never
 * asked for a file or URL.
 * @example const svg = await renderSvg(costSplitChart('split', rows));
 */
export async function renderSvg(chart: Chart): Promise<string> {
  let view: View | null = null;
  try {
    const vg = compile(chart.spec as unknown as Parameters<typeof compile>[0]).spec;
    view = new View(parse(vg), { renderer: 'none' });
    const svg = localIds(await view.toSVG(), chart.id);
    // The report's CSS and tests know each chart by its id.
    return svg.replace('<svg ', `<svg data-chart="${chart.id}" role="img" aria-label="${chart.title.replace(/[&"<>]/g, '')}" `);
  } catch (err) {
    throw pairflowError('PAIRFLOW_ERR_INTERNAL_BUG', { detail: `chart ${chart.id} could not be drawn: ${(err as Error).message}` }, err);
  } finally {
    view?.finalize();
  }
}
