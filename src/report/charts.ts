/**
 * The report's charts as Vega-Lite specifications: declarative descriptions of
 * marks and encodings, compiled and drawn to SVG by Vega's own packages (svg.ts).
 * Nothing here draws; every spec carries its data inline.
 *
 * Colours: the Okabe–Ito palette (Okabe & Ito 2008, "Color Universal Design"; common
 * practice for colour-blind-safe categories), picked so the three cost causes differ
 * in lightness too, and lines told apart by dash as well as colour, so a grey print
 * still reads. Maps use the viridis scale (perceptually uniform, readable in grey),
 * darker for more.
 */
import type { CeilingView, Distribution, MapLayer, RegretRow, SweepView, WorkSpread } from './figures.js';
import { dayLabel } from './text.js';

/** A Vega-Lite specification (kept loose: the compiler checks it). */
export type ChartSpec = Record<string, unknown>;

/** One chart of the report: its spec, and what a reader is told under it. */
export interface Chart {
  id: string;
  title: string;
  caption: string;
  spec: ChartSpec;
}

export const PALETTE = {
  blue: '#0072B2',
  orange: '#E69F00',
  vermillion: '#D55E00',
  sky: '#56B4E9',
  green: '#009E73',
  purple: '#CC79A7',
  ink: '#222222',
  grid: '#e4e4e4',
} as const;

const COMPONENTS = { domain: ['travel', 'waiting', 'abandoned'], range: [PALETTE.blue, PALETTE.orange, PALETTE.vermillion] };
/** Stacking order of the causes: travel nearest the axis, abandoned outermost. */
const STACK = { travel: 0, waiting: 1, abandoned: 2 } as const;
const SOURCES = { domain: ['online', 'hindsight'], range: [PALETTE.vermillion, PALETTE.blue] };

const FONT = 'Helvetica, Arial, sans-serif';

/** The look shared by every chart. */
export const THEME = {
  font: FONT,
  background: 'white',
  padding: 6,
  view: { stroke: null },
  axis: { labelLimit: 360, labelColor: PALETTE.ink, titleColor: PALETTE.ink, gridColor: PALETTE.grid, domainColor: '#888888', tickColor: '#888888', labelFontSize: 11, titleFontSize: 11, titleFontWeight: 'normal' },
  legend: { labelFontSize: 11, titleFontSize: 11, titleFontWeight: 'normal', orient: 'top', titleLimit: 360, labelLimit: 360 },
  header: { labelFontSize: 11, titleFontSize: 11 },
  title: { fontSize: 12, fontWeight: 'normal', anchor: 'start' },
} as const;

function spec(body: ChartSpec): ChartSpec {
  return { $schema: 'https://vega.github.io/schema/vega-lite/v6.json', config: THEME, ...body };
}

/** Online and hindsight cost per market, split by cause. */
export function costSplitChart(id: string, rows: Array<{ market: string; source: 'online' | 'hindsight'; travel: number; wait: number; abandon: number }>): Chart {
  const values = rows.flatMap((r) => [
    { row: `${r.market} · ${r.source}`, component: 'travel', k: STACK.travel, cost: r.travel },
    { row: `${r.market} · ${r.source}`, component: 'waiting', k: STACK.waiting, cost: r.wait },
    { row: `${r.market} · ${r.source}`, component: 'abandoned', k: STACK.abandoned, cost: r.abandon },
  ]);
  return {
    id,
    title: 'Cost by cause, online and in hindsight',
    caption: 'Each bar is one market\'s total cost, split into travel, waiting and abandoned orders (the abandon penalty per unserved order). The gap between a market\'s two bars is its regret.',
    spec: spec({
      width: 560,
      data: { values },
      mark: { type: 'bar', stroke: 'white', strokeWidth: 0.5 },
      encoding: {
        y: { field: 'row', type: 'nominal', title: null, sort: null },
        x: { field: 'cost', type: 'quantitative', title: 'cost (minutes-equivalent)', stack: 'zero' },
        color: { field: 'component', type: 'nominal', title: 'cause', scale: COMPONENTS },
        order: { field: 'k', type: 'quantitative', sort: 'ascending' },
      },
    }),
  };
}

