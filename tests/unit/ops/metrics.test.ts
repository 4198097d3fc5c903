import { describe, expect, it } from 'vitest';
import { validateEvent } from '../../../src/consume/validate.js';
import { createMetrics, EVENT_FIELDS, rejectField } from '../../../src/ops/metrics.js';
import { parseExposition, parseWithPythonClient, pythonPrometheusClient, sampleValue } from './exposition.js';

/** Every pairflow_ family and its type, as docs/operations.md "Metrics" lists them. */
const FAMILIES: Record<string, string> = {
  pairflow_build_info: 'GAUGE',
  pairflow_events_total: 'COUNTER',
  pairflow_rejects_total: 'COUNTER',
  pairflow_late_events_total: 'COUNTER',
  pairflow_windows_closed_total: 'COUNTER',
  pairflow_assignments_total: 'COUNTER',
  pairflow_expirations_total: 'COUNTER',
  pairflow_pool_size: 'GAUGE',
  pairflow_epoch_solve_duration_seconds: 'HISTOGRAM',
  pairflow_epoch_close_to_commit_seconds: 'HISTOGRAM',
  pairflow_consumer_lag_records: 'GAUGE',
  pairflow_transactions_total: 'COUNTER',
  pairflow_restore_duration_seconds: 'HISTOGRAM',
  pairflow_partitions_assigned: 'GAUGE',
};

/** Drives every method once or more, with known totals. */
function exercised() {
  const m = createMetrics({ version: '9.8.7' });
  m.eventIn('supply', 3);
  m.eventIn('demand');
  m.eventIn('withdraw', 2);
  m.reject('invalid-event', "field 'lat': got 95, expected a number in [-90, 90]");
  m.reject('bad-json', 'not valid JSON: Unexpected token');
  m.lateEvent(2);
  m.lateEvent(2, 4);
  m.windowClosed('north', 2);
  m.windowClosed('north', 250);
  m.windowClosed('south', 0.4);
  m.assignment('north', 5);
  m.assignment('south');
  m.expiration('north', 'demand', 2);
  m.expiration('north', 'supply');
  m.poolSize('north', 7, 3);
  m.poolSize('south', 1, 0);
  m.committed(0, [40, 1500]);
  m.committed(1, []);
  m.aborted(1);
  m.consumerLag(0, 12);
  m.consumerLag(1, 0);
  m.restored(1200);
  m.partitionsAssigned(2);
  return m;
}

