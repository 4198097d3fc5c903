import { spawnSync } from 'node:child_process';
import { existsSync, mkdtempSync, readdirSync, readFileSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { describe, expect, it } from 'vitest';
import { gzipSync } from 'node:zlib';
import { toJsonLine } from '../../../src/consume/index.js';
import { generateEvents } from '../../../src/gen/gen.js';

// The CLI is tested as users run it: the built bin (npm test builds first).
const bin = new URL('../../../bin/pairflow.js', import.meta.url).pathname;
const run = (args: string[]) => spawnSync(process.execPath, [bin, ...args], { encoding: 'utf8' });

const dir = mkdtempSync(join(tmpdir(), 'pairflow-cli-replay-'));
const good = join(dir, 'day.jsonl');
writeFileSync(good, [...generateEvents({ days: 1, seed: 12, scale: 0.005 })].map(toJsonLine).join('\n') + '\n');
const withBad = join(dir, 'bad.jsonl');
writeFileSync(withBad, readFileSync(good, 'utf8').split('\n').slice(0, 40).join('\n') + '\n{"type":"demand","id":"","market":"m","t":1}\n');

describe('pairflow replay', () => {
  it('--json prints exactly one JSON object with the SPEC §6 keys on stdout', () => {
    const r = run(['replay', good, '--window', '5s', '--json', '--threads', '1']);
    expect(r.status, r.stderr).toBe(0);
    const lines = r.stdout.trimEnd().split('\n');
    expect(lines).toHaveLength(1);
    const s = JSON.parse(lines[0]!) as Record<string, unknown>;
    for (const k of ['windowMs', 'demandUnits', 'supplyUnits', 'online', 'hindsight', 'regret', 'ratio', 'rejects']) expect(s, k).toHaveProperty(k);
    expect(s.windowMs).toBe(5000);
    expect(Object.keys(s.online as object)).toEqual(expect.arrayContaining(['cost', 'matched', 'abandoned', 'meanWaitMin', 'p95WaitMin']));
    expect(Object.keys(s.hindsight as object)).toEqual(expect.arrayContaining(['cost', 'matched', 'abandoned']));
  });

  it('windows accept 5000, 5s and 1.5m; --window overrides the config file', () => {
    const cfg = join(dir, 'cfg.json');
    writeFileSync(cfg, '{"windowMs": 20000}');
    const ms = (args: string[]): number => (JSON.parse(run(['replay', good, '--json', '--no-hindsight', ...args]).stdout) as { windowMs: number }).windowMs;
    expect(ms(['--window', '5000'])).toBe(5000);
    expect(ms(['--window', '1.5m'])).toBe(90_000);
    expect(ms(['--config', cfg])).toBe(20_000);
    expect(ms(['--config', cfg, '--window', '5s'])).toBe(5000);
  });

  it('prints a human summary by default', () => {
    const r = run(['replay', good, '--threads', '1']);
    expect(r.status, r.stderr).toBe(0);
    for (const word of ['online', 'hindsight', 'regret', 'ratio', 'rejects', 'p95 wait']) expect(r.stdout).toContain(word);
  });

  it('exit 2 for usage and input errors, with one line naming the problem on stderr', () => {
    const missing = run(['replay', join(dir, 'nope.jsonl'), '--json']);
    expect(missing.status).toBe(2);
    expect(missing.stdout).toBe('');
    expect(missing.stderr).toContain('PAIRFLOW_ERR_INPUT_NOT_FOUND');
    const badWindow = run(['replay', good, '--window', 'soon']);
    expect(badWindow.status).toBe(2);
    expect(badWindow.stderr).toContain('PAIRFLOW_ERR_CLI_OPTION');
    const cfg = join(dir, 'bad-config.json');
    writeFileSync(cfg, '{"maxTravelMin": "far"}');
    const badConfig = run(['replay', good, '--config', cfg]);
    expect(badConfig.status).toBe(2);
    expect(badConfig.stderr).toContain('PAIRFLOW_ERR_CONFIG_INVALID');
    expect(badConfig.stderr).toContain(cfg);
    expect(badConfig.stderr).toContain('maxTravelMin');
  });

  it('hostile numbers are input errors (exit 2), not a silently wrong result; a window longer than every patience warns', () => {
    for (const [name, text] of [['fast.json', '{"speedKmh": 1e200}'], ['negative-p.json', '{"abandonPenalty": -30}'], ['long-w.json', '{"windowMs": 1e300}']] as const) {
      const cfg = join(dir, name);
      writeFileSync(cfg, text);
      const r = run(['replay', good, '--config', cfg, '--json', '--no-hindsight']);
      expect(r.status, name).toBe(2);
      expect(r.stderr, name).toContain('PAIRFLOW_ERR_CONFIG_INVALID');
    }
    for (const w of ['-5s', '9007199254740993']) {
      const r = run(['replay', good, '--window', w, '--json']);
      expect(r.status, w).toBe(2);
      expect(r.stderr, w).toContain('PAIRFLOW_ERR_CLI_OPTION');
    }
    const long = run(['replay', good, '--window', '1h', '--json', '--no-hindsight']);
    expect(long.status, long.stderr).toBe(0);
    expect(long.stderr).toMatch(/^pairflow: warning: .*patience/m);
  });

  it('--strict stops at the first reject with exit 2 and its file:line; without it the reject is counted', () => {
    const strict = run(['replay', withBad, '--strict', '--json']);
    expect(strict.status).toBe(2);
    expect(strict.stdout).toBe('');
    expect(strict.stderr).toContain('PAIRFLOW_ERR_INPUT_REJECT');
    expect(strict.stderr).toContain(`${withBad}:41`);
    const lax = run(['replay', withBad, '--json', '--no-hindsight']);
    expect(lax.status, lax.stderr).toBe(0);
    expect((JSON.parse(lax.stdout) as { rejects: number }).rejects).toBe(1);
    expect(lax.stderr).toContain(`${withBad}:41`);
  });

  it('a log from which no valid arrival could be read is an input error (exit 2), not a summary of zeros (SPEC §6)', () => {
    const empty = join(dir, 'empty.jsonl');
    writeFileSync(empty, '');
    const allBad = join(dir, 'all-bad.jsonl');
    writeFileSync(allBad, 'not json\n{"type":"demand","id":"","market":"m","t":1}\n');
    const gzipped = join(dir, 'really-gzip.jsonl');
    writeFileSync(gzipped, gzipSync(readFileSync(good)));
    const cut = join(dir, 'cut.jsonl.gz');
    writeFileSync(cut, gzipSync(readFileSync(good)).subarray(0, 30));
    const onlyWithdraws = join(dir, 'withdraws.jsonl');
    writeFileSync(onlyWithdraws, '{"type":"withdraw","id":"a","market":"m","t":5,"side":"demand"}\n');
    const xy = join(dir, 'xy.jsonl');
    writeFileSync(xy, [...generateEvents({ days: 1, seed: 2, scale: 0.002, coords: 'xy' })].map(toJsonLine).join('\n'));
    for (const log of [empty, allBad, gzipped, cut, onlyWithdraws, xy]) {
      const r = run(['replay', log, '--json', '--no-hindsight']);
      expect(r.status, log).toBe(2);
      expect(r.stdout, log).toBe('');
      expect(r.stderr, log).toContain('[PAIRFLOW_ERR_INPUT_NO_EVENTS]');
      expect(r.stderr, log).toContain(log);
    }
    // the same log under the metric it was written for replays
    const cfg = join(dir, 'euclidean.json');
    writeFileSync(cfg, '{"metric": "euclidean"}');
    expect(run(['replay', xy, '--config', cfg, '--json', '--no-hindsight']).status).toBe(0);
  });

  it('--max-rejects N or P% fails the run (exit 2) past the limit, and not before it', () => {
    // withBad: 40 good lines and 1 rejected line, a share of 1/41 = 2.44 %
    for (const [limit, status] of [['0', 2], ['1', 0], ['100', 0], ['0%', 2], ['2.4%', 2], ['2.5%', 0], ['100%', 0]] as const) {
      const r = run(['replay', withBad, '--max-rejects', limit, '--json', '--no-hindsight']);
      expect(r.status, `--max-rejects ${limit}: ${r.stderr}`).toBe(status);
      if (status === 2) expect(r.stderr).toContain('[PAIRFLOW_ERR_INPUT_TOO_MANY_REJECTS]');
    }
    for (const bad of ['-1', 'lots', '101%', '1.5']) {
      const r = run(['replay', withBad, '--max-rejects', bad]);
      expect(r.status, bad).toBe(2);
      expect(r.stderr, bad).toContain('[PAIRFLOW_ERR_CLI_OPTION]');
    }
  });

  it('rejects take bounded memory: huge bad lines and 80,000 small ones replay within a 96 MB heap', () => {
    // Before: a 2 kB excerpt of a 900 kB line kept the whole line alive (V8 slices share
    // their parent), and every reject stayed in memory until the end — both ran out of heap.
    const good40 = readFileSync(good, 'utf8');
    const cases = {
      'long-bad.jsonl.gz': gzipSync(good40 + `{"type":"demand","id":"${'x'.repeat(900_000)}\n`.repeat(200)),
      'many-bad.jsonl.gz': gzipSync(good40 + `{"type":"demand","id":"${'y'.repeat(2100)}\n`.repeat(80_000)),
    };
    for (const [name, bytes] of Object.entries(cases)) {
      const path = join(dir, name);
      writeFileSync(path, bytes);
      const r = spawnSync(process.execPath, ['--max-old-space-size=96', bin, 'replay', path, '--rejects', join(dir, `${name}.rejects`), '--no-hindsight', '--json'], { encoding: 'utf8' });
      expect(r.status, `${name}: ${r.stderr.slice(-300)}`).toBe(0);
      const s = JSON.parse(r.stdout) as { rejects: number };
      expect(s.rejects).toBe(name.startsWith('long') ? 200 : 80_000);
      const lines = readFileSync(join(dir, `${name}.rejects`), 'utf8').trimEnd().split('\n');
      expect(lines).toHaveLength(s.rejects);
      expect((JSON.parse(lines[0]!) as { raw: string }).raw.length).toBeLessThanOrEqual(2048);
    }
  });

  it('--rejects FILE beside --out DIR writes both, each with every reject', () => {
    const base = mkdtempSync(join(dir, 'both-'));
    const r = run(['replay', withBad, '--out', join(base, 'run'), '--rejects', join(base, 'rejects.jsonl'), '--no-hindsight']);
    expect(r.status, r.stderr).toBe(0);
    const a = readFileSync(join(base, 'run', 'rejects.jsonl'), 'utf8');
    expect(a.trimEnd().split('\n')).toHaveLength(1);
    expect(readFileSync(join(base, 'rejects.jsonl'), 'utf8')).toBe(a);
  });

  it('exit 1 when the run directory cannot be written', () => {
    const file = join(dir, 'plain-file');
    writeFileSync(file, 'x');
    const r = run(['replay', good, '--out', join(file, 'run'), '--no-hindsight']);
    expect(r.status).toBe(1);
    expect(r.stderr).toContain('PAIRFLOW_ERR_OUTPUT_WRITE');
  });

  it.skipIf(!existsSync('/dev/full'))('exit 1 naming the file when the rejects file cannot take its last write', () => {
    const r = run(['replay', withBad, '--rejects', '/dev/full', '--no-hindsight', '--json']);
    expect(r.status).toBe(1);
    expect(r.stdout).toBe('');
    expect(r.stderr).toContain('/dev/full');
    expect(r.stderr).toContain('PAIRFLOW_ERR_OUTPUT_WRITE');
  });

  it('a failed run leaves --out DIR as it was: an earlier complete run stays whole, nothing half-written beside it', () => {
    const base = mkdtempSync(join(dir, 'strict-'));
    const out = join(base, 'run');
    expect(run(['replay', good, '--out', out, '--no-hindsight']).status).toBe(0);
    const before = Object.fromEntries(readdirSync(out).map((f) => [f, readFileSync(join(out, f), 'utf8')]));
    const r = run(['replay', withBad, '--strict', '--out', out, '--no-hindsight']);
    expect(r.status).toBe(2);
    expect(r.stderr).toContain('PAIRFLOW_ERR_INPUT_REJECT');
    expect(readdirSync(base)).toEqual(['run']);
    expect(Object.fromEntries(readdirSync(out).map((f) => [f, readFileSync(join(out, f), 'utf8')]))).toEqual(before);
  });

  it('--out under /proc is refused at once (exit 1) instead of spinning in mkdir', () => {
    const r = spawnSync(process.execPath, [bin, 'replay', good, '--out', '/proc/pairflow/run', '--no-hindsight'], { encoding: 'utf8', timeout: 60_000 });
    expect(r.status).toBe(1);
    expect(r.stderr).toContain('PAIRFLOW_ERR_OUTPUT_WRITE');
    expect(r.stderr).toContain('/proc');
  });

  it('--out writes the run directory and --no-warm solves every epoch cold', () => {
    const out = join(dir, 'run');
    const r = run(['replay', good, '--out', out, '--json', '--no-warm', '--no-hindsight']);
    expect(r.status, r.stderr).toBe(0);
    const s = JSON.parse(r.stdout) as { warm: boolean; epochs: { warm: number; cold: number } };
    expect(s.warm).toBe(false);
    expect(s.epochs.warm).toBe(0);
    expect(JSON.parse(readFileSync(join(out, 'summary.json'), 'utf8'))).toEqual(s);
    const manifest = JSON.parse(readFileSync(join(out, 'manifest.json'), 'utf8')) as { command: string[] };
    expect(manifest.command).toEqual(['pairflow', 'replay', good, '--out', out, '--json', '--no-warm', '--no-hindsight']);
  });
});

describe('pairflow sweep', () => {
  it('--json prints one object with every window, the best one, and bootstrap intervals; --csv writes the table', () => {
    const csv = join(dir, 'sweep.csv');
    const r = run(['sweep', good, '--windows', '2s,10s,1m', '--json', '--threads', '1', '--bootstrap', '200', '--seed', '3', '--csv', csv]);
    expect(r.status, r.stderr).toBe(0);
    const lines = r.stdout.trimEnd().split('\n');
    expect(lines).toHaveLength(1);
    const s = JSON.parse(lines[0]!) as { policies: { policy: { windowMs: number }; online: { cost: number } }[]; best: { windowMs: number }; bootstrap: { resamples: number; seed: number } };
    expect(s.policies.map((w) => w.policy.windowMs)).toEqual([2000, 10_000, 60_000]);
    expect(s.bootstrap).toMatchObject({ resamples: 200, seed: 3 });
    const min = Math.min(...s.policies.map((w) => w.online.cost));
    expect(s.policies.find((w) => w.policy.windowMs === s.best.windowMs)!.online.cost).toBe(min);
    const rows = readFileSync(csv, 'utf8').split('\r\n').filter((l) => l !== '');
    expect(rows).toHaveLength(4);
    expect(rows[0]!.startsWith('policy,window_ms,reserve,commit,online_cost,')).toBe(true);
  });

  it('prints a table by default and rejects a bad --windows list with exit 2', () => {
    const r = run(['sweep', good, '--windows', '5s,30s', '--threads', '1', '--bootstrap', '50']);
    expect(r.status, r.stderr).toBe(0);
    expect(r.stdout).toContain('recommendation:');
    const bad = run(['sweep', good, '--windows', '5s,often']);
    expect(bad.status).toBe(2);
    expect(bad.stderr).toContain('PAIRFLOW_ERR_CLI_OPTION');
  });
});
