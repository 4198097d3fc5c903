/**
 * Parsing the Prometheus text exposition in tests with parsers from the registries, never
 * a regular expression: `parse-prometheus-text-format` (npm 1.1.1, a port of the Python
 * client's sample parser) in every test, and the official Python client
 * (`prometheus_client` 0.26.0 from PyPI, `text_string_to_metric_families`) as the
 * outside check. Without the Python package the check skips locally and fails with CI=true.
 */
import { spawnSync } from 'node:child_process';
import parsePrometheusTextFormat from 'parse-prometheus-text-format';
import { PYTHON } from '../../helpers/python.js';

/** One metric family as parse-prometheus-text-format returns it (prom2json's shape). */
export interface Family {
  name: string;
  help: string;
  type: 'COUNTER' | 'GAUGE' | 'HISTOGRAM' | 'SUMMARY' | 'UNTYPED';
  metrics: { labels?: Record<string, string>; value?: string; buckets?: Record<string, string>; count?: string; sum?: string }[];
}

/** Parses an exposition into families keyed by name. */
export function parseExposition(text: string): Map<string, Family> {
  const families = (parsePrometheusTextFormat as (t: string) => Family[])(text);
  return new Map(families.map((f) => [f.name, f]));
}

/** The value of a counter or gauge sample with exactly these labels, or undefined. */
export function sampleValue(families: Map<string, Family>, name: string, labels: Record<string, string> = {}): number | undefined {
  const family = families.get(name);
  const keys = Object.keys(labels);
  const m = family?.metrics.find((s) => {
    const have = s.labels ?? {};
    return Object.keys(have).length === keys.length && keys.every((k) => have[k] === labels[k]);
  });
  return m?.value === undefined ? undefined : Number(m.value);
}

let pythonClient: string | null | undefined;

/** prometheus_client's version, or null when it cannot be imported (a failure with CI=true). */
export function pythonPrometheusClient(): string | null {
  if (pythonClient !== undefined) return pythonClient;
  const r = spawnSync(PYTHON, ['-c', 'from importlib.metadata import version; import prometheus_client.parser; print(version("prometheus_client"))'], { encoding: 'utf8' });
  pythonClient = r.status === 0 ? r.stdout.trim() : null;
  if (pythonClient === null && (process.env.CI === 'true' || process.env.CI === '1')) {
    throw new Error(`CI=true but prometheus_client is not importable by ${PYTHON} (requirements-dev.txt): ${r.stderr || r.error}`);
  }
  return pythonClient;
}

const PY_PARSE = `
import json, math, sys
from prometheus_client.parser import text_string_to_metric_families
out = []
for fam in text_string_to_metric_families(sys.stdin.read()):
    out.append({"name": fam.name, "type": fam.type, "documentation": fam.documentation,
                "samples": [{"name": s.name, "labels": s.labels, "value": s.value if math.isfinite(s.value) else str(s.value)} for s in fam.samples]})
print(json.dumps(out))
`;

/**
 * The exposition as the official Python client parses it (it raises on malformed text).
 * Non-finite values (NaN, ±Inf: prom-client's event-loop gauges before their first
 * sample) come back as strings, since JSON has no such numbers.
 */
export function parseWithPythonClient(text: string): { name: string; type: string; documentation: string; samples: { name: string; labels: Record<string, string>; value: number | string }[] }[] {
  const r = spawnSync(PYTHON, ['-c', PY_PARSE], { input: text, encoding: 'utf8', maxBuffer: 1 << 26 });
  if (r.status !== 0) throw new Error(`prometheus_client could not parse the exposition: ${r.stderr}`);
  return JSON.parse(r.stdout) as ReturnType<typeof parseWithPythonClient>;
}
