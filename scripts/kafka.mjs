#!/usr/bin/env node
/**
 * A local single-node Apache Kafka broker (KRaft) for development and tests, built from
 * the `org.apache.kafka:kafka_2.13` artifacts that Maven resolves into a cache outside
 * the repository. Plain JavaScript so it runs before (and without) a build.
 *
 *   node scripts/kafka.mjs fetch            resolve the artifacts only (CI warms the cache)
 *   node scripts/kafka.mjs up [--instance NAME] [--sasl-ssl]   start (or reuse) the broker, print KAFKA_BROKERS=…
 *                                           (--sasl-ssl: also a SASL_SSL listener with throw-away TLS material)
 *   node scripts/kafka.mjs down [--instance NAME | --all]   stop it and delete its data
 *   node scripts/kafka.mjs status           print the running instances as JSON
 *
 * Environment: PAIRFLOW_KAFKA_VERSION (default {@link DEFAULT_KAFKA_VERSION}),
 * PAIRFLOW_CACHE_DIR (default ~/.cache/pairflow), PAIRFLOW_JAVA_HOME or JAVA_HOME (else
 * `java` on PATH), PAIRFLOW_MVN (else `mvn` on PATH), PAIRFLOW_KAFKA_HEAP (default 512m),
 * PAIRFLOW_KAFKA_START_TIMEOUT_MS (default 120000), PAIRFLOW_KAFKA_JVM_OPTS (extra JVM
 * flags, split on spaces), PAIRFLOW_KAFKA_PORT (fixed broker port; default a free one).
 * See docs/kafka.md.
 */
import { spawn, spawnSync } from 'node:child_process';
import { randomBytes } from 'node:crypto';
import {
  closeSync, existsSync, mkdirSync, openSync, readdirSync, readFileSync, renameSync, rmSync,
  statSync, writeFileSync,
} from 'node:fs';
import { createServer } from 'node:net';
import { homedir } from 'node:os';
import { join, resolve } from 'node:path';
import { fileURLToPath } from 'node:url';

/** The broker version used when PAIRFLOW_KAFKA_VERSION is unset (docs/kafka.md says why). */
export const DEFAULT_KAFKA_VERSION = '3.9.2';

/** The instance name `up`/`down` use; test setups use their own names. */
export const DEFAULT_INSTANCE = 'default';

/** Same code as PAIRFLOW_ERR_KAFKA_BROKER_SETUP in src/errors.ts (this file runs unbuilt). */
export const BROKER_SETUP_CODE = 'PAIRFLOW_ERR_KAFKA_BROKER_SETUP';

/** An error of the local broker tooling; `code` matches the registry in src/errors.ts. */
export class BrokerSetupError extends Error {
  constructor(message, cause) {
    super(message, cause === undefined ? undefined : { cause });
    this.name = 'BrokerSetupError';
    this.code = BROKER_SETUP_CODE;
    this.retriable = true;
  }
}

const progress = (msg) => process.stderr.write(`kafka: ${msg}\n`);
const sleep = (ms) => new Promise((r) => setTimeout(r, ms));

/**
 * Every setting of the local broker, read from the environment in this one place.
 * @param {NodeJS.ProcessEnv} [env]
 */
export function brokerSettings(env = process.env) {
  const version = env.PAIRFLOW_KAFKA_VERSION || DEFAULT_KAFKA_VERSION;
  if (!/^\d+\.\d+\.\d+$/.test(version)) {
    throw new BrokerSetupError(`PAIRFLOW_KAFKA_VERSION=${version}: expected a release like ${DEFAULT_KAFKA_VERSION}`);
  }
  const cacheRoot = resolve(env.PAIRFLOW_CACHE_DIR || join(homedir(), '.cache', 'pairflow'));
  const javaHome = env.PAIRFLOW_JAVA_HOME || env.JAVA_HOME || '';
  const timeout = Number(env.PAIRFLOW_KAFKA_START_TIMEOUT_MS || 120_000);
  const port = env.PAIRFLOW_KAFKA_PORT ? Number(env.PAIRFLOW_KAFKA_PORT) : 0;
  if (!Number.isInteger(port) || port < 0 || port > 65535) {
    throw new BrokerSetupError(`PAIRFLOW_KAFKA_PORT=${env.PAIRFLOW_KAFKA_PORT}: expected a port number in 1..65535`);
  }
  return {
    version,
    cacheRoot,
    kafkaDir: join(cacheRoot, 'kafka'),
    versionDir: join(cacheRoot, 'kafka', version),
    instancesDir: join(cacheRoot, 'kafka', 'instances'),
    java: javaHome ? join(javaHome, 'bin', 'java') : 'java',
    mvn: env.PAIRFLOW_MVN || 'mvn',
    heap: env.PAIRFLOW_KAFKA_HEAP || '512m',
    jvmOpts: (env.PAIRFLOW_KAFKA_JVM_OPTS || '').split(/\s+/).filter(Boolean),
    startTimeoutMs: Number.isFinite(timeout) && timeout > 0 ? timeout : 120_000,
    brokerPort: port,
  };
}

function majorOf(version) {
  return Number(version.split('.')[0]);
}

