import { createHash } from 'node:crypto';
import { existsSync, mkdtempSync, readFileSync, readdirSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { describe, expect, it, vi } from 'vitest';
import { toJsonLine } from '../../../src/consume/index.js';
import { RUN_FILES } from '../../../src/emit/index.js';
import { DEFAULT_CONFIG, type PairflowConfig } from '../../../src/model.js';
import { generateEvents } from '../../../src/gen/gen.js';
import { solveHindsight } from '../../../src/hindsight/hindsight.js';
import { runReplay, type ReplaySummary } from '../../../src/replay/run.js';
import { formatReplaySummary } from '../../../src/replay/summary.js';
import { MAX_REACH_KM, validateConfig } from '../../../src/config.js';
import { runPythonJson, scipyVersion } from '../../helpers/python.js';
import { mulberry32 } from '../../helpers/random.js';

// The real hindsight, watched: what the replay asks of it.
vi.mock('../../../src/hindsight/hindsight.js', async (importOriginal) => {
  const actual = await importOriginal<typeof import('../../../src/hindsight/hindsight.js')>();
  return { ...actual, solveHindsight: vi.fn(actual.solveHindsight) };
});

const tmp = (): string => mkdtempSync(join(tmpdir(), 'pairflow-replay-'));

/** A small generated day (the demo city at 1% scale) plus three bad lines. */
function writeLog(dir: string, seed = 3, bad = true): string {
  const lines = [...generateEvents({ days: 1, seed, scale: 0.01 })].map(toJsonLine);
  if (bad) lines.splice(5, 0, '{"type":"supply","market":"m1","t":1}', 'not json', '{"type":"teleport","id":"x","market":"m","t":5}');
  const path = join(dir, 'day.jsonl');
  writeFileSync(path, lines.join('\n') + '\n');
  return path;
}

const config: PairflowConfig = { ...DEFAULT_CONFIG, windowMs: 10_000 };

/** The summary without what wall time decides. */
function stable(s: ReplaySummary): Omit<ReplaySummary, 'timings'> {
  const { timings: _t, ...rest } = s;
  return rest;
}

describe('runReplay() with extreme but valid configs (issue #10 item 11)', () => {
  it('gives a result with a regret ≥ 0 — the hindsight a true lower bound — at the edges of every range (seeded)', async () => {
    const seed = 1011;
    const rand = mulberry32(seed);
    const dir = tmp();
    const latlon = writeLog(dir, 5, false);
    const xyPath = join(dir, 'xy.jsonl');
    writeFileSync(xyPath, [...generateEvents({ days: 1, seed: 5, scale: 0.005, coords: 'xy' })].map(toJsonLine).join('\n') + '\n');
    const pick = <T>(xs: readonly T[]): T => xs[Math.floor(rand() * xs.length)]!;
    for (let i = 0; i < 12; i++) {
      const metric = pick(['haversine', 'euclidean'] as const);
      const speedKmh = pick([0.001, 1, 25, 900, 10_000]);
      const reach = MAX_REACH_KM[metric] * pick([1e-6, 0.01, 0.5, 0.999, 1]);
      const raw = {
        metric, speedKmh, maxTravelMin: Math.min(1e6, Math.floor((reach * 60) / speedKmh)),
        waitWeight: pick([0, 1, 1e6]), abandonPenalty: pick([0, 30, 1e9]), reserve: pick([null, 0, 1e9]),
        demandPatienceMin: pick([0, 10, 1e7]), supplyPatienceMin: pick([0, 30, 1e7]), windowMs: pick([1000, 5000, 3_600_000]),
      };
      const checked = validateConfig(raw);
      expect('config' in checked, `seed ${seed}: ${JSON.stringify(raw)}`).toBe(true);
      if (!('config' in checked)) continue;
      const s = await runReplay([metric === 'euclidean' ? xyPath : latlon], checked.config, { threads: 0 });
      expect(s.regret!, `seed ${seed} case ${i}: ${JSON.stringify(raw)}`).toBeGreaterThanOrEqual(0);
      expect(Number.isFinite(s.online.cost) && Number.isFinite(s.hindsight!.cost), `seed ${seed} case ${i}`).toBe(true);
    }
  });
});

describe('runReplay()', () => {
  it('returns the SPEC §6 summary keys with their types', async () => {
    const dir = tmp();
    const s = await runReplay([writeLog(dir)], config, { hindsight: true, threads: 0 });
    expect(s.windowMs).toBe(10_000);
    for (const k of ['demandUnits', 'supplyUnits', 'rejects'] as const) expect(Number.isInteger(s[k]), k).toBe(true);
    for (const k of ['cost', 'matched', 'abandoned', 'meanWaitMin', 'p95WaitMin'] as const) expect(typeof s.online[k], k).toBe('number');
    for (const k of ['cost', 'matched', 'abandoned'] as const) expect(typeof s.hindsight![k], k).toBe('number');
    expect(typeof s.regret).toBe('number');
    expect(typeof s.ratio).toBe('number');
    expect(s.rejects).toBe(3);
    expect(s.regret).toBeCloseTo(s.online.cost - s.hindsight!.cost, 9);
    expect(s.ratio).toBeCloseTo(s.online.cost / s.hindsight!.cost, 12);
    expect(s.online.matched + s.online.abandoned).toBe(s.demandUnits);
    expect(s.hindsight!.cost).toBeLessThanOrEqual(s.online.cost);
    expect(s.online.p95WaitMin!).toBeGreaterThanOrEqual(0);
    expect(Number.isFinite(s.online.p95WaitMin)).toBe(true);
  });

  it('tells the hindsight that its online pass takes a core of its own, and lets go of it when the pass ends', async () => {
    const solve = vi.mocked(solveHindsight);
    solve.mockClear();
    const s = await runReplay([writeLog(tmp())], config, { hindsight: true, threads: 0 });
    expect(s.hindsight).not.toBeNull();
    expect(solve).toHaveBeenCalledTimes(1);
    const holds = solve.mock.calls[0]![2]!.callerHolds!;
    expect(holds.core).toBe(true);
    // Settled by the time the replay returns (a pending promise would lose this race).
    expect(await Promise.race([holds.until.then(() => 'settled'), new Promise((r) => setTimeout(() => r('pending'), 0))])).toBe('settled');
  });

  it('timings.cpuMs is the CPU the process spent over the whole run, load included: its last reading less its first', async () => {
    const path = writeLog(tmp());
    const readings: number[] = [];
    const cpuNow = (): number => {
      readings.push(readings.length === 0 ? 500 : 2000);
      return readings[readings.length - 1]!;
    };
    const s = await runReplay([path], config, { threads: 0, cpuNow });
    expect(readings).toEqual([500, 2000]);
    expect(s.timings.cpuMs).toBe(1500);
    // The real clock: all of the process's threads, so never more than the process
    // spent around the call (other test files' threads included).
    const before = process.cpuUsage();
    const real = await runReplay([path], config, { threads: 0 });
    const spent = process.cpuUsage(before);
    expect(real.timings.cpuMs).toBeGreaterThan(0);
    expect(real.timings.cpuMs).toBeLessThanOrEqual((spent.user + spent.system) / 1000 + 1);
    expect(formatReplaySummary(real)).toMatch(/total [\d.]+ m?s \(CPU [\d.]+ m?s, all threads\)/);
  });

  it('waits are (decidedAt − demandT) in minutes over the assignments; p95 as numpy.quantile (linear)', async () => {
    const dir = tmp();
    const out = join(dir, 'run');
    const s = await runReplay([writeLog(dir)], config, { outDir: out, threads: 0 });
    const rows = readFileSync(join(out, RUN_FILES.assignments), 'utf8').trimEnd().split('\n').map((l) => JSON.parse(l) as { decidedAt: number; demandT: number; cost: number });
    expect(rows.length).toBe(s.online.matched);
    const waits = rows.map((r) => (r.decidedAt - r.demandT) / 60_000);
    expect(s.online.meanWaitMin).toBeCloseTo(waits.reduce((a, b) => a + b, 0) / waits.length, 9);
    const expired = readFileSync(join(out, RUN_FILES.expired), 'utf8').trimEnd().split('\n').map((l) => JSON.parse(l) as { side: string; cost: number });
    const recorded = rows.reduce((a, r) => a + r.cost, 0) + expired.filter((e) => e.side === 'demand').reduce((a, e) => a + e.cost, 0);
    expect(recorded).toBeCloseTo(s.online.cost, 6);
    if (scipyVersion() !== null) {
      // Outside check: numpy.quantile, default method "linear", in a Python subprocess.
      const p95 = runPythonJson<number>('import json, sys, numpy as np\nprint(json.dumps(float(np.quantile(np.array(json.load(sys.stdin)), 0.95))))', waits);
      expect(s.online.p95WaitMin).toBeCloseTo(p95, 9);
    }
  });

  it('with no matched pair the waits are null and every demand is abandoned at P', async () => {
    const dir = tmp();
    const t = 1_767_225_600_000;
    const path = join(dir, 'lonely.jsonl');
    writeFileSync(path, [
      { type: 'demand', id: 'd1', market: 'm', t, lat: 0, lon: 0 },
      { type: 'demand', id: 'd2', market: 'm', t: t + 1, lat: 0, lon: 0 },
      { type: 'supply', id: 's1', market: 'm', t, lat: 10, lon: 10 },
    ].map((e) => JSON.stringify(e)).join('\n'));
    const s = await runReplay([path], config, { threads: 0 });
    expect(s.online).toEqual({ cost: 60, matched: 0, abandoned: 2, meanWaitMin: null, p95WaitMin: null });
    expect(s.hindsight).toMatchObject({ cost: 60, matched: 0, abandoned: 2 });
    expect(s.regret).toBe(0);
    expect(s.ratio).toBe(1);
  });

  it('two replays of the same log give identical run directories (timings aside); the manifest checksums match the inputs', async () => {
    const dir = tmp();
    const log = writeLog(dir, 5);
    const cfg = { ...config, commit: 'due' as const };
    await runReplay([log], cfg, { outDir: join(dir, 'a'), threads: 0, command: ['test'] });
    await runReplay([log], cfg, { outDir: join(dir, 'b'), threads: 0, command: ['test'] });
    const files = readdirSync(join(dir, 'a')).sort();
    expect(files).toEqual(Object.values(RUN_FILES).sort());
    expect(readdirSync(join(dir, 'b')).sort()).toEqual(files);
    const noTimings = (name: string, text: string): unknown => {
      if (name === RUN_FILES.summary || name === RUN_FILES.manifest) {
        const { timings: _t, ...rest } = JSON.parse(text) as Record<string, unknown>;
        return rest;
      }
      if (name === RUN_FILES.epochs) return text.trimEnd().split('\n').map((l) => ({ ...JSON.parse(l), solveMs: 0 }));
      return text;
    };
    for (const f of files) {
      const a = readFileSync(join(dir, 'a', f), 'utf8');
      const b = readFileSync(join(dir, 'b', f), 'utf8');
      expect(noTimings(f, b), f).toEqual(noTimings(f, a));
    }
    expect(readFileSync(join(dir, 'a', RUN_FILES.assignments), 'utf8').length).toBeGreaterThan(0);
    const manifest = JSON.parse(readFileSync(join(dir, 'a', RUN_FILES.manifest), 'utf8')) as { inputs: { file: string; sha256: string; bytes: number }[]; config: PairflowConfig };
    // Outside check: sha256 of the file's bytes by node:crypto (OpenSSL), independent of the reader.
    expect(manifest.inputs).toHaveLength(1);
    expect(manifest.inputs[0]!.sha256).toBe(createHash('sha256').update(readFileSync(log)).digest('hex'));
    expect(manifest.inputs[0]!.bytes).toBe(readFileSync(log).length);
    expect(manifest.config).toEqual(cfg);
    const rejects = readFileSync(join(dir, 'a', RUN_FILES.rejects), 'utf8').trimEnd().split('\n').map((l) => JSON.parse(l) as { line: number });
    expect(rejects.map((r) => r.line)).toEqual([6, 7, 8]);
  });

  it('reusing a hindsight result gives the same summary as computing it', async () => {
    const dir = tmp();
    const log = writeLog(dir, 8, false);
    const computed = await runReplay([log], config, { threads: 0 });
    const { loadLog } = await import('../../../src/consume/index.js');
    const loaded = await loadLog([log], { metric: config.metric });
    const h = await solveHindsight(loaded.events, config, { threads: 0 });
    const reused = await runReplay([log], config, { hindsight: h });
    expect(stable(reused)).toEqual(stable(computed));
    const skipped = await runReplay([log], config, { hindsight: false });
    expect(skipped.hindsight).toBeNull();
    expect(skipped.regret).toBeNull();
    expect(skipped.online).toEqual(computed.online);
  });

  it('a log split over two files (in any order) gives the summary of the whole log', async () => {
    const dir = tmp();
    const whole = writeLog(dir, 13, false);
    const lines = readFileSync(whole, 'utf8').trimEnd().split('\n');
    // Odd and even lines: each file interleaves in time with the other, so the merge order matters.
    const odd = join(dir, 'odd.jsonl');
    const even = join(dir, 'even.jsonl');
    writeFileSync(odd, lines.filter((_, i) => i % 2 === 1).join('\n') + '\n');
    writeFileSync(even, lines.filter((_, i) => i % 2 === 0).join('\n') + '\n');
    const a = stable(await runReplay([whole], config, { threads: 0 }));
    const b = stable(await runReplay([even, odd], config, { threads: 0 }));
    const c = stable(await runReplay([odd, even], config, { threads: 0 }));
    expect({ ...b, inputs: null, files: null }).toEqual({ ...a, inputs: null, files: null });
    expect({ ...c, inputs: null, files: null }).toEqual({ ...a, inputs: null, files: null });
    expect(b.files.map((f) => f.lines)).toEqual([Math.ceil(lines.length / 2), Math.floor(lines.length / 2)]);
    expect(b.inputs).toEqual(['even.jsonl', 'odd.jsonl']);
  });

  it('strict: the first reject is PAIRFLOW_ERR_INPUT_REJECT naming file and line', async () => {
    const dir = tmp();
    const log = writeLog(dir);
    await expect(runReplay([log], config, { strict: true, hindsight: false })).rejects.toMatchObject({
      code: 'PAIRFLOW_ERR_INPUT_REJECT', params: { file: log, line: 6 },
    });
  });

  it('without a run directory, rejectsFile still keeps every reject', async () => {
    const dir = tmp();
    const seen: number[] = [];
    const file = join(dir, 'rejects.jsonl');
    const s = await runReplay([writeLog(dir)], config, { hindsight: false, rejectsFile: file, onReject: (r) => seen.push(r.pos.line) });
    expect(s.rejects).toBe(3);
    expect(seen).toEqual([6, 7, 8]);
    expect(readFileSync(file, 'utf8').trimEnd().split('\n')).toHaveLength(3);
  });

  const demo = new URL('../../../replay-logs/', import.meta.url).pathname;
  const haveDemo = existsSync(join(demo, 'demo-day.jsonl.gz')) && existsSync(join(demo, 'demo-day.avro'));
  it.skipIf(!haveDemo && process.env.CI !== 'true')('replaying the bundled demo day from .jsonl.gz and from .avro gives the same summary', async () => {
    const a = await runReplay([join(demo, 'demo-day.jsonl.gz')], { ...config, windowMs: 30_000 }, { hindsight: false });
    const b = await runReplay([join(demo, 'demo-day.avro')], { ...config, windowMs: 30_000 }, { hindsight: false });
    const { inputs: ia, files: fa, ...sa } = stable(a);
    const { inputs: ib, files: fb, ...sb } = stable(b);
    expect(fb.map((f) => ({ ...f, file: '', bytes: 0 }))).toEqual(fa.map((f) => ({ ...f, file: '', bytes: 0 })));
    expect(ia).toEqual(['demo-day.jsonl.gz']);
    expect(ib).toEqual(['demo-day.avro']);
    expect(sb).toEqual(sa);
    expect(sa.rejects).toBe(0);
    expect(sa.demandUnits).toBeGreaterThan(0);
  });
});
