/**
 * stdout as a command's result channel. A write that fails is never an unhandled
 * 'error' event with a stack trace: a reader that went away (`pairflow gen | head`,
 * EPIPE) ends the command quietly, and any other failure (a full disk, ENOSPC) is
 * `PAIRFLOW_ERR_OUTPUT_WRITE` naming stdout, exit 1.
 */
import { pairflowError, PairflowError } from '../errors.js';

/** The name stdout goes by in error messages. */
export const STDOUT_NAME = 'stdout';

let failure: NodeJS.ErrnoException | null = null;

function outputError(err: NodeJS.ErrnoException): PairflowError {
  return pairflowError('PAIRFLOW_ERR_OUTPUT_WRITE', { file: STDOUT_NAME, detail: err.code ?? err.message }, err);
}

/**
 * Keeps stdout's (and stderr's) asynchronous 'error' events from ending the process
 * with a stack trace; stdout's first error is remembered and raised by the next
 * {@link writeOut} or {@link flushOut}. Call once, before any command runs.
 */
export function watchStdout(out: NodeJS.WritableStream = process.stdout, err: NodeJS.WritableStream = process.stderr): void {
  out.on('error', (e: NodeJS.ErrnoException) => { failure ??= e; });
  // Nothing useful can be said about a failing stderr; losing a message beats a crash.
  err.on('error', () => {});
}

/**
 * Writes `text` to stdout and resolves once the stream has taken it (so a large
 * output waits for a slow reader); rejects with `PAIRFLOW_ERR_OUTPUT_WRITE`.
 * @example await writeOut(`${JSON.stringify(summary)}\n`);
 */
export function writeOut(text: string, out: NodeJS.WritableStream = process.stdout): Promise<void> {
  if (failure) return Promise.reject(outputError(failure));
  return new Promise((resolve, reject) => {
    out.write(text, (e?: Error | null) => {
      if (e) {
        failure ??= e as NodeJS.ErrnoException;
        reject(outputError(failure));
      } else resolve();
    });
  });
}

/** Resolves once everything written to stdout has been handed on; rejects like {@link writeOut}. */
export function flushOut(out: NodeJS.WritableStream = process.stdout): Promise<void> {
  return writeOut('', out);
}

/** True for the error of a stdout whose reader has gone away (EPIPE): not a failure of pairflow. */
export function isClosedPipe(err: unknown): boolean {
  if (!(err instanceof PairflowError) || err.code !== 'PAIRFLOW_ERR_OUTPUT_WRITE' || err.params.file !== STDOUT_NAME) return false;
  return (err.cause as NodeJS.ErrnoException | undefined)?.code === 'EPIPE';
}
