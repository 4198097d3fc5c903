/**
 * deploy/prometheus/pairflow-alerts.yml: a valid rules file whose expressions parse with
 * the Prometheus project's PromQL grammar (npm @prometheus-io/lezer-promql 0.315.0) and
 * name only metrics pairflow exports.
 */
import { readFileSync } from 'node:fs';
import { parser } from '@prometheus-io/lezer-promql';
import { describe, expect, it } from 'vitest';
import { parse } from 'yaml';
import { createMetrics } from '../../../src/ops/metrics.js';
import { parseExposition } from './exposition.js';

interface Rule { alert: string; expr: string; for?: string; labels: { severity: string }; annotations: { summary: string; description: string } }
const file = readFileSync(new URL('../../../deploy/prometheus/pairflow-alerts.yml', import.meta.url), 'utf8');
const rules = (parse(file) as { groups: { name: string; rules: Rule[] }[] }).groups.flatMap((g) => g.rules);

/** PromQL syntax errors and the metric names an expression selects. */
function analyse(expr: string): { errors: number; metrics: string[] } {
  let errors = 0;
  const metrics: string[] = [];
  parser.parse(expr).iterate({
    enter: (n) => {
      if (n.type.isError) errors += 1;
      if (n.name === 'Identifier' && n.node.parent?.name === 'VectorSelector') metrics.push(expr.slice(n.from, n.to));
    },
  });
  return { errors, metrics };
}

describe('pairflow alert rules', () => {
  it('cover lag, aborted transactions, restore time and the rejects rate (the issue\'s list), each documented', () => {
    const names = rules.map((r) => r.alert);
    for (const a of ['PairflowConsumerLagHigh', 'PairflowTransactionsAborted', 'PairflowRestoreSlow', 'PairflowRejectRateHigh']) expect(names).toContain(a);
    const doc = readFileSync(new URL('../../../docs/operations.md', import.meta.url), 'utf8');
    for (const r of rules) {
      expect(['warning', 'critical'], r.alert).toContain(r.labels.severity);
      expect(r.annotations.summary.length, r.alert).toBeGreaterThan(10);
      expect(doc, `${r.alert} in docs/operations.md`).toContain(r.alert);
      if (r.for !== undefined) expect(r.for, r.alert).toMatch(/^\d+[smh]$/);
    }
  });

  it('every expression is valid PromQL and names only metrics pairflow exports', async () => {
    const exported = new Set(parseExposition(await createMetrics({ version: 'test' }).registry.metrics()).keys());
    // The grammar itself must reject a broken expression, or this check proves nothing.
    expect(analyse('sum(rate(pairflow_events_total[5m])) >').errors).toBeGreaterThan(0);
    for (const r of rules) {
      const { errors, metrics } = analyse(r.expr);
      expect(errors, `${r.alert}: ${r.expr}`).toBe(0);
      expect(metrics.length, r.alert).toBeGreaterThan(0);
      for (const m of metrics) {
        if (m === 'up') continue; // Prometheus' own per-target series
        expect(exported.has(m.replace(/_(bucket|sum|count)$/, '')), `${r.alert}: ${m}`).toBe(true);
      }
    }
  });
});