/** Java feature release on the given command, e.g. 17; throws when Java is missing. */
export function javaMajor(java) {
  const r = spawnSync(java, ['-version'], { encoding: 'utf8' });
  if (r.error) {
    throw new BrokerSetupError(
      `Java not found (${java}: ${r.error.code ?? r.error.message}); install a JDK 17+ or set JAVA_HOME / PAIRFLOW_JAVA_HOME`,
      r.error,
    );
  }
  const m = /version "(\d+)(?:\.(\d+))?/.exec(`${r.stderr}${r.stdout}`);
  if (!m) throw new BrokerSetupError(`cannot read the Java version from "${java} -version": ${r.stderr.trim()}`);
  // Java 8 reports itself as "1.8".
  return m[1] === '1' ? Number(m[2]) : Number(m[1]);
}

function requireJava(settings) {
  const have = javaMajor(settings.java);
  // Kafka 4 brokers need Java 17 (KIP-750/1013); 3.x brokers run on 11+ (8 is deprecated).
  const need = majorOf(settings.version) >= 4 ? 17 : 11;
  if (have < need) {
    throw new BrokerSetupError(
      `Kafka ${settings.version} needs Java ${need}+, but ${settings.java} is Java ${have}; set PAIRFLOW_JAVA_HOME to a newer JDK`,
    );
  }
  return have;
}

/**
 * The pom that makes Maven copy the broker's runtime class path. The logging binding
 * matches the slf4j generation each Kafka line was built against.
 */
function pomFor(version) {
  // Kafka 4 declares slf4j-api 1.7 but ships no binding; slf4j 2 (declared first, so it
  // wins Maven's nearest-first choice) reads 1.7 callers and finds slf4j-simple.
  const logging = majorOf(version) >= 4
    ? `<dependency><groupId>org.slf4j</groupId><artifactId>slf4j-api</artifactId><version>2.0.17</version></dependency>
    <dependency><groupId>org.slf4j</groupId><artifactId>slf4j-simple</artifactId><version>2.0.17</version></dependency>`
    : `<dependency><groupId>org.slf4j</groupId><artifactId>slf4j-reload4j</artifactId><version>1.7.36</version></dependency>`;
  return `<?xml version="1.0" encoding="UTF-8"?>
<!-- Generated by pairflow scripts/kafka.mjs: the class path of a local Kafka ${version} broker. -->
<project xmlns="http://maven.apache.org/POM/4.0.0">
  <modelVersion>4.0.0</modelVersion>
  <groupId>local.pairflow</groupId>
  <artifactId>kafka-broker-classpath</artifactId>
  <version>${version}</version>
  <packaging>pom</packaging>
  <dependencies>
    <dependency><groupId>org.apache.kafka</groupId><artifactId>kafka_2.13</artifactId><version>${version}</version></dependency>
    ${logging}
  </dependencies>
</project>
`;
}

function tail(text, lines = 40) {
  return text.split('\n').slice(-lines).join('\n');
}

/**
 * Resolves the broker's jars with Maven into `<cache>/kafka/<version>/libs` (once; later
 * calls reuse them). @returns {{ version: string, libDir: string, downloaded: boolean, ms: number }}
 */
export function fetchArtifacts(settings = brokerSettings()) {
  const t0 = Date.now();
  const libDir = join(settings.versionDir, 'libs');
  const marker = join(settings.versionDir, 'resolved.json');
  if (existsSync(marker) && existsSync(libDir)) {
    return { version: settings.version, libDir, downloaded: false, ms: Date.now() - t0 };
  }
  const mv = spawnSync(settings.mvn, ['-v'], { encoding: 'utf8' });
  if (mv.error) {
    throw new BrokerSetupError(
      `Maven not found (${settings.mvn}: ${mv.error.code ?? mv.error.message}); install Maven 3 or set PAIRFLOW_MVN`,
      mv.error,
    );
  }
  mkdirSync(settings.versionDir, { recursive: true });
  const pom = join(settings.versionDir, 'pom.xml');
  writeFileSync(pom, pomFor(settings.version));
  // A private output dir renamed at the end, so two concurrent fetches cannot mix files.
  const tmp = `${libDir}.tmp-${process.pid}`;
  rmSync(tmp, { recursive: true, force: true });
  progress(`resolving org.apache.kafka:kafka_2.13:${settings.version} with Maven (first run downloads ~50 MB)…`);
  const r = spawnSync(
    settings.mvn,
    ['-B', '-q', '-Dstyle.color=never', '-f', pom, 'dependency:copy-dependencies', `-DoutputDirectory=${tmp}`, '-DincludeScope=runtime'],
    { encoding: 'utf8', maxBuffer: 64 * 1024 * 1024 },
  );
  if (r.status !== 0 || !existsSync(join(tmp, `kafka_2.13-${settings.version}.jar`))) {
    rmSync(tmp, { recursive: true, force: true });
    throw new BrokerSetupError(
      `Maven could not resolve org.apache.kafka:kafka_2.13:${settings.version} (exit ${r.status}):\n${tail(mavenProblems(`${r.stdout}\n${r.stderr}`))}`,
    );
  }
  if (existsSync(libDir)) rmSync(tmp, { recursive: true, force: true });
  else renameSync(tmp, libDir);
  const jars = readdirSync(libDir).filter((f) => f.endsWith('.jar')).sort();
  writeFileSync(marker, JSON.stringify({ version: settings.version, jars, resolvedAt: new Date().toISOString() }, null, 2));
  const ms = Date.now() - t0;
  progress(`resolved ${jars.length} jars into ${libDir} in ${(ms / 1000).toFixed(1)} s`);
  return { version: settings.version, libDir, downloaded: true, ms };
}

