import { createHash } from 'node:crypto';
import { mkdtempSync, readFileSync, rmSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { afterAll, afterEach, describe, expect, it, vi } from 'vitest';
import { commandLine, outputFormat, parseStart } from '../../../src/cli/commands/gen.js';
import { main } from '../../../src/cli/main.js';
import { loadLog } from '../../../src/consume/index.js';
import { GEN_DEFAULTS, resolveGenOptions } from '../../../src/gen/gen.js';

const dir = mkdtempSync(join(tmpdir(), 'pairflow-gen-cli-'));
afterAll(() => rmSync(dir, { recursive: true, force: true }));
afterEach(() => {
  vi.restoreAllMocks();
});

/** Runs the CLI in-process, capturing what it prints. */
async function run(args: string[]): Promise<{ code: number; stdout: string; stderr: string }> {
  let stdout = '';
  let stderr = '';
  // Like a stream: the text is taken, then the write's callback (if any) runs.
  vi.spyOn(process.stdout, 'write').mockImplementation(((chunk: string | Uint8Array, ...rest: unknown[]) => {
    stdout += String(chunk);
    const done = rest.find((x) => typeof x === 'function') as (() => void) | undefined;
    if (done) queueMicrotask(done);
    return true;
  }) as typeof process.stdout.write);
  vi.spyOn(process.stderr, 'write').mockImplementation((chunk: string | Uint8Array) => {
    stderr += String(chunk);
    return true;
  });
  const code = await main(['node', 'pairflow', ...args]);
  vi.restoreAllMocks();
  return { code, stdout, stderr };
}

const sha = (path: string): string => createHash('sha256').update(readFileSync(path)).digest('hex');

describe('pairflow gen', () => {
  it('writes the same bytes twice for the same seed, and a manifest entry that matches the file', async () => {
    const a = join(dir, 'a.jsonl.gz');
    const b = join(dir, 'b.jsonl.gz');
    const manifest = join(dir, 'MANIFEST.json');
    const r1 = await run(['gen', '--out', a, '--scale', '0.01', '--days', '2', '--seed', '4', '--manifest', manifest]);
    const r2 = await run(['gen', '--out', b, '--scale', '0.01', '--days', '2', '--seed', '4', '--json']);
    expect(r1.code).toBe(0);
    expect(r2.code).toBe(0);
    expect(sha(a)).toBe(sha(b));
    const m = JSON.parse(readFileSync(manifest, 'utf8')) as { pairflowVersion: string; files: Record<string, { sha256: string; seed: number; events: number; command: string }> };
    expect(m.files['a.jsonl.gz']).toMatchObject({ sha256: sha(a), seed: 4 });
    expect(m.files['a.jsonl.gz']!.command).toContain('--seed 4');
    const summary = JSON.parse(r2.stdout) as { events: number; sha256: string };
    expect(summary.sha256).toBe(sha(b));
    const back = await loadLog([b], { metric: 'haversine' });
    expect(back.events.length).toBe(summary.events);
    expect(back.rejects).toEqual([]);
  });

  it('writes Avro when the extension says so, with the same events as JSON Lines', async () => {
    const j = join(dir, 'same.jsonl');
    const a = join(dir, 'same.avro');
    expect((await run(['gen', '--out', j, '--scale', '0.005', '--markets', '6'])).code).toBe(0);
    expect((await run(['gen', '--out', a, '--scale', '0.005', '--markets', '6', '--format', 'avro'])).code).toBe(0);
    const [x, y] = await Promise.all([loadLog([j], { metric: 'haversine' }), loadLog([a], { metric: 'haversine' })]);
    expect(y.events.map((e) => e.event)).toEqual(x.events.map((e) => e.event));
    expect(new Set(x.events.map((e) => e.event.market)).size).toBe(6);
  });

  it('shuffles with --shuffle and writes x/y with --coords xy', async () => {
    const s = join(dir, 'shuffled.jsonl');
    expect((await run(['gen', '--out', s, '--scale', '0.005', '--shuffle', '--coords', 'xy'])).code).toBe(0);
    const { events } = await loadLog([s], { metric: 'euclidean' });
    const lines = events.map((e) => e.pos.line);
    // loadLog sorts by t; in a shuffled file the sorted order is not the line order.
    expect(lines).not.toEqual([...lines].sort((p, q) => p - q));
  });

  it('prints JSON Lines on stdout without --out, each line a valid event', async () => {
    const r = await run(['gen', '--scale', '0.001', '--seed', '2']);
    expect(r.code).toBe(0);
    const lines = r.stdout.trimEnd().split('\n');
    expect(lines.length).toBeGreaterThan(80);
    const types = new Set(lines.map((l) => (JSON.parse(l) as { type: string }).type));
    expect(types).toEqual(new Set(['supply', 'demand', 'withdraw']));
  });

  it('exits 2 with a usage error for bad options', async () => {
    for (const args of [
      ['--out', join(dir, 'x.csv')],
      ['--out', join(dir, 'x.jsonl'), '--format', 'avro'],
      ['--out', join(dir, 'x.jsonl'), '--days', '0'],
      ['--out', join(dir, 'x.jsonl'), '--scale', 'lots'],
      ['--out', join(dir, 'x.jsonl'), '--scale', '-1'],
      ['--out', join(dir, 'x.jsonl'), '--start', '2026-02-30'],
      ['--out', join(dir, 'x.jsonl'), '--coords', 'polar'],
      ['--manifest', join(dir, 'm.json')],
    ]) {
      const r = await run(['gen', ...args]);
      expect(r.code, args.join(' ')).toBe(2);
      expect(r.stderr, args.join(' ')).toMatch(/\[PAIRFLOW_ERR_CLI_(OPTION|USAGE)\]/);
    }
  });
});

describe('outputFormat()', () => {
  it('takes the format from the extension and refuses a mismatch', () => {
    expect(outputFormat('a.jsonl.gz', undefined)).toBe('jsonl.gz');
    expect(outputFormat('a.jsonl.gz', 'jsonl')).toBe('jsonl.gz');
    expect(outputFormat('a.avro', undefined)).toBe('avro');
    expect(outputFormat(undefined, undefined)).toBe('jsonl');
    expect(() => outputFormat('a.avro', 'jsonl')).toThrow(expect.objectContaining({ code: 'PAIRFLOW_ERR_CLI_OPTION' }));
    expect(() => outputFormat(undefined, 'avro')).toThrow(expect.objectContaining({ code: 'PAIRFLOW_ERR_CLI_USAGE' }));
  });
});

describe('parseStart()', () => {
  it('reads a date as 00:00 UTC, or an RFC 3339 date-time', () => {
    expect(parseStart('2026-03-02')).toBe(Date.UTC(2026, 2, 2));
    expect(parseStart('2026-03-02T06:00:00+02:00')).toBe(Date.UTC(2026, 2, 2, 4));
    expect(() => parseStart('March 2')).toThrow(expect.objectContaining({ code: 'PAIRFLOW_ERR_CLI_OPTION' }));
  });
});

describe('commandLine()', () => {
  it('records every option that changes the output', () => {
    const line = commandLine(resolveGenOptions({ seed: 3, days: 7, scale: 0.5, shuffle: true, coords: 'xy' }), 'out.avro');
    expect(line).toBe(`pairflow gen --days 7 --seed 3 --start ${new Date(GEN_DEFAULTS.startMs).toISOString()} --scale 0.5 --markets 4 --shuffle --coords xy --out out.avro`);
  });
});
