/**
 * The live processor's HTTP endpoints on `--metrics-port` (docs/operations.md):
 *
 * - `GET /metrics`: the Prometheus text exposition of the processor's registry;
 * - `GET /healthz`: 200 while the process runs (its event loop answers) — a liveness probe;
 * - `GET /readyz`: 200 when the readiness callback says ready (every assigned partition
 *   restored and consuming), 503 otherwise, with the reason as JSON — a readiness probe.
 *
 * Plain `node:http`: three fixed routes do not need a framework.
 */
import { createServer, type IncomingMessage, type Server, type ServerResponse } from 'node:http';
import type { AddressInfo } from 'node:net';
import type { Logger } from 'pino';
import type { Registry } from 'prom-client';
import { pairflowError } from '../errors.js';

/** What a readiness check answers; `detail` is shown as JSON on `/readyz`. */
export interface Readiness {
  readonly ready: boolean;
  readonly detail?: Readonly<Record<string, unknown>>;
}

/** Options of {@link startOpsServer}. */
export interface OpsServerOptions {
  /** TCP port; 0 picks a free one (tests). */
  readonly port: number;
  /** Address to listen on. @default '0.0.0.0' (Prometheus scrapes from another host) */
  readonly host?: string;
  /** The registry `/metrics` serves (`createMetrics().registry`). */
  readonly registry: Registry;
  /** Asked on every `/readyz`; the live processor supplies it (see {@link createReadiness}). */
  readonly readiness: () => Readiness | Promise<Readiness>;
  /** Where request failures are logged. @default none */
  readonly logger?: Logger;
}

/** A running ops server. */
export interface OpsServer {
  /** The address it listens on, e.g. `http://127.0.0.1:9464`. */
  readonly url: string;
  readonly port: number;
  /** Stops listening and closes open connections (keep-alive scrapers included). */
  close(): Promise<void>;
}

function send(res: ServerResponse, status: number, contentType: string, body: string, head: boolean): void {
  res.writeHead(status, { 'content-type': contentType, 'cache-control': 'no-store', 'content-length': Buffer.byteLength(body) });
  res.end(head ? undefined : body);
}

const JSON_TYPE = 'application/json; charset=utf-8';

/**
 * Starts the metrics and health server. Throws PAIRFLOW_ERR_METRICS_LISTEN when the
 * address cannot be bound (port taken, no permission).
 * @example
 * const server = await startOpsServer({ port: 9464, registry: metrics.registry, readiness: tracker.check });
 * // … on shutdown
 * await server.close();
 */
export async function startOpsServer(options: OpsServerOptions): Promise<OpsServer> {
  const host = options.host ?? '0.0.0.0';
  const handle = async (req: IncomingMessage, res: ServerResponse): Promise<void> => {
    const path = (req.url ?? '/').split('?')[0];
    const head = req.method === 'HEAD';
    if (req.method !== 'GET' && !head) {
      res.setHeader('allow', 'GET, HEAD');
      send(res, 405, JSON_TYPE, '{"error":"method not allowed"}\n', head);
      return;
    }
    switch (path) {
      case '/metrics':
        send(res, 200, options.registry.contentType, await options.registry.metrics(), head);
        return;
      case '/healthz':
        send(res, 200, JSON_TYPE, '{"alive":true}\n', head);
        return;
      case '/readyz': {
        const r = await options.readiness();
        send(res, r.ready ? 200 : 503, JSON_TYPE, `${JSON.stringify({ ready: r.ready, ...r.detail })}\n`, head);
        return;
      }
      default:
        send(res, 404, JSON_TYPE, `${JSON.stringify({ error: 'not found', paths: ['/metrics', '/healthz', '/readyz'] })}\n`, head);
    }
  };
  const server: Server = createServer((req, res) => {
    handle(req, res).catch((err: unknown) => {
      // A failing collector or readiness callback must not take the process down; the
      // probe sees a 500 and the log says why.
      options.logger?.error({ err, path: req.url }, 'ops endpoint failed');
      if (!res.headersSent) send(res, 500, JSON_TYPE, '{"error":"internal error"}\n', false);
      else res.destroy();
    });
  });
  await new Promise<void>((resolve, reject) => {
    server.once('error', (err: NodeJS.ErrnoException) => {
      const detail = err.code === 'EADDRINUSE' ? 'the port is already in use'
        : err.code === 'EACCES' ? 'permission denied (ports below 1024 need privileges)'
          : err.code === 'EADDRNOTAVAIL' ? 'no such local address' : `${err.code ?? ''} ${err.message}`.trim();
      reject(pairflowError('PAIRFLOW_ERR_METRICS_LISTEN', { host, port: options.port, detail }, err));
    });
    server.listen(options.port, host, () => resolve());
  });
  const port = (server.address() as AddressInfo).port;
  const urlHost = host.includes(':') ? `[${host}]` : host;
  return {
    url: `http://${urlHost}:${port}`,
    port,
    close: () => new Promise<void>((resolve) => {
      server.close(() => resolve());
      server.closeAllConnections();
    }),
  };
}