/** Maven's output without colour codes and its generic "re-run with -e" advice. */
function mavenProblems(text) {
  return text
    .replace(new RegExp(`${String.fromCharCode(27)}\\[[0-9;]*m`, 'g'), '')
    .split('\n')
    .filter((l) => l.trim() !== '' && !/^\[ERROR\]\s*$|re-run Maven|For more information about the errors|^\[ERROR\] \[Help \d+\]/i.test(l))
    .join('\n');
}

function freePorts(n) {
  // Hold every listener open until all are bound, so the ports are distinct.
  return new Promise((resolvePorts, reject) => {
    const servers = [];
    const ports = [];
    const next = () => {
      if (ports.length === n) {
        let open = servers.length;
        for (const s of servers) s.close(() => { if (--open === 0) resolvePorts(ports); });
        return;
      }
      const s = createServer();
      s.once('error', reject);
      s.listen(0, '127.0.0.1', () => {
        servers.push(s);
        ports.push(s.address().port);
        next();
      });
    };
    next();
  });
}

/** A KRaft cluster id: 16 random bytes in URL-safe base64 without padding, like Kafka's Uuid. */
function clusterId() {
  for (;;) {
    const id = randomBytes(16).toString('base64url');
    // Kafka avoids ids starting with '-' because command lines read them as options.
    if (!id.startsWith('-')) return id;
  }
}

/** The SASL mechanisms the SASL_SSL listener enables, for every user it is given. */
export const SASL_SSL_MECHANISMS = ['PLAIN', 'SCRAM-SHA-256', 'SCRAM-SHA-512'];

// User names and passwords go into a JAAS line inside a .properties file and into
// StorageTool's --add-scram argument; this character set needs no escaping in any of them.
const SAFE_CREDENTIAL = /^[A-Za-z0-9_.@%+:-]+$/;

/**
 * Checks the `saslSsl` option of {@link startBroker}.
 * @param {{ keystoreFile: string, keyPassword?: string, truststoreFile?: string,
 *   clientAuth?: 'required' | 'requested' | 'none', users: { name: string, password: string }[] }} o
 */
function checkSaslSsl(o) {
  if (!o.keystoreFile || !existsSync(o.keystoreFile)) throw new BrokerSetupError(`saslSsl.keystoreFile: no such file ${o.keystoreFile}`);
  if (o.truststoreFile && !existsSync(o.truststoreFile)) throw new BrokerSetupError(`saslSsl.truststoreFile: no such file ${o.truststoreFile}`);
  if (!Array.isArray(o.users) || o.users.length === 0) throw new BrokerSetupError('saslSsl.users: give at least one { name, password }');
  for (const u of o.users) {
    if (!SAFE_CREDENTIAL.test(u.name ?? '') || !SAFE_CREDENTIAL.test(u.password ?? '')) {
      throw new BrokerSetupError(`saslSsl.users: user "${u.name}": names and passwords of the local broker use letters, digits and _.@%+:- only`);
    }
  }
  if (o.clientAuth && !['required', 'requested', 'none'].includes(o.clientAuth)) {
    throw new BrokerSetupError(`saslSsl.clientAuth: "${o.clientAuth}", expected required, requested or none`);
  }
}

/** The SASL_SSL listener's lines: PEM key store, PEM trust store, PLAIN and SCRAM logins. */
function saslSslProperties(o) {
  const l = 'listener.name.sasl_ssl';
  const plainUsers = o.users.map((u) => `user_${u.name}="${u.password}"`).join(' ');
  const clientAuth = o.clientAuth ?? (o.truststoreFile ? 'required' : 'none');
  return [
    `sasl.enabled.mechanisms=${SASL_SSL_MECHANISMS.join(',')}`,
    `${l}.sasl.enabled.mechanisms=${SASL_SSL_MECHANISMS.join(',')}`,
    `${l}.plain.sasl.jaas.config=org.apache.kafka.common.security.plain.PlainLoginModule required ${plainUsers};`,
    `${l}.scram-sha-256.sasl.jaas.config=org.apache.kafka.common.security.scram.ScramLoginModule required;`,
    `${l}.scram-sha-512.sasl.jaas.config=org.apache.kafka.common.security.scram.ScramLoginModule required;`,
    // KIP-651: PEM key and trust stores, no JKS/PKCS12 conversion needed.
    `${l}.ssl.keystore.type=PEM`,
    `${l}.ssl.keystore.location=${o.keystoreFile}`,
    ...(o.keyPassword ? [`${l}.ssl.key.password=${o.keyPassword}`] : []),
    ...(o.truststoreFile ? [`${l}.ssl.truststore.type=PEM`, `${l}.ssl.truststore.location=${o.truststoreFile}`] : []),
    `${l}.ssl.client.auth=${clientAuth}`,
  ];
}

/** StorageTool arguments that create every user's SCRAM credentials in the new cluster's metadata (KIP-900). */
function scramFormatArgs(o) {
  if (!o) return [];
  return o.users.flatMap((u) => ['SCRAM-SHA-256', 'SCRAM-SHA-512'].flatMap((m) => ['--add-scram', `${m}=[name=${u.name},password=${u.password}]`]));
}

