import { spawn } from 'node:child_process';
import { fileURLToPath } from 'node:url';
import { describe, expect, it } from 'vitest';
import { installShutdown } from '../../../src/ops/shutdown.js';

const CHILD = fileURLToPath(new URL('./fixtures/shutdown-child.ts', import.meta.url));

interface Run {
  code: number | null;
  signal: NodeJS.Signals | null;
  stdout: string[];
  logs: { level: string; msg: string; err?: { code?: string } }[];
}

/**
 * Starts the child, waits for "ready", sends the signals (the second one once the stop
 * callback has begun), and resolves with how the child ended. Bounded: a child that has
 * not exited after 60 s is killed and the test fails on its status.
 */
function runChild(env: Record<string, string>, signals: NodeJS.Signals[]): Promise<Run> {
  return new Promise((resolve, reject) => {
    const child = spawn(process.execPath, ['--import', 'tsx', CHILD], {
      env: { ...process.env, ...env },
      stdio: ['ignore', 'pipe', 'pipe'],
    });
    let out = '';
    let err = '';
    let sent = 0;
    const kill = setTimeout(() => child.kill('SIGKILL'), 60_000);
    child.stdout.setEncoding('utf8').on('data', (chunk: string) => {
      out += chunk;
      if (sent === 0 && out.includes('ready\n')) child.kill(signals[sent++]!);
      if (sent === 1 && signals.length > 1 && out.includes('stop:')) child.kill(signals[sent++]!);
    });
    child.stderr.setEncoding('utf8').on('data', (chunk: string) => { err += chunk; });
    child.on('error', reject);
    child.on('exit', (code, signal) => {
      clearTimeout(kill);
      const logs = err.split('\n').filter((l) => l.startsWith('{')).map((l) => JSON.parse(l) as Run['logs'][number]);
      resolve({ code, signal, stdout: out.split('\n').filter(Boolean), logs });
    });
  });
}

describe('installShutdown() in a real process', () => {
  it('SIGTERM runs the stop callback to its end and exits 0', async () => {
    const r = await runChild({ SCENARIO: 'clean' }, ['SIGTERM']);
    expect(r.code).toBe(0);
    expect(r.stdout).toEqual(['ready', 'stop:SIGTERM', 'stopped']);
    expect(r.logs.map((l) => l.msg)).toEqual([
      'shutdown begun: finishing the current transaction and leaving the group',
      'shutdown complete',
    ]);
  });

  it('SIGINT does the same', async () => {
    const r = await runChild({ SCENARIO: 'clean' }, ['SIGINT']);
    expect(r.code).toBe(0);
    expect(r.stdout).toEqual(['ready', 'stop:SIGINT', 'stopped']);
  });

  it('a stop that outlasts the grace period exits 1 with PAIRFLOW_ERR_SHUTDOWN_TIMEOUT', async () => {
    const r = await runChild({ SCENARIO: 'hang', GRACE_MS: '300' }, ['SIGTERM']);
    expect(r.code).toBe(1);
    expect(r.stdout).toEqual(['ready', 'stop:SIGTERM']);
    expect(r.logs.at(-1)).toMatchObject({ level: 'error', err: { code: 'PAIRFLOW_ERR_SHUTDOWN_TIMEOUT' } });
  });

  it('a second signal during the stop exits at once with 128 + its number', async () => {
    const term = await runChild({ SCENARIO: 'slow' }, ['SIGTERM', 'SIGTERM']);
    expect(term.code).toBe(143);
    expect(term.stdout).toEqual(['ready', 'stop:SIGTERM']);
    expect(term.logs.at(-1)).toMatchObject({ level: 'warn', msg: 'second signal: exiting at once' });
    const int = await runChild({ SCENARIO: 'slow' }, ['SIGTERM', 'SIGINT']);
    expect(int.code).toBe(130);
  });

  it('a stop callback that throws exits 1 and logs the error', async () => {
    const r = await runChild({ SCENARIO: 'fail' }, ['SIGTERM']);
    expect(r.code).toBe(1);
    expect(r.logs.at(-1)).toMatchObject({ level: 'error', msg: 'shutdown failed' });
  });
});

describe('installShutdown().begin()', () => {
  it('starts the same stop without a signal, once, and resolves with the exit status', async () => {
    const codes: number[] = [];
    let stops = 0;
    const s = installShutdown({ stop: async () => { stops += 1; }, exit: (c) => codes.push(c), signals: [] });
    expect(s.stopping).toBe(false);
    const a = s.begin('idle');
    const b = s.begin('again');
    expect(s.stopping).toBe(true);
    expect(await a).toBe(0);
    expect(await b).toBe(0);
    expect(stops).toBe(1);
    expect(codes).toEqual([0]);
    s.dispose();
  });
});
