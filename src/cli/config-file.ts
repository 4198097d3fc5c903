import { readFile } from 'node:fs/promises';
import { validateConfig } from '../config.js';
import { findDuplicateKey, printable } from '../consume/json-text.js';
import { pairflowError } from '../errors.js';
import { DEFAULT_CONFIG, type PairflowConfig } from '../model.js';
import { inputFileError } from './solve-input.js';

/**
 * Reads a `--config FILE` (JSON, every field optional; SPEC §2) and validates it.
 * A missing file is `PAIRFLOW_ERR_INPUT_NOT_FOUND` (a directory `PAIRFLOW_ERR_INPUT_UNREADABLE`); bad JSON, a repeated key or a bad field is
 * `PAIRFLOW_ERR_CONFIG_INVALID` with params `file`, `field` (the first bad field, or
 * '' for a JSON syntax error) and a detail listing every problem.
 * @example const config = await readConfigFile('city.json');
 */
export async function readConfigFile(file: string): Promise<PairflowConfig> {
  let text: string;
  try {
    text = await readFile(file, 'utf8');
  } catch (err) {
    throw inputFileError(file, err);
  }
  // A byte-order mark is accepted here as in every other input pairflow reads.
  if (text.charCodeAt(0) === 0xfeff) text = text.slice(1);
  let raw: unknown;
  try {
    raw = JSON.parse(text);
  } catch (err) {
    throw pairflowError('PAIRFLOW_ERR_CONFIG_INVALID', { file, field: '', detail: `not valid JSON: ${printable((err as Error).message)}` }, err);
  }
  const repeated = findDuplicateKey(text);
  if (repeated !== null) {
    throw pairflowError('PAIRFLOW_ERR_CONFIG_INVALID', { file, field: repeated.key, detail: `field '${printable(repeated.key)}' is given twice` });
  }
  const result = validateConfig(raw);
  if ('problems' in result) {
    const field = /field '([^']+)'/.exec(result.problems[0] ?? '')?.[1] ?? '';
    throw pairflowError('PAIRFLOW_ERR_CONFIG_INVALID', { file, field, detail: result.problems.join('; ') });
  }
  return result.config;
}

/**
 * The config a command runs with: the defaults of SPEC §2, then the `--config` file,
 * then `--window` (which overrides the file's `windowMs`).
 */
export async function resolveConfig(args: { configFile?: string | undefined; windowMs?: number | undefined }): Promise<PairflowConfig> {
  const base = args.configFile !== undefined ? await readConfigFile(args.configFile) : DEFAULT_CONFIG;
  return args.windowMs !== undefined ? Object.freeze({ ...base, windowMs: args.windowMs }) : base;
}