function serverProperties({ brokerPort, controllerPort, saslSslPort, saslSsl, dataDir }) {
  const sasl = saslSsl && saslSslPort;
  return [
    '# Generated by pairflow scripts/kafka.mjs: a single-node KRaft broker on 127.0.0.1.',
    'process.roles=broker,controller',
    'node.id=1',
    `controller.quorum.voters=1@127.0.0.1:${controllerPort}`,
    `listeners=PLAINTEXT://127.0.0.1:${brokerPort},CONTROLLER://127.0.0.1:${controllerPort}${sasl ? `,SASL_SSL://127.0.0.1:${saslSslPort}` : ''}`,
    `advertised.listeners=PLAINTEXT://127.0.0.1:${brokerPort}${sasl ? `,SASL_SSL://127.0.0.1:${saslSslPort}` : ''}`,
    'controller.listener.names=CONTROLLER',
    'inter.broker.listener.name=PLAINTEXT',
    `listener.security.protocol.map=CONTROLLER:PLAINTEXT,PLAINTEXT:PLAINTEXT${sasl ? ',SASL_SSL:SASL_SSL' : ''}`,
    ...(sasl ? saslSslProperties(saslSsl) : []),
    `log.dirs=${dataDir}`,
    'num.partitions=1',
    // One node: every internal topic has one replica, and one partition so it starts fast.
    'offsets.topic.replication.factor=1',
    'offsets.topic.num.partitions=1',
    'transaction.state.log.replication.factor=1',
    'transaction.state.log.min.isr=1',
    'transaction.state.log.num.partitions=1',
    'share.coordinator.state.topic.replication.factor=1',
    'share.coordinator.state.topic.min.isr=1',
    'default.replication.factor=1',
    'min.insync.replicas=1',
    'group.initial.rebalance.delay.ms=0',
    'auto.create.topics.enable=true',
    // Replayed and generated logs carry event times far from now. Kafka 4 rejects record
    // timestamps over 1 h ahead by default (3.x accepts any); keep 3.x behaviour on both.
    'log.message.timestamp.after.max.ms=9223372036854775807',
    // Short-lived test data: small segments, no long flush or retention bookkeeping.
    'log.segment.bytes=16777216',
    'log.retention.check.interval.ms=60000',
    '',
  ].join('\n');
}

function log4jProperties(logFile) {
  return [
    'log4j.rootLogger=INFO, file',
    'log4j.appender.file=org.apache.log4j.FileAppender',
    `log4j.appender.file.File=${logFile}`,
    'log4j.appender.file.layout=org.apache.log4j.PatternLayout',
    'log4j.appender.file.layout.ConversionPattern=[%d] %p %m (%c)%n',
    'log4j.logger.org.apache.kafka.clients=WARN',
    'log4j.logger.kafka.request.logger=WARN',
    '',
  ].join('\n');
}

// Kafka 4 configures log4j 2 itself (dynamic log levels); without a file it complains.
function log4j2Properties() {
  return [
    'status = warn',
    'appender.err.type = Console',
    'appender.err.name = ERR',
    'appender.err.target = SYSTEM_ERR',
    'appender.err.layout.type = PatternLayout',
    'appender.err.layout.pattern = [%d] %p %m (%c)%n',
    'rootLogger.level = info',
    'rootLogger.appenderRef.err.ref = ERR',
    '',
  ].join('\n');
}

function instancePaths(settings, instance) {
  if (!/^[\w.-]+$/.test(instance)) throw new BrokerSetupError(`instance name "${instance}": use letters, digits, '.', '_' or '-'`);
  const dir = join(settings.instancesDir, instance);
  return {
    dir,
    stateFile: join(dir, 'state.json'),
    dataDir: join(dir, 'data'),
    logFile: join(dir, 'broker.log'),
    props: join(dir, 'server.properties'),
    log4j: join(dir, 'log4j.properties'),
    log4j2: join(dir, 'log4j2.properties'),
    lock: join(settings.instancesDir, `${instance}.lock`),
  };
}

/** True when `pid` is a live (not zombie) process whose command line contains `marker`. */
function processMatches(pid, marker) {
  if (!Number.isInteger(pid) || pid <= 0) return false;
  try {
    process.kill(pid, 0);
  } catch {
    return false;
  }
  try {
    // A zombie has an empty command line; a reused pid has someone else's.
    return readFileSync(`/proc/${pid}/cmdline`, 'utf8').includes(marker);
  } catch {
    return process.platform !== 'linux';
  }
}

function readState(paths) {
  try {
    return JSON.parse(readFileSync(paths.stateFile, 'utf8'));
  } catch {
    return undefined;
  }
}

function readLog(file) {
  try {
    return readFileSync(file, 'utf8').trimEnd();
  } catch {
    return '';
  }
}

/**
 * The first error lines of a broker log and then its tail: a failed Kafka start logs the
 * cause (e.g. a BindException) and then hundreds of shutdown lines that bury it.
 */
function logReport(file) {
  const text = readLog(file);
  if (!text) return `(no broker log at ${file})`;
  const firstErrors = [...new Set(text.split('\n').filter((l) => /\b(ERROR|FATAL)\b|^Caused by:|Exception:/.test(l)))].slice(0, 8);
  const head = firstErrors.length ? `first errors in ${file}:\n${firstErrors.join('\n')}\n` : '';
  return `${head}last lines of ${file}:\n${tail(text, 30)}`;
}