/** Regret by hour of day or by day, stacked by cause (a cause that did better than hindsight goes below zero). */
export function regretChart(id: string, rows: readonly RegretRow[], by: 'hour' | 'day'): Chart {
  const label = (r: RegretRow): string => (by === 'hour' ? String(r.at).padStart(2, '0') : dayLabel(r.at));
  const values = rows.flatMap((r) => [
    { at: label(r), component: 'travel', k: STACK.travel, regret: r.travel },
    { at: label(r), component: 'waiting', k: STACK.waiting, regret: r.wait },
    { at: label(r), component: 'abandoned', k: STACK.abandoned, regret: r.abandon },
  ]);
  return {
    id,
    title: by === 'hour' ? 'Regret by hour of day (UTC)' : 'Regret by day (UTC)',
    caption: by === 'hour'
      ? 'Online minus hindsight cost of the orders that arrived in each hour of the day, summed over the days of the log, by cause.'
      : 'Online minus hindsight cost of the orders that arrived on each day, by cause.',
    spec: spec({
      width: by === 'hour' ? 560 : Math.max(240, Math.min(700, rows.length * 60)),
      height: 200,
      data: { values },
      mark: { type: 'bar', stroke: 'white', strokeWidth: 0.5 },
      encoding: {
        x: { field: 'at', type: 'ordinal', title: by === 'hour' ? 'hour of day (UTC)' : null, sort: null, axis: { labelAngle: 0 } },
        y: { field: 'regret', type: 'quantitative', title: 'regret (minutes-equivalent)', stack: 'zero' },
        color: { field: 'component', type: 'nominal', title: 'cause', scale: COMPONENTS },
        order: { field: 'k', type: 'quantitative', sort: 'ascending' },
      },
    }),
  };
}

/** A distribution of waits or travel times, online (solid) against hindsight (dashed). */
export function distributionChart(id: string, dists: readonly Distribution[], measure: 'wait' | 'travel'): Chart {
  const values = dists
    .filter((d) => d.measure === measure)
    .flatMap((d) => {
      const total = d.bins.reduce((s, b) => s + b.count, 0);
      const pts = d.bins.map((b) => ({ source: d.source, min: b.lo, share: total > 0 ? b.count / total : 0 }));
      const last = d.bins[d.bins.length - 1];
      // Close the last step at its bin's upper edge.
      if (last) pts.push({ source: d.source, min: last.hi, share: total > 0 ? last.count / total : 0 });
      return pts;
    });
  return {
    id,
    title: measure === 'wait' ? 'How long orders waited for a courier' : 'How far couriers travelled to their orders',
    caption: measure === 'wait'
      ? 'Share of matched orders by minutes waited before the match (online: from arrival to the window\'s decision; hindsight: until a courier was there).'
      : 'Share of matched orders by travel minutes of their courier.',
    spec: spec({
      width: 270,
      height: 170,
      data: { values },
      mark: { type: 'line', interpolate: 'step-after', strokeWidth: 2 },
      encoding: {
        x: { field: 'min', type: 'quantitative', title: measure === 'wait' ? 'wait (min)' : 'travel (min)' },
        y: { field: 'share', type: 'quantitative', title: 'share of matched orders', axis: { format: '.0%' } },
        color: { field: 'source', type: 'nominal', title: null, scale: SOURCES },
        strokeDash: { field: 'source', type: 'nominal', title: null, scale: { domain: ['online', 'hindsight'], range: [[1, 0], [6, 3]] } },
      },
    }),
  };
}

