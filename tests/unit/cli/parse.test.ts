import { describe, expect, it } from 'vitest';
import { parseDuration, parseNumber } from '../../../src/cli/parse.js';

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

describe('parseNumber()', () => {
  it('parses finite numbers and rejects the rest', () => {
    expect(parseNumber('-2.5', '--unmatched-cost')).toBe(-2.5);
    expect(() => parseNumber('NaN', '--unmatched-cost')).toThrow(/not a finite number/);
    expect(() => parseNumber(' ', '--unmatched-cost')).toThrow(/not a finite number/);
  });
});
