/**
 * Reading `pairflow solve` instances: a dense CSV cost matrix or a JSON sparse
 * instance. This is the CLI edge — it reads the file and packs the numbers into the
 * typed arrays of src/matching/types.ts; the solver itself does no I/O.
 *
 * Dense CSV (`*.csv`, or any file that does not start with `{`):
 * - one line per row (demand), one comma-separated cell per column (supply), no header;
 * - a cell is a decimal number (`3`, `-2.5`, `1e-3`), or empty / `inf` for a pair that
 *   is not allowed; spaces around cells and double quotes around a cell are ignored;
 * - CRLF, LF or CR line ends, a UTF-8 byte-order mark and blank lines at the end are
 *   tolerated; every other line must have as many cells as the first.
 *
 * JSON sparse instance, 0-based:
 * ```json
 * { "rows": 3, "cols": 4,
 *   "pairs": [[0, 1, 2.5], [1, 1, 4], [2, 3, 0.5]],
 *   "unmatchedCost": 10 }
 * ```
 * `pairs` lists the allowed pairs as `[row, col, cost]` (each pair at most once);
 * `unmatchedCost` is optional: one number for every row, or an array with one number
 * per row. Without it (and without `--unmatched-cost`) every row must be matched.
 * Unknown and repeated keys are errors; `rows` and `cols` are at most
 * {@link MAX_SOLVE_DIM}, and every cost lies within ±1e150 (SPEC §5).
 */

import { readFileSync, statSync } from 'node:fs';
import { findDuplicateKey, printable } from '../consume/json-text.js';
import { pairflowError, PairflowError } from '../errors.js';
import { denseCosts } from '../matching/index.js';
import type { DenseInstance, SparseInstance } from '../matching/types.js';
import { MAX_COST, MAX_COST_TEXT } from '../matching/validate.js';

/** A parsed instance, in the form its file gave. */
export type SolveInput =
  | { readonly kind: 'dense'; readonly file: string; readonly instance: DenseInstance }
  | { readonly kind: 'sparse'; readonly file: string; readonly instance: SparseInstance };

/**
 * The most rows or columns a `solve` instance may declare. The solver allocates per
 * row and column, so `"rows": 1e8` in a 70-byte file would take gigabytes before a
 * single pair is read; ten million is far beyond any instance solved one at a time.
 */
export const MAX_SOLVE_DIM = 10_000_000;

/** The largest instance file read: about the longest string Node.js can hold (2²⁹ − 24 characters). */
export const MAX_SOLVE_FILE_BYTES = 512 * 1024 * 1024;

const NUMBER = /^[+-]?(?:\d+(?:\.\d*)?|\.\d+)(?:[eE][+-]?\d+)?$/;
const NOT_ALLOWED = /^(?:|\+?inf(?:inity)?)$/i;

function formatError(file: string, line: number, detail: string) {
  return pairflowError('PAIRFLOW_ERR_INPUT_FORMAT', { file, line, detail });
}

/**
 * Parses a dense CSV cost matrix (format in the module comment). `Infinity` marks a
 * pair that is not allowed.
 * @example parseCostMatrixCsv('1,2\n3,\n', 'm.csv') // 2×2, cost[3] = Infinity
 */
