import { readFileSync } from 'node:fs';
import { join } from 'node:path';
import { describe, expect, it } from 'vitest';
import { cellCentre, cellOf, CELL_COLUMNS, DIGEST_FILE, HOUR_COLUMNS, SUPPLY_COLUMNS, type RunDigest } from '../../../src/replay/digest.js';
import type { ReplaySummary } from '../../../src/replay/summary.js';
import { mulberry32 } from '../../helpers/random.js';
import { makeFixture } from '../report/fixture.js';

const fx = await makeFixture({ days: 2, seed: 11 });
const read = <T>(dir: string, f: string): T => JSON.parse(readFileSync(join(dir, f), 'utf8')) as T;

function colSum(t: { columns: readonly string[]; rows: Array<Array<number | string>> }, name: string): number {
  const i = t.columns.indexOf(name);
  return t.rows.reduce((s, r) => s + (r[i] as number), 0);
}

describe('the run digest (digest.json)', () => {
  const s = read<ReplaySummary>(fx.runA, 'summary.json');
  const d = read<RunDigest>(fx.runA, DIGEST_FILE);

  it('its hour table adds up to the summary, online and hindsight', () => {
    expect(d.hours.columns).toEqual(HOUR_COLUMNS);
    expect(colSum(d.hours, 'matched')).toBe(s.online.matched);
    expect(colSum(d.hours, 'abandoned')).toBe(s.online.abandoned);
    expect(colSum(d.hours, 'demand')).toBe(s.demandUnits);
    const online = colSum(d.hours, 'travelCost') + colSum(d.hours, 'waitCost') + colSum(d.hours, 'abandonCost');
    expect(online).toBeCloseTo(s.online.cost, 6);
    expect(colSum(d.hours, 'hMatched')).toBe(s.hindsight!.matched);
    expect(colSum(d.hours, 'hAbandoned')).toBe(s.hindsight!.abandoned);
    expect(colSum(d.hours, 'hTravelCost') + colSum(d.hours, 'hWaitCost') + colSum(d.hours, 'hAbandonCost')).toBeCloseTo(s.hindsight!.cost, 6);
    // The mean wait of the summary from the summed wait minutes.
    expect(colSum(d.hours, 'waitMin') / s.online.matched).toBeCloseTo(s.online.meanWaitMin!, 9);
  });

  it('every supply occurrence ends in exactly one assignment or expiry: the supply table counts them all', () => {
    expect(d.supply.columns).toEqual(SUPPLY_COLUMNS);
    expect(colSum(d.supply, 'assignments')).toBe(s.online.matched);
    expect(colSum(d.supply, 'occurrences')).toBe(s.supplyUnits);
  });

  it('its cells count every arrival, every abandoned order, and the whole König cover (as many units as the ceiling)', () => {
    expect(d.cells.columns).toEqual(CELL_COLUMNS);
    const events = readFileSync(fx.log, 'utf8').trim().split('\n').map((l) => JSON.parse(l) as { type: string });
    expect(colSum(d.cells, 'demand')).toBe(events.filter((e) => e.type === 'demand').length);
    expect(colSum(d.cells, 'supply')).toBe(events.filter((e) => e.type === 'supply').length);
    expect(colSum(d.cells, 'abandoned')).toBe(s.online.abandoned);
    expect(colSum(d.cells, 'coverDemand') + colSum(d.cells, 'coverSupply')).toBe(s.hindsight!.ceiling);
    expect(colSum(d.cells, 'priceCount')).toBeGreaterThan(0);
    // Supply prices are ≤ 0, so the summed value −v is ≥ 0 in every cell.
    const i = d.cells.columns.indexOf('priceSum');
    expect(d.cells.rows.every((r) => (r[i] as number) >= 0)).toBe(true);
  });

  it('its histograms count every matched order, online and in hindsight', () => {
    const total = (c: readonly number[] | null): number => (c ?? []).reduce((a, b) => a + b, 0);
    expect(total(d.histograms.wait)).toBe(s.online.matched);
    expect(total(d.histograms.travel)).toBe(s.online.matched);
    expect(total(d.histograms.hindsightWait)).toBe(s.hindsight!.matched);
    expect(total(d.histograms.hindsightTravel)).toBe(s.hindsight!.matched);
  });

  it('per market waits match the records of assignments.jsonl (mean, and p95 by numpy\'s linear rule)', () => {
    const rows = readFileSync(join(fx.runA, 'assignments.jsonl'), 'utf8').trim().split('\n').map((l) => JSON.parse(l) as { market: string; waitMin: number });
    for (const m of d.markets) {
      const w = rows.filter((r) => r.market === m.market).map((r) => r.waitMin).sort((a, b) => a - b);
      const mean = w.reduce((a, b) => a + b, 0) / w.length;
      const h = (w.length - 1) * 0.95;
      const lo = Math.floor(h);
      const p95 = w[lo]! + (h - lo) * (w[Math.min(lo + 1, w.length - 1)]! - w[lo]!);
      expect(m.online.meanWaitMin, m.market).toBeCloseTo(mean, 12);
      expect(m.online.p95WaitMin, m.market).toBeCloseTo(p95, 12);
    }
  });

  it('is the same for the same log and config (replay is deterministic)', async () => {
    const again = await makeFixture({ days: 2, seed: 11 });
    expect(read<RunDigest>(again.runA, DIGEST_FILE)).toEqual(d);
  });
});

describe('cellOf() and cellCentre()', () => {
  it('the centre of a place\'s cell lies in the same cell, under both metrics', () => {
    const rand = mulberry32(4);
    for (const grid of [{ metric: 'haversine' as const, cellKm: 0.5, refLat: 46.5 }, { metric: 'euclidean' as const, cellKm: 0.5, refLat: 0 }]) {
      for (let k = 0; k < 200; k++) {
        const a = grid.metric === 'haversine' ? 46 + rand() : -20 + 40 * rand();
        const b = grid.metric === 'haversine' ? -32 + rand() : -20 + 40 * rand();
        const [cx, cy] = cellOf(grid, a, b);
        const [ca, cb] = cellCentre(grid, cx, cy);
        expect(cellOf(grid, ca, cb)).toEqual([cx, cy]);
      }
    }
  });
});
