import { readFileSync } from 'node:fs';
import { describe, expect, it } from 'vitest';
import { ERROR_CODES, exitCodeFor, pairflowError, PairflowError, RETIRED_CODES } from '../../src/errors.js';

const doc = readFileSync(new URL('../../docs/errors.md', import.meta.url), 'utf8');
const documented = new Map<string, number>();
for (const m of doc.matchAll(/^\| `(PAIRFLOW_ERR_[A-Z0-9_]+)` \| (\d) \|/gm)) documented.set(m[1]!, Number(m[2]));

describe('error registry', () => {
  it('docs/errors.md lists exactly the registered codes, with their exit status', () => {
    expect([...documented.keys()].sort()).toEqual(Object.keys(ERROR_CODES).sort());
    for (const [code, spec] of Object.entries(ERROR_CODES)) {
      expect(documented.get(code), code).toBe(spec.kind === 'runtime' ? 1 : 2);
    }
  });

  it('codes follow PAIRFLOW_ERR_<AREA>_<WHAT> and no retired code is reused', () => {
    for (const code of Object.keys(ERROR_CODES)) {
      expect(code).toMatch(/^PAIRFLOW_ERR_[A-Z0-9]+_[A-Z0-9_]+$/);
      expect(RETIRED_CODES).not.toContain(code);
    }
  });

  it('pairflowError() fills the template and maps to the exit status of SPEC §6', () => {
    const err = pairflowError('PAIRFLOW_ERR_INPUT_FORMAT', { file: 'm.csv', line: 3, detail: 'expected a number' });
    expect(err).toBeInstanceOf(PairflowError);
    expect(err.code).toBe('PAIRFLOW_ERR_INPUT_FORMAT');
    expect(err.message).toBe('m.csv:3: expected a number');
    expect(exitCodeFor(err)).toBe(2);
    expect(exitCodeFor(pairflowError('PAIRFLOW_ERR_KAFKA_CONNECT', { brokers: 'x', detail: 'y' }))).toBe(1);
    expect(exitCodeFor(new Error('boom'))).toBe(1);
  });
});