/** Supply units by number of assignments. */
export function workChart(id: string, w: WorkSpread): Chart {
  const width = w.counts.length > 0 ? w.counts[0]!.hi - w.counts[0]!.lo : 1;
  return {
    id,
    title: 'Jobs per courier',
    caption: width === 1 ? 'Couriers (supply ids) by how many assignments they got over the whole log.' : `Couriers (supply ids) by how many assignments they got, in bins of ${width}.`,
    spec: spec({
      width: 270,
      height: 170,
      data: { values: w.counts },
      mark: { type: 'bar', color: PALETTE.blue, stroke: 'white', strokeWidth: 0.5 },
      encoding: {
        x: { field: 'lo', type: 'quantitative', bin: { binned: true, step: width }, title: 'assignments' },
        x2: { field: 'hi' },
        y: { field: 'units', type: 'quantitative', title: 'couriers' },
      },
    }),
  };
}

/** The Lorenz curve of assignments over supply units, against equal shares. */
export function lorenzChart(id: string, w: WorkSpread): Chart {
  const values = [
    ...w.lorenz.map((p) => ({ ...p, line: 'actual' })),
    { units: 0, share: 0, line: 'equal shares' },
    { units: 1, share: 1, line: 'equal shares' },
  ];
  return {
    id,
    title: 'Who did the work (Lorenz curve)',
    caption: 'Couriers sorted from least to most busy: the share of all jobs done by the least busy x % of them. The further below the diagonal, the less evenly the work was spread.',
    spec: spec({
      width: 200,
      height: 200,
      data: { values },
      mark: { type: 'line', strokeWidth: 2 },
      encoding: {
        x: { field: 'units', type: 'quantitative', title: 'share of couriers', axis: { format: '.0%' } },
        y: { field: 'share', type: 'quantitative', title: 'share of jobs', axis: { format: '.0%' } },
        color: { field: 'line', type: 'nominal', title: null, scale: { domain: ['actual', 'equal shares'], range: [PALETTE.blue, '#999999'] } },
        strokeDash: { field: 'line', type: 'nominal', title: null, scale: { domain: ['actual', 'equal shares'], range: [[1, 0], [4, 3]] } },
      },
    }),
  };
}

/**
 * A map of cells in km, drawn as squares (no tiles): one panel, or one per block of
 * hours. Cells with nothing to show are left white on the pale extent of the city.
 */
export function mapChart(id: string, layer: MapLayer, opts: { title: string; caption: string; legend: string; format?: string; panels?: string[] }): Chart {
  const panelWidth = opts.panels ? 190 : 380;
  const height = Math.max(80, Math.round(panelWidth * (layer.height / Math.max(layer.width, 1e-9))));
  const x = { field: 'x0', type: 'quantitative', title: 'km east', scale: { domain: [0, layer.width], nice: false, zero: true } };
  const y = { field: 'y0', type: 'quantitative', title: 'km north', scale: { domain: [0, layer.height], nice: false, zero: true } };
  const cellLayer = {
    // Hundreds of cells: no per-cell description (the caption and legend say what they are).
    mark: { type: 'rect', aria: false },
    encoding: {
      x, x2: { field: 'x1' }, y, y2: { field: 'y1' },
      color: {
        field: 'value', type: 'quantitative', title: opts.legend,
        scale: { scheme: 'viridis', reverse: true },
        legend: { orient: 'right', ...(opts.format ? { format: opts.format } : {}), gradientLength: Math.min(160, height) },
      },
    },
  };
  const frame = {
    data: { values: [{ x0: 0, x1: layer.width, y0: 0, y1: layer.height }] },
    mark: { type: 'rect', color: '#f4f4f4' },
    encoding: { x, x2: { field: 'x1' }, y, y2: { field: 'y1' } },
  };
  const body = opts.panels
    ? {
      data: { values: layer.cells },
      facet: { field: 'panel', type: 'ordinal', title: null, sort: opts.panels, header: { labelOrient: 'top' } },
      columns: 3,
      spec: { width: panelWidth, height, layer: [frame, cellLayer] },
      resolve: { scale: { color: 'shared' } },
    }
    : { data: { values: layer.cells }, width: panelWidth, height, layer: [frame, cellLayer] };
  return { id, title: opts.title, caption: opts.caption, spec: spec(body) };
}

