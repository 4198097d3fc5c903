import { formatBound, MAX_DURATION_MS } from '../config.js';
import { pairflowError } from '../errors.js';

const UNIT_MS = { ms: 1n, s: 1000n, m: 60_000n, h: 3_600_000n } as const;

/**
 * Parses a duration such as `5000` (ms), `250ms`, `5s`, `1.5m` or `1h` into whole
 * milliseconds (SPEC §6: windows accept `5000`, `5s`, `1.5m`), exactly: the decimal
 * is scaled in integers, so `1.1s` is 1100 ms and `9007199254740993` is not rounded
 * to a neighbour. A value that is not a whole number of ms (`0.5ms`, `1.0001s`), not
 * positive, or longer than {@link MAX_DURATION_MS} is a usage error naming the option.
 * @example parseDuration('1.5m', '--window') // 90000
 */
export function parseDuration(text: string, option: string): number {
  const m = /^\s*([+-]?)(\d+)(?:\.(\d+))?\s*(ms|s|m|h)?\s*$/.exec(text);
  const bad = (detail: string): never => {
    throw pairflowError('PAIRFLOW_ERR_CLI_OPTION', { option, detail: `'${text}' ${detail}` });
  };
  if (!m) return bad('is not a duration (expected e.g. 5000, 250ms, 5s, 1.5m, 1h)');
  const [, sign, whole, frac = '', unit = 'ms'] = m;
  const scaled = BigInt(whole! + frac) * UNIT_MS[unit as keyof typeof UNIT_MS];
  const denom = 10n ** BigInt(frac.length);
  if (sign === '-' || scaled === 0n) return bad('must be positive (longer than 0 ms)');
  if (scaled % denom !== 0n) return bad('is not a whole number of milliseconds');
  const ms = scaled / denom;
  if (ms > BigInt(MAX_DURATION_MS)) return bad(`is longer than the longest duration accepted, ${formatBound(MAX_DURATION_MS)} ms`);
  return Number(ms);
}

/** Parses a finite number option, with a usage error naming the option otherwise. */
export function parseNumber(text: string, option: string): number {
  const value = Number(text);
  if (text.trim() === '' || !Number.isFinite(value)) {
    throw pairflowError('PAIRFLOW_ERR_CLI_OPTION', { option, detail: `'${text}' is not a finite number` });
  }
  return value;
}

/**
 * Parses `--max-rejects`: a whole number of rejects (`0`, `100`), or a share of the
 * lines and records read (`1%`, `0.5%`).
 * @example parseRejectLimit('1%', '--max-rejects') // { share: 0.01 }
 */
export function parseRejectLimit(text: string, option: string): { count: number } | { share: number } {
  const m = /^\s*(\d+(?:\.\d+)?)\s*(%?)\s*$/.exec(text);
  if (m && m[2] === '%' && Number(m[1]) <= 100) return { share: Number(m[1]) / 100 };
  if (m && m[2] === '' && /^\d+$/.test(m[1]!) && Number.isSafeInteger(Number(m[1]))) return { count: Number(m[1]) };
  throw pairflowError('PAIRFLOW_ERR_CLI_OPTION', { option, detail: `'${text}' is not a count or a share (expected e.g. 100 or 1%)` });
}
