/**
 * The report page: one HTML document with its style inline and every chart as inline
 * SVG. No script, no font or image to fetch; a Content-Security-Policy forbids any
 * request, so the file opens the same from a disk, an e-mail or a share. Pure: text
 * out.
 */
import type { RunManifest } from '../emit/manifest.js';
import type { Headline } from './figures.js';
import { esc, int, minutes, num } from './text.js';

/** The page's style: a plain reading column, tabular figures, charts that shrink to fit and print whole. */
export const STYLE = `
:root { --ink: #1f2328; --muted: #5b6168; --rule: #d7dadd; --accent: #D55E00; --soft: #f6f5f2; }
* { box-sizing: border-box; }
body { margin: 0; color: var(--ink); background: #fff; font: 15px/1.5 Georgia, 'Times New Roman', serif; }
main { max-width: 1000px; margin: 0 auto; padding: 28px 24px 60px; }
h1, h2, h3, .kicker, table, figcaption, nav, .meta, code, footer { font-family: Helvetica, Arial, sans-serif; }
h1 { font-size: 26px; line-height: 1.2; margin: 4px 0 12px; }
h2 { font-size: 19px; margin: 40px 0 8px; padding-top: 10px; border-top: 3px solid var(--ink); }
h3 { font-size: 15px; margin: 26px 0 6px; }
.kicker { text-transform: uppercase; letter-spacing: 0.12em; font-size: 11px; color: var(--muted); margin: 0; }
.lede { font-size: 18px; border-left: 4px solid var(--accent); padding: 2px 0 2px 14px; margin: 14px 0; }
.meta { font-size: 12px; color: var(--muted); }
.sentence { margin: 6px 0; }
.note { font-size: 13px; color: var(--muted); }
.advice { background: var(--soft); border-left: 4px solid var(--accent); padding: 10px 14px; margin: 12px 0; }
nav ol { font-size: 13px; columns: 2; margin: 6px 0; }
table { border-collapse: collapse; font-size: 13px; margin: 8px 0 4px; width: 100%; }
th, td { padding: 4px 8px; border-bottom: 1px solid var(--rule); vertical-align: top; }
th { text-align: left; font-weight: 600; border-bottom: 2px solid var(--ink); }
td.n, th.n { text-align: right; font-variant-numeric: tabular-nums; white-space: nowrap; }
tr.all td { font-weight: 600; }
code, .hash { font-family: Menlo, Consolas, monospace; font-size: 12px; word-break: break-all; }
figure { margin: 16px 0 22px; break-inside: avoid; page-break-inside: avoid; }
figure svg { max-width: 100%; height: auto; display: block; }
figcaption { font-size: 12px; color: var(--muted); max-width: 720px; margin-top: 4px; }
figcaption b { color: var(--ink); font-weight: 600; }
.row { display: flex; flex-wrap: wrap; gap: 18px; align-items: flex-start; }
.row figure { flex: 1 1 300px; }
ul.limits li { margin: 4px 0; }
footer { font-size: 12px; color: var(--muted); margin-top: 40px; border-top: 1px solid var(--rule); padding-top: 8px; }
@media print {
  body { font-size: 11pt; }
  main { max-width: none; padding: 0; }
  h2 { break-before: auto; break-after: avoid; }
  nav { display: none; }
  a { color: inherit; text-decoration: none; }
}
`;

/** A chart as a captioned figure. */
export function figure(id: string, title: string, caption: string, svg: string): string {
  return `<figure id="${esc(id)}" class="chart"><figcaption><b>${esc(title)}.</b></figcaption>${svg}<figcaption>${esc(caption)}</figcaption></figure>`;
}

