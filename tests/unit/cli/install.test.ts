/**
 * The installed command works right after installing (issue: `npx pairflow --version`
 * failed after `npm ci` because dist/ was only built by `npm test`). npm runs a
 * package's `prepare` script after `npm ci` and `npm install` in its checkout (npm
 * docs, "scripts": life cycle operations) — so a copy of the checkout whose
 * `prepare` has run must answer `npx pairflow --version`.
 */
import { spawnSync } from 'node:child_process';
import { cpSync, mkdtempSync, readFileSync, rmSync, symlinkSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { afterAll, describe, expect, it } from 'vitest';

const root = new URL('../../../', import.meta.url).pathname;
const pkg = JSON.parse(readFileSync(join(root, 'package.json'), 'utf8')) as { version: string; scripts: Record<string, string> };
const dir = mkdtempSync(join(tmpdir(), 'pairflow-install-'));
afterAll(() => rmSync(dir, { recursive: true, force: true }));

/** A checkout as `git clone` leaves it: sources, no dist/. Dependencies are linked, not installed again. */
function checkout(name: string): string {
  const at = join(dir, name);
  for (const entry of ['package.json', 'package-lock.json', 'tsconfig.json', 'tsconfig.build.json', 'bin', 'src', 'scripts', 'schemas']) {
    cpSync(join(root, entry), join(at, entry), { recursive: true });
  }
  symlinkSync(join(root, 'node_modules'), join(at, 'node_modules'), 'dir');
  return at;
}

describe('installing pairflow', () => {
  it('the prepare script npm runs on install builds dist/, so `npx pairflow --version` works', () => {
    const at = checkout('fresh');
    const prepare = spawnSync('npm', ['run', '--silent', 'prepare'], { cwd: at, encoding: 'utf8' });
    expect(prepare.status, prepare.stderr).toBe(0);
    const r = spawnSync('npx', ['--no', '--', 'pairflow', '--version'], { cwd: at, encoding: 'utf8' });
    expect(r.status, r.stderr).toBe(0);
    expect(r.stdout.trim()).toBe(pkg.version);
  });

  it('a checkout without dist/ gets one line saying how to build it, not a stack trace', () => {
    const at = checkout('unbuilt');
    const r = spawnSync(process.execPath, [join(at, 'bin', 'pairflow.js'), '--version'], { encoding: 'utf8' });
    expect(r.status).toBe(1);
    expect(r.stderr.trim().split('\n')).toHaveLength(1);
    expect(r.stderr).toContain('npm run build');
  });
});
