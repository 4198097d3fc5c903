import { spawnSync } from 'node:child_process';
import { existsSync, mkdtempSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { describe, expect, it } from 'vitest';
import { progressLine, parseCommits, parseReserves } from '../../../src/cli/commands/sweep.js';
import { toJsonLine } from '../../../src/consume/index.js';
import { generateEvents } from '../../../src/gen/gen.js';

// The CLI is tested as users run it: the built bin (npm test builds first).
const bin = new URL('../../../bin/pairflow.js', import.meta.url).pathname;
const run = (args: string[]) => spawnSync(process.execPath, [bin, ...args], { encoding: 'utf8' });

const dir = mkdtempSync(join(tmpdir(), 'pairflow-cli-sweep-'));
const log = join(dir, 'day.jsonl');
writeFileSync(log, [...generateEvents({ days: 1, seed: 13, scale: 0.004 })].map(toJsonLine).join('\n') + '\n');

describe('pairflow sweep (policy grid)', () => {
  it('--reserves and --commits widen the grid; the table ends with the recommendation and what to run next', () => {
    const out = join(dir, 'sw');
    const r = run(['sweep', log, '--windows', '5s,30s', '--reserves', 'P,5', '--commits', 'all,due', '--threads', '1', '--bootstrap', '100', '--out', out]);
    expect(r.status, r.stderr).toBe(0);
    expect(r.stdout).toContain('30s / R=5 / due');
    expect(r.stdout).toMatch(/recommendation: /);
    expect(r.stdout).toContain(`pairflow report ${out} --out ${out}/report.html`);
    expect(r.stdout).toMatch(/pairflow replay .* --window \d+s --out run-best/);
    // Progress: one line per phase when stderr is not a terminal.
    expect(r.stderr).toMatch(/pairflow sweep: reading/);
    expect(r.stderr).toMatch(/pairflow sweep: 8 policies on 1 thread/);
    expect(existsSync(join(out, 'policies', '8.json'))).toBe(true);
  });

  it('--csv to a path that cannot be written fails before any work (exit 1, the file named)', () => {
    const r = run(['sweep', join(dir, 'no-such-log.jsonl'), '--windows', '5s', '--csv', join(dir, 'missing', 'x.csv')]);
    expect(r.status).toBe(1);
    expect(r.stderr).toContain('PAIRFLOW_ERR_OUTPUT_WRITE');
    expect(r.stderr).toContain(join(dir, 'missing', 'x.csv'));
    expect(existsSync(join(dir, 'missing'))).toBe(false);
  });

  it('rejects a bad --reserves or --commits list with exit 2', () => {
    for (const args of [['--reserves', 'P,lots'], ['--commits', 'all,some'], ['--reserves', ',']]) {
      const r = run(['sweep', log, '--windows', '5s', ...args]);
      expect(r.status, args.join(' ')).toBe(2);
      expect(r.stderr).toContain('PAIRFLOW_ERR_CLI_OPTION');
    }
  });
});

describe('parseReserves() and parseCommits()', () => {
  it('read P as R = P and numbers as reserves; commit modes by name', () => {
    expect(parseReserves('P, 5,0.5,p')).toEqual([null, 5, 0.5, null]);
    expect(parseCommits('all,due')).toEqual(['all', 'due']);
    expect(() => parseCommits('none')).toThrow(expect.objectContaining({ code: 'PAIRFLOW_ERR_CLI_OPTION' }));
  });
});

describe('progressLine()', () => {
  const stream = (tty: boolean): { s: NodeJS.WriteStream; text: () => string } => {
    let text = '';
    const s = { isTTY: tty, columns: 100, write: (chunk: string) => { text += chunk; return true; } } as unknown as NodeJS.WriteStream;
    return { s, text: () => text };
  };

  it('in a terminal, names the phase on the bar and clears it at the end', () => {
    const t = stream(true);
    const p = progressLine('sweep', t.s);
    p.phase('hindsight optimum');
    p.update(2, 4, '2/4 markets');
    p.done();
    expect(t.text()).toContain('sweep (hindsight optimum)');
    expect(t.text()).toContain(' 50% 2/4 markets');
    expect(t.text().endsWith('\r')).toBe(true);
  });

  it('elsewhere, prints one plain line per phase and no bar', () => {
    const t = stream(false);
    const p = progressLine('sweep', t.s);
    p.phase('reading x.jsonl');
    p.update(1, 2);
    p.done();
    expect(t.text()).toBe('pairflow sweep: reading x.jsonl\n');
  });
});

describe('pairflow replay: next steps', () => {
  it('the human summary ends with the report and a sweep to run next; --json prints none', () => {
    const out = join(dir, 'run');
    const r = run(['replay', log, '--out', out, '--threads', '1']);
    expect(r.status, r.stderr).toBe(0);
    const tail = r.stdout.trimEnd().split('\n').slice(-3);
    expect(tail[0]).toBe('next:');
    expect(tail[1]).toContain(`pairflow report ${out} --out ${out}/report.html`);
    expect(tail[2]).toMatch(/^ {2}pairflow sweep .* --windows .* --reserves P,10 --out sweep1/);
    const j = run(['replay', log, '--json', '--no-hindsight']);
    expect(() => JSON.parse(j.stdout) as unknown).not.toThrow();
  });
});
