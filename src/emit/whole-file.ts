import { rename, writeFile } from 'node:fs/promises';
import { pairflowError } from '../errors.js';

/**
 * Writes a whole file via a temporary one beside it and a rename, so a reader never
 * sees half of it; a failure is `PAIRFLOW_ERR_OUTPUT_WRITE` naming the file.
 * @example await writeWholeFile('run/digest.json', JSON.stringify(digest))
 */
export async function writeWholeFile(path: string, text: string): Promise<void> {
  const tmp = `${path}.tmp`;
  try {
    await writeFile(tmp, text, 'utf8');
    await rename(tmp, path);
  } catch (err) {
    const code = (err as NodeJS.ErrnoException).code ?? String(err);
    throw pairflowError('PAIRFLOW_ERR_OUTPUT_WRITE', { file: path, detail: code }, err);
  }
}