/** The state of one assigned partition, as `/readyz` shows it. */
export type PartitionState = 'restoring' | 'consuming';

/**
 * Readiness bookkeeping for the live processor: it reports group and partition events,
 * and hands {@link ReadinessTracker.check} to {@link startOpsServer}.
 */
export interface ReadinessTracker {
  /** The consumer joined its group (kafkajs `consumer.events.GROUP_JOIN`). */
  joined(): void;
  /** The group assigned these partitions; each starts in `restoring`. */
  assigned(partitions: readonly number[]): void;
  /** A partition's pool state is restored and its records are being consumed. */
  consuming(partition: number): void;
  /** The group took these partitions away. */
  revoked(partitions: readonly number[]): void;
  /**
   * The whole assignment after a rebalance (kafkajs' GROUP_JOIN gives it whole): kept
   * partitions keep their state, new ones start in `restoring`, the rest are dropped.
   * Also marks the group as joined.
   */
  assignment(partitions: readonly number[]): void;
  /** Shutdown began (or the consumer crashed): not ready from now on. */
  stopping(): void;
  /**
   * Ready iff the group was joined, shutdown has not begun, and every assigned partition
   * is consuming. A member with no partitions (more members than partitions) is ready:
   * it stands by as the group intends.
   */
  check(): Readiness;
}

/**
 * Builds a {@link ReadinessTracker}.
 * @example
 * const readiness = createReadiness();
 * consumer.on(consumer.events.GROUP_JOIN, () => readiness.joined());
 * await startOpsServer({ port, registry, readiness: readiness.check });
 */
export function createReadiness(): ReadinessTracker {
  const partitions = new Map<number, PartitionState>();
  let joined = false;
  let stopping = false;
  return {
    joined() {
      joined = true;
    },
    assigned(list) {
      for (const p of list) partitions.set(p, 'restoring');
    },
    consuming(partition) {
      partitions.set(partition, 'consuming');
    },
    revoked(list) {
      for (const p of list) partitions.delete(p);
    },
    assignment(list) {
      joined = true;
      const keep = new Set(list);
      for (const p of [...partitions.keys()]) if (!keep.has(p)) partitions.delete(p);
      for (const p of list) if (!partitions.has(p)) partitions.set(p, 'restoring');
    },
    stopping() {
      stopping = true;
    },
    check() {
      const states = Object.fromEntries([...partitions].sort((a, b) => a[0] - b[0]).map(([p, s]) => [String(p), s]));
      const restoring = [...partitions.values()].filter((s) => s === 'restoring').length;
      const ready = joined && !stopping && restoring === 0;
      const reason = stopping ? 'shutting down' : !joined ? 'not joined to the consumer group yet'
        : restoring > 0 ? `${restoring} partition(s) restoring` : undefined;
      return { ready, detail: { ...(reason ? { reason } : {}), partitions: states } };
    },
  };
}
