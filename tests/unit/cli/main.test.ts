import { spawnSync } from 'node:child_process';
import { readFileSync } from 'node:fs';
import { describe, expect, it } from 'vitest';

// The CLI is tested as users run it: the built bin (npm test builds first).
const bin = new URL('../../../bin/pairflow.js', import.meta.url).pathname;
const pkg = JSON.parse(readFileSync(new URL('../../../package.json', import.meta.url), 'utf8')) as { version: string };

function run(args: string[]) {
  return spawnSync(process.execPath, [bin, ...args], { encoding: 'utf8' });
}

describe('pairflow CLI', () => {
  it('--version prints the package version and exits 0', () => {
    const r = run(['--version']);
    expect(r.status).toBe(0);
    expect(r.stdout.trim()).toBe(pkg.version);
  });

  it('--help lists the registered commands and exits 0', () => {
    const r = run(['--help']);
    expect(r.status).toBe(0);
    expect(r.stdout).toContain('Usage: pairflow');
  });

  it('an unknown option is a usage error: exit 2 and one line on stderr', () => {
    const r = run(['--no-such-option']);
    expect(r.status).toBe(2);
    expect(r.stdout).toBe('');
    expect(r.stderr.trim().split('\n')).toHaveLength(1);
    expect(r.stderr).toContain('--no-such-option');
  });

  it('an unknown command is a usage error with exit 2', () => {
    const r = run(['frobnicate']);
    expect(r.status).toBe(2);
    expect(r.stderr.trim().split('\n')).toHaveLength(1);
  });
});