async function withLock(lock, fn) {
  mkdirSync(resolve(lock, '..'), { recursive: true });
  const deadline = Date.now() + 300_000;
  for (;;) {
    try {
      mkdirSync(lock);
      writeFileSync(join(lock, 'owner'), String(process.pid));
      break;
    } catch (err) {
      if (err.code !== 'EEXIST') throw err;
      let owner = 0;
      try { owner = Number(readFileSync(join(lock, 'owner'), 'utf8')); } catch { /* being created */ }
      let age = 0;
      try { age = Date.now() - statSync(lock).mtimeMs; } catch { /* just released */ }
      const ownerGone = owner > 0 && !processMatches(owner, '');
      if (ownerGone || age > 280_000) rmSync(lock, { recursive: true, force: true });
      else if (Date.now() > deadline) throw new BrokerSetupError(`timed out waiting for the lock ${lock}`);
      else await sleep(250);
    }
  }
  try {
    return await fn();
  } finally {
    rmSync(lock, { recursive: true, force: true });
  }
}

/** One metadata round trip; resolves to the broker count or throws. */
async function describeCluster(brokers, timeoutMs = 5000) {
  const { Kafka, logLevel } = (await import('kafkajs')).default;
  const kafka = new Kafka({
    clientId: 'pairflow-broker-probe',
    brokers,
    logLevel: logLevel.NOTHING,
    connectionTimeout: Math.min(2000, timeoutMs),
    requestTimeout: timeoutMs,
    retry: { retries: 0 },
  });
  const admin = kafka.admin();
  try {
    await admin.connect();
    const cluster = await admin.describeCluster();
    return cluster.brokers.length;
  } finally {
    await admin.disconnect().catch(() => {});
  }
}

/** True when a broker answers a metadata request within `timeoutMs`. */
export async function brokerAnswers(brokers, timeoutMs = 5000) {
  try {
    return (await describeCluster(brokers, timeoutMs)) > 0;
  } catch {
    return false;
  }
}

function javaArgs(settings, paths, libDir, mainClass, extra) {
  const args = [
    `-Xms128m`, `-Xmx${settings.heap}`,
    '-XX:+UseG1GC', '-XX:MaxGCPauseMillis=20',
    // C1 only: a development broker starts ~40% sooner (measured, docs/kafka.md) and its
    // traffic is too small to need C2. PAIRFLOW_KAFKA_JVM_OPTS=-XX:TieredStopAtLevel=4 undoes it.
    '-XX:TieredStopAtLevel=1',
    '-Djava.awt.headless=true',
    `-Dlog4j.configuration=file:${paths.log4j}`,
    `-Dlog4j2.configurationFile=${paths.log4j2}`,
    // slf4j-simple (Kafka 4.x class path) writes to stderr, which goes to the log file.
    '-Dorg.slf4j.simpleLogger.defaultLogLevel=info',
    '-Dorg.slf4j.simpleLogger.showDateTime=true',
    '-Dorg.slf4j.simpleLogger.dateTimeFormat=yyyy-MM-dd HH:mm:ss,SSS',
    '-Dorg.slf4j.simpleLogger.log.org.apache.kafka.clients=warn',
    '-Dorg.slf4j.simpleLogger.log.kafka.request.logger=warn',
    `-Dpairflow.instance=${paths.dir}`,
    ...settings.jvmOpts,
    '-cp', join(libDir, '*'),
    mainClass,
  ];
  return args.concat(extra);
}

/**
 * Deletes an instance's data and state. The named `up` instance keeps its directory (and
 * last broker.log) for a look after `down`; per-run instances go entirely, so test runs
 * do not pile up directories in the cache.
 */
function cleanInstance(paths, instance) {
  if (instance !== undefined && instance !== DEFAULT_INSTANCE) {
    rmSync(paths.dir, { recursive: true, force: true });
    return;
  }
  rmSync(paths.dataDir, { recursive: true, force: true });
  rmSync(paths.stateFile, { force: true });
}

/**
 * Starts the local broker (or reuses the instance if it is already up) and waits until it
 * answers a metadata request.
 *
 * @param {object} [options]
 * @param {string} [options.instance] instance name; each has its own ports and data. @default 'default'
 * @param {number} [options.ownerPid] stop the broker when this process dies (test setups)
 * @param {NodeJS.ProcessEnv} [options.env] where settings are read from. @default process.env
 * @param {{ keystoreFile: string, keyPassword?: string, truststoreFile?: string,
 *   clientAuth?: 'required' | 'requested' | 'none', users: { name: string, password: string }[] }} [options.saslSsl]
 *   also open a SASL_SSL listener: `keystoreFile` is a PEM file with the server's private key
 *   (PKCS#8) and certificate chain; `truststoreFile` a PEM file of the CAs whose client
 *   certificates are accepted (client certificates are then required unless `clientAuth`
 *   says otherwise); every user may log in with PLAIN, SCRAM-SHA-256 and SCRAM-SHA-512.
 * @returns {Promise<{ brokers: string, saslSslBrokers?: string, started: boolean, pid: number, version: string,
 *   instance: string, logFile: string, stateFile: string, fetchMs: number, startMs: number }>}
 * @example const { brokers } = await startBroker(); // '127.0.0.1:40123'
 */
