import { spawnSync } from 'node:child_process';
import { mkdtempSync, readFileSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { afterAll, describe, expect, it } from 'vitest';
import { solveInstance } from '../../../src/cli/commands/solve.js';
import { MAX_SOLVE_DIM, parseCostMatrixCsv, parseSolveInput, parseSparseJson, type SolveInput } from '../../../src/cli/solve-input.js';
import { PairflowError } from '../../../src/errors.js';
import { checkCertificate } from '../../../src/matching/index.js';
import type { SolveResult } from '../../../src/matching/types.js';
import { runPythonJson, scipyVersion } from '../../helpers/python.js';
import { mulberry32, randInt } from '../../helpers/random.js';

// The CLI is tested as users run it: the built bin (npm test builds first).
const bin = new URL('../../../bin/pairflow.js', import.meta.url).pathname;
const sample = new URL('../../../replay-logs/sample-matrix.csv', import.meta.url).pathname;
const dir = mkdtempSync(join(tmpdir(), 'pairflow-solve-test-'));
afterAll(() => rmSync(dir, { recursive: true, force: true }));

function run(args: string[]) {
  return spawnSync(process.execPath, [bin, 'solve', ...args], { encoding: 'utf8' });
}

function file(name: string, text: string): string {
  const path = join(dir, name);
  writeFileSync(path, text);
  return path;
}

function caught(fn: () => unknown): PairflowError {
  try {
    fn();
  } catch (err) {
    if (err instanceof PairflowError) return err;
    throw err;
  }
  throw new Error('expected a PairflowError');
}

interface Printed {
  cost: number;
  pairs: [number, number][];
  rowDuals: number[];
  colDuals: number[];
  solveMs: number;
}

/** The printed answer as a SolveResult, so the core's checker can judge what the CLI printed. */
function asResult(input: SolveInput, out: Printed): SolveResult {
  const rowToCol = new Int32Array(input.instance.nRows).fill(-1);
  const colToRow = new Int32Array(input.instance.nCols).fill(-1);
  for (const [r, c] of out.pairs) {
    rowToCol[r] = c;
    colToRow[c] = r;
  }
  return {
    cost: out.cost,
    rowToCol,
    colToRow,
    rowDuals: Float64Array.from(out.rowDuals),
    colDuals: Float64Array.from(out.colDuals),
    stats: { augmentations: 0, scannedPairs: 0, ms: 0, warm: false },
  };
}

/**
 * scipy.optimize.linear_sum_assignment (scipy ≥ 1.4) on a dense matrix, with the
 * unmatched option as one private column per row (cost δ there, inf elsewhere):
 * the textbook reduction of "match or pay δ" to a full assignment of the rows.
 */
const SCIPY_LSA = `
import sys, json
import numpy as np
from scipy.optimize import linear_sum_assignment
req = json.load(sys.stdin)
a = np.genfromtxt(req["sample"], delimiter=",", filling_values=np.inf)
r, c = linear_sum_assignment(a)
sample_min = float(a[r, c].sum())
w = np.where(np.isinf(a), -np.inf, a)
r, c = linear_sum_assignment(w, maximize=True)
sample_max = float(w[r, c].sum())
out = []
for case in req["cases"]:
    a = np.array([[np.inf if x is None else x for x in row] for row in case["cost"]], dtype=float).reshape(case["nRows"], case["nCols"])
    if case.get("delta") is not None:
        d = np.full((case["nRows"], case["nRows"]), np.inf)
        np.fill_diagonal(d, case["delta"])
        a = np.hstack([a, d])
    elif a.shape[0] > a.shape[1]:
        out.append(None)  # scipy would match every column; we need every row
        continue
    try:
        r, c = linear_sum_assignment(a)
        out.append(float(a[r, c].sum()))
    except ValueError:
        out.append(None)
print(json.dumps({"sampleMin": sample_min, "sampleMax": sample_max, "cases": out}))
`;

interface ScipyCase {
  nRows: number;
  nCols: number;
  cost: (number | null)[][];
  delta?: number[] | null;
}

function denseRows(input: SolveInput): (number | null)[][] {
  const { nRows, nCols } = input.instance;
  const rows: (number | null)[][] = Array.from({ length: nRows }, () => new Array<number | null>(nCols).fill(null));
  if (input.kind === 'dense') {
    for (let r = 0; r < nRows; r++) for (let c = 0; c < nCols; c++) {
      const x = input.instance.cost[r * nCols + c]!;
      rows[r]![c] = Number.isFinite(x) ? x : null;
    }
  } else {
    const { rowPtr, colIdx, cost } = input.instance;
    for (let r = 0; r < nRows; r++) for (let e = rowPtr[r]!; e < rowPtr[r + 1]!; e++) rows[r]![colIdx[e]!] = cost[e]!;
  }
  return rows;
}

/** Seeded small instances, CSV and JSON, some with an unmatched cost. */
function randomInputs() {
  const inputs: SolveInput[] = [];
  const cases: ScipyCase[] = [];
  const deltas: (number | undefined)[] = [];
  const seeds: number[] = [];
  for (let seed = 1; seed <= 40; seed++) {
    const rand = mulberry32(seed);
    const nRows = randInt(rand, 1, 12);
    const nCols = randInt(rand, 1, 12);
    const density = 0.3 + 0.7 * rand();
    const cells: string[][] = [];
    const pairs: number[][] = [];
    for (let r = 0; r < nRows; r++) {
      cells.push([]);
      for (let c = 0; c < nCols; c++) {
        if (rand() < density) {
          const w = Math.round(rand() * 2000 - 500) / 10;
          cells[r]!.push(String(w));
          pairs.push([r, c, w]);
        } else {
          // A blank line at the end is not a row, so a one-column matrix spells it inf.
          cells[r]!.push(rand() < 0.5 && nCols > 1 ? '' : 'inf');
        }
      }
    }
    const delta = seed % 2 === 0 ? randInt(rand, 0, 80) : undefined;
    const input =
      seed % 3 === 0
        ? parseSolveInput(JSON.stringify({ rows: nRows, cols: nCols, pairs: pairs.reverse() }), `s${seed}.json`)
        : parseSolveInput(cells.map((row) => row.join(', ')).join('\r\n'), `s${seed}.csv`);
    inputs.push(input);
    deltas.push(delta);
    seeds.push(seed);
    cases.push({
      nRows,
      nCols,
      cost: denseRows(input),
      delta: delta === undefined ? null : new Array<number>(nRows).fill(delta),
    });
  }
  return { inputs, cases, deltas, seeds };
}

interface ScipyReference {
  /** The sample read by numpy.genfromtxt itself, min-cost and max-weight. */
  sampleMin: number;
  sampleMax: number;
  /** Per random case; null where no assignment of every row exists. */
  cases: (number | null)[];
}

let reference: ScipyReference | undefined;
/** One Python run for every reference number in this file (scipy's import is slow). */
function scipyReference(): ScipyReference {
  reference ??= runPythonJson<ScipyReference>(SCIPY_LSA, { sample, cases: randomInputs().cases });
  return reference;
}

const relClose = (a: number, b: number) => Math.abs(a - b) <= 1e-9 * Math.max(1, Math.abs(a), Math.abs(b));

describe('pairflow solve (built CLI)', () => {
  it('--json prints exactly cost, pairs, rowDuals, colDuals, solveMs, with scipy\'s cost on the sample', (ctx) => {
    const r = run([sample, '--json']);
    expect(r.status, r.stderr).toBe(0);
    expect(r.stderr).toBe('');
    const out = JSON.parse(r.stdout) as Printed;
    expect(Object.keys(out)).toEqual(['cost', 'pairs', 'rowDuals', 'colDuals', 'solveMs']);
    expect(out.solveMs).toBeGreaterThanOrEqual(0);
    const input = parseSolveInput(readFileSync(sample, 'utf8'), sample);
    expect(out.pairs).toHaveLength(input.instance.nRows);
    const rep = checkCertificate(input.instance, asResult(input, out));
    expect(rep.ok, rep.problems.join('; ')).toBe(true);
    if (scipyVersion() === null) ctx.skip();
    // Reference: numpy.genfromtxt + scipy.optimize.linear_sum_assignment read the file itself.
    const ref = scipyReference().sampleMin;
    expect(relClose(out.cost, ref), `${out.cost} vs scipy ${ref}`).toBe(true);
  });

  it('prints a human table without --json, with the same pairs', () => {
    const human = run([sample]);
    const json = JSON.parse(run([sample, '--json']).stdout) as Printed;
    expect(human.status).toBe(0);
    const rows = human.stdout.split('\n').map((l) => /^\s+(\d+)\s+(\d+)\s+\S+$/.exec(l)).filter((m) => m !== null);
    expect(rows.map((m) => [Number(m[1]), Number(m[2])])).toEqual(json.pairs);
  });

  it('--maximize treats cells as weights and prints duals with p + q ≥ w, q ≥ 0', (ctx) => {
    const r = run([sample, '--maximize', '--json']);
    expect(r.status, r.stderr).toBe(0);
    const out = JSON.parse(r.stdout) as Printed;
    const input = parseSolveInput(readFileSync(sample, 'utf8'), sample);
    const { nCols, cost } = input.kind === 'dense' ? input.instance : expect.fail('sample is dense');
    let sum = 0;
    for (const [row, col] of out.pairs) sum += cost[row * nCols + col]!;
    expect(relClose(out.cost, sum)).toBe(true);
    for (let row = 0; row < input.instance.nRows; row++) {
      for (let col = 0; col < nCols; col++) {
        const w = cost[row * nCols + col]!;
        if (Number.isFinite(w)) expect(out.rowDuals[row]! + out.colDuals[col]!).toBeGreaterThanOrEqual(w - 1e-9);
      }
    }
    for (const q of out.colDuals) expect(q).toBeGreaterThanOrEqual(0);
    const dual = [...out.rowDuals, ...out.colDuals].reduce((a, b) => a + b, 0);
    expect(relClose(dual, out.cost), `dual ${dual} vs primal ${out.cost}`).toBe(true);
    if (scipyVersion() === null) ctx.skip();
    const ref = scipyReference().sampleMax;
    expect(relClose(out.cost, ref), `${out.cost} vs scipy ${ref}`).toBe(true);
  });

  it('input errors exit 2 with one line on stderr naming the code', () => {
    const cases: [string, string, string[]][] = [
      ['ragged.csv', '1,2,3\n4,5\n', []],
      ['word.csv', '1,2\n3,abc\n', []],
      ['nan.csv', '1,NaN\n3,4\n', []],
      ['empty.csv', '', []],
      ['infeasible.csv', '1,inf\n2,\n', []],
      ['bad-pair.json', '{"rows": 1, "cols": 1, "pairs": [[0, 3, 1]]}', []],
      ['bad-option.csv', '1\n', ['--unmatched-cost', 'lots']],
      // Finite, but beyond what sums can hold (SPEC §5): input errors stating the bound, not internal bugs.
      ['near-limit.csv', '1e308,1e308,1\n1e308,1,1e308\n', []],
      ['huge-delta.csv', '1,2\n', ['--unmatched-cost', '-1e308']],
      ['huge-pair.json', '{"rows": 1, "cols": 1, "pairs": [[0, 0, 1e200]]}', []],
      ['huge-unmatched.json', '{"rows": 1, "cols": 1, "pairs": [[0, 0, 1]], "unmatchedCost": -1e300}', []],
    ];
    const codes: Record<string, string> = {
      'ragged.csv': 'PAIRFLOW_ERR_INPUT_FORMAT',
      'word.csv': 'PAIRFLOW_ERR_INPUT_FORMAT',
      'nan.csv': 'PAIRFLOW_ERR_INPUT_FORMAT',
      'empty.csv': 'PAIRFLOW_ERR_INPUT_EMPTY',
      'infeasible.csv': 'PAIRFLOW_ERR_SOLVER_INFEASIBLE',
      'bad-pair.json': 'PAIRFLOW_ERR_INPUT_FORMAT',
      'bad-option.csv': 'PAIRFLOW_ERR_CLI_OPTION',
      'near-limit.csv': 'PAIRFLOW_ERR_INPUT_FORMAT',
      'huge-delta.csv': 'PAIRFLOW_ERR_CLI_OPTION',
      'huge-pair.json': 'PAIRFLOW_ERR_INPUT_FORMAT',
      'huge-unmatched.json': 'PAIRFLOW_ERR_INPUT_FORMAT',
    };
    for (const [name, text, extra] of cases) {
      const r = run([file(name, text), ...extra, '--json']);
      expect(r.status, name).toBe(2);
      expect(r.stdout, name).toBe('');
      const lines = r.stderr.trim().split('\n');
      expect(lines, name).toHaveLength(1);
      expect(lines[0], name).toContain(`[${codes[name]}]`);
    }
    const missing = run([join(dir, 'no-such.csv')]);
    expect(missing.status).toBe(2);
    expect(missing.stderr).toContain('[PAIRFLOW_ERR_INPUT_NOT_FOUND]');
  });

  it('an infeasible matrix solves once --unmatched-cost is given', () => {
    const path = file('needs-delta.csv', '1,inf\n2,\n');
    const r = run([path, '--unmatched-cost', '10', '--json']);
    expect(r.status, r.stderr).toBe(0);
    const out = JSON.parse(r.stdout) as Printed;
    // By hand: one row takes column 0 at 1 or 2, the other pays 10; best is 1 + 10.
    expect(out.cost).toBe(11);
    expect(out.pairs).toEqual([[0, 0]]);
  });
});

describe('parseCostMatrixCsv()', () => {
  it('tolerates CRLF, a trailing newline, spaces, quotes and a byte-order mark', () => {
    const clean = parseCostMatrixCsv('1,2,3\n4,,inf', 'a.csv');
    for (const text of ['1,2,3\r\n4,,inf\r\n', '\uFEFF 1 , 2,3\n4, ,INF\n\n', '"1","2", 3\n4,"",inf\n']) {
      const got = parseCostMatrixCsv(text, 'b.csv');
      expect([got.nRows, got.nCols]).toEqual([2, 3]);
      expect(Array.from(got.cost)).toEqual(Array.from(clean.cost));
    }
    expect(Array.from(clean.cost)).toEqual([1, 2, 3, 4, Infinity, Infinity]);
  });

  it('names the file, the line and the column of a bad cell', () => {
    expect(caught(() => parseCostMatrixCsv('1,2\n3,4\n5, x\n', 'm.csv'))).toMatchObject({
      code: 'PAIRFLOW_ERR_INPUT_FORMAT',
      params: { file: 'm.csv', line: 3 },
    });
    for (const cell of ['nan', '-inf', '1.2.3', '0x10', '1e999']) {
      const err = caught(() => parseCostMatrixCsv(`1,${cell}\n`, 'm.csv'));
      expect(err.code, cell).toBe('PAIRFLOW_ERR_INPUT_FORMAT');
      expect(err.params.line, cell).toBe(1);
    }
    expect(caught(() => parseCostMatrixCsv('1,2\n\n3,4\n', 'm.csv')).params.line).toBe(2);
    expect(caught(() => parseCostMatrixCsv(' \r\n\n', 'm.csv')).code).toBe('PAIRFLOW_ERR_INPUT_EMPTY');
  });
});

describe('parseSparseJson()', () => {
  it('builds CSR from pairs in any order and keeps per-row or shared unmatched costs', () => {
    const inst = parseSparseJson('{"rows": 2, "cols": 3, "pairs": [[1, 2, 5], [0, 1, 2.5], [1, 0, 4]], "unmatchedCost": [7, 8]}', 'i.json');
    expect(Array.from(inst.rowPtr)).toEqual([0, 1, 3]);
    expect(Array.from(inst.colIdx)).toEqual([1, 2, 0]);
    expect(Array.from(inst.cost)).toEqual([2.5, 5, 4]);
    expect(Array.from(inst.unmatchedCost!)).toEqual([7, 8]);
    const shared = parseSparseJson('{"rows": 2, "cols": 1, "pairs": [], "unmatchedCost": 3}', 'i.json');
    expect(Array.from(shared.unmatchedCost!)).toEqual([3, 3]);
    expect(parseSparseJson('{"rows": 1, "cols": 1, "pairs": [[0, 0, 1]]}', 'i.json').unmatchedCost).toBeNull();
  });

  it('names the line of the bad pair, one pair per line', () => {
    const lines = ['{"rows": 2, "cols": 2, "pairs": [', '  [0, 0, 1],', '  [1, 1, 2],', '  [1, 1, 3],', '  [0, 1, 4]', ']}'];
    expect(caught(() => parseSparseJson(lines.join('\n'), 'i.json'))).toMatchObject({
      code: 'PAIRFLOW_ERR_INPUT_FORMAT',
      params: { file: 'i.json', line: 4 }, // the repeat of (1, 1) is pair 2, on line 4
    });
    const bad = [...lines.slice(0, 3), '  [0, 1, "x"]', ']}'];
    expect(caught(() => parseSparseJson(bad.join('\n'), 'i.json')).params.line).toBe(4);
    const badRow = ['{"rows": 2, "cols": 2,', '"pairs": [[0, 0, 1], [1, 0, 1],', '[2, 0, 1]]}'];
    expect(caught(() => parseSparseJson(badRow.join('\n'), 'i.json')).params.line).toBe(3);
  });

  it('rejects bad shapes with the code of SPEC §6 input errors', () => {
    const bad = [
      '{"rows": 2, "cols": 2',
      '[1, 2]',
      '{"rows": -1, "cols": 2, "pairs": []}',
      '{"rows": 1.5, "cols": 2, "pairs": []}',
      '{"rows": 1, "cols": 2}',
      '{"rows": 1, "cols": 2, "pairs": [[0, 0]]}',
      '{"rows": 1, "cols": 2, "pairs": [[0, 0, null]]}',
      '{"rows": 1, "cols": 2, "pairs": [], "unmatchedCost": [1, 2]}',
      '{"rows": 1, "cols": 2, "pairs": [], "unmatchedCost": "high"}',
      '{"rows": 1, "cols": 2, "pairs": [], "extra": 1}',
    ];
    for (const text of bad) expect(caught(() => parseSparseJson(text, 'i.json')).code, text).toBe('PAIRFLOW_ERR_INPUT_FORMAT');
    expect(caught(() => parseSparseJson('  \n', 'i.json')).code).toBe('PAIRFLOW_ERR_INPUT_EMPTY');
    // A repeated key is not silently the last one: the error names its line.
    expect(caught(() => parseSparseJson('{"rows": 1, "cols": 1,\n"pairs": [[0, 0, 1]],\n"rows": 2}', 'i.json'))).toMatchObject({
      code: 'PAIRFLOW_ERR_INPUT_FORMAT', params: { line: 3 },
    });
    expect(caught(() => parseSparseJson('{"rows": 0, "cols": 2, "pairs": []}', 'i.json')).code).toBe('PAIRFLOW_ERR_INPUT_EMPTY');
  });
});

describe('solve input limits and odd files (issue #10 items 12, 17)', () => {
  it('refuses declared sizes beyond the limit before allocating anything', () => {
    for (const text of ['{"rows": 1e10, "cols": 1, "pairs": []}', '{"rows": 100000000, "cols": 2, "pairs": [], "unmatchedCost": 1}', '{"rows": 1, "cols": 1e8, "pairs": []}']) {
      expect(caught(() => parseSparseJson(text, 'i.json')).code, text).toBe('PAIRFLOW_ERR_INPUT_LIMIT');
    }
    expect(parseSparseJson(`{"rows": 2, "cols": ${MAX_SOLVE_DIM}, "pairs": [[0, 0, 1], [1, 9999999, 2]]}`, 'i.json').nCols).toBe(MAX_SOLVE_DIM);
  });

  it('reads a JSON array as JSON (an error), not as a one-row CSV', () => {
    expect(caught(() => parseSolveInput('[1,2]', 'm.csv')).code).toBe('PAIRFLOW_ERR_INPUT_FORMAT');
    expect(caught(() => parseSolveInput('\uFEFF [[1, 2]]\n', 'm.json')).code).toBe('PAIRFLOW_ERR_INPUT_FORMAT');
  });

  it('reads CR-only line ends and never puts raw control characters into a message', () => {
    // eslint-disable-next-line no-control-regex
    const control = /[\u0000-\u001f]/;
    const cr = parseCostMatrixCsv('1,2\r3,4\r', 'mac.csv');
    expect([cr.nRows, cr.nCols, ...cr.cost]).toEqual([2, 2, 1, 2, 3, 4]);
    for (const text of ['1,\u0000\n', '1,a\u001bb\n', '1,2\n3,\u0007']) {
      const err = caught(() => parseCostMatrixCsv(text, 'ctl.csv'));
      expect(err.code).toBe('PAIRFLOW_ERR_INPUT_FORMAT');
      expect(err.message).not.toMatch(control);
    }
    expect(caught(() => parseSparseJson('{"rows": 1,\u0000}', 'ctl.json')).message).not.toMatch(control);
  });

  it('a directory is "not a file" (exit 2, PAIRFLOW_ERR_INPUT_UNREADABLE), not "no such file"', () => {
    const r = run([dir, '--json']);
    expect(r.status).toBe(2);
    expect(r.stderr).toContain('[PAIRFLOW_ERR_INPUT_UNREADABLE]');
  });
});

describe('solveInstance() across the whole allowed range of costs (SPEC §5, seeded)', () => {
  it('solves and certifies matrices mixing magnitudes up to ±1e150 — never an internal error', () => {
    const seed = 10150;
    const rand = mulberry32(seed);
    const magnitudes = [0, 5e-324, 1e-300, 1, 1e15, 1e100, 1e150];
    for (let round = 0; round < 60; round++) {
      const rows = randInt(rand, 1, 6);
      const cols = randInt(rand, rows, 7);
      const cells = Array.from({ length: rows }, () => Array.from({ length: cols }, () => {
        if (rand() < 0.15) return 'inf';
        return String((rand() < 0.3 ? -1 : 1) * magnitudes[randInt(rand, 0, magnitudes.length - 1)]! * (1 + rand()) / 2);
      }).join(','));
      // every row keeps one allowed cell on the diagonal so the instance stays feasible
      const text = cells.map((line, r) => line.split(',').map((c, k) => (k === r && c === 'inf' ? '1' : c)).join(',')).join('\n');
      const input = parseSolveInput(text, `r${round}.csv`);
      for (const opts of [{}, { maximize: true }, { unmatchedCost: -1e150 }, { unmatchedCost: 1e150, maximize: true }]) {
        expect(() => solveInstance(input, opts), `seed ${seed} round ${round} ${JSON.stringify(opts)}:\n${text}`).not.toThrow();
      }
    }
  });
});

describe('solveInstance()', () => {
  it('matches scipy on seeded CSV and JSON instances, with and without unmatched costs', (ctx) => {
    if (scipyVersion() === null) ctx.skip();
    const { inputs, deltas, seeds } = randomInputs();
    const ref = scipyReference().cases;
    inputs.forEach((input, i) => {
      const d = deltas[i];
      const opts = d === undefined ? {} : { unmatchedCost: d };
      if (ref[i] === null) {
        expect(caught(() => solveInstance(input, opts)).code, `seed ${seeds[i]}`).toBe('PAIRFLOW_ERR_SOLVER_INFEASIBLE');
        return;
      }
      const out = solveInstance(input, opts);
      expect(relClose(out.cost, ref[i]!), `seed ${seeds[i]}: ${out.cost} vs scipy ${ref[i]}`).toBe(true);
      let primal = out.unmatchedRows.length * (d ?? 0);
      for (const [r, c] of out.pairs) primal += denseRows(input)[r]![c]!;
      expect(relClose(out.cost, primal), `seed ${seeds[i]}`).toBe(true);
    });
  });

  it('--unmatched-cost overrides the instance\'s own, and with --maximize it is a value earned', () => {
    const input = parseSolveInput('{"rows": 2, "cols": 1, "pairs": [[0, 0, 5], [1, 0, 3]], "unmatchedCost": 100}', 'u.json');
    // By hand: with δ = 100 one row takes the column at 3 and the other pays 100.
    expect(solveInstance(input, {}).cost).toBe(103);
    // δ = 4 overrides: row 1 takes the column (3), row 0 pays 4 rather than 5 → 7.
    const cheap = solveInstance(input, { unmatchedCost: 4 });
    expect([cheap.cost, cheap.pairs]).toEqual([7, [[1, 0]]]);
    // Maximising weights with ω = 4: row 0 takes weight 5, row 1 keeps 4 → 9.
    const best = solveInstance(input, { unmatchedCost: 4, maximize: true });
    expect([best.cost, best.pairs]).toEqual([9, [[0, 0]]]);
    expect(best.rowDuals[1]).toBeGreaterThanOrEqual(4);
  });

  it('times only the solver call with the injected clock', () => {
    const input = parseSolveInput('1,2\n3,4\n', 'm.csv');
    let ticks = 0;
    const out = solveInstance(input, {}, () => (ticks += 5));
    // Two clock reads around the solver: 5 then 10.
    expect(out.solveMs).toBe(5);
    expect(ticks).toBe(10);
  });

  it('explains infeasibility by the rows that compete for too few columns (Hall violator)', () => {
    const err = caught(() => solveInstance(parseSolveInput('1,inf,inf\n2,,\n3,4,5\n', 'h.csv'), {}));
    expect(err.code).toBe('PAIRFLOW_ERR_SOLVER_INFEASIBLE');
    expect(err.params).toMatchObject({ file: 'h.csv', matchable: 2, rows: 3 });
  });
});
