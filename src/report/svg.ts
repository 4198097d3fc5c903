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
 * Renders one chart to an SVG string. Data is inline, so the view's loader is never
 * asked for a file or URL.
 * @example const svg = await renderSvg(costSplitChart('split', rows));
 */
export async function renderSvg(chart: Chart): Promise<string> {
  let view: View | null = null;
  try {
    const vg = compile(chart.spec as unknown as Parameters<typeof compile>[0]).spec;
    view = new View(parse(vg), { renderer: 'none' });
    const svg = await view.toSVG();
    // Vega marks the root with class "marks"; the report's CSS and tests know each chart by its id.
    return svg.replace('<svg ', `<svg data-chart="${chart.id}" role="img" aria-label="${chart.title.replace(/[&"<>]/g, '')}" `);
  } catch (err) {
    throw pairflowError('PAIRFLOW_ERR_INTERNAL_BUG', { detail: `chart ${chart.id} could not be drawn: ${(err as Error).message}` }, err);
  } finally {
    view?.finalize();
  }
}
