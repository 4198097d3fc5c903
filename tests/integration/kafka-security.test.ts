/**
 * TLS and SASL against a real broker: a private instance of scripts/kafka.mjs with a
 * SASL_SSL listener (PEM key and trust stores, client certificates required, PLAIN and
 * SCRAM users), TLS material generated here with openssl. Settings go through
 * src/ops/settings.ts as a user would give them; every log line, at debug level with
 * kafkajs' own lines, is searched for the known password.
 */
import { mkdtempSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { Writable } from 'node:stream';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { brokerSettings, javaMajor, startBroker, stopBroker } from '../../scripts/kafka.mjs';
import { generateTlsMaterial } from '../../scripts/kafka/tls.mjs';
import { readSettingsEnv } from '../../src/env.js';
import { createKafka, verifyConnection } from '../../src/kafka/client.js';
import { createLogger } from '../../src/ops/log.js';
import { kafkaOptions, resolveSettings, secretValues, type SettingsFlags } from '../../src/ops/settings.js';
import { FAST_CONSUMER, collect, uniqueName } from './helpers/kafka.js';

const isCi = process.env.CI === 'true' || process.env.CI === '1';
function javaRuns(): boolean {
  try {
    return javaMajor(brokerSettings().java) > 0;
  } catch {
    return false;
  }
}
const run = javaRuns() || isCi;

const USER = 'pairflow-it';
// Known, so every log line can be searched for it; random enough not to occur by chance.
const PASSWORD = `it-${Math.random().toString(36).slice(2)}-Secret`;
const instance = `vitest-security-${process.pid}`;
const scratch = mkdtempSync(join(tmpdir(), 'pairflow-security-'));
let saslSslBrokers = '';
let tls: ReturnType<typeof generateTlsMaterial>;
let otherCa: ReturnType<typeof generateTlsMaterial>;

/** Every log line any client of this file writes, for the secret search. */
const logLines: string[] = [];
const sink = new Writable({
  write(chunk: Buffer, _enc, done) {
    logLines.push(...chunk.toString('utf8').split('\n').filter(Boolean));
    done();
  },
});

beforeAll(async () => {
  if (!run) return;
  tls = generateTlsMaterial(join(scratch, 'tls'));
  // A second, unrelated CA: certificates the broker does not trust, a CA that did not sign the broker.
  otherCa = generateTlsMaterial(join(scratch, 'other'));
  const r = await startBroker({
    instance,
    ownerPid: process.pid,
    saslSsl: { keystoreFile: tls.serverKeystoreFile, truststoreFile: tls.caFile, users: [{ name: USER, password: PASSWORD }] },
  });
  saslSslBrokers = r.saslSslBrokers ?? '';
  writeFileSync(join(scratch, 'password'), `${PASSWORD}\n`);
}, 240_000);

afterAll(async () => {
  if (run) await stopBroker({ instance });
  rmSync(scratch, { recursive: true, force: true });
}, 60_000);

/** Resolves settings as `pairflow live` would, builds the client with a debug logger that knows the secrets, and checks the connection. */
async function connect(flags: SettingsFlags, env: Record<string, string> = {}) {
  const settings = await resolveSettings({ flags: { brokers: saslSslBrokers, ...flags }, env: readSettingsEnv(env) }, 'connection');
  const logger = createLogger({ level: 'debug', destination: sink, secrets: secretValues(settings) });
  logger.info({ settings }, 'connecting');
  const kafka = createKafka(kafkaOptions(settings, logger));
  try {
    return { kafka, settings, logger, brokers: await verifyConnection(kafka, { brokers: settings.brokers, security: settings.security }) };
  } catch (err) {
    logger.error({ err }, 'connection failed');
    throw err;
  }
}

const clientTls = (): SettingsFlags => ({ tlsCa: tls.caFile, tlsCert: tls.clientCertFile, tlsKey: tls.clientKeyFile });

describe.skipIf(!run)('SASL_SSL listener of the local broker', () => {
  it('the broker opened a SASL_SSL listener', () => {
    expect(saslSslBrokers).toMatch(/^127\.0\.0\.1:\d+$/);
  });

  it('SCRAM-SHA-512 with a client certificate: a transactional write and a read_committed read go through', async () => {
    const { kafka } = await connect({ ...clientTls(), saslMechanism: 'scram-sha-512', saslUsername: USER, saslPasswordFile: join(scratch, 'password') });
    const topic = uniqueName('secure');
    const admin = kafka.admin();
    await admin.connect();
    await admin.createTopics({ topics: [{ topic, numPartitions: 1 }], waitForLeaders: true });
    await admin.disconnect();
    const producer = kafka.producer({ transactionalId: uniqueName('tx'), idempotent: true, maxInFlightRequests: 1 });
    await producer.connect();
    const tx = await producer.transaction();
    await tx.send({ topic, messages: [{ key: 'north', value: 'over TLS and SCRAM' }] });
    await tx.commit();
    await producer.disconnect();
    const consumer = kafka.consumer({ groupId: uniqueName('g'), readUncommitted: false, ...FAST_CONSUMER });
    await consumer.connect();
    try {
      const seen = await collect(consumer, topic, (s) => s.length >= 1);
      expect(seen.map((p) => p.message.value?.toString())).toEqual(['over TLS and SCRAM']);
    } finally {
      await consumer.disconnect();
    }
  });

  it.each(['scram-sha-256', 'plain'])('%s logs in with the password from the environment', async (mechanism) => {
    const r = await connect({ ...clientTls(), saslMechanism: mechanism, saslUsername: USER }, { PAIRFLOW_SASL_PASSWORD: PASSWORD });
    expect(r.brokers).toBe(1);
  });

  it.each(['scram-sha-512', 'plain'])('a wrong %s password is PAIRFLOW_ERR_KAFKA_AUTH, at once and without retries', async (mechanism) => {
    await expect(connect({ ...clientTls(), saslMechanism: mechanism, saslUsername: USER }, { PAIRFLOW_SASL_PASSWORD: `${PASSWORD}-wrong` }))
      .rejects.toMatchObject({ code: 'PAIRFLOW_ERR_KAFKA_AUTH', retriable: false });
  });

  it('an unknown SCRAM user is PAIRFLOW_ERR_KAFKA_AUTH', async () => {
    await expect(connect({ ...clientTls(), saslMechanism: 'scram-sha-256', saslUsername: 'nobody' }, { PAIRFLOW_SASL_PASSWORD: PASSWORD }))
      .rejects.toMatchObject({ code: 'PAIRFLOW_ERR_KAFKA_AUTH' });
  });

  it('a broker certificate from a CA the client does not trust is PAIRFLOW_ERR_KAFKA_TLS', async () => {
    await expect(connect({ tlsCa: otherCa.caFile, tlsCert: tls.clientCertFile, tlsKey: tls.clientKeyFile, saslMechanism: 'plain', saslUsername: USER }, { PAIRFLOW_SASL_PASSWORD: PASSWORD }))
      .rejects.toMatchObject({ code: 'PAIRFLOW_ERR_KAFKA_TLS' });
  });

  it('no client certificate, or one the broker does not trust, is PAIRFLOW_ERR_KAFKA_TLS', async () => {
    await expect(connect({ tlsCa: tls.caFile, saslMechanism: 'plain', saslUsername: USER }, { PAIRFLOW_SASL_PASSWORD: PASSWORD }))
      .rejects.toMatchObject({ code: 'PAIRFLOW_ERR_KAFKA_TLS' });
    await expect(connect({ tlsCa: tls.caFile, tlsCert: otherCa.clientCertFile, tlsKey: otherCa.clientKeyFile, saslMechanism: 'plain', saslUsername: USER }, { PAIRFLOW_SASL_PASSWORD: PASSWORD }))
      .rejects.toMatchObject({ code: 'PAIRFLOW_ERR_KAFKA_TLS' });
  });

  it('no log line of any of these clients contains the password', () => {
    // Debug level: kafkajs' own connection and SASL lines are in here too.
    expect(logLines.length).toBeGreaterThan(20);
    expect(logLines.some((l) => l.includes('"kafka":"'))).toBe(true);
    // Also as bytes: a Buffer logged as JSON ({"type":"Buffer","data":[…]}) or in base64.
    const asBytes = Buffer.from(PASSWORD).toJSON().data.join(',');
    const asBase64 = Buffer.from(PASSWORD).toString('base64').slice(0, -2);
    for (const line of logLines) {
      expect(line.includes(PASSWORD), line).toBe(false);
      expect(line.includes(asBytes), line).toBe(false);
      expect(line.includes(asBase64), line).toBe(false);
    }
  });
});
