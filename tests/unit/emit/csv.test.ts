import { describe, expect, it } from 'vitest';
import { csvField, csvRow } from '../../../src/emit/csv.js';
import { runPythonJson, scipyVersion } from '../../helpers/python.js';
import { mulberry32, randInt } from '../../helpers/random.js';

describe('csvRow()', () => {
  it('quotes fields holding a comma, a quote, CR or LF, doubles inner quotes, and ends records with CRLF', () => {
    // Expected strings follow RFC 4180 §2 rules 1, 4, 6 and 7 by hand.
    expect(csvRow(['a', 'b,c', 'say "hi"', 'two\nlines', 'cr\r'])).toBe('a,"b,c","say ""hi""","two\nlines","cr\r"\r\n');
    expect(csvRow([1.5, null, undefined, true])).toBe('1.5,,,true\r\n');
    expect(csvField(' padded ')).toBe('" padded "');
    expect(csvField('')).toBe('');
  });

  it.skipIf(scipyVersion() === null)('round-trips through Python\'s csv module on seeded random fields', () => {
    // Outside check: CPython's csv.reader (stdlib, RFC 4180 dialect "excel"), run in a subprocess.
    // The helper uses python3 from tests/helpers/python.ts, which is importable wherever scipy is.
    const seed = 4180;
    const rand = mulberry32(seed);
    const alphabet = ['a', 'Z', '9', ',', '"', '\n', '\r\n', ' ', 'é', '€', ';', "'"];
    const rows: string[][] = [];
    for (let r = 0; r < 200; r++) {
      const row: string[] = [];
      const n = randInt(rand, 1, 6);
      for (let c = 0; c < n; c++) {
        let f = '';
        const len = randInt(rand, 0, 8);
        for (let k = 0; k < len; k++) f += alphabet[randInt(rand, 0, alphabet.length - 1)];
        row.push(f);
      }
      rows.push(row);
    }
    const text = rows.map((r) => csvRow(r)).join('');
    const parsed = runPythonJson<string[][]>(
      'import csv, io, json, sys\ntext = json.load(sys.stdin)\nprint(json.dumps(list(csv.reader(io.StringIO(text, newline="")))))',
      text,
    );
    expect(parsed, `seed ${seed}`).toEqual(rows.map((r) => (r.length === 1 && r[0] === '' ? [] : r)));
  });
});
