import { describe, expect, it } from 'vitest';
import { formatWindow, quantileLinear, regretAndRatio } from '../../../src/replay/summary.js';
import { runPythonJson, scipyVersion } from '../../helpers/python.js';
import { mulberry32, randInt } from '../../helpers/random.js';

describe('quantileLinear()', () => {
  it('interpolates linearly between order statistics (hand-computed)', () => {
    // h = (4 − 1)·0.95 = 2.85 → 3 + 0.85·(4 − 3)
    expect(quantileLinear(Float64Array.of(4, 1, 3, 2), 0.95)).toBeCloseTo(3.85, 12);
    expect(quantileLinear(Float64Array.of(7), 0.95)).toBe(7);
    expect(quantileLinear(new Float64Array(0), 0.95)).toBeNull();
    expect(quantileLinear(Float64Array.of(1, 2), 0)).toBe(1);
    expect(quantileLinear(Float64Array.of(1, 2), 1)).toBe(2);
  });

  it.skipIf(scipyVersion() === null)('equals numpy.quantile with its default (linear) method on seeded samples', () => {
    // Outside check: numpy.quantile(a, q) default method "linear" (numpy ≥ 1.22), in a Python subprocess.
    const seed = 95;
    const rand = mulberry32(seed);
    const samples = Array.from({ length: 40 }, () => Array.from({ length: randInt(rand, 1, 300) }, () => Math.round(rand() * 1e6) / 1e3));
    const qs = [0.025, 0.5, 0.95, 0.975];
    const ref = runPythonJson<number[][]>(
      'import json, sys, numpy as np\nd = json.load(sys.stdin)\nprint(json.dumps([[float(np.quantile(np.array(s), q)) for q in d["qs"]] for s in d["samples"]]))',
      { samples, qs },
    );
    samples.forEach((s, i) => qs.forEach((q, j) => {
      expect(quantileLinear(Float64Array.from(s), q), `seed ${seed} sample ${i} q ${q}`).toBeCloseTo(ref[i]![j]!, 9);
    }));
  });
});

describe('regretAndRatio()', () => {
  it('is online − hindsight and online / hindsight, with the zero cases of the summary doc', () => {
    expect(regretAndRatio(120, 100)).toEqual({ regret: 20, ratio: 1.2 });
    expect(regretAndRatio(0, 0)).toEqual({ regret: 0, ratio: 1 });
    expect(regretAndRatio(5, 0)).toEqual({ regret: 5, ratio: null });
    expect(regretAndRatio(5, null)).toEqual({ regret: null, ratio: null });
  });

  it('never reports a negative regret: rounding noise is 0, anything more is a bug (the hindsight is a lower bound)', () => {
    const online = 0.1 + 0.2; // 0.30000000000000004
    expect(regretAndRatio(online - 1e-12, 0.3 + 1e-12)).toEqual({ regret: 0, ratio: 1 });
    expect(() => regretAndRatio(90, 100)).toThrow(expect.objectContaining({ code: 'PAIRFLOW_ERR_INTERNAL_BUG' }));
    expect(() => regretAndRatio(0, 1e-6)).toThrow(expect.objectContaining({ code: 'PAIRFLOW_ERR_INTERNAL_BUG' }));
  });
});

describe('formatWindow()', () => {
  it('writes window lengths the way --window accepts them', () => {
    expect(formatWindow(5000)).toBe('5s');
    expect(formatWindow(90_000)).toBe('1.5m');
    expect(formatWindow(250)).toBe('250ms');
    expect(formatWindow(3_600_000)).toBe('1h');
    expect(formatWindow(1500)).toBe('1.5s');
  });
});