/** Demand, the match ceiling, and what hindsight and the online policy matched. */
export function ceilingChart(id: string, c: CeilingView): Chart {
  const values = [
    { what: 'orders (demand occurrences)', n: c.demand, kind: 'limit' },
    { what: 'match ceiling (most any policy could match)', n: c.ceiling, kind: 'limit' },
    ...(c.hindsight !== null ? [{ what: 'matched in hindsight', n: c.hindsight, kind: 'matched' }] : []),
    { what: 'matched online', n: c.online, kind: 'matched' },
  ];
  return {
    id,
    title: 'Orders, the match ceiling, and what was matched',
    caption: 'The ceiling is a maximum-cardinality matching of every allowed pair in hindsight (Hopcroft–Karp), certified by the minimum vertex cover below (König\'s theorem).',
    spec: spec({
      width: 420,
      data: { values },
      mark: { type: 'bar' },
      encoding: {
        y: { field: 'what', type: 'nominal', title: null, sort: null },
        x: { field: 'n', type: 'quantitative', title: 'orders' },
        color: { field: 'kind', type: 'nominal', title: null, scale: { domain: ['limit', 'matched'], range: ['#9a9a9a', PALETTE.blue] }, legend: null },
      },
    }),
  };
}

/** The cover's units by hour of day of their arrival. */
export function coverHourChart(id: string, c: CeilingView): Chart {
  return {
    id,
    title: 'The units that bound the ceiling, by hour of arrival (UTC)',
    caption: 'Couriers in the cover: orders competed for them. Orders in the cover: there, couriers were to spare.',
    spec: spec({
      width: 560,
      height: 160,
      data: { values: c.byHour.map((r) => ({ ...r, h: String(r.hour).padStart(2, '0') })) },
      mark: { type: 'bar', stroke: 'white', strokeWidth: 0.5 },
      encoding: {
        x: { field: 'h', type: 'ordinal', title: 'hour of day (UTC)', axis: { labelAngle: 0 } },
        y: { field: 'units', type: 'quantitative', title: 'units in the cover', stack: 'zero' },
        color: { field: 'side', type: 'nominal', title: null, scale: { domain: ['couriers', 'orders'], range: [PALETTE.vermillion, PALETTE.sky] } },
      },
    }),
  };
}

/** A sweep: each policy's cost with its bootstrap band, and the hindsight optimum as a rule. */
export function sweepCostChart(id: string, v: SweepView): Chart {
  const values = v.policies.map((p) => ({ ...p, mark: p.recommended ? 'recommended' : 'other' }));
  const y = { field: 'label', type: 'nominal', title: null, sort: null };
  return {
    id,
    title: 'Cost of each policy, with its bootstrap band',
    caption: `Points: each policy's online cost over the whole log; bars: the ${Math.round((v.input.sweep.bootstrap?.level ?? 0.95) * 100)} % bootstrap interval over resampled ${v.input.sweep.buckets.unit}s. The dashed line is the hindsight optimum. Bands this wide come from how much the ${v.input.sweep.buckets.unit}s differ, not from the policies: compare policies with the paired differences next.`,
    spec: spec({
      width: 480,
      layer: [
        { data: { values: values.filter((p) => p.lo !== null) }, mark: { type: 'rule', color: '#777777', strokeWidth: 1.5 }, encoding: { y, x: { field: 'lo', type: 'quantitative', title: 'online cost (minutes-equivalent)', scale: { zero: false } }, x2: { field: 'hi' } } },
        { data: { values }, mark: { type: 'point', filled: true, size: 70 }, encoding: { y, x: { field: 'cost', type: 'quantitative' }, color: { field: 'mark', type: 'nominal', title: null, scale: { domain: ['recommended', 'other'], range: [PALETTE.vermillion, PALETTE.ink] } }, shape: { field: 'mark', type: 'nominal', title: null, scale: { domain: ['recommended', 'other'], range: ['diamond', 'circle'] } } } },
        { data: { values: [{ h: v.hindsightCost }] }, mark: { type: 'rule', strokeDash: [5, 3], color: PALETTE.blue }, encoding: { x: { field: 'h', type: 'quantitative' } } },
      ],
    }),
  };
}