export async function startBroker(options = {}) {
  const settings = brokerSettings(options.env);
  const instance = options.instance ?? DEFAULT_INSTANCE;
  const paths = instancePaths(settings, instance);
  if (options.saslSsl) checkSaslSsl(options.saslSsl);
  return withLock(paths.lock, async () => {
    const t0 = Date.now();
    const old = readState(paths);
    if (old && processMatches(old.pid, paths.dir)) {
      const brokers = `127.0.0.1:${old.brokerPort}`;
      if (options.saslSsl && !old.saslSslPort) {
        progress(`instance ${instance} has no SASL_SSL listener; restarting it with one`);
        await stopProcess(old.pid, paths.dir);
      } else if (await brokerAnswers([brokers])) {
        progress(`reusing instance ${instance} (Kafka ${old.version}, pid ${old.pid}) at ${brokers}`);
        return { ...describe(old, paths), started: false, fetchMs: 0, startMs: Date.now() - t0 };
      } else {
        progress(`instance ${instance} (pid ${old.pid}) does not answer; restarting it`);
        await stopProcess(old.pid, paths.dir);
      }
    }
    cleanInstance(paths);
    sweepStaleInstances(settings, instance);

    requireJava(settings);
    const fetched = fetchArtifacts(settings);
    // The ports are free when picked but another process may bind one before the broker
    // does; a start that fails on a taken port is retried on new ports.
    for (let attempt = 1; ; attempt++) {
      try {
        return await launch(settings, paths, instance, fetched, options);
      } catch (err) {
        // A fixed port stays taken: only freshly picked ports are worth another try.
        if (!err.portTaken || settings.brokerPort || attempt >= 3) throw err;
        progress(`a port was taken before the broker bound it; retrying (${attempt}/3)`);
      }
    }
  });
}

async function launch(settings, paths, instance, fetched, options) {
  const saslSsl = options.saslSsl;
  const picked = await freePorts(saslSsl ? 3 : 2);
  const brokerPort = settings.brokerPort || picked[0];
  const controllerPort = picked[1];
  const saslSslPort = saslSsl ? picked[2] : 0;
  mkdirSync(paths.dir, { recursive: true });
  writeFileSync(paths.props, serverProperties({ brokerPort, controllerPort, saslSslPort, saslSsl, dataDir: paths.dataDir }));
  writeFileSync(paths.log4j, log4jProperties(paths.logFile));
  writeFileSync(paths.log4j2, log4j2Properties());
  writeFileSync(paths.logFile, '');

  const format = spawnSync(
    settings.java,
    javaArgs(settings, paths, fetched.libDir, 'kafka.tools.StorageTool',
      ['format', '-t', clusterId(), '-c', paths.props, '--ignore-formatted', ...scramFormatArgs(saslSsl)]),
    { encoding: 'utf8' },
  );
  if (format.status !== 0) {
    throw new BrokerSetupError(
      `formatting the KRaft storage failed (exit ${format.status}):\n${tail(`${format.stdout}\n${format.stderr}`)}\n${logReport(paths.logFile)}`,
    );
  }

  const startT = Date.now();
  const out = openSync(paths.logFile, 'a');
  const child = spawn(settings.java, javaArgs(settings, paths, fetched.libDir, 'kafka.Kafka', [paths.props]), {
    detached: true,
    stdio: ['ignore', out, out],
  });
  closeSync(out);
  let exited = null;
  child.once('exit', (code, signal) => { exited = { code, signal }; });
  child.once('error', (err) => { exited = { code: null, signal: null, err }; });
  child.unref();

  let watchdog = 0;
  if (options.ownerPid) {
    // If the owner dies without tearing down (a killed test run), stop the broker anyway.
    const w = spawn('sh', ['-c',
      `while kill -0 ${options.ownerPid} 2>/dev/null && kill -0 ${child.pid} 2>/dev/null; do sleep 1; done; kill ${child.pid} 2>/dev/null; exit 0`],
    { detached: true, stdio: 'ignore' });
    w.unref();
    watchdog = w.pid ?? 0;
  }
  const state = {
    instance, version: settings.version, pid: child.pid, watchdog, brokerPort, controllerPort, saslSslPort,
    dataDir: paths.dataDir, logFile: paths.logFile, props: paths.props, startedAt: new Date().toISOString(),
  };
  writeFileSync(paths.stateFile, JSON.stringify(state, null, 2));
  progress(`starting Kafka ${settings.version} (pid ${child.pid}) on 127.0.0.1:${brokerPort}, log ${paths.logFile}`);

  const brokers = `127.0.0.1:${brokerPort}`;
  const deadline = startT + settings.startTimeoutMs;
  for (;;) {
    if (exited) {
      const report = logReport(paths.logFile);
      const portTaken = /BindException|Address already in use/.test(readLog(paths.logFile));
      cleanInstance(paths);
      const err = new BrokerSetupError(
        `the Kafka broker exited during start-up (${exited.err ? exited.err.message : `code ${exited.code}, signal ${exited.signal}`}); ${report}`,
      );
      err.portTaken = portTaken;
      throw err;
    }
    if (await brokerAnswers([brokers], 2000)) break;
    if (Date.now() > deadline) {
      await stopProcess(child.pid, paths.dir);
      cleanInstance(paths);
      throw new BrokerSetupError(
        `the Kafka broker did not answer within ${settings.startTimeoutMs} ms; ${logReport(paths.logFile)}`,
      );
    }
    await sleep(300);
  }
  const startMs = Date.now() - startT;
  progress(`Kafka ${settings.version} answers at ${brokers} after ${(startMs / 1000).toFixed(1)} s`);
  return { ...describe(state, paths), started: true, fetchMs: fetched.ms, startMs };
}