describe('createMetrics()', () => {
  it('exposes every family with the type the docs give, each with HELP text', async () => {
    const families = parseExposition(await exercised().registry.metrics());
    for (const [name, type] of Object.entries(FAMILIES)) {
      expect(families.get(name)?.type, name).toBe(type);
      expect(families.get(name)?.help.length, name).toBeGreaterThan(10);
    }
    // prom-client's process metrics come along (the soak bench reads resident memory).
    expect(families.get('process_resident_memory_bytes')?.type).toBe('GAUGE');
  });

  it('names follow the Prometheus conventions: one prefix, _total on counters only, base units', async () => {
    // prometheus.io/docs/practices/naming: application prefix; counters end in _total;
    // times in seconds (never _ms/_milliseconds); a pseudo-metric of build facts ends in _info.
    const families = parseExposition(await exercised().registry.metrics());
    const ours = [...families.values()].filter((f) => f.name.startsWith('pairflow_'));
    expect(ours.length).toBe(Object.keys(FAMILIES).length);
    for (const f of ours) {
      expect(f.name).toMatch(/^pairflow_[a-z_]+[a-z]$/);
      expect(f.name.endsWith('_total'), f.name).toBe(f.type === 'COUNTER');
      expect(f.name).not.toMatch(/_(ms|milliseconds|millis)(_|$)/);
      if (f.type === 'HISTOGRAM') expect(f.name.endsWith('_seconds'), f.name).toBe(true);
    }
  });

  it('counts what the methods report, with bounded labels', async () => {
    const f = parseExposition(await exercised().registry.metrics());
    expect(sampleValue(f, 'pairflow_build_info', { version: '9.8.7', nodejs: process.versions.node })).toBe(1);
    expect(sampleValue(f, 'pairflow_events_total', { type: 'supply' })).toBe(3);
    expect(sampleValue(f, 'pairflow_events_total', { type: 'demand' })).toBe(1);
    expect(sampleValue(f, 'pairflow_events_total', { type: 'withdraw' })).toBe(2);
    expect(sampleValue(f, 'pairflow_rejects_total', { reason: 'invalid-event', field: 'lat' })).toBe(1);
    expect(sampleValue(f, 'pairflow_rejects_total', { reason: 'bad-json' })).toBe(1);
    expect(sampleValue(f, 'pairflow_late_events_total', { partition: '2' })).toBe(5);
    expect(sampleValue(f, 'pairflow_windows_closed_total', { market: 'north' })).toBe(2);
    expect(sampleValue(f, 'pairflow_windows_closed_total', { market: 'south' })).toBe(1);
    expect(sampleValue(f, 'pairflow_assignments_total', { market: 'north' })).toBe(5);
    expect(sampleValue(f, 'pairflow_expirations_total', { market: 'north', side: 'demand' })).toBe(2);
    expect(sampleValue(f, 'pairflow_expirations_total', { market: 'north', side: 'supply' })).toBe(1);
    expect(sampleValue(f, 'pairflow_pool_size', { market: 'north', side: 'supply' })).toBe(7);
    expect(sampleValue(f, 'pairflow_pool_size', { market: 'north', side: 'demand' })).toBe(3);
    expect(sampleValue(f, 'pairflow_transactions_total', { partition: '0', outcome: 'committed' })).toBe(1);
    expect(sampleValue(f, 'pairflow_transactions_total', { partition: '1', outcome: 'committed' })).toBe(1);
    expect(sampleValue(f, 'pairflow_transactions_total', { partition: '1', outcome: 'aborted' })).toBe(1);
    expect(sampleValue(f, 'pairflow_consumer_lag_records', { partition: '0' })).toBe(12);
    expect(sampleValue(f, 'pairflow_partitions_assigned')).toBe(2);
  });

  it('histograms take milliseconds and expose seconds', async () => {
    const f = parseExposition(await exercised().registry.metrics());
    const solve = f.get('pairflow_epoch_solve_duration_seconds')!.metrics[0]!;
    expect(Number(solve.count)).toBe(3);
    expect(Number(solve.sum)).toBeCloseTo(0.2524, 12);
    // Cumulative buckets: 0.4 ms ≤ 0.0005 s; 2 ms ≤ 0.0025 s; 250 ms ≤ 0.25 s.
    expect(Number(solve.buckets!['0.0005'])).toBe(1);
    expect(Number(solve.buckets!['0.0025'])).toBe(2);
    expect(Number(solve.buckets!['0.1'])).toBe(2);
    expect(Number(solve.buckets!['0.25'])).toBe(3);
    const c2c = f.get('pairflow_epoch_close_to_commit_seconds')!.metrics[0]!;
    expect(Number(c2c.count)).toBe(2);
    expect(Number(c2c.sum)).toBeCloseTo(1.54, 12);
    const restore = f.get('pairflow_restore_duration_seconds')!.metrics[0]!;
    expect(Number(restore.count)).toBe(1);
    expect(Number(restore.sum)).toBeCloseTo(1.2, 12);
  });

  it('forgetMarket() and forgetPartition() drop the gauges of what moved away, and keep the counters', async () => {
    const m = exercised();
    m.forgetMarket('north');
    m.forgetPartition(0);
    const f = parseExposition(await m.registry.metrics());
    expect(sampleValue(f, 'pairflow_pool_size', { market: 'north', side: 'supply' })).toBeUndefined();
    expect(sampleValue(f, 'pairflow_pool_size', { market: 'south', side: 'supply' })).toBe(1);
    expect(sampleValue(f, 'pairflow_consumer_lag_records', { partition: '0' })).toBeUndefined();
    expect(sampleValue(f, 'pairflow_consumer_lag_records', { partition: '1' })).toBe(0);
    expect(sampleValue(f, 'pairflow_assignments_total', { market: 'north' })).toBe(5);
  });

  it('two processors in one process do not share counts (no global registry)', async () => {
    const a = createMetrics({ defaultMetrics: false });
    const b = createMetrics({ defaultMetrics: false });
    a.assignment('m', 4);
    const fb = parseExposition(await b.registry.metrics());
    expect(sampleValue(fb, 'pairflow_assignments_total', { market: 'm' })).toBeUndefined();
    expect(sampleValue(parseExposition(await a.registry.metrics()), 'pairflow_assignments_total', { market: 'm' })).toBe(4);
    expect(fb.has('process_resident_memory_bytes')).toBe(false);
  });

  it.skipIf(pythonPrometheusClient() === null)('the official Python client parses the exposition to the same samples', async () => {
    // Outside check: prometheus_client (PyPI 0.26.0), the Prometheus project's own parser.
    const text = await exercised().registry.metrics();
    const py = parseWithPythonClient(text);
    const byName = new Map(py.map((fam) => [fam.name, fam]));
    // The Python client strips _total from counter family names (OpenMetrics style).
    expect(byName.get('pairflow_assignments')?.type).toBe('counter');
    expect(byName.get('pairflow_epoch_solve_duration_seconds')?.type).toBe('histogram');
    const assignments = byName.get('pairflow_assignments')!.samples.find((s) => s.labels.market === 'north');
    expect(assignments).toMatchObject({ name: 'pairflow_assignments_total', value: 5 });
    const solveSum = byName.get('pairflow_epoch_solve_duration_seconds')!.samples.find((s) => s.name.endsWith('_sum'));
    expect(solveSum!.value).toBeCloseTo(0.2524, 12);
    const ours = py.filter((fam) => fam.name.startsWith('pairflow_'));
    expect(ours.length).toBe(Object.keys(FAMILIES).length);
  });
});