/** A sweep: each policy's cost minus the recommended one's, with the paired interval. */
export function sweepDiffChart(id: string, v: SweepView): Chart {
  const values = v.policies.map((p) => ({ ...p, mark: p.recommended ? 'recommended' : 'other' }));
  const y = { field: 'label', type: 'nominal', title: null, sort: null };
  return {
    id,
    title: 'How much more each policy cost than the recommended one',
    caption: 'Paired: every resample draws the same days (or hours) for both policies, so what the days have in common cancels. A bar clear of zero means the log tells the two policies apart.',
    spec: spec({
      width: 480,
      layer: [
        { data: { values: [{ z: 0 }] }, mark: { type: 'rule', color: '#999999' }, encoding: { x: { field: 'z', type: 'quantitative' } } },
        { data: { values: values.filter((p) => p.diffLo !== null) }, mark: { type: 'rule', color: '#777777', strokeWidth: 1.5 }, encoding: { y, x: { field: 'diffLo', type: 'quantitative', title: 'cost − recommended cost' }, x2: { field: 'diffHi' } } },
        { data: { values }, mark: { type: 'point', filled: true, size: 70 }, encoding: { y, x: { field: 'diff', type: 'quantitative' }, color: { field: 'mark', type: 'nominal', title: null, scale: { domain: ['recommended', 'other'], range: [PALETTE.vermillion, PALETTE.ink] } }, shape: { field: 'mark', type: 'nominal', title: null, scale: { domain: ['recommended', 'other'], range: ['diamond', 'circle'] } } } },
      ],
    }),
  };
}

/** A paired difference per bucket (day or hour): bars above zero where the second cost more. */
export function pairedChart(id: string, title: string, caption: string, unit: 'day' | 'hour', rows: ReadonlyArray<{ at: number; diff: number }>): Chart {
  const label = (at: number): string => (unit === 'day' ? dayLabel(at) : new Date(at).toISOString().slice(11, 13));
  return {
    id,
    title,
    caption,
    spec: spec({
      width: unit === 'day' ? Math.max(240, Math.min(700, rows.length * 60)) : 560,
      height: 170,
      data: { values: rows.map((r) => ({ at: label(r.at), diff: r.diff, sign: r.diff >= 0 ? 'more' : 'less' })) },
      mark: { type: 'bar' },
      encoding: {
        x: { field: 'at', type: 'ordinal', sort: null, title: unit === 'day' ? null : 'hour (UTC)', axis: { labelAngle: 0 } },
        y: { field: 'diff', type: 'quantitative', title: 'cost difference' },
        color: { field: 'sign', type: 'nominal', title: null, scale: { domain: ['more', 'less'], range: [PALETTE.vermillion, PALETTE.blue] }, legend: null },
      },
    }),
  };
}

/** The headline comparison of runs side by side: online cost against the hindsight optimum. */
export function runsChart(id: string, runs: ReadonlyArray<{ title: string; online: number; hindsight: number | null }>): Chart {
  const values = runs.flatMap((r) => [
    { run: r.title, source: 'online', cost: r.online },
    ...(r.hindsight !== null ? [{ run: r.title, source: 'hindsight', cost: r.hindsight }] : []),
  ]);
  return {
    id,
    title: 'The runs side by side',
    caption: 'Online cost of each run and the hindsight optimum of its log.',
    spec: spec({
      width: 480,
      data: { values },
      mark: { type: 'bar' },
      encoding: {
        y: { field: 'run', type: 'nominal', title: null, sort: null },
        yOffset: { field: 'source', sort: ['online', 'hindsight'] },
        x: { field: 'cost', type: 'quantitative', title: 'cost (minutes-equivalent)' },
        color: { field: 'source', type: 'nominal', title: null, scale: SOURCES },
      },
    }),
  };
}

