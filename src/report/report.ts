/**
 * `pairflow report`: replay and sweep directories in, one self-contained HTML file and
 * its CSV tables out. The flow is data → figures (figures.ts) → chart specs
 * (charts.ts) → SVG (svg.ts) → one page (html.ts). Deterministic: the same
 * directories and options give the same bytes.
 */
import { basename, dirname, extname, join } from 'node:path';
import { probeWritableFile } from '../emit/probe.js';
import { writeWholeFile } from '../emit/whole-file.js';
import { pairflowVersion } from '../emit/manifest.js';
import { pairflowError } from '../errors.js';
import { formatWindow } from '../replay/summary.js';
import {
  ceilingChart, costSplitChart, coverHourChart, distributionChart, lorenzChart, mapChart, pairedChart, regretChart, runsChart,
  sweepCostChart, sweepDiffChart, workChart, type Chart,
} from './charts.js';
import {
  ceilingView, distributions, HOUR_BLOCKS, mapLayer, pairRuns, policyWords, regretByDay, regretByHourOfDay, regretSentence, runViews,
  splitOf, sweepView, workSentence, workSpread, type PairedRuns, type RunView, type SweepView,
} from './figures.js';
import { figure, headlineTable, page, provenance, table } from './html.js';
import { loadInputs, type ReportInput } from './load.js';
import { renderSvg } from './svg.js';
import { buildTables } from './tables.js';
import { dayLabel, esc, int, num, pct } from './text.js';

/** Options of {@link buildReport}. */
export interface ReportOptions {
  /** Replay (`--out`) and sweep (`--out`) directories, in the order shown. */
  dirs: readonly string[];
  /** The HTML file; the CSV tables go beside it as `<name>-<table>.csv`. */
  out: string;
  /** Bootstrap resamples for comparing runs side by side. @default 1000 */
  bootstrap?: number;
  /** Seed of that bootstrap. @default 1 */
  seed?: number;
  /** The command line, shown under provenance. @default none */
  command?: readonly string[];
  /** Called as each stage starts. */
  onPhase?: (note: string) => void;
}

/** What was written. */
export interface ReportResult {
  html: string;
  bytes: number;
  tables: string[];
  charts: number;
  runs: number;
}

/** Where the CSV table `name` of report `out` goes. */
export function tablePath(out: string, name: string): string {
  const ext = extname(out);
  const stem = ext ? basename(out, ext) : basename(out);
  return join(dirname(out), `${stem}-${name}.csv`);
}

const MAP_TEXT = {
  abandoned: { title: 'Where orders went unserved', legend: 'orders abandoned', caption: 'Orders that left unmatched online, by where they were, over the whole log.' },
  supplyValue: {
    title: 'Where couriers were scarce: the value of one more courier',
    legend: 'mean value (min-eq.)',
    caption: 'Mean dual price of the couriers waiting in each cell, over every window that solved there (minus the supply price v of SPEC §5): the minutes-equivalent one more courier there would have saved that window. 0 where couriers were to spare.',
  },
} as const;

function mapFigures(v: RunView, charts: Chart[]): string {
  let html = '';
  const add = (c: Chart | null): void => {
    if (c) charts.push(c);
  };
  const abandoned = mapLayer(v, 'abandoned');
  const value = mapLayer(v, 'supplyValue');
  const valueHours = mapLayer(v, 'supplyValue', true);
  const mergeNote = (l: { merge: number; cellKm: number }): string => ` Squares of ${num(l.cellKm * l.merge, 2)} km; km from the south-west corner of the area shown.`;
  const cs: Array<Chart | null> = [
    abandoned && abandoned.cells.length > 0 ? mapChart(`${v.key}-map-abandoned`, abandoned, { ...MAP_TEXT.abandoned, caption: MAP_TEXT.abandoned.caption + mergeNote(abandoned) }) : null,
    value && value.cells.length > 0 ? mapChart(`${v.key}-map-value`, value, { ...MAP_TEXT.supplyValue, caption: MAP_TEXT.supplyValue.caption + mergeNote(value), format: '.2f' }) : null,
  ];
  for (const c of cs) add(c);
  html += `<div class="row">${cs.filter((c): c is Chart => c !== null).map((c) => `<!--chart:${c.id}-->`).join('')}</div>`;
  if (valueHours && valueHours.cells.length > 0) {
    const c = mapChart(`${v.key}-map-value-hours`, valueHours, {
      title: 'The value of one more courier, by time of day (UTC)',
      legend: 'mean value (min-eq.)',
      caption: 'The same dual prices in blocks of four hours: where and when supply was short.' + mergeNote(valueHours),
      format: '.2f',
      panels: HOUR_BLOCKS.map((b) => b.label),
    });
    add(c);
    html += `<!--chart:${c.id}-->`;
  }
  if (!abandoned && !value) html += '<p class="note">No unit had a place on the map.</p>';
  return html;
}

