import { request } from 'node:http';
import { createServer, type AddressInfo } from 'node:net';
import { afterEach, describe, expect, it } from 'vitest';
import { createReadiness, startOpsServer, type OpsServer } from '../../../src/ops/http.js';
import { createMetrics } from '../../../src/ops/metrics.js';
import { parseExposition, sampleValue } from './exposition.js';

/** One real HTTP request to 127.0.0.1 (node:http, no client library in between). */
function get(url: string, method = 'GET'): Promise<{ status: number; type: string; body: string }> {
  return new Promise((resolve, reject) => {
    const req = request(url, { method, agent: false }, (res) => {
      let body = '';
      res.setEncoding('utf8');
      res.on('data', (c: string) => { body += c; });
      res.on('end', () => resolve({ status: res.statusCode ?? 0, type: String(res.headers['content-type']), body }));
    });
    req.on('error', reject);
    req.end();
  });
}

const servers: OpsServer[] = [];
afterEach(async () => {
  while (servers.length) await servers.pop()!.close();
});

async function start(readiness = createReadiness()) {
  const metrics = createMetrics({ version: '0.0.0-test' });
  const server = await startOpsServer({ port: 0, host: '127.0.0.1', registry: metrics.registry, readiness: readiness.check });
  servers.push(server);
  return { metrics, server, readiness };
}

describe('startOpsServer()', () => {
  it('serves /metrics in the Prometheus text format over real HTTP', async () => {
    const { metrics, server } = await start();
    metrics.assignment('north', 2);
    metrics.consumerLag(3, 41);
    const res = await get(`${server.url}/metrics`);
    expect(res.status).toBe(200);
    // The text format's content type, version 0.0.4 (prometheus.io exposition formats).
    expect(res.type).toMatch(/^text\/plain; version=0\.0\.4/);
    const families = parseExposition(res.body);
    expect(sampleValue(families, 'pairflow_assignments_total', { market: 'north' })).toBe(2);
    expect(sampleValue(families, 'pairflow_consumer_lag_records', { partition: '3' })).toBe(41);
    expect(families.get('process_resident_memory_bytes')?.type).toBe('GAUGE');
  });

  it('/healthz answers 200 while the process runs', async () => {
    const { server } = await start();
    const res = await get(`${server.url}/healthz`);
    expect(res.status).toBe(200);
    expect(JSON.parse(res.body)).toEqual({ alive: true });
  });

  it('/readyz follows the readiness callback: joined, restored and consuming, then stopping', async () => {
    const { server, readiness } = await start();
    const ready = async () => {
      const r = await get(`${server.url}/readyz`);
      return { status: r.status, body: JSON.parse(r.body) as { ready: boolean; reason?: string; partitions: Record<string, string> } };
    };
    expect((await ready()).status).toBe(503);
    readiness.joined();
    readiness.assigned([2, 0]);
    let r = await ready();
    expect(r.status).toBe(503);
    expect(r.body.partitions).toEqual({ 0: 'restoring', 2: 'restoring' });
    readiness.consuming(0);
    expect((await ready()).status).toBe(503);
    readiness.consuming(2);
    r = await ready();
    expect(r.status).toBe(200);
    expect(r.body).toEqual({ ready: true, partitions: { 0: 'consuming', 2: 'consuming' } });
    // A rebalance brings a new partition: not ready until it is restored too.
    readiness.assigned([5]);
    expect((await ready()).status).toBe(503);
    readiness.revoked([5]);
    expect((await ready()).status).toBe(200);
    readiness.stopping();
    r = await ready();
    expect(r.status).toBe(503);
    expect(r.body.ready).toBe(false);
  });

  it('assignment() replaces the whole assignment: kept partitions keep their state, new ones restore', () => {
    const t = createReadiness();
    t.assignment([0, 1]);
    t.consuming(0);
    t.consuming(1);
    expect(t.check().ready).toBe(true);
    t.assignment([1, 2]);
    expect(t.check()).toEqual({ ready: false, detail: { reason: '1 partition(s) restoring', partitions: { 1: 'consuming', 2: 'restoring' } } });
    t.consuming(2);
    expect(t.check().ready).toBe(true);
  });

  it('a member with no partitions is ready once it joined (it stands by)', () => {
    const t = createReadiness();
    expect(t.check().ready).toBe(false);
    t.joined();
    expect(t.check()).toEqual({ ready: true, detail: { partitions: {} } });
  });

  it('unknown paths get 404, other methods 405, HEAD no body', async () => {
    const { server } = await start();
    expect((await get(`${server.url}/nope`)).status).toBe(404);
    expect((await get(`${server.url}/metrics`, 'POST')).status).toBe(405);
    const head = await get(`${server.url}/metrics`, 'HEAD');
    expect(head.status).toBe(200);
    expect(head.body).toBe('');
  });

  it('a readiness callback that throws gives 500, and the server keeps serving', async () => {
    const metrics = createMetrics({ defaultMetrics: false });
    const server = await startOpsServer({
      port: 0, host: '127.0.0.1', registry: metrics.registry,
      readiness: () => { throw new Error('boom'); },
    });
    servers.push(server);
    expect((await get(`${server.url}/readyz`)).status).toBe(500);
    expect((await get(`${server.url}/healthz`)).status).toBe(200);
  });

  it('a port already taken is PAIRFLOW_ERR_METRICS_LISTEN, not a crash', async () => {
    const holder = createServer();
    await new Promise<void>((r) => holder.listen(0, '127.0.0.1', () => r()));
    const port = (holder.address() as AddressInfo).port;
    try {
      await expect(startOpsServer({ port, host: '127.0.0.1', registry: createMetrics({ defaultMetrics: false }).registry, readiness: () => ({ ready: true }) }))
        .rejects.toMatchObject({ code: 'PAIRFLOW_ERR_METRICS_LISTEN' });
    } finally {
      await new Promise((r) => holder.close(r));
    }
  });

  it('close() stops the server while a scraper holds a keep-alive connection', async () => {
    const { server } = await start();
    // A keep-alive agent holds its socket open after the response.
    const { Agent } = await import('node:http');
    const agent = new Agent({ keepAlive: true });
    await new Promise<void>((resolve, reject) => {
      request(`${server.url}/healthz`, { agent }, (res) => { res.resume(); res.on('end', resolve); }).on('error', reject).end();
    });
    await servers.pop()!.close();
    agent.destroy();
    await expect(get(`${server.url}/healthz`)).rejects.toMatchObject({ code: 'ECONNREFUSED' });
  });
});
