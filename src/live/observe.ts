/**
 * The live processor's figures as Prometheus metrics (src/ops/metrics.ts): a
 * {@link LiveObserver} that feeds a {@link LiveMetrics}.
 */
import type { LiveMetrics } from '../ops/metrics.js';
import type { LiveObserver } from './processor.js';

/** @example new LiveProcessor({ …, observer: metricsObserver(createMetrics()) }) */
export function metricsObserver(m: LiveMetrics): LiveObserver {
  const marketsOf = new Map<number, Set<string>>();
  // Counted here per record and handed to prom-client once per batch: a labelled
  // counter's inc() per record cost more than the record's own encoding.
  const events = { supply: 0, demand: 0, withdraw: 0 };
  const perMarket = new Map<string, { assignments: number; demand: number; supply: number }>();
  const countsOf = (market: string): { assignments: number; demand: number; supply: number } => {
    let c = perMarket.get(market);
    if (!c) perMarket.set(market, (c = { assignments: 0, demand: 0, supply: 0 }));
    return c;
  };
  const flush = (): void => {
    for (const type of ['supply', 'demand', 'withdraw'] as const) {
      if (events[type] > 0) m.eventIn(type, events[type]);
      events[type] = 0;
    }
    for (const [market, c] of perMarket) {
      if (c.assignments > 0) m.assignment(market, c.assignments);
      if (c.demand > 0) m.expiration(market, 'demand', c.demand);
      if (c.supply > 0) m.expiration(market, 'supply', c.supply);
    }
    perMarket.clear();
  };
  const note = (partition: number, market: string): void => {
    let set = marketsOf.get(partition);
    if (!set) marketsOf.set(partition, (set = new Set()));
    set.add(market);
  };
  return {
    recordIn(_partition, kind, code) {
      if (kind === 'reject') m.reject(code!);
      else events[kind]++;
    },
    assignment(partition, a) {
      note(partition, a.market);
      countsOf(a.market).assignments++;
    },
    expired(partition, e) {
      note(partition, e.market);
      countsOf(e.market)[e.side]++;
    },
    window(partition, s) {
      note(partition, s.market);
      m.windowClosed(s.market, s.solveMs);
      if (s.late > 0) m.lateEvent(partition, s.late);
    },
    committed(partition, info) {
      flush();
      m.committed(partition, info.closeToCommitMs === null ? [] : [info.closeToCommitMs]);
    },
    aborted(partition) {
      m.aborted(partition);
    },
    restored(_partition, info) {
      m.restored(info.ms);
    },
    lag(partition, lag) {
      flush();
      m.consumerLag(partition, lag);
    },
    pools(_partition, sizes) {
      for (const s of sizes) m.poolSize(s.market, s.supply, s.demand);
    },
    released(partition) {
      m.forgetPartition(partition);
      for (const market of marketsOf.get(partition) ?? []) m.forgetMarket(market);
      marketsOf.delete(partition);
    },
    assigned(partitions) {
      m.partitionsAssigned(partitions.length);
    },
  };
}
