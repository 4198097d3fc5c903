/**
 * The live processor's figures as Prometheus metrics (src/ops/metrics.ts): a
 * {@link LiveObserver} that feeds a {@link LiveMetrics}.
 */
import type { LiveMetrics } from '../ops/metrics.js';
import type { LiveObserver } from './processor.js';

/** @example new LiveProcessor({ …, observer: metricsObserver(createMetrics()) }) */
export function metricsObserver(m: LiveMetrics): LiveObserver {
  const marketsOf = new Map<number, Set<string>>();
  const note = (partition: number, market: string): void => {
    let set = marketsOf.get(partition);
    if (!set) marketsOf.set(partition, (set = new Set()));
    set.add(market);
  };
  return {
    recordIn(partition, kind, code) {
      void partition;
      if (kind === 'reject') m.reject(code!);
      else m.eventIn(kind);
    },
    assignment(partition, a) {
      note(partition, a.market);
      m.assignment(a.market);
    },
    expired(partition, e) {
      note(partition, e.market);
      m.expiration(e.market, e.side);
    },
    window(partition, s) {
      note(partition, s.market);
      m.windowClosed(s.market, s.solveMs);
      if (s.late > 0) m.lateEvent(partition, s.late);
    },
    committed(partition, info) {
      m.committed(partition, info.closeToCommitMs === null ? [] : [info.closeToCommitMs]);
    },
    aborted(partition) {
      m.aborted(partition);
    },
    restored(_partition, info) {
      m.restored(info.ms);
    },
    lag(partition, lag) {
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
