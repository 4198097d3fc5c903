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