function runSection(v: RunView, charts: Chart[]): string {
  let html = `<section id="run-${esc(v.key)}"><h2>${esc(v.title)}</h2>` +
    `<p class="meta">${esc(policyWords(v.policy))} · figures from <code>${esc(v.figuresFile)}</code> and the digest of <code>${esc(v.dir)}</code></p>`;
  if (!v.digest) {
    return html + '<p class="note">This directory has no digest.json (written by an older pairflow, or without the report\'s tables), so only the headline above can be shown. Replay again with <code>--out</code> to draw the rest.</p></section>';
  }
  const push = (c: Chart): string => {
    charts.push(c);
    return `<!--chart:${c.id}-->`;
  };
  // Where the regret comes from.
  html += '<h3>Where the regret comes from</h3>';
  if (v.hasHindsight) {
    html += `<p class="sentence">${esc(regretSentence(v))}</p>`;
    const byMarket = new Map<string, typeof v.hours>();
    for (const h of v.hours) {
      let l = byMarket.get(h.market);
      if (!l) byMarket.set(h.market, (l = []));
      l.push(h);
    }
    const splitRows = [...byMarket.entries()].sort((a, b) => (a[0] < b[0] ? -1 : 1)).flatMap(([market, hs]) => {
      const s = splitOf(hs);
      return [{ market, source: 'online' as const, ...s.online }, { market, source: 'hindsight' as const, ...s.hindsight }];
    });
    html += push(costSplitChart(`${v.key}-cost-split`, splitRows));
    html += push(regretChart(`${v.key}-regret-hour`, regretByHourOfDay(v.hours), 'hour'));
    const days = regretByDay(v.hours);
    if (days.length >= 2) html += push(regretChart(`${v.key}-regret-day`, days, 'day'));
    else html += `<p class="note">The log covers one day (${esc(days[0] ? dayLabel(days[0].at) : '–')}), so there is no split by day.</p>`;
  } else {
    html += '<p class="note">The hindsight optimum was not computed for this run (replay without <code>--no-hindsight</code>), so there is no regret to split.</p>';
  }
  // Waits and travel.
  const dists = distributions(v.digest);
  html += '<h3>Waits and travel</h3>';
  const waitRows = v.digest.markets.map((m) => [
    m.market, num(m.online.meanWaitMin, 2), num(m.online.p95WaitMin, 2), num(m.hindsight?.meanWaitMin, 2), num(m.hindsight?.p95WaitMin, 2),
    num(m.online.meanTravelMin, 2), num(m.hindsight?.meanTravelMin, 2),
  ]);
  html += table(['market', 'mean wait online', 'p95 wait online', 'mean wait hindsight', 'p95 wait hindsight', 'mean travel online', 'mean travel hindsight'], waitRows, [false, true, true, true, true, true, true]);
  html += `<div class="row">${push(distributionChart(`${v.key}-waits`, dists, 'wait'))}${push(distributionChart(`${v.key}-travel`, dists, 'travel'))}</div>`;
  // Work per supply unit.
  const w = workSpread(v.supply);
  html += '<h3>How the work was spread over couriers</h3>';
  html += `<p class="sentence">${esc(workSentence(w))}</p>`;
  html += `<div class="row">${push(workChart(`${v.key}-work`, w))}${push(lorenzChart(`${v.key}-lorenz`, w))}</div>`;
  html += table(['market', 'couriers', 'jobs', 'Gini', 'busiest tenth did', 'with no job'],
    w.byMarket.map((m) => [m.market, int(m.units), int(m.assignments), num(m.gini, 3), pct(m.top10), int(m.idle)]), [false, true, true, true, true, true]);
  html += '<p class="note">Counts are per supply id over the whole log, not per hour online: couriers who worked longer shifts get more jobs. Check uneven spreads against shift lengths before calling them unfair, and follow local rules on working time and algorithmic management.</p>';
  // Maps.
  html += '<h3>Where demand went unserved and where supply was scarce</h3>';
  html += mapFigures(v, charts);
  // Ceiling.
  const cv = ceilingView(v);
  html += '<h3>The match ceiling and what bounds it</h3>';
  if (cv) {
    html += `<p class="sentence">${esc(cv.sentence)}</p>`;
    html += push(ceilingChart(`${v.key}-ceiling`, cv));
    if (cv.byHour.length > 0) html += push(coverHourChart(`${v.key}-cover-hour`, cv));
    const cover = mapLayer(v, 'coverSupply');
    if (cover && cover.cells.length > 0) {
      html += push(mapChart(`${v.key}-map-cover`, cover, {
        title: 'Where the couriers were that orders competed for',
        legend: 'couriers in the cover',
        caption: `The couriers of the minimum vertex cover, by where they appeared: more couriers here, at the hours above, is what would have let more orders be matched at all. Squares of ${num(cover.cellKm * cover.merge, 2)} km.`,
      }));
    }
  } else {
    html += '<p class="note">The match ceiling comes with the hindsight optimum, which this run did not compute.</p>';
  }
  return html + '</section>';
}