/** A headline table: overall and per market, each figure carrying its exact value for checks. */
export function headlineTable(runKey: string, rows: readonly Headline[]): string {
  const cell = (field: string, v: number | null | undefined, text: string): string =>
    `<td class="n" data-field="${field}"${v === null || v === undefined ? '' : ` data-value="${v}"`}>${esc(text)}</td>`;
  const head = ['', 'online cost', 'hindsight cost', 'regret', 'ratio', 'matched', 'abandoned', 'mean wait', 'p95 wait']
    .map((h, i) => `<th${i > 0 ? ' class="n"' : ''}>${h}</th>`).join('');
  const body = rows.map((h) => `<tr class="${h.market === null ? 'all' : 'market'}" data-run="${esc(runKey)}" data-market="${esc(h.market ?? '*')}">` +
    `<td>${esc(h.market ?? 'all markets')}</td>` +
    cell('online.cost', h.online.cost, num(h.online.cost)) +
    cell('hindsight.cost', h.hindsight?.cost, num(h.hindsight?.cost)) +
    cell('regret', h.regret, num(h.regret)) +
    cell('ratio', h.ratio, h.ratio === null ? '–' : h.ratio.toFixed(3)) +
    cell('online.matched', h.online.matched, int(h.online.matched)) +
    cell('online.abandoned', h.online.abandoned, int(h.online.abandoned)) +
    cell('online.meanWaitMin', h.online.meanWaitMin, minutes(h.online.meanWaitMin)) +
    cell('online.p95WaitMin', h.online.p95WaitMin, minutes(h.online.p95WaitMin)) +
    '</tr>').join('');
  return `<table class="headline"><thead><tr>${head}</tr></thead><tbody>${body}</tbody></table>` +
    rows.map((h) => `<p class="sentence" data-run="${esc(runKey)}" data-market="${esc(h.market ?? '*')}">${esc(h.sentence)}</p>`).join('');
}

/** A plain table from rows of cells; columns after the first are right-aligned when numeric. */
export function table(head: readonly string[], rows: ReadonlyArray<ReadonlyArray<string | number | null>>, numeric: readonly boolean[] = []): string {
  const th = head.map((h, i) => `<th${numeric[i] ? ' class="n"' : ''}>${esc(h)}</th>`).join('');
  const tr = rows.map((r) => `<tr>${r.map((c, i) => `<td${numeric[i] ? ' class="n"' : ''}>${esc(c === null ? '–' : String(c))}</td>`).join('')}</tr>`).join('');
  return `<table><thead><tr>${th}</tr></thead><tbody>${tr}</tbody></table>`;
}

/** A manifest's provenance: inputs with checksums, versions, command, options and config. */
export function provenance(title: string, dir: string, m: RunManifest | null): string {
  if (!m) return `<h3>${esc(title)}</h3><p class="note">${esc(dir)} has no manifest.json: its inputs and config are unknown.</p>`;
  const inputs = table(
    ['file', 'bytes', 'lines or records', 'sha256'],
    m.inputs.map((i) => [i.file, int(i.bytes), int(i.lines), i.sha256]),
    [false, true, true, false],
  ).replace(/<td>([0-9a-f]{64})<\/td>/g, '<td class="hash">$1</td>');
  const config = table(['setting', 'value'], Object.entries(m.config).map(([k, v]) => [k, JSON.stringify(v)]));
  const options = Object.keys(m.options ?? {}).length > 0 ? table(['option', 'value'], Object.entries(m.options).map(([k, v]) => [k, JSON.stringify(v)])) : '';
  return `<h3>${esc(title)}</h3>` +
    `<p class="meta">directory <code>${esc(dir)}</code> · pairflow ${esc(m.pairflow)} · Node.js ${esc(m.node)}</p>` +
    `<p class="meta">command: <code>${esc(m.command.join(' '))}</code></p>` +
    inputs + `<div class="row"><div>${config}</div>${options ? `<div>${options}</div>` : ''}</div>`;
}

/** The whole page. */
export function page(args: { title: string; body: string }): string {
  return '<!doctype html>\n<html lang="en"><head><meta charset="utf-8">' +
    // No request may leave the file: no scripts, fonts, images or frames from anywhere.
    `<meta http-equiv="Content-Security-Policy" content="default-src 'none'; style-src 'unsafe-inline'; img-src data:">` +
    '<meta name="viewport" content="width=device-width, initial-scale=1">' +
    `<title>${esc(args.title)}</title><style>${STYLE}</style></head><body><main>${args.body}</main></body></html>\n`;
}

