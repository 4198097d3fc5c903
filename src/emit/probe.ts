/**
 * Output checks made before long work: a sweep or a report that would fail to write
 * its result at the end fails at the start instead, naming the path.
 */
import { constants } from 'node:fs';
import { access, mkdir, open, rm, stat } from 'node:fs/promises';
import { dirname, resolve } from 'node:path';
import { pairflowError } from '../errors.js';

function writeError(file: string, err: unknown): Error {
  const code = (err as NodeJS.ErrnoException).code ?? String(err);
  return pairflowError('PAIRFLOW_ERR_OUTPUT_WRITE', { file, detail: code }, err);
}

/**
 * Checks that `path` can be written as a file: it is not a directory, and it can be
 * opened for writing (created if missing — and removed again, so nothing is left
 * behind — or opened without truncating if it exists).
 * @example await probeWritableFile('out/sweep.csv')
 */
export async function probeWritableFile(path: string): Promise<void> {
  const existed = await stat(path).then((s) => s, () => null);
  if (existed?.isDirectory()) throw pairflowError('PAIRFLOW_ERR_OUTPUT_WRITE', { file: path, detail: 'is a directory, expected a file' });
  try {
    if (!existed) await access(dirname(resolve(path)), constants.W_OK);
    const fh = await open(path, 'a');
    await fh.close();
    if (!existed) await rm(path, { force: true });
  } catch (err) {
    throw writeError(path, err);
  }
}

/** Creates `dir` (and its parents) if needed and checks that files can be made in it. */
export async function probeWritableDir(dir: string): Promise<void> {
  try {
    await mkdir(dir, { recursive: true });
    await access(dir, constants.W_OK);
  } catch (err) {
    throw writeError(dir, err);
  }
}