export function parseCostMatrixCsv(text: string, file: string): DenseInstance {
  const body = text.charCodeAt(0) === 0xfeff ? text.slice(1) : text;
  const lines = body.split(/\r\n|\r|\n/);
  let nLines = lines.length;
  while (nLines > 0 && lines[nLines - 1]!.trim() === '') nLines--;
  if (nLines === 0) {
    throw pairflowError('PAIRFLOW_ERR_INPUT_EMPTY', { file, detail: 'the cost matrix has no rows' });
  }
  const nCols = lines[0]!.split(',').length;
  // Written once, where the dense kernel reads it (square matrices of its sizes).
  const cost = denseCosts(nLines, nCols);
  for (let r = 0; r < nLines; r++) {
    const cells = lines[r]!.split(',');
    if (cells.length !== nCols) {
      throw formatError(file, r + 1, `row has ${cells.length} cell${cells.length === 1 ? '' : 's'}, expected ${nCols} like line 1`);
    }
    for (let c = 0; c < nCols; c++) {
      let cell = cells[c]!.trim();
      if (cell.length >= 2 && cell.startsWith('"') && cell.endsWith('"')) cell = cell.slice(1, -1).trim();
      if (NOT_ALLOWED.test(cell)) {
        cost[r * nCols + c] = Infinity;
      } else if (NUMBER.test(cell)) {
        const v = Number(cell);
        if (!(Math.abs(v) <= MAX_COST)) {
          throw formatError(file, r + 1, `column ${c + 1}: '${printable(cell)}' is beyond ${MAX_COST_TEXT}, the largest cost pairflow solves exactly (SPEC §5)`);
        }
        cost[r * nCols + c] = v;
      } else {
        const hint = r === 0 ? '; the matrix has no header row' : '';
        const shown = cell.length > 40 ? `${cell.slice(0, 39)}…` : cell;
        throw formatError(file, r + 1, `column ${c + 1}: '${printable(shown)}' is not a number (expected a cost, empty or inf${hint})`);
      }
    }
  }
  return { nRows: nLines, nCols, cost };
}

/** 1-based line of a character offset. */
function lineAt(text: string, offset: number): number {
  let line = 1;
  const end = Math.min(offset, text.length);
  for (let i = 0; i < end; i++) if (text.charCodeAt(i) === 10) line++;
  return line;
}

/**
 * Character offset where element `index` of the top-level `"pairs"` array starts, by
 * a small scan that skips strings; -1 if not found. Only used to name a line in an
 * error, so the happy path never pays for it.
 */
function pairOffset(text: string, index: number): number {
  let depth = 0;
  let i = 0;
  let lastKey = '';
  let inPairs = false;
  let count = -1;
  let expectElement = false;
  for (; i < text.length; i++) {
    const ch = text[i]!;
    if (ch === '"') {
      let j = i + 1;
      while (j < text.length && text[j] !== '"') j += text[j] === '\\' ? 2 : 1;
      if (depth === 1) lastKey = text.slice(i + 1, j);
      if (inPairs && depth === 2 && expectElement) {
        count++;
        expectElement = false;
        if (count === index) return i;
      }
      i = j;
      continue;
    }
    if (ch === ' ' || ch === '\t' || ch === '\r' || ch === '\n') continue;
    if (inPairs && depth === 2 && expectElement && ch !== ']') {
      count++;
      expectElement = false;
      if (count === index) return i;
    }
    if (ch === '{' || ch === '[') {
      if (depth === 1 && ch === '[' && lastKey === 'pairs') {
        inPairs = true;
        expectElement = true;
      }
      depth++;
    } else if (ch === '}' || ch === ']') {
      depth--;
      if (inPairs && depth === 1) inPairs = false;
    } else if (ch === ',' && inPairs && depth === 2) {
      expectElement = true;
    }
  }
  return -1;
}

function isIndex(v: unknown, n: number): v is number {
  return typeof v === 'number' && Number.isInteger(v) && v >= 0 && v < n;
}

/**
 * Parses a JSON sparse instance (format in the module comment) into CSR, rows in
 * order, each row's pairs in file order. Errors name the file, the line and the pair index.
 */
