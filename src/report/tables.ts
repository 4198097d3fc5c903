/**
 * The CSV tables written beside the report (RFC 4180, one header row each): what the
 * charts are drawn from, so an analyst can take the numbers elsewhere. Pure: text out.
 */
import { csvRow } from '../emit/csv.js';
import { cellCentre, type CellGrid } from '../replay/digest.js';
import { distributions, type PairedRuns, type RunView, type SweepView } from './figures.js';

/** Table name → CSV text. */
export type Tables = Map<string, string>;

export const TABLE_HEADERS = {
  headline: ['run', 'market', 'demand', 'online_cost', 'hindsight_cost', 'regret', 'ratio', 'matched', 'abandoned', 'hindsight_matched', 'hindsight_abandoned', 'mean_wait_min', 'p95_wait_min', 'sentence'],
  hours: ['run', 'market', 'hour_utc', 'demand', 'matched', 'abandoned', 'travel_cost', 'wait_cost', 'abandon_cost', 'online_cost', 'wait_min',
    'hindsight_matched', 'hindsight_abandoned', 'hindsight_travel_cost', 'hindsight_wait_cost', 'hindsight_abandon_cost', 'hindsight_cost', 'regret'],
  cells: ['run', 'market', 'cell_east', 'cell_north', 'centre_a', 'centre_b', 'hour_of_day_utc', 'demand_arrivals', 'supply_arrivals', 'abandoned',
    'price_observations', 'mean_supply_value', 'cover_demand', 'cover_supply'],
  supply: ['run', 'market', 'supply_id', 'occurrences', 'assignments', 'travel_min'],
  distributions: ['run', 'measure', 'source', 'from_min', 'to_min', 'count'],
  sweep: ['sweep', 'policy', 'window_ms', 'reserve', 'commit', 'online_cost', 'cost_lo', 'cost_hi', 'diff_vs_recommended', 'diff_lo', 'diff_hi', 'best_share', 'recommended'],
  paired: ['comparison', 'bucket_start_utc', 'cost_a', 'cost_b', 'difference_b_minus_a'],
} as const;

/** Builds every table the report's runs have data for. */
export function buildTables(views: readonly RunView[], sweeps: readonly SweepView[], paired: readonly PairedRuns[]): Tables {
  const t: Tables = new Map();
  let headline = csvRow(TABLE_HEADERS.headline);
  for (const v of views) {
    for (const h of v.headline) {
      headline += csvRow([
        v.title, h.market ?? 'all', h.demand, h.online.cost, h.hindsight?.cost, h.regret, h.ratio, h.online.matched, h.online.abandoned,
        h.hindsight?.matched, h.hindsight?.abandoned, h.online.meanWaitMin, h.online.p95WaitMin, h.sentence,
      ]);
    }
  }
  t.set('headline', headline);

  const withDigest = views.filter((v) => v.digest !== null);
  if (withDigest.length > 0) {
    let hours = csvRow(TABLE_HEADERS.hours);
    let cells = csvRow(TABLE_HEADERS.cells);
    let supply = csvRow(TABLE_HEADERS.supply);
    let dists = csvRow(TABLE_HEADERS.distributions);
    for (const v of withDigest) {
      for (const h of v.hours) {
        const online = h.travelCost + h.waitCost + h.abandonCost;
        const hind = h.hTravelCost + h.hWaitCost + h.hAbandonCost;
        hours += csvRow([
          v.title, h.market, new Date(h.hour).toISOString(), h.demand, h.matched, h.abandoned, h.travelCost, h.waitCost, h.abandonCost, online, h.waitMin,
          ...(v.hasHindsight ? [h.hMatched, h.hAbandoned, h.hTravelCost, h.hWaitCost, h.hAbandonCost, hind, online - hind] : ['', '', '', '', '', '', '']),
        ]);
      }
      const grid: CellGrid = v.digest!.grid;
      for (const c of v.cells) {
        const [a, b] = cellCentre(grid, c.cx, c.cy);
        cells += csvRow([
          v.title, c.market, c.cx, c.cy, a, b, c.hourOfDay, c.demand, c.supply, c.abandoned, c.priceCount,
          c.priceCount > 0 ? c.priceSum / c.priceCount : null, c.coverDemand, c.coverSupply,
        ]);
      }
      for (const s of v.supply) supply += csvRow([v.title, s.market, s.id, s.occurrences, s.assignments, s.travelMin]);
      for (const d of distributions(v.digest!)) {
        for (const b of d.bins) dists += csvRow([v.title, d.measure, d.source, b.lo, b.hi, b.count]);
      }
    }
    t.set('hours', hours);
    t.set('cells', cells);
    t.set('supply', supply);
    t.set('distributions', dists);
  }

  if (sweeps.length > 0) {
    let sw = csvRow(TABLE_HEADERS.sweep);
    for (const s of sweeps) {
      s.input.sweep.policies.forEach((p, i) => {
        const v = s.policies[i]!;
        sw += csvRow([s.input.name, p.label, p.policy.windowMs, p.policy.reserve, p.policy.commit, v.cost, v.lo, v.hi, v.diff, v.diffLo, v.diffHi, v.bestShare, v.recommended ? 1 : 0]);
      });
    }
    t.set('sweep', sw);
  }

  const pairs: Array<{ name: string; rows: ReadonlyArray<{ at: number; a: number; b: number }> }> = [
    ...sweeps.flatMap((s) => {
      if (!s.paired) return [];
      const bi = s.input.sweep.policies.findIndex((p) => p.label === s.recommendation.label);
      const ri = s.input.sweep.policies.findIndex((p) => p.label === s.recommendation.runnerUp);
      const b = s.input.sweep.buckets;
      return [{
        name: `${s.input.name}: ${s.recommendation.runnerUp} vs ${s.recommendation.label}`,
        rows: b.hindsight.map((_, k) => ({ at: b.origin + k * b.unitMs, a: b.policies[bi]![k]!, b: b.policies[ri]![k]! })),
      }];
    }),
    ...paired.map((p) => ({ name: `${p.b.title} vs ${p.a.title}`, rows: p.rows })),
  ];
  if (pairs.length > 0) {
    let out = csvRow(TABLE_HEADERS.paired);
    for (const p of pairs) for (const r of p.rows) out += csvRow([p.name, new Date(r.at).toISOString(), r.a, r.b, r.b - r.a]);
    t.set('paired', out);
  }
  return t;
}
