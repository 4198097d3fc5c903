import { readFileSync } from 'node:fs';
import { gunzipSync } from 'node:zlib';
import { describe, expect, it } from 'vitest';
import { checkCertificate, solveDense, solveSparse } from '../../../src/matching/index.js';
import type { DenseInstance, SparseInstance } from '../../../src/matching/types.js';
import { denseToSparse } from './gen.js';

/*
 * OR-Library assignment instances (J.E. Beasley; see tests/fixtures/orlib-assign/
 * SOURCE.md): every file must solve to its published optimum (optima.tsv).
 */
const dir = new URL('../../fixtures/orlib-assign/', import.meta.url);

function numbers(name: string): Float64Array {
  const plain = new URL(`${name}.txt`, dir);
  let text: string;
  try {
    text = readFileSync(plain, 'utf8');
  } catch {
    text = gunzipSync(readFileSync(new URL(`${name}.txt.gz`, dir))).toString('utf8');
  }
  return Float64Array.from(text.trim().split(/\s+/), Number);
}

function readDense(name: string): DenseInstance {
  const a = numbers(name);
  const n = a[0]!;
  expect(a.length, name).toBe(1 + n * n);
  return { nRows: n, nCols: n, cost: a.subarray(1) };
}

/** 1-based `i j c` lines to CSR, rows in file order. */
function readSparse(name: string): SparseInstance {
  const a = numbers(name);
  const n = a[0]!;
  const m = (a.length - 1) / 3;
  expect(Number.isInteger(m), name).toBe(true);
  const rowPtr = new Int32Array(n + 1);
  for (let k = 0; k < m; k++) rowPtr[a[1 + 3 * k]!]!++;
  for (let r = 0; r < n; r++) rowPtr[r + 1]! += rowPtr[r]!;
  const fill = rowPtr.slice(0, n);
  const colIdx = new Int32Array(m);
  const cost = new Float64Array(m);
  for (let k = 0; k < m; k++) {
    const r = a[1 + 3 * k]! - 1;
    const at = fill[r]!++;
    colIdx[at] = a[2 + 3 * k]! - 1;
    cost[at] = a[3 + 3 * k]!;
  }
  return { nRows: n, nCols: n, rowPtr, colIdx, cost };
}

const optima = readFileSync(new URL('optima.tsv', dir), 'utf8')
  .trim()
  .split('\n')
  .slice(1)
  .map((line) => {
    const [name, n, format, opt] = line.split('\t');
    return { name: name!, n: Number(n), format: format!, opt: Number(opt) };
  });

describe('OR-Library assignment instances reach their published optimum', () => {
  it('optima.tsv lists all twelve instances', () => {
    expect(optima.map((o) => o.name)).toEqual([
      'assign100', 'assign200', 'assign300', 'assign400', 'assign500', 'assign600', 'assign700', 'assign800',
      'assignp800', 'assignp1500', 'assignp3000', 'assignp5000',
    ]);
  });

  for (const o of optima) {
    it(`${o.format === 'dense' ? 'solveDense() and solveSparse()' : 'solveSparse()'} on ${o.name} give ${o.opt}`, () => {
      if (o.format === 'dense') {
        const d = readDense(o.name);
        for (const strategy of ['full', 'candidates'] as const) {
          const rd = solveDense(d, { strategy });
          expect(rd.cost, strategy).toBe(o.opt);
          expect(checkCertificate(d, rd).problems, strategy).toEqual([]);
        }
        const s = denseToSparse(d);
        const rs = solveSparse(s);
        expect(rs.cost).toBe(o.opt);
        expect(checkCertificate(s, rs).problems).toEqual([]);
      } else {
        const s = readSparse(o.name);
        expect(s.nRows).toBe(o.n);
        const rs = solveSparse(s);
        expect(rs.cost).toBe(o.opt);
        expect(checkCertificate(s, rs).problems).toEqual([]);
      }
    });
  }
});
