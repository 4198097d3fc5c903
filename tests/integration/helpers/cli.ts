/**
 * The built `pairflow` command as a child process, for tests of whole runs: live
 * processors that exit, get killed or join and leave a group.
 */
import { spawn, type ChildProcess } from 'node:child_process';
import { fileURLToPath } from 'node:url';

export const BIN = fileURLToPath(new URL('../../../bin/pairflow.js', import.meta.url));

/** A running `pairflow` process and what it printed so far. */
export interface CliProcess {
  child: ChildProcess;
  stdout: () => string;
  stderr: () => string;
  /** Resolves with the exit code (null when killed by a signal) and the signal. */
  exited: Promise<{ code: number | null; signal: NodeJS.Signals | null }>;
  /** Resolves once stderr has a line containing `text` (a log message), or rejects after `timeoutMs`. */
  waitForLog: (text: string, timeoutMs?: number) => Promise<void>;
}

/** Starts `pairflow ...args`. */
export function startCli(args: string[], env: Record<string, string | undefined> = {}): CliProcess {
  const child = spawn(process.execPath, [BIN, ...args], { env: { ...process.env, ...env }, stdio: ['ignore', 'pipe', 'pipe'] });
  let out = '';
  let err = '';
  const waiters: Array<{ text: string; resolve: () => void }> = [];
  child.stdout!.on('data', (b: Buffer) => { out += b.toString(); });
  child.stderr!.on('data', (b: Buffer) => {
    err += b.toString();
    for (const w of [...waiters]) {
      if (err.includes(w.text)) {
        waiters.splice(waiters.indexOf(w), 1);
        w.resolve();
      }
    }
  });
  const exited = new Promise<{ code: number | null; signal: NodeJS.Signals | null }>((resolve) => {
    child.on('exit', (code, signal) => resolve({ code, signal }));
  });
  return {
    child,
    stdout: () => out,
    stderr: () => err,
    exited,
    waitForLog: (text, timeoutMs = 60_000) => {
      if (err.includes(text)) return Promise.resolve();
      return new Promise<void>((resolve, reject) => {
        const timer = setTimeout(() => reject(new Error(`no log line with '${text}' within ${timeoutMs} ms; stderr:\n${err.slice(-3000)}`)), timeoutMs);
        waiters.push({ text, resolve: () => { clearTimeout(timer); resolve(); } });
        void exited.then(() => {
          if (!err.includes(text)) {
            clearTimeout(timer);
            reject(new Error(`process exited before logging '${text}'; stderr:\n${err.slice(-3000)}`));
          }
        });
      });
    },
  };
}

/** Runs `pairflow ...args` to its end. */
export async function runCli(args: string[], env: Record<string, string | undefined> = {}, timeoutMs = 120_000): Promise<{ code: number | null; signal: NodeJS.Signals | null; stdout: string; stderr: string }> {
  const p = startCli(args, env);
  const timer = setTimeout(() => p.child.kill('SIGKILL'), timeoutMs);
  const { code, signal } = await p.exited;
  clearTimeout(timer);
  return { code, signal, stdout: p.stdout(), stderr: p.stderr() };
}