export function parseSparseJson(text: string, file: string): SparseInstance {
  if (text.trim() === '') throw pairflowError('PAIRFLOW_ERR_INPUT_EMPTY', { file, detail: 'the instance file is empty' });
  let doc: unknown;
  try {
    doc = JSON.parse(text);
  } catch (err) {
    const msg = err instanceof Error ? err.message : String(err);
    const pos = /position (\d+)/.exec(msg);
    const line = pos ? lineAt(text, Number(pos[1])) : lineAt(text, text.length);
    throw formatError(file, line, `not valid JSON: ${printable(msg)}`);
  }
  if (typeof doc !== 'object' || doc === null || Array.isArray(doc)) {
    throw formatError(file, 1, `expected a JSON object {"rows", "cols", "pairs", "unmatchedCost"?}, got ${Array.isArray(doc) ? 'an array' : 'a JSON value that is not an object'} (a dense matrix is CSV)`);
  }
  const repeated = findDuplicateKey(text);
  if (repeated !== null) throw formatError(file, lineAt(text, repeated.offset), `key "${printable(repeated.key)}" appears twice in one object`);
  const obj = doc as Record<string, unknown>;
  const keyLine = (key: string) => {
    const at = text.indexOf(`"${key}"`);
    return at < 0 ? 1 : lineAt(text, at);
  };
  const { rows, cols, pairs, unmatchedCost } = obj;
  if (typeof rows !== 'number' || !Number.isInteger(rows) || rows < 0) {
    throw formatError(file, keyLine('rows'), `"rows" must be an integer ≥ 0, got ${JSON.stringify(rows)}`);
  }
  if (typeof cols !== 'number' || !Number.isInteger(cols) || cols < 0) {
    throw formatError(file, keyLine('cols'), `"cols" must be an integer ≥ 0, got ${JSON.stringify(cols)}`);
  }
  for (const [key, n] of [['rows', rows], ['cols', cols]] as const) {
    if (n > MAX_SOLVE_DIM) {
      throw pairflowError('PAIRFLOW_ERR_INPUT_LIMIT', { file, detail: `line ${keyLine(key)}: "${key}" is ${n}, more than the ${MAX_SOLVE_DIM.toLocaleString('en-US')} a solve instance may have` });
    }
  }
  if (!Array.isArray(pairs)) {
    throw formatError(file, keyLine('pairs'), `"pairs" must be an array of [row, col, cost], got ${JSON.stringify(pairs) ?? 'nothing'}`);
  }
  if (rows === 0) throw pairflowError('PAIRFLOW_ERR_INPUT_EMPTY', { file, detail: 'the instance has no rows' });
  for (const key of Object.keys(obj)) {
    if (key !== 'rows' && key !== 'cols' && key !== 'pairs' && key !== 'unmatchedCost') {
      throw formatError(file, keyLine(key), `unknown field "${key}" (expected rows, cols, pairs, unmatchedCost)`);
    }
  }

  const nnz = pairs.length;
  const pairRow = new Int32Array(nnz);
  const rowPtr = new Int32Array(rows + 1);
  const pairError = (i: number, detail: string) => {
    const at = pairOffset(text, i);
    return formatError(file, at < 0 ? keyLine('pairs') : lineAt(text, at), `pair ${i}: ${detail}`);
  };
  for (let i = 0; i < nnz; i++) {
    const p: unknown = pairs[i];
    if (!Array.isArray(p) || p.length !== 3) throw pairError(i, `expected [row, col, cost], got ${JSON.stringify(p)}`);
    const [r, c, w] = p as unknown[];
    if (!isIndex(r, rows)) throw pairError(i, `row ${JSON.stringify(r)} is not an integer in 0..${rows - 1}`);
    if (!isIndex(c, cols)) throw pairError(i, `col ${JSON.stringify(c)} is not an integer in 0..${cols - 1}`);
    if (typeof w !== 'number' || !Number.isFinite(w)) throw pairError(i, `cost ${JSON.stringify(w)} is not a finite number`);
    if (Math.abs(w) > MAX_COST) throw pairError(i, `cost ${w} is beyond ${MAX_COST_TEXT}, the largest cost pairflow solves exactly (SPEC §5)`);
    pairRow[i] = r;
    rowPtr[r + 1]!++;
  }
  for (let r = 0; r < rows; r++) rowPtr[r + 1]! += rowPtr[r]!;
  // Counting sort by row keeps each row's pairs in file order.
  const fill = rowPtr.slice(0, rows);
  const colIdx = new Int32Array(nnz);
  const cost = new Float64Array(nnz);
  const pairAt = new Int32Array(nnz);
  for (let i = 0; i < nnz; i++) {
    const p = pairs[i] as [number, number, number];
    const k = fill[pairRow[i]!]!++;
    colIdx[k] = p[1];
    cost[k] = p[2];
    pairAt[k] = i;
  }
  const seenInRow = new Int32Array(cols).fill(-1);
  const firstPair = new Int32Array(cols);
  for (let r = 0; r < rows; r++) {
    for (let k = rowPtr[r]!; k < rowPtr[r + 1]!; k++) {
      const c = colIdx[k]!;
      if (seenInRow[c] === r) throw pairError(pairAt[k]!, `(${r}, ${c}) repeats pair ${firstPair[c]}`);
      seenInRow[c] = r;
      firstPair[c] = pairAt[k]!;
    }
  }

  let delta: Float64Array | null = null;
  if (unmatchedCost !== undefined && unmatchedCost !== null) {
    if (typeof unmatchedCost === 'number') {
      if (!(Math.abs(unmatchedCost) <= MAX_COST)) throw formatError(file, keyLine('unmatchedCost'), `"unmatchedCost" must be a number within ${MAX_COST_TEXT}`);
      delta = new Float64Array(rows).fill(unmatchedCost);
    } else if (Array.isArray(unmatchedCost)) {
      if (unmatchedCost.length !== rows) {
        throw formatError(file, keyLine('unmatchedCost'), `"unmatchedCost" has ${unmatchedCost.length} entries, expected one per row (${rows})`);
      }
      delta = new Float64Array(rows);
      for (let r = 0; r < rows; r++) {
        const v: unknown = unmatchedCost[r];
        if (typeof v !== 'number' || !(Math.abs(v) <= MAX_COST)) {
          throw formatError(file, keyLine('unmatchedCost'), `"unmatchedCost"[${r}] = ${JSON.stringify(v)} is not a number within ${MAX_COST_TEXT}`);
        }
        delta[r] = v;
      }
    } else {
      throw formatError(file, keyLine('unmatchedCost'), `"unmatchedCost" must be a number or an array of numbers, got ${JSON.stringify(unmatchedCost)}`);
    }
  }
  return { nRows: rows, nCols: cols, rowPtr, colIdx, cost, unmatchedCost: delta };
}

