/**
 * bench/live.ts in its quick mode (tiny sizes, no docs written), against the test
 * broker: a benchmark that is not run rots.
 */
import { describe, expect, it } from 'vitest';
import { runLiveBench } from '../../bench/live.js';
import { BROKERS } from './helpers/kafka.js';

describe.skipIf(!BROKERS)('bench/live.ts --quick', () => {
  it('drains a backlog, restores a pool and reports a paced run, with consistent figures', async () => {
    const r = await runLiveBench({ quick: true, write: false, brokers: BROKERS, log: () => {} });
    const t = r.throughput![0]!;
    expect(t.events).toBeGreaterThan(1000);
    expect(t.busyMs).toBeGreaterThan(0);
    expect(t.transactions).toBeGreaterThan(0);
    expect(r.restore!.restoreMs).toHaveLength(4);
    expect(r.paced!.minutes.length).toBeGreaterThan(0);
    expect(r.paced!.published).toBeGreaterThan(0);
    expect(r.markdown.startsWith('<!-- bench:live:start -->')).toBe(true);
  });
});
