/**
 * Numbers and words of the report: one way to write a cost, a share, an hour. Pure.
 */

/** A cost or count with thousands separators: whole above 100, two decimals below. */
export function num(v: number | null | undefined, digits?: number): string {
  if (v === null || v === undefined || Number.isNaN(v)) return '–';
  const d = digits ?? (Math.abs(v) >= 100 ? 0 : 2);
  return v.toLocaleString('en-US', { minimumFractionDigits: d, maximumFractionDigits: d });
}

/** A whole count. */
export function int(v: number | null | undefined): string {
  return v === null || v === undefined ? '–' : Math.round(v).toLocaleString('en-US');
}

/** A share 0..1 as a percentage: `35 %`, `0.4 %` below 1 %. */
export function pct(v: number | null | undefined): string {
  if (v === null || v === undefined || Number.isNaN(v)) return '–';
  const p = v * 100;
  const d = Math.abs(p) < 1 && p !== 0 ? 1 : 0;
  return `${p.toFixed(d)} %`;
}

/** Minutes with two decimals. */
export function minutes(v: number | null | undefined): string {
  return v === null || v === undefined ? '–' : `${v.toFixed(2)} min`;
}

/** An hour of the day as `12:00–13:00 UTC`. */
export function hourSpan(h: number): string {
  const two = (x: number): string => String(x).padStart(2, '0');
  return `${two(h)}:00–${two((h + 1) % 24)}:00 UTC`;
}

/** A UTC day as `Mon 2026-03-02`. */
export function dayLabel(ms: number): string {
  const d = new Date(ms);
  return `${['Sun', 'Mon', 'Tue', 'Wed', 'Thu', 'Fri', 'Sat'][d.getUTCDay()]} ${d.toISOString().slice(0, 10)}`;
}

/** Escapes text for HTML element content and attribute values. */
export function esc(text: string): string {
  return text.replace(/&/g, '&amp;').replace(/</g, '&lt;').replace(/>/g, '&gt;').replace(/"/g, '&quot;').replace(/'/g, '&#39;');
}

/** `1 order` / `2 orders`. */
export function plural(n: number, one: string, many = `${one}s`): string {
  return `${int(n)} ${Math.round(n) === 1 ? one : many}`;
}
