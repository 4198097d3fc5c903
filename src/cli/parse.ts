import { pairflowError } from '../errors.js';

/**
 * Parses a duration such as `5000` (ms), `250ms`, `5s`, `1.5m` or `1h` into whole
 * milliseconds (SPEC §6: windows accept `5000`, `5s`, `1.5m`).
 * @example parseDuration('1.5m', '--window') // 90000
 */
export function parseDuration(text: string, option: string): number {
  const m = /^\s*(\d+(?:\.\d+)?)\s*(ms|s|m|h)?\s*$/.exec(text);
  if (!m) {
    throw pairflowError('PAIRFLOW_ERR_CLI_OPTION', {
      option,
      detail: `'${text}' is not a duration (expected e.g. 5000, 5s, 1.5m)`,
    });
  }
  const value = Number(m[1]);
  const unit = m[2] ?? 'ms';
  const scale = unit === 'ms' ? 1 : unit === 's' ? 1000 : unit === 'm' ? 60_000 : 3_600_000;
  const ms = Math.round(value * scale);
  if (!(ms > 0)) {
    throw pairflowError('PAIRFLOW_ERR_CLI_OPTION', { option, detail: `'${text}' must be longer than 0 ms` });
  }
  return ms;
}

/** Parses a finite number option, with a usage error naming the option otherwise. */
export function parseNumber(text: string, option: string): number {
  const value = Number(text);
  if (text.trim() === '' || !Number.isFinite(value)) {
    throw pairflowError('PAIRFLOW_ERR_CLI_OPTION', { option, detail: `'${text}' is not a finite number` });
  }
  return value;
}
