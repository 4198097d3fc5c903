/**
 * Vitest global setup of the `integration` project: finds a Kafka broker for the tests.
 *
 * Sources, first that works wins (docs/kafka.md):
 *  1. env `KAFKA_BROKERS` (a broker someone already runs);
 *  2. testcontainers' Kafka module, when a Docker engine answers a ping within a second;
 *  3. the local broker of scripts/kafka.mjs: a running `npm run kafka:up` instance is
 *     reused as is, otherwise a private instance is started and stopped at teardown.
 *
 * Tests read the list with `inject('kafkaBrokers')` (also in `process.env.KAFKA_BROKERS`).
 * An empty string means no broker: the tests skip loudly, except with CI=true, where the
 * run fails with the reason.
 */
import { request } from 'node:http';
import { existsSync } from 'node:fs';
import type { TestProject } from 'vitest/node';
import {
  DEFAULT_INSTANCE,
  brokerAnswers,
  brokerStatus,
  startBroker,
  stopBroker,
} from '../../scripts/kafka.mjs';

declare module 'vitest' {
  export interface ProvidedContext {
    /** Comma-separated `host:port` list, or '' when no broker could be had outside CI. */
    kafkaBrokers: string;
    /** Which source gave the broker: 'env', 'testcontainers', 'local' or 'none'. */
    kafkaSource: string;
  }
}

/** The image testcontainers' Kafka module drives (Confluent Platform 7.9 carries Apache Kafka 3.9). */
const CONTAINER_IMAGE = 'confluentinc/cp-kafka:7.9.0';

const log = (msg: string): void => {
  process.stderr.write(`[kafka-global] ${msg}\n`);
};

function isCi(): boolean {
  return process.env.CI === 'true' || process.env.CI === '1';
}

/** Pings the Docker engine's `/_ping` over its unix socket; false within ~1 s if none. */
function dockerAnswers(timeoutMs = 1000): Promise<boolean> {
  const host = process.env.DOCKER_HOST ?? '';
  const socketPath = host.startsWith('unix://') ? host.slice('unix://'.length) : host === '' ? '/var/run/docker.sock' : '';
  // Only a local socket is probed: a tcp:// engine is left to testcontainers' own discovery
  // when the user asks for it explicitly with PAIRFLOW_TEST_DOCKER=1.
  if (socketPath === '') return Promise.resolve(process.env.PAIRFLOW_TEST_DOCKER === '1');
  if (!existsSync(socketPath)) return Promise.resolve(false);
  return new Promise((resolve) => {
    const req = request({ socketPath, path: '/_ping', method: 'GET', timeout: timeoutMs }, (res) => {
      res.resume();
      resolve(res.statusCode === 200);
    });
    req.on('timeout', () => { req.destroy(); resolve(false); });
    req.on('error', () => resolve(false));
    req.end();
  });
}

type Teardown = () => Promise<void>;

async function fromTestcontainers(): Promise<{ brokers: string; teardown: Teardown }> {
  const { KafkaContainer } = await import('@testcontainers/kafka');
  const container = await new KafkaContainer(CONTAINER_IMAGE)
    .withKraft()
    .withEnvironment({
      KAFKA_TRANSACTION_STATE_LOG_REPLICATION_FACTOR: '1',
      KAFKA_TRANSACTION_STATE_LOG_NUM_PARTITIONS: '1',
    })
    .start();
  const brokers = `${container.getHost()}:${container.getMappedPort(9093)}`;
  return { brokers, teardown: async () => { await container.stop(); } };
}

async function fromLocalBroker(): Promise<{ brokers: string; teardown: Teardown; detail: string }> {
  // A broker the developer started with `npm run kafka:up` is shared, never stopped here.
  const running = brokerStatus().find((s) => s.instance === DEFAULT_INSTANCE && s.alive);
  if (running) {
    const brokers = `127.0.0.1:${running.brokerPort}`;
    if (await brokerAnswers([brokers])) {
      return { brokers, teardown: async () => {}, detail: `reused instance '${DEFAULT_INSTANCE}' (Kafka ${running.version})` };
    }
  }
  // A private instance per run, so parallel runs never stop each other's broker.
  const instance = `vitest-${process.pid}`;
  const r = await startBroker({ instance, ownerPid: process.pid });
  return {
    brokers: r.brokers,
    teardown: async () => { await stopBroker({ instance }); },
    detail: `started instance '${instance}' (Kafka ${r.version}, pid ${r.pid}) in ${(r.startMs / 1000).toFixed(1)} s` +
      (r.fetchMs > 1000 ? ` after resolving artifacts in ${(r.fetchMs / 1000).toFixed(1)} s` : ''),
  };
}

export default async function setup(project: TestProject): Promise<Teardown> {
  const reasons: string[] = [];
  let brokers = '';
  let source = 'none';
  let teardown: Teardown = async () => {};

  const fromEnv = process.env.KAFKA_BROKERS?.trim();
  if (fromEnv) {
    brokers = fromEnv;
    source = 'env';
    // Used as given either way; the warning saves a hunt through connection errors.
    const answers = await brokerAnswers(brokers.split(',').map((b) => b.trim()).filter(Boolean));
    log(`using KAFKA_BROKERS=${brokers}${answers ? '' : ' (WARNING: it does not answer a metadata request)'}`);
  }
  if (!brokers) {
    if (await dockerAnswers()) {
      try {
        const r = await fromTestcontainers();
        ({ brokers, teardown } = r);
        source = 'testcontainers';
        log(`using testcontainers (${CONTAINER_IMAGE}) at ${brokers}`);
      } catch (err) {
        reasons.push(`testcontainers: ${(err as Error).message}`);
      }
    } else {
      reasons.push('testcontainers: no Docker engine answers');
    }
  }
  if (!brokers) {
    try {
      const r = await fromLocalBroker();
      ({ brokers, teardown } = r);
      source = 'local';
      log(`using the local broker at ${brokers}: ${r.detail}`);
    } catch (err) {
      const e = err as Error & { code?: string };
      reasons.push(`local broker: ${e.message}${e.code ? ` [${e.code}]` : ''}`);
    }
  }
  if (!brokers) {
    const why = `no Kafka broker for the integration tests:\n  ${reasons.join('\n  ')}`;
    if (isCi()) throw new Error(`CI=true: ${why}`);
    log(`${why}\n  the Kafka tests are SKIPPED (set KAFKA_BROKERS or fix the local broker; see docs/kafka.md)`);
  }

  process.env.KAFKA_BROKERS = brokers;
  project.provide('kafkaBrokers', brokers);
  project.provide('kafkaSource', source);
  return teardown;
}