/**
 * Parses instance text: JSON when it starts with `{` or `[` (after spaces and a
 * byte-order mark; an array is then an error, not a one-row CSV), a dense CSV otherwise.
 */
export function parseSolveInput(text: string, file: string): SolveInput {
  if (/^\uFEFF?\s*[[{]/.test(text)) return { kind: 'sparse', file, instance: parseSparseJson(text.replace(/^\uFEFF/, ''), file) };
  return { kind: 'dense', file, instance: parseCostMatrixCsv(text, file) };
}

/**
 * Reads and parses an instance file: a missing file is `PAIRFLOW_ERR_INPUT_NOT_FOUND`,
 * a directory or unreadable file `PAIRFLOW_ERR_INPUT_UNREADABLE`, a file over
 * {@link MAX_SOLVE_FILE_BYTES} `PAIRFLOW_ERR_INPUT_LIMIT`.
 */
export function readSolveInput(file: string): SolveInput {
  let text: string;
  try {
    const st = statSync(file);
    if (!st.isFile()) throw pairflowError('PAIRFLOW_ERR_INPUT_UNREADABLE', { file, detail: st.isDirectory() ? 'is a directory, not a file' : 'is not a regular file' });
    if (st.size > MAX_SOLVE_FILE_BYTES) {
      throw pairflowError('PAIRFLOW_ERR_INPUT_LIMIT', { file, detail: `${st.size} bytes, more than the ${MAX_SOLVE_FILE_BYTES} bytes (512 MiB) a solve instance file may have` });
    }
    text = readFileSync(file, 'utf8');
  } catch (err) {
    throw inputFileError(file, err);
  }
  return parseSolveInput(text, file);
}

/**
 * The error for an input file that could not be opened: not found, or there but not
 * readable (a directory, no permission). A {@link PairflowError} passes through.
 */
export function inputFileError(file: string, err: unknown): PairflowError {
  if (err instanceof PairflowError) return err;
  const code = (err as NodeJS.ErrnoException).code;
  if (code === 'ENOENT' || code === 'ENOTDIR') return pairflowError('PAIRFLOW_ERR_INPUT_NOT_FOUND', { file }, err);
  const detail = code === 'EISDIR' ? 'is a directory, not a file' : code === 'EACCES' || code === 'EPERM' ? 'cannot be read (permission denied)' : `cannot be read (${code ?? String(err)})`;
  return pairflowError('PAIRFLOW_ERR_INPUT_UNREADABLE', { file, detail }, err);
}
