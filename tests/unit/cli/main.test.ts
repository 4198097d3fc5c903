import { spawnSync } from 'node:child_process';
import { closeSync, existsSync, mkdtempSync, openSync, readFileSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
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

describe('stdout that fails', () => {
  const dir = mkdtempSync(join(tmpdir(), 'pairflow-cli-main-'));
  const matrix = join(dir, 'm.csv');
  writeFileSync(matrix, '1,2\n3,4\n');

  it('a reader that goes away (`pairflow gen | head`) ends the command quietly with 0', () => {
    // bash reports the exit status of the first command of the pipeline in PIPESTATUS.
    const r = spawnSync('bash', ['-c', `"${process.execPath}" "${bin}" gen --days 2 | head -c 100 >/dev/null; echo "status=\${PIPESTATUS[0]}"`], { encoding: 'utf8' });
    expect(r.stdout.trim()).toBe('status=0');
    expect(r.stderr).toBe('');
  });

  it.skipIf(!existsSync('/dev/full'))('a full device on stdout is one line naming stdout and exit 1, for every command', () => {
    for (const args of [['gen', '--scale', '0.01'], ['solve', matrix, '--json']]) {
      const fd = openSync('/dev/full', 'w');
      const r = spawnSync(process.execPath, [bin, ...args], { stdio: ['ignore', fd, 'pipe'], encoding: 'utf8' });
      closeSync(fd);
      expect(r.status, args.join(' ')).toBe(1);
      expect(r.stderr.trim().split('\n'), r.stderr).toHaveLength(1);
      expect(r.stderr).toContain('stdout');
      expect(r.stderr).toContain('PAIRFLOW_ERR_OUTPUT_WRITE');
    }
  });
});