function describe(state, paths) {
  return {
    brokers: `127.0.0.1:${state.brokerPort}`,
    ...(state.saslSslPort ? { saslSslBrokers: `127.0.0.1:${state.saslSslPort}` } : {}),
    pid: state.pid,
    version: state.version,
    instance: state.instance,
    logFile: paths.logFile,
    stateFile: paths.stateFile,
  };
}

async function stopProcess(pid, marker, graceMs = 30_000) {
  if (!processMatches(pid, marker)) return false;
  try { process.kill(pid, 'SIGTERM'); } catch { return false; }
  const deadline = Date.now() + graceMs;
  while (processMatches(pid, marker)) {
    if (Date.now() > deadline) {
      try { process.kill(pid, 'SIGKILL'); } catch { /* already gone */ }
      await sleep(200);
      break;
    }
    await sleep(100);
  }
  return true;
}

/**
 * Removes instances whose broker is gone (a crashed or killed run, or a failed start whose
 * log was kept for a look), except ones being started right now (their lock exists).
 */
function sweepStaleInstances(settings, except) {
  let names = [];
  try { names = readdirSync(settings.instancesDir, { withFileTypes: true }).filter((d) => d.isDirectory()).map((d) => d.name); } catch { return; }
  for (const name of names) {
    if (name === except || name.endsWith('.lock')) continue;
    const paths = instancePaths(settings, name);
    if (existsSync(paths.lock)) continue;
    const state = readState(paths);
    if (!state || !processMatches(state.pid, paths.dir)) cleanInstance(paths, name);
  }
}

/**
 * Stops a local broker instance (SIGTERM, then SIGKILL after 30 s) and deletes its data.
 * @param {{ instance?: string, env?: NodeJS.ProcessEnv }} [options]
 * @returns {Promise<{ stopped: boolean, instance: string }>}
 */
export async function stopBroker(options = {}) {
  const settings = brokerSettings(options.env);
  const instance = options.instance ?? DEFAULT_INSTANCE;
  const paths = instancePaths(settings, instance);
  const state = readState(paths);
  let stopped = false;
  if (state) {
    // The watchdog first, while its command line (which names the broker pid) proves
    // it is ours; once the broker is gone it exits by itself and its pid may be reused.
    if (state.watchdog && processMatches(state.watchdog, `kill -0 ${state.pid} `)) {
      try { process.kill(state.watchdog, 'SIGTERM'); } catch { /* already gone */ }
    }
    stopped = await stopProcess(state.pid, paths.dir);
  }
  cleanInstance(paths, instance);
  return { stopped, instance };
}

/**
 * Stops an instance's broker process (SIGTERM, SIGKILL after `graceMs`) but keeps its
 * data, ports and state, so {@link resumeBroker} starts it again on the same data: a
 * broker outage for tests of clients that must ride it out.
 * @param {{ instance?: string, env?: NodeJS.ProcessEnv, graceMs?: number }} [options]
 * @returns {Promise<{ halted: boolean, instance: string }>}
 */
export async function haltBroker(options = {}) {
  const settings = brokerSettings(options.env);
  const instance = options.instance ?? DEFAULT_INSTANCE;
  const paths = instancePaths(settings, instance);
  const state = readState(paths);
  if (!state) throw new BrokerSetupError(`instance ${instance} has no state: start it first`);
  if (state.watchdog && processMatches(state.watchdog, `kill -0 ${state.pid} `)) {
    try { process.kill(state.watchdog, 'SIGTERM'); } catch { /* already gone */ }
  }
  const halted = await stopProcess(state.pid, paths.dir, options.graceMs ?? 30_000);
  writeFileSync(paths.stateFile, JSON.stringify({ ...state, pid: 0, watchdog: 0, haltedAt: new Date().toISOString() }, null, 2));
  return { halted, instance };
}

/**
 * Starts a halted instance again from its data, on the ports it had, and waits until it
 * answers. `ownerPid` as for {@link startBroker}.
 * @param {{ instance?: string, env?: NodeJS.ProcessEnv, ownerPid?: number }} [options]
 * @returns {Promise<{ brokers: string, pid: number, startMs: number }>}
 */
export async function resumeBroker(options = {}) {
  const settings = brokerSettings(options.env);
  const instance = options.instance ?? DEFAULT_INSTANCE;
  const paths = instancePaths(settings, instance);
  const state = readState(paths);
  if (!state) throw new BrokerSetupError(`instance ${instance} has no state: start it first`);
  if (state.pid && processMatches(state.pid, paths.dir)) return { brokers: `127.0.0.1:${state.brokerPort}`, pid: state.pid, startMs: 0 };
  const fetched = fetchArtifacts(settings);
  const t0 = Date.now();
  const out = openSync(paths.logFile, 'a');
  const child = spawn(settings.java, javaArgs(settings, paths, fetched.libDir, 'kafka.Kafka', [paths.props]), { detached: true, stdio: ['ignore', out, out] });
  closeSync(out);
  let exited = null;
  child.once('exit', (code, signal) => { exited = { code, signal }; });
  child.unref();
  let watchdog = 0;
  if (options.ownerPid) {
    const w = spawn('sh', ['-c',
      `while kill -0 ${options.ownerPid} 2>/dev/null && kill -0 ${child.pid} 2>/dev/null; do sleep 1; done; kill ${child.pid} 2>/dev/null; exit 0`],
    { detached: true, stdio: 'ignore' });
    w.unref();
    watchdog = w.pid ?? 0;
  }
  writeFileSync(paths.stateFile, JSON.stringify({ ...state, pid: child.pid, watchdog, haltedAt: undefined }, null, 2));
  const brokers = `127.0.0.1:${state.brokerPort}`;
  const deadline = t0 + settings.startTimeoutMs;
  while (!(await brokerAnswers([brokers], 2000))) {
    if (exited) throw new BrokerSetupError(`the Kafka broker exited while resuming (code ${exited.code}); ${logReport(paths.logFile)}`);
    if (Date.now() > deadline) throw new BrokerSetupError(`the resumed Kafka broker did not answer within ${settings.startTimeoutMs} ms; ${logReport(paths.logFile)}`);
    await sleep(300);
  }
  return { brokers, pid: child.pid, startMs: Date.now() - t0 };
}