function sweepSection(s: SweepView, charts: Chart[]): string {
  const sw = s.input.sweep;
  const push = (c: Chart): string => {
    charts.push(c);
    return `<!--chart:${c.id}-->`;
  };
  let html = `<section id="sweep-${esc(s.key)}"><h2>Sweep ${esc(s.input.name)}: which policy to use</h2>`;
  html += `<p class="meta">${sw.policies.length} policies (window / reserve / commit) on ${esc(sw.inputs.join(', '))}; ` +
    `${sw.bootstrap ? `${int(sw.bootstrap.resamples)} bootstrap resamples of ${sw.bootstrap.buckets} ${sw.bootstrap.unit}s, seed ${sw.bootstrap.seed}` : 'no bootstrap'}.</p>`;
  html += `<p class="advice" data-sweep="${esc(s.key)}">${esc(s.recommendation.text)}</p>`;
  html += push(sweepCostChart(`${s.key}-sweep-cost`, s));
  html += push(sweepDiffChart(`${s.key}-sweep-diff`, s));
  if (s.paired && s.recommendation.runnerUp) {
    html += push(pairedChart(`${s.key}-sweep-paired`, `${s.recommendation.runnerUp} minus ${s.recommendation.label}, ${s.paired.unit} by ${s.paired.unit}`,
      `Above zero where the runner-up cost more than the recommended policy. The margin's interval above comes from resampling these ${s.paired.unit}s.`, s.paired.unit, s.paired.rows));
  }
  html += table(
    ['policy', 'online cost', 'interval', 'vs recommended', 'paired interval', 'cheapest in', 'mean wait', 'abandoned'],
    sw.policies.map((p, i) => {
      const v = s.policies[i]!;
      return [
        `${p.label}${v.recommended ? ' (recommended)' : ''}`, num(v.cost), v.lo === null ? '–' : `${num(v.lo)} – ${num(v.hi)}`,
        v.recommended ? '–' : `+${num(v.diff)}`, v.recommended || v.diffLo === null ? '–' : `${num(v.diffLo)} – ${num(v.diffHi)}`,
        v.bestShare === null ? '–' : pct(v.bestShare), num(p.online.meanWaitMin, 2), int(p.online.abandoned),
      ];
    }),
    [false, true, true, true, true, true, true, true],
  );
  html += `<p class="note">The hindsight optimum of this log costs ${num(sw.hindsight.cost)}; each policy's regret is its cost minus that. ` +
    `The recommended policy is detailed in its own section below.</p>`;
  return html + '</section>';
}

