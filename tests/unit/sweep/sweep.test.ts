import { createHash } from 'node:crypto';
import { existsSync, mkdtempSync, readFileSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { fileURLToPath } from 'node:url';
import { describe, expect, it } from 'vitest';
import { loadLog, toJsonLine } from '../../../src/consume/index.js';
import { DEFAULT_CONFIG, type PairflowConfig } from '../../../src/model.js';
import { generateEvents } from '../../../src/gen/gen.js';
import { solveHindsight } from '../../../src/hindsight/hindsight.js';
import { runReplay } from '../../../src/replay/run.js';
import { runSweep, sweepLoaded, sweepWorkerUrl, type SweepResult } from '../../../src/sweep/sweep.js';

const dir = mkdtempSync(join(tmpdir(), 'pairflow-sweep-'));

function writeLog(name: string, days: number, seed: number, scale: number): string {
  const path = join(dir, name);
  writeFileSync(path, [...generateEvents({ days, seed, scale })].map(toJsonLine).join('\n') + '\n');
  return path;
}

const config: PairflowConfig = { ...DEFAULT_CONFIG };
const windows = [2000, 10_000, 60_000];

function withoutTimings(r: SweepResult): unknown {
  return { ...r, timings: null, policies: r.policies.map((w) => ({ ...w, timings: null })) };
}

describe('runSweep()', () => {
  const week = writeLog('week.jsonl', 3, 21, 0.004);

  it('gives each window the figures of a separate runReplay, sharing one hindsight optimum', async () => {
    const r = await runSweep([week], config, { windows, threads: 1, bootstrap: 200, seed: 4 });
    expect(r.policies.map((w) => w.policy.windowMs)).toEqual(windows);
    // Computed here, so where its time went is reported.
    expect(Object.keys(r.timings.hindsightPhases!).sort()).toEqual(['ceilingMs', 'firstSolveMs', 'graphMs', 'pricingMs', 'resolveMs', 'setupMs']);
    for (const w of r.policies) {
      const single = await runReplay([week], { ...config, windowMs: w.policy.windowMs }, { threads: 0 });
      expect(w.online, `W ${w.policy.windowMs}`).toEqual(single.online);
      expect(w.regret, `W ${w.policy.windowMs}`).toBe(single.regret);
      expect(w.ratio, `W ${w.policy.windowMs}`).toBe(single.ratio);
      expect(r.hindsight).toEqual(single.hindsight);
      expect(r.demandUnits).toBe(single.demandUnits);
    }
    const best = r.policies.reduce((b, w) => (w.online.cost < b.online.cost ? w : b));
    expect(r.best.windowMs).toBe(best.policy.windowMs);
  });

  it('bootstraps over days for a multi-day log: intervals contain the point estimates, the same seed gives the same result', async () => {
    const a = await runSweep([week], config, { windows, threads: 1, bootstrap: 300, seed: 9 });
    const b = await runSweep([week], config, { windows, threads: 1, bootstrap: 300, seed: 9 });
    expect(withoutTimings(b)).toEqual(withoutTimings(a));
    expect(a.bootstrap).toMatchObject({ resamples: 300, seed: 9, unit: 'day', buckets: 3 });
    for (const w of a.policies) {
      expect(w.interval!.cost[0], `W ${w.policy.windowMs}`).toBeLessThanOrEqual(w.online.cost);
      expect(w.interval!.cost[1], `W ${w.policy.windowMs}`).toBeGreaterThanOrEqual(w.online.cost);
      expect(w.interval!.regret[0]).toBeLessThanOrEqual(w.regret + 1e-6);
      expect(w.interval!.regret[1]).toBeGreaterThanOrEqual(w.regret - 1e-6);
    }
    expect(a.policies.reduce((s, w) => s + w.bestShare!, 0)).toBeCloseTo(1, 12);
    const c = await runSweep([week], config, { windows, threads: 1, bootstrap: 300, seed: 10 });
    expect(c.policies.map((w) => w.interval)).not.toEqual(a.policies.map((w) => w.interval));
  });

  it('resamples hours for a log shorter than two days', async () => {
    const day = writeLog('day.jsonl', 1, 22, 0.01);
    const r = await runSweep([day], config, { windows: [5000, 30_000], threads: 1, bootstrap: 100 });
    expect(r.bootstrap?.unit).toBe('hour');
    expect(r.bootstrap?.buckets).toBe(24);
  });

  it('with a shared hindsight result and no bootstrap it skips both', async () => {
    const loaded = await loadLog([week], { metric: config.metric });
    const h = await solveHindsight(loaded.events, config, { threads: 0 });
    const r = await sweepLoaded(loaded, config, { windows: [5000], threads: 1, bootstrap: 0, hindsight: h });
    expect(r.bootstrap).toBeNull();
    expect(r.policies[0]!.interval).toBeNull();
    expect(r.timings.hindsightMs).toBeNull();
    expect(r.timings.hindsightPhases).toBeNull();
    expect(r.hindsight.cost).toBe(h.cost);
  });

  const haveWorker = existsSync(fileURLToPath(sweepWorkerUrl()));
  it.skipIf(!haveWorker && process.env.CI !== 'true')('worker threads give the same result as one thread (needs the build in dist/)', async () => {
    const one = await runSweep([week], config, { windows, threads: 1, bootstrap: 200, seed: 2 });
    const two = await runSweep([week], config, { windows, threads: 2, bootstrap: 200, seed: 2 });
    expect(two.timings.threads).toBe(2);
    expect(withoutTimings(two)).toEqual({ ...(withoutTimings(one) as object), timings: null });
  });

  it('lets the loaded events go when told (releaseEvents), with the same result in this thread and on workers', async () => {
    for (const threads of haveWorker ? [1, 2] : [1]) {
      const kept = await loadLog([week], { metric: config.metric });
      const a = await sweepLoaded(kept, config, { windows, threads, bootstrap: 100, seed: 3 });
      expect(kept.events.length, `threads ${threads}`).toBeGreaterThan(0);
      const gone = await loadLog([week], { metric: config.metric });
      const b = await sweepLoaded(gone, config, { windows, threads, bootstrap: 100, seed: 3, releaseEvents: true });
      expect(gone.events, `threads ${threads}`).toHaveLength(0);
      expect(withoutTimings(b), `threads ${threads}`).toEqual(withoutTimings(a));
    }
  });

  it('outDir keeps the result, its CSV and a manifest with the inputs\' checksums and the seed', async () => {
    const out = join(dir, 'sweep-out');
    const r = await runSweep([week], config, { windows: [5000, 30_000], threads: 1, bootstrap: 50, seed: 77, outDir: out, command: ['test'] });
    expect(JSON.parse(readFileSync(join(out, 'sweep.json'), 'utf8'))).toEqual(JSON.parse(JSON.stringify(r)));
    const manifest = JSON.parse(readFileSync(join(out, 'manifest.json'), 'utf8')) as { inputs: { sha256: string }[]; options: { seed: number; windows: number[] }; config: PairflowConfig };
    // Outside check: node:crypto's sha256 of the file's bytes.
    expect(manifest.inputs[0]!.sha256).toBe(createHash('sha256').update(readFileSync(week)).digest('hex'));
    expect(manifest.options).toMatchObject({ seed: 77, windows: [5000, 30_000], bootstrap: 50 });
    expect(manifest.config).toEqual(config);
    const csv = readFileSync(join(out, 'sweep.csv'), 'utf8').split('\r\n').filter((l) => l !== '');
    expect(csv).toHaveLength(3);
    expect(csv[1]!.split(',').slice(0, 4)).toEqual(['5s / R=P / all', '5000', '', 'all']);
  });

  it('sweeps a grid of windows x reserves x commits, each policy equal to a separate replay with its config', async () => {
    const r = await runSweep([week], config, { windows: [5000, 30_000], reserves: [null, 5], commits: ['all', 'due'], threads: 1, bootstrap: 200, seed: 6 });
    expect(r.policies.map((p) => p.label)).toEqual([
      '5s / R=P / all', '5s / R=P / due', '5s / R=5 / all', '5s / R=5 / due',
      '30s / R=P / all', '30s / R=P / due', '30s / R=5 / all', '30s / R=5 / due',
    ]);
    const p = r.policies.find((x) => x.label === '30s / R=5 / due')!;
    const single = await runReplay([week], { ...config, windowMs: 30_000, reserve: 5, commit: 'due' }, { threads: 0 });
    expect(p.online).toEqual(single.online);
    expect(p.regret).toBe(single.regret);
    // The cheapest policy is the reference of every paired difference.
    const best = r.policies.reduce((b, x) => (x.online.cost < b.online.cost ? x : b));
    expect(r.best.label).toBe(best.label);
    expect(best.vsBest).toEqual({ diff: 0, interval: [0, 0] });
    for (const x of r.policies) {
      expect(x.vsBest.diff).toBeCloseTo(x.online.cost - best.online.cost, 9);
      expect(x.vsBest.interval![0]).toBeLessThanOrEqual(x.vsBest.diff + 1e-6);
      expect(x.vsBest.interval![1]).toBeGreaterThanOrEqual(x.vsBest.diff - 1e-6);
    }
    // Per-bucket costs add up to each policy's cost and the hindsight's.
    r.buckets.policies.forEach((b, i) => expect(b.reduce((a, c) => a + c, 0)).toBeCloseTo(r.policies[i]!.online.cost, 6));
    expect(r.buckets.hindsight.reduce((a, c) => a + c, 0)).toBeCloseTo(r.hindsight.cost, 6);
  });

  it('recommends the cheapest policy with its margin over the runner-up and whether the interval clears zero', async () => {
    const r = await runSweep([week], config, { windows: [2000, 60_000], reserves: [null, 2], threads: 1, bootstrap: 300, seed: 1 });
    const rec = r.recommendation;
    expect(rec.label).toBe(r.best.label);
    const others = r.policies.filter((p) => p.label !== rec.label).sort((a, b) => a.online.cost - b.online.cost);
    expect(rec.runnerUp).toBe(others[0]!.label);
    expect(rec.margin).toBeCloseTo(others[0]!.online.cost - r.best.cost, 9);
    expect(rec.marginInterval).toEqual(others[0]!.vsBest.interval);
    expect(rec.clear).toBe(rec.marginInterval![0] > 0);
    expect(rec.text).toContain(rec.label);
    expect(rec.text).toContain(rec.runnerUp!);
    const one = await runSweep([week], config, { windows: [5000], threads: 1, bootstrap: 0 });
    expect(one.recommendation).toMatchObject({ runnerUp: null, margin: null, clear: false });
  });

  it('outDir writes each policy\'s digest, equal to the digest of a separate replay with --out', async () => {
    const outDir = join(dir, 'sweep-digests');
    const r = await runSweep([week], config, { windows: [10_000], reserves: [4], threads: 1, bootstrap: 50, outDir });
    expect(r.policies[0]!.digest).toBe('policies/1.json');
    const run = join(dir, 'replay-digest');
    await runReplay([week], { ...config, windowMs: 10_000, reserve: 4 }, { outDir: run, threads: 0 });
    expect(JSON.parse(readFileSync(join(outDir, 'policies', '1.json'), 'utf8'))).toEqual(JSON.parse(readFileSync(join(run, 'digest.json'), 'utf8')));
  });

  it('checks its output directory before reading the log', async () => {
    const file = join(dir, 'a-file');
    writeFileSync(file, 'x');
    await expect(runSweep(['/nonexistent/log.jsonl'], config, { windows: [5000], outDir: join(file, 'sub') })).rejects.toMatchObject({ code: 'PAIRFLOW_ERR_OUTPUT_WRITE' });
    await expect(runSweep(['/nonexistent/log.jsonl'], config, { windows: [5000], commits: [] })).rejects.toMatchObject({ code: 'PAIRFLOW_ERR_CLI_OPTION' });
  });

  it('tells its phases as they start', async () => {
    const phases: string[] = [];
    await runSweep([week], config, { windows: [5000, 10_000], threads: 1, bootstrap: 20, onPhase: (p) => phases.push(p) });
    expect(phases).toEqual(['load', 'hindsight', 'policies', 'bootstrap']);
  });

  it('rejects an empty window list', async () => {
    const loaded = await loadLog([week], { metric: config.metric });
    await expect(sweepLoaded(loaded, config, { windows: [], threads: 1 })).rejects.toMatchObject({ code: 'PAIRFLOW_ERR_CLI_USAGE' });
  });
});
