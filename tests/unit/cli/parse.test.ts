import { describe, expect, it } from 'vitest';
import { parseDuration, parseNumber } from '../../../src/cli/parse.js';
import { MAX_DURATION_MS } from '../../../src/config.js';

describe('parseDuration()', () => {
  it('accepts the window forms of SPEC §6: 5000, 5s, 1.5m', () => {
    expect(parseDuration('5000', '--window')).toBe(5000);
    expect(parseDuration('5s', '--window')).toBe(5000);
    expect(parseDuration('1.5m', '--window')).toBe(90_000);
    expect(parseDuration('250ms', '--window')).toBe(250);
    expect(parseDuration('1h', '--window')).toBe(3_600_000);
  });

  it('rejects zero, negatives and words with a usage error naming the option', () => {
    for (const bad of ['0', '-5s', 'five', '5 parsecs', '', '1e3']) {
      try {
        parseDuration(bad, '--window');
        expect.unreachable(`accepted ${bad}`);
      } catch (err) {
        expect((err as { code: string }).code).toBe('PAIRFLOW_ERR_CLI_OPTION');
        expect((err as Error).message).toContain('--window');
      }
    }
  });
});

describe('parseDuration() with hostile values', () => {
  const code = (text: string): string | number => {
    try {
      return parseDuration(text, '--window');
    } catch (err) {
      expect((err as { params: { option: string } }).params.option).toBe('--window');
      return (err as { code: string }).code;
    }
  };

  it('scales decimals exactly instead of through floating point', () => {
    expect(parseDuration('1.1s', '--window')).toBe(1100); // 1.1 * 1000 = 1100.0000000000002 in doubles
    expect(parseDuration('0.001s', '--window')).toBe(1);
    expect(parseDuration('2.5h', '--window')).toBe(9_000_000);
    expect(parseDuration('+5s', '--window')).toBe(5000);
  });

  it('refuses what it would otherwise round: beyond 2^53, beyond a year, fractions of a millisecond', () => {
    for (const text of ['9007199254740993', '9007199254740992', '31536000001', '8761h', '0.5ms', '1.0001s', '-5s', '-0', '0.0s']) {
      expect(code(text), text).toBe('PAIRFLOW_ERR_CLI_OPTION');
    }
    expect(parseDuration('31536000000', '--window')).toBe(MAX_DURATION_MS);
    expect(parseDuration('8760h', '--window')).toBe(MAX_DURATION_MS);
  });
});

describe('parseNumber()', () => {
  it('parses finite numbers and rejects the rest', () => {
    expect(parseNumber('-2.5', '--unmatched-cost')).toBe(-2.5);
    expect(() => parseNumber('NaN', '--unmatched-cost')).toThrow(/not a finite number/);
    expect(() => parseNumber(' ', '--unmatched-cost')).toThrow(/not a finite number/);
  });
});