const LIMITS = [
  'Why: the log records what happened, not why. Weather, traffic, kitchen delays or a promotion that drove demand are not in it.',
  'Shifts: work per courier is counted per id over the whole log, not per hour online; uneven counts may mean uneven shifts.',
  'Money: costs are minutes-equivalent under the configured weights (travel minutes, wait weight, abandon penalty P); what a minute or an abandoned order is worth in money is for you to set.',
  'Hindsight is a bound, not a target: it knows every order in advance. The gap to it shows how much better any policy could do at most.',
  'Other weeks: intervals resample the days (or hours) of this log; a different season or a change in the city can move every figure.',
  'Local time: hours are UTC; read them against the city\'s own clock.',
];

/**
 * Builds the report of `opts.dirs` into `opts.out` (HTML) and the CSV tables beside it.
 * Outputs are checked before anything is read.
 * @example await buildReport({ dirs: ['runs/w5s', 'runs/w30s'], out: 'report.html' })
 */
export async function buildReport(opts: ReportOptions): Promise<ReportResult> {
  if (!opts.out.toLowerCase().endsWith('.html') && !opts.out.toLowerCase().endsWith('.htm')) {
    throw pairflowError('PAIRFLOW_ERR_CLI_OPTION', { option: '--out', detail: `'${opts.out}' should name an .html file` });
  }
  await probeWritableFile(opts.out);
  opts.onPhase?.(`reading ${opts.dirs.length} director${opts.dirs.length === 1 ? 'y' : 'ies'}`);
  const inputs: ReportInput[] = await loadInputs(opts.dirs);
  const views = runViews(inputs);
  const resamples = opts.bootstrap ?? 1000;
  const seed = opts.seed ?? 1;
  const sweeps = inputs.flatMap((i, k) => (i.kind === 'sweep' ? [sweepView(i, `s${k + 1}`)] : []));
  const paired: PairedRuns[] = [];
  const unpaired: string[] = [];
  for (let k = 1; k < views.length; k++) {
    const a = views[0]!;
    const b = views[k]!;
    if (a.inputsKey === null || a.inputsKey !== b.inputsKey) {
      unpaired.push(`${b.title} replayed ${b.inputsKey === null ? 'unknown inputs' : 'other inputs'} than ${a.title}, so the two are not compared day by day.`);
      continue;
    }
    const p = pairRuns(a, b, { resamples, seed });
    if (p) paired.push(p);
    else unpaired.push(`${b.title} or ${a.title} has no digest, so the two are not compared day by day.`);
  }

  opts.onPhase?.('drawing the charts');
  const charts: Chart[] = [];
  const first = views[0]!;
  let body = '<header><p class="kicker">pairflow report</p>' +
    '<h1>The online policy against the best possible in hindsight</h1>' +
    `<p class="lede">${esc(first.headline[0]!.sentence)}</p>` +
    sweeps.map((s) => `<p class="lede">${esc(s.recommendation.text)}</p>`).join('');
  const logSpan = (v: RunView): string => {
    if (v.hours.length === 0) return '';
    const lo = Math.min(...v.hours.map((h) => h.hour));
    const hi = Math.max(...v.hours.map((h) => h.hour)) + 3_600_000;
    return `${new Date(lo).toISOString().slice(0, 16).replace('T', ' ')} to ${new Date(hi).toISOString().slice(0, 16).replace('T', ' ')} UTC`;
  };
  const span = logSpan(first);
  body += `<p class="meta">${views.length === 1 ? 'One run' : `${views.length} runs`}${span ? `; orders arriving ${esc(span)}` : ''}. ` +
    'Costs are in minutes-equivalent: travel minutes, plus the wait weight times minutes waited, plus the abandon penalty per order never matched. ' +
    '“Orders” are demand units and “couriers” supply units.</p>';
  const tables = buildTables(views, sweeps, paired);
  body += `<p class="meta">Tables beside this file: ${[...tables.keys()].map((n) => `<a href="${esc(basename(tablePath(opts.out, n)))}">${esc(basename(tablePath(opts.out, n)))}</a>`).join(', ')}.</p></header>`;

  const toc: Array<[string, string]> = [['headline', 'Headline']];
  for (const s of sweeps) toc.push([`sweep-${s.key}`, `Sweep ${s.input.name}`]);
  if (views.length > 1) toc.push(['side-by-side', 'Runs side by side']);
  for (const v of views) toc.push([`run-${v.key}`, v.title]);
  toc.push(['limits', 'What this report cannot tell you'], ['provenance', 'Provenance']);
  body += `<nav><ol>${toc.map(([id, t]) => `<li><a href="#${esc(id)}">${esc(t)}</a></li>`).join('')}</ol></nav>`;

  body += '<section id="headline"><h2>Headline</h2>';
  for (const v of views) {
    body += `<h3>${esc(v.title)}</h3><p class="meta">${esc(policyWords(v.policy))}</p>` + headlineTable(v.key, v.headline);
  }
  body += '</section>';
  for (const s of sweeps) body += sweepSection(s, charts);
  if (views.length > 1) {
    body += '<section id="side-by-side"><h2>Runs side by side</h2>';
    const c = runsChart('runs', views.map((v) => ({ title: v.title, online: v.headline[0]!.online.cost, hindsight: v.headline[0]!.hindsight?.cost ?? null })));
    charts.push(c);
    body += `<!--chart:${c.id}-->`;
    body += table(['run', 'policy', 'online cost', 'regret', 'matched', 'abandoned', 'mean wait'],
      views.map((v) => [v.title, `${formatWindow(v.policy.windowMs)} / R=${v.policy.reserve ?? 'P'} / ${v.policy.commit}`, num(v.headline[0]!.online.cost), num(v.headline[0]!.regret),
        int(v.headline[0]!.online.matched), int(v.headline[0]!.online.abandoned), num(v.headline[0]!.online.meanWaitMin, 2)]),
      [false, false, true, true, true, true, true]);
    for (const p of paired) {
      body += `<p class="sentence">${esc(p.sentence)}</p>`;
      const pc = pairedChart(`paired-${p.a.key}-${p.b.key}`, `${p.b.title} minus ${p.a.title}, ${p.unit} by ${p.unit}`,
        `Online cost of ${p.b.title} minus that of ${p.a.title}, for the orders that arrived in each ${p.unit}. Above zero where ${p.b.title} cost more.`, p.unit, p.rows);
      charts.push(pc);
      body += `<!--chart:${pc.id}-->`;
    }
    for (const u of unpaired) body += `<p class="note">${esc(u)}</p>`;
    body += '</section>';
  }
  for (const v of views) body += runSection(v, charts);
  body += `<section id="limits"><h2>What this report cannot tell you</h2><ul class="limits">${LIMITS.map((l) => `<li>${esc(l)}</li>`).join('')}</ul></section>`;
  body += '<section id="provenance"><h2>Provenance</h2>' +
    inputs.map((i) => provenance(i.name, i.dir, i.manifest)).join('') +
    `<p class="meta">Report made by pairflow ${esc(pairflowVersion())}${opts.command ? ` with <code>${esc(opts.command.join(' '))}</code>` : ''}.</p></section>`;
  body += '<footer>pairflow — online matching with exact assignments, replayed against the hindsight optimum. Location data is personal data: share this report as you would the logs it was made from.</footer>';

  // Draw every chart, then put each in its place.
  const svgs = new Map<string, string>();
  for (const c of charts) svgs.set(c.id, figure(c.id, c.title, c.caption, await renderSvg(c)));
  const html = page({ title: `pairflow report: ${views.map((v) => v.title).join(', ')}`, body: body.replace(/<!--chart:([^>]+?)-->/g, (_, id: string) => svgs.get(id) ?? '') });

  opts.onPhase?.(`writing ${opts.out}`);
  const written: string[] = [];
  for (const [name, text] of tables) {
    const path = tablePath(opts.out, name);
    await writeWholeFile(path, text);
    written.push(path);
  }
  await writeWholeFile(opts.out, html);
  return { html: opts.out, bytes: Buffer.byteLength(html), tables: written, charts: charts.length, runs: views.length };
}
