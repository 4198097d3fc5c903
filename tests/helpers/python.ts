import { spawnSync } from 'node:child_process';

/**
 * Reference checks run scipy in a Python subprocess (installed by .ci/run). Locally a
 * missing scipy skips those checks; with CI=true it fails the run, never a silent skip.
 */
export const PYTHON = process.env.PAIRFLOW_PYTHON ?? 'python3';

let cached: string | null | undefined;

/** scipy's version string, or null when python3 or scipy is not importable. */
export function scipyVersion(): string | null {
  if (cached !== undefined) return cached;
  const r = spawnSync(PYTHON, ['-c', 'import scipy, numpy; print(scipy.__version__)'], { encoding: 'utf8' });
  cached = r.status === 0 ? r.stdout.trim() : null;
  if (cached === null && (process.env.CI === 'true' || process.env.CI === '1')) {
    throw new Error(`CI=true but scipy is not importable by ${PYTHON}: ${r.stderr || r.error}`);
  }
  return cached;
}

/** Runs a Python script with JSON on stdin and returns its stdout parsed as JSON. */
export function runPythonJson<T>(script: string, input: unknown, timeoutMs = 600_000): T {
  const r = spawnSync(PYTHON, ['-c', script], {
    input: JSON.stringify(input),
    encoding: 'utf8',
    maxBuffer: 1 << 30,
    timeout: timeoutMs,
  });
  if (r.status !== 0) throw new Error(`python failed (${r.status}): ${r.stderr}`);
  return JSON.parse(r.stdout) as T;
}

/**
 * The optimal cost of each dense instance by scipy.optimize.linear_sum_assignment
 * (from PyPI), null when it has no complete assignment. Unmatched costs go through the
 * usual dummy-column augmentation: column nCols + r allowed only for row r, at δ_r.
 * All instances go to Python in one batch.
 */
export function scipyDenseCosts(instances: readonly { nRows: number; nCols: number; cost: Float64Array; unmatchedCost?: Float64Array | null }[]): (number | null)[] {
  return runPythonJson<(number | null)[]>(
    DENSE_LSA,
    instances.map((inst) => ({
      nRows: inst.nRows,
      nCols: inst.nCols,
      cost: Array.from(inst.cost, (x) => (x < Infinity ? x : null)),
      delta: inst.unmatchedCost ? Array.from(inst.unmatchedCost) : null,
    })),
  );
}

const DENSE_LSA = `
import json, sys
import numpy as np
from scipy.optimize import linear_sum_assignment
out = []
for inst in json.load(sys.stdin):
    m, n = inst['nRows'], inst['nCols']
    c = np.array([np.inf if x is None else x for x in inst['cost']], dtype=float).reshape(m, n)
    if inst['delta'] is not None:
        d = np.full((m, m), np.inf)
        np.fill_diagonal(d, inst['delta'])
        c = np.hstack([c, d])
    try:
        r, k = linear_sum_assignment(c)
        out.append(float(c[r, k].sum()) if len(r) == m else None)
    except ValueError:
        out.append(None)
print(json.dumps(out))
`;
