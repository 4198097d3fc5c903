/**
 * CSV text per RFC 4180: fields separated by commas, records ended by CRLF, and a
 * field quoted (with inner quotes doubled) when it holds a comma, a quote, CR or LF.
 */

export type CsvValue = string | number | boolean | null | undefined;

const NEEDS_QUOTES = /[",\r\n]/;

/** One field. `null`/`undefined` become an empty field; numbers use JS's shortest round-trip form. */
export function csvField(value: CsvValue): string {
  if (value === null || value === undefined) return '';
  const text = typeof value === 'string' ? value : String(value);
  // A leading or trailing space is data, but many readers trim it unless quoted.
  if (NEEDS_QUOTES.test(text) || text !== text.trim()) return `"${text.replace(/"/g, '""')}"`;
  return text;
}

/**
 * One record, CRLF included.
 * @example csvRow(['a,b', 'say "hi"', 3]) // '"a,b","say ""hi""",3\r\n'
 */
export function csvRow(values: readonly CsvValue[]): string {
  let out = '';
  for (let i = 0; i < values.length; i++) {
    if (i > 0) out += ',';
    out += csvField(values[i]);
  }
  return out + '\r\n';
}
