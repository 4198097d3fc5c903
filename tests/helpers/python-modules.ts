import { spawnSync } from 'node:child_process';
import { PYTHON } from './python.js';

const versions = new Map<string, string | null>();

/**
 * The version of a Python package used by a reference check, or null when it is not
 * importable. Locally a missing package skips the check; with CI=true (where .ci/run
 * installs requirements-dev.txt) it fails the run instead, never a silent skip.
 */
export function pythonModuleVersion(module: string, distribution = module): string | null {
  if (versions.has(module)) return versions.get(module)!;
  const r = spawnSync(PYTHON, ['-c', `import ${module}; from importlib.metadata import version; print(version(${JSON.stringify(distribution)}))`], { encoding: 'utf8' });
  const v = r.status === 0 ? r.stdout.trim() : null;
  versions.set(module, v);
  if (v === null && (process.env.CI === 'true' || process.env.CI === '1')) {
    throw new Error(`CI=true but the Python package ${distribution} is not importable by ${PYTHON}: ${r.stderr || r.error}`);
  }
  return v;
}