describe('rejectField()', () => {
  it('names the field of every validation failure of src/consume, and nothing unbounded', () => {
    // One bad event per field: the validator's own reason must map to that field.
    const good = { type: 'supply', id: 's1', market: 'm', t: 1000, lat: 1, lon: 1 };
    const bad: Record<string, [Record<string, unknown>, 'haversine' | 'euclidean']> = {
      type: [{ ...good, type: 'other' }, 'haversine'],
      id: [{ ...good, id: '' }, 'haversine'],
      market: [{ ...good, market: 7 }, 'haversine'],
      t: [{ ...good, t: 'yesterday' }, 'haversine'],
      lat: [{ ...good, lat: 95 }, 'haversine'],
      lon: [{ ...good, lon: 'east' }, 'haversine'],
      x: [{ ...good, x: 'a' }, 'euclidean'],
      y: [{ ...good, x: 1, y: null }, 'euclidean'],
      until: [{ ...good, until: 10 }, 'haversine'],
      has: [{ ...good, has: 'cold-bag' }, 'haversine'],
      needs: [{ ...good, type: 'demand', needs: [1] }, 'haversine'],
      side: [{ type: 'withdraw', id: 's1', market: 'm', t: 5, side: 'both' }, 'haversine'],
    };
    expect(Object.keys(bad).sort()).toEqual([...EVENT_FIELDS].sort());
    for (const [field, [event, metric]] of Object.entries(bad)) {
      const r = validateEvent(event, metric);
      expect(r.ok, field).toBe(false);
      expect(rejectField((r as { reason: string }).reason), field).toBe(field);
    }
    const notObject = validateEvent([1, 2], 'haversine') as { reason: string };
    expect(rejectField(notObject.reason)).toBe('object');
  });

  it('maps any other text to "other"', () => {
    for (const reason of ['not valid JSON: x', "field 'color': got 1", '']) expect(rejectField(reason)).toBe('other');
  });
});
