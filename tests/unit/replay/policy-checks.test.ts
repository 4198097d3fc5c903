/**
 * Checks of the online policy against outside facts: the hindsight optimum is a lower
 * bound on every online policy (SPEC §4), and a greedy-like policy can be held to half
 * the pairs on the classic upper-triangular instance.
 */
import { describe, expect, it } from 'vitest';
import { DEFAULT_CONFIG, type PairflowConfig, type PairflowEvent, type SourcedEvent } from '../../../src/model.js';
import { solveHindsight } from '../../../src/hindsight/hindsight.js';
import { replayEvents } from '../../../src/replay/run.js';
import { mulberry32, randInt } from '../../helpers/random.js';

/** Sorted by t, stable by the order given (what loadLog hands the engine). */
function sourced(events: PairflowEvent[]): SourcedEvent[] {
  return events
    .map((event, seq) => ({ event, pos: { file: 'mem.jsonl', line: seq + 1 }, seq }))
    .sort((a, b) => a.event.t - b.event.t || a.seq - b.seq);
}

/**
 * A small random log with every kind of SPEC §1 event: arrivals with and without
 * `until`, capabilities, withdraws (some finding no unit), re-arrivals of an id and
 * exact duplicates, over two markets on a euclidean plane.
 */
function randomLog(seed: number): SourcedEvent[] {
  const rand = mulberry32(seed);
  const t0 = 1_767_225_600_000; // a multiple of every window used below
  const events: PairflowEvent[] = [];
  const n = randInt(rand, 15, 45);
  const tags = ['cold', 'big'];
  for (let i = 0; i < n; i++) {
    const market = rand() < 0.7 ? 'east' : 'west';
    const t = t0 + randInt(rand, 0, 180_000);
    const kind = rand();
    if (kind < 0.42) {
      const id = `s${randInt(rand, 0, Math.floor(n / 3))}`;
      const has = rand() < 0.3 ? [tags[randInt(rand, 0, 1)]!] : undefined;
      events.push({ type: 'supply', id, market, t, until: rand() < 0.4 ? t + randInt(rand, 1000, 120_000) : null, x: rand() * 6, y: rand() * 6, ...(has ? { has } : {}) });
    } else if (kind < 0.88) {
      const id = `d${randInt(rand, 0, Math.floor(n / 2))}`;
      const needs = rand() < 0.2 ? [tags[randInt(rand, 0, 1)]!] : undefined;
      events.push({ type: 'demand', id, market, t, until: rand() < 0.4 ? t + randInt(rand, 0, 90_000) : null, x: rand() * 6, y: rand() * 6, ...(needs ? { needs } : {}) });
    } else {
      const side = rand() < 0.5 ? 'supply' : 'demand';
      events.push({ type: 'withdraw', side, id: `${side[0]}${randInt(rand, 0, Math.floor(n / 3))}`, market, t });
    }
    if (rand() < 0.05 && events.length > 0) events.push(events[events.length - 1]!); // an exact duplicate
  }
  return sourced(events);
}

const policyConfig = (over: Partial<PairflowConfig>): PairflowConfig => ({
  ...DEFAULT_CONFIG,
  metric: 'euclidean',
  speedKmh: 20,
  maxTravelMin: 12,
  demandPatienceMin: 1,
  supplyPatienceMin: 2,
  ...over,
});

describe('the hindsight optimum is a lower bound on the online policy (SPEC §4)', () => {
  const windows = [1000, 5000, 20_000];
  const reserves = [null, 9, 60];
  const seeds = Array.from({ length: 32 }, (_, i) => 1000 + i);

  it('hindsight cost ≤ online cost on 32 seeded random logs, both commit modes, several W and R', async () => {
    for (const seed of seeds) {
      const events = randomLog(seed);
      const base = policyConfig({ abandonPenalty: 30, reserve: reserves[seed % 3]!, windowMs: windows[Math.floor(seed / 3) % 3]! });
      const h = await solveHindsight(events, base, { threads: 0 });
      for (const commit of ['all', 'due'] as const) {
        const config = { ...base, commit };
        const run = await replayEvents(events, config, { verify: true });
        const label = `seed ${seed} commit ${commit} W ${config.windowMs} R ${config.reserve}`;
        expect(h.cost, label).toBeLessThanOrEqual(run.online.cost + 1e-9 * Math.max(1, run.online.cost));
        // Both sides count the same occurrences of the same log (SPEC §1).
        expect(run.totals.demandUnits, label).toBe(h.demandUnits);
        expect(run.totals.supplyUnits, label).toBe(h.supplyUnits);
        expect(run.online.matched + run.online.abandoned, label).toBe(run.totals.demandUnits);
        // The records the engine streams add up to its totals.
        expect(run.recordedCost, label).toBeCloseTo(run.online.cost, 9);
        // No policy matches more than the max-cardinality matching of the allowed graph.
        expect(run.online.matched, label).toBeLessThanOrEqual(h.ceiling);
      }
    }
  });
});

describe('greedy\'s half on the upper-triangular instance (Karp, Vazirani & Vazirani 1990)', () => {
  /**
   * n supply units present from the start; supply j has capabilities {c1..cj}, demand i
   * needs {ci}, so demand i may only take a supply j ≥ i. Demands arrive one per window.
   * Supply j sits (n − j)·1 m from every demand, so each epoch's exact solve (R = P,
   * commit all) takes the highest-index supply still free: demand i gets n − i + 1
   * while n − i + 1 ≥ i, after which every supply j ≥ i is gone. Online therefore
   * matches exactly ⌈n/2⌉ pairs, while hindsight matches demand i to supply i: all n.
   */
  function triangle(n: number, W: number): SourcedEvent[] {
    const t0 = 1_767_225_600_000;
    const events: PairflowEvent[] = [];
    for (let j = 1; j <= n; j++) {
      const has = Array.from({ length: j }, (_, k) => `c${k + 1}`);
      events.push({ type: 'supply', id: `s${j}`, market: 'tri', t: t0, until: t0 + 3_600_000, x: (n - j) * 0.001, y: 0, has });
    }
    for (let i = 1; i <= n; i++) {
      events.push({ type: 'demand', id: `d${i}`, market: 'tri', t: t0 + i * W + W / 2, until: null, x: 0, y: 0, needs: [`c${i}`] });
    }
    return sourced(events);
  }

  it('online matches exactly ⌈n/2⌉ while hindsight matches all n', async () => {
    for (const n of [1, 2, 5, 6, 7, 10, 25]) {
      const W = 1000;
      const config = policyConfig({ windowMs: W, reserve: null, commit: 'all', demandPatienceMin: 10, supplyPatienceMin: 90 });
      const events = triangle(n, W);
      const run = await replayEvents(events, config, { verify: true });
      const h = await solveHindsight(events, config, { threads: 0 });
      expect(run.online.matched, `n ${n}`).toBe(Math.ceil(n / 2));
      expect(run.online.abandoned, `n ${n}`).toBe(n - Math.ceil(n / 2));
      expect(h.matched, `n ${n}`).toBe(n);
      expect(h.ceiling, `n ${n}`).toBe(n);
    }
  });
});