/** Instance names found in the cache, running or not. */
export function listInstances(options = {}) {
  const settings = brokerSettings(options.env);
  try {
    return readdirSync(settings.instancesDir, { withFileTypes: true })
      .filter((d) => d.isDirectory() && !d.name.endsWith('.lock'))
      .map((d) => d.name);
  } catch {
    return [];
  }
}

/** The state of every instance with a state file, with whether its process is alive. */
export function brokerStatus(options = {}) {
  const settings = brokerSettings(options.env);
  const out = [];
  for (const name of listInstances(options)) {
    const paths = instancePaths(settings, name);
    const state = readState(paths);
    if (state) out.push({ ...state, alive: processMatches(state.pid, paths.dir) });
  }
  return out;
}

/**
 * TLS material and a user for `up --sasl-ssl`, kept in the instance directory: made once,
 * reused while the instance runs (a running broker holds the files it started with).
 * `writeSettings` writes a pairflow settings file (docs/operations.md "Settings") that
 * connects through the SASL_SSL listener with SCRAM-SHA-512 and a client certificate.
 */
async function localSaslSsl(instance) {
  const settings = brokerSettings();
  const paths = instancePaths(settings, instance);
  const dir = join(paths.dir, 'tls');
  const settingsFile = join(dir, 'pairflow-settings.json');
  const state = readState(paths);
  const running = state && state.saslSslPort && processMatches(state.pid, paths.dir) && existsSync(join(dir, 'password'));
  if (!running) {
    const { generateTlsMaterial } = await import('./kafka/tls.mjs');
    rmSync(dir, { recursive: true, force: true });
    generateTlsMaterial(dir);
    writeFileSync(join(dir, 'password'), `${randomBytes(12).toString('hex')}\n`, { mode: 0o600 });
  }
  const password = readFileSync(join(dir, 'password'), 'utf8').trim();
  return {
    options: {
      keystoreFile: join(dir, 'server.keystore.pem'),
      truststoreFile: join(dir, 'ca.pem'),
      users: [{ name: 'pairflow', password }],
    },
    writeSettings(brokers) {
      writeFileSync(settingsFile, `${JSON.stringify({
        brokers,
        tls: { ca: 'ca.pem', cert: 'client.pem', key: 'client.key.pem' },
        sasl: { mechanism: 'scram-sha-512', username: 'pairflow', passwordFile: 'password' },
      }, null, 2)}\n`);
      return settingsFile;
    },
  };
}

function optionValue(args, name) {
  const i = args.indexOf(name);
  return i >= 0 ? args[i + 1] : undefined;
}

async function main(argv) {
  const [cmd, ...rest] = argv;
  const instance = optionValue(rest, '--instance') ?? DEFAULT_INSTANCE;
  switch (cmd) {
    case 'fetch': {
      const settings = brokerSettings();
      requireJava(settings);
      const r = fetchArtifacts(settings);
      progress(r.downloaded ? `fetched Kafka ${r.version}` : `Kafka ${r.version} already in ${r.libDir}`);
      return 0;
    }
    case 'up': {
      const saslSsl = rest.includes('--sasl-ssl') ? await localSaslSsl(instance) : undefined;
      const r = await startBroker({ instance, saslSsl: saslSsl?.options });
      process.stdout.write(`KAFKA_BROKERS=${r.brokers}\n`);
      if (saslSsl && r.saslSslBrokers) {
        const settingsFile = saslSsl.writeSettings(r.saslSslBrokers);
        process.stdout.write(`KAFKA_SASL_SSL_BROKERS=${r.saslSslBrokers}\nPAIRFLOW_SETTINGS=${settingsFile}\n`);
      }
      return 0;
    }
    case 'down': {
      const names = rest.includes('--all') ? listInstances() : [instance];
      for (const instance of names) {
        const r = await stopBroker({ instance });
        progress(r.stopped ? `stopped instance ${instance}` : `instance ${instance} was not running; its data is cleaned`);
      }
      return 0;
    }
    case 'status': {
      process.stdout.write(`${JSON.stringify(brokerStatus(), null, 2)}\n`);
      return 0;
    }
    default:
      process.stderr.write('usage: node scripts/kafka.mjs fetch | up [--instance NAME] [--sasl-ssl] | down [--instance NAME | --all] | status\n');
      return 2;
  }
}

if (process.argv[1] && resolve(process.argv[1]) === fileURLToPath(import.meta.url)) {
  main(process.argv.slice(2)).then(
    (code) => { process.exitCode = code; },
    (err) => {
      process.stderr.write(`kafka: ${err.message}${err.code ? ` [${err.code}]` : ''}\n`);
      process.exitCode = 1;
    },
  );
}
