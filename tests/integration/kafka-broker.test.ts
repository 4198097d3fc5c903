/**
 * scripts/kafka.mjs, the local broker tooling: its failure messages, and a full
 * start/reuse/stop cycle of a private instance (with the cached artifacts; no network
 * beyond 127.0.0.1).
 */
import { spawn, spawnSync } from 'node:child_process';
import { existsSync, mkdirSync, mkdtempSync, rmSync, writeFileSync } from 'node:fs';
import { createServer, type AddressInfo } from 'node:net';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { afterAll, describe, expect, it } from 'vitest';
import {
  BROKER_SETUP_CODE,
  brokerAnswers,
  brokerSettings,
  brokerStatus,
  fetchArtifacts,
  javaMajor,
  startBroker,
  stopBroker,
} from '../../scripts/kafka.mjs';
import { uniqueName } from './helpers/kafka.js';

const scratch = mkdtempSync(join(tmpdir(), 'pairflow-broker-test-'));
afterAll(() => rmSync(scratch, { recursive: true, force: true }));

const isCi = process.env.CI === 'true' || process.env.CI === '1';
/** Whether the JDK the broker would use runs; outside CI the broker cases skip without one. */
function javaRuns(): boolean {
  try {
    return javaMajor(brokerSettings().java) > 0;
  } catch {
    return false;
  }
}
const hasJava = javaRuns();
const setupError = expect.objectContaining({ code: BROKER_SETUP_CODE });

async function waitGone(pid: number, maxPolls = 300): Promise<boolean> {
  for (let i = 0; i < maxPolls; i++) {
    try {
      process.kill(pid, 0);
    } catch {
      return true;
    }
    await new Promise((r) => setTimeout(r, 100));
  }
  return false;
}

describe('brokerSettings()', () => {
  it('reads version and cache from the environment, with defaults', () => {
    const s = brokerSettings({ PAIRFLOW_KAFKA_VERSION: '4.4.0', PAIRFLOW_CACHE_DIR: scratch });
    expect(s.version).toBe('4.4.0');
    expect(s.versionDir).toBe(join(scratch, 'kafka', '4.4.0'));
    expect(brokerSettings({ HOME: '/home/u' }).version).toBe('3.9.2');
  });

  it('refuses a version that is not a release number', () => {
    expect(() => brokerSettings({ PAIRFLOW_KAFKA_VERSION: 'latest' })).toThrowError(setupError);
  });
});

describe('failures name their cause', () => {
  it('javaMajor() of a missing Java throws PAIRFLOW_ERR_KAFKA_BROKER_SETUP', () => {
    expect(() => javaMajor(join(scratch, 'no-such-java'))).toThrowError(setupError);
  });

  it('fetchArtifacts() without Maven throws PAIRFLOW_ERR_KAFKA_BROKER_SETUP naming Maven', () => {
    const s = brokerSettings({ PAIRFLOW_CACHE_DIR: join(scratch, 'empty-cache'), PAIRFLOW_MVN: join(scratch, 'no-such-mvn') });
    expect(() => fetchArtifacts(s)).toThrowError(expect.objectContaining({ code: BROKER_SETUP_CODE, message: expect.stringMatching(/Maven/) }));
  });

  it('startBroker() with a JDK path that does not exist fails before touching Maven', async () => {
    const env = { ...process.env, PAIRFLOW_CACHE_DIR: join(scratch, 'nojava'), PAIRFLOW_JAVA_HOME: join(scratch, 'no-jdk') };
    await expect(startBroker({ instance: 'nojava', env })).rejects.toEqual(setupError);
    expect(existsSync(join(scratch, 'nojava', 'kafka', '3.9.2'))).toBe(false);
  });

  it.skipIf(!hasJava && !isCi)('startBroker() with a JVM that cannot start reports the JVM\'s own words', async () => {
    const env = { ...process.env, PAIRFLOW_KAFKA_HEAP: '1k' };
    await expect(startBroker({ instance: uniqueName('tiny-heap'), env })).rejects.toEqual(
      expect.objectContaining({ code: BROKER_SETUP_CODE, message: expect.stringMatching(/heap/i) }),
    );
  });
});

describe.skipIf(!hasJava && !isCi)('a private broker instance', () => {
  it('startBroker() on a fixed port that is taken fails with the broker\'s own cause, not just its shutdown lines', async () => {
    const holder = createServer();
    await new Promise<void>((r) => holder.listen(0, '127.0.0.1', () => r()));
    const port = (holder.address() as AddressInfo).port;
    const instance = uniqueName('taken');
    try {
      const env = { ...process.env, PAIRFLOW_KAFKA_PORT: String(port) };
      await expect(startBroker({ instance, env })).rejects.toEqual(
        expect.objectContaining({ code: BROKER_SETUP_CODE, message: expect.stringMatching(new RegExp(`first errors[^]*${port}[^]*Address already in use`)) }),
      );
    } finally {
      holder.close();
      await stopBroker({ instance });
    }
  });


  it('startBroker() starts once under concurrent calls, reuses while running, and stopBroker() leaves no process and no data', async () => {
    const instance = uniqueName('cycle');
    // What a killed run leaves behind: a state file naming a process that is gone.
    const stale = join(brokerSettings().instancesDir, uniqueName('stale'));
    mkdirSync(join(stale, 'data'), { recursive: true });
    const gonePid = spawnSync('true').pid;
    writeFileSync(join(stale, 'state.json'), JSON.stringify({ instance: 'stale', pid: gonePid, brokerPort: 1 }));

    // Two starts at once: the instance lock lets one start the broker, the other reuse it.
    const both = await Promise.all([startBroker({ instance, ownerPid: process.pid }), startBroker({ instance, ownerPid: process.pid })]);
    expect(both.map((r) => r.started).sort()).toEqual([false, true]);
    expect(both[0].pid).toBe(both[1].pid);
    const first = both.find((r) => r.started)!;
    expect(existsSync(stale), 'a stale instance is swept on start').toBe(false);
    const watchdog = brokerStatus().find((s) => s.instance === instance)?.watchdog ?? 0;
    expect(watchdog).toBeGreaterThan(0);
    try {
      expect(first.started).toBe(true);
      expect(first.brokers).toMatch(/^127\.0\.0\.1:\d+$/);
      expect(await brokerAnswers([first.brokers])).toBe(true);

      const again = await startBroker({ instance });
      expect(again.started).toBe(false);
      expect(again.brokers).toBe(first.brokers);
      expect(again.pid).toBe(first.pid);
      expect(brokerStatus().find((s) => s.instance === instance)).toMatchObject({ alive: true, pid: first.pid });
    } finally {
      const stop = await stopBroker({ instance });
      expect(stop.stopped).toBe(true);
    }
    expect(await waitGone(first.pid)).toBe(true);
    expect(await waitGone(watchdog), 'the watchdog goes with its broker').toBe(true);
    expect(brokerStatus().find((s) => s.instance === instance)).toBeUndefined();
    expect(existsSync(join(brokerSettings().instancesDir, instance))).toBe(false);
    expect((await stopBroker({ instance })).stopped).toBe(false);
  });

  it('a broker started for an owner process stops by itself when the owner dies', async () => {
    const owner = spawn('sleep', ['600'], { stdio: 'ignore' });
    const instance = uniqueName('owned');
    let pid = 0;
    try {
      const r = await startBroker({ instance, ownerPid: owner.pid! });
      pid = r.pid;
      owner.kill('SIGKILL');
      expect(await waitGone(pid)).toBe(true);
    } finally {
      owner.kill('SIGKILL');
      await stopBroker({ instance });
    }
  });
});
