import { existsSync, mkdirSync, mkdtempSync, readFileSync, readdirSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { basename, join } from 'node:path';
import { describe, expect, it } from 'vitest';
import { ASSIGNMENT_CSV_HEADER, buildManifest, checkOutputPath, openRunDir, RUN_FILES, TextFileWriter } from '../../../src/emit/index.js';
import { DEFAULT_CONFIG } from '../../../src/model.js';
import type { AssignmentRecord, EpochRecord, ExpiryRecord } from '../../../src/ports.js';

const tmp = (): string => mkdtempSync(join(tmpdir(), 'pairflow-emit-'));

const assignment = (i: number): AssignmentRecord => ({
  market: i % 2 ? 'north, "old town"' : 'south', epoch: 5000 * (i + 1), demandId: `d${i}`, supplyId: `s${i}`,
  demandT: 5000 * i + 100, supplyT: 10, decidedAt: 5000 * (i + 1), travelMin: 1.25, waitMin: (4900) / 60000, cost: 1.25 + 4900 / 60000,
});
const expiry: ExpiryRecord = { market: 'south', side: 'demand', id: 'd9', t: 1, end: 600_001, epoch: 605_000, cost: 30 };
const epoch: EpochRecord = {
  market: 'south', epoch: 5000, poolDemand: 2, poolSupply: 3, candidatePairs: 4, matched: 1, tentative: 0, solveMs: 0.2,
  warm: false, augmentations: 2, primalCost: 31.3, dualObjective: 31.3, priceMin: -1, priceMean: -0.5, priceMax: 0,
};

describe('openRunDir()', () => {
  it('streams every record to its file and writes summary and manifest whole', async () => {
    const dir = join(tmp(), 'nested', 'run');
    const sink = await openRunDir(dir);
    for (let i = 0; i < 3; i++) sink.assignment(assignment(i));
    sink.expiry(expiry);
    sink.epoch(epoch);
    sink.reject({ pos: { file: 'a.avro', line: 7, block: 0, record: 6 }, reason: 'missing id', raw: '{"type":"supply"}' });
    await sink.close();
    await sink.writeJson(RUN_FILES.summary, { windowMs: 5000 });
    expect(existsSync(dir)).toBe(false); // written aside until committed
    await sink.commit();
    expect(readdirSync(dir).sort()).toEqual([
      'assignments.csv', 'assignments.jsonl', 'epochs.jsonl', 'expired.jsonl', 'rejects.jsonl', 'summary.json',
    ]);
    const lines = readFileSync(join(dir, RUN_FILES.assignments), 'utf8').trimEnd().split('\n').map((l) => JSON.parse(l));
    expect(lines).toEqual([0, 1, 2].map(assignment));
    const csv = readFileSync(join(dir, RUN_FILES.assignmentsCsv), 'utf8').split('\r\n');
    expect(csv[0]).toBe(ASSIGNMENT_CSV_HEADER.join(','));
    expect(csv[2]).toBe(`10000,"north, ""old town""",d1,s1,1970-01-01T00:00:10.000Z,1.25,${4900 / 60000},${1.25 + 4900 / 60000}`);
    expect(csv).toHaveLength(5); // header, 3 rows, and the empty string after the last CRLF
    expect(JSON.parse(readFileSync(join(dir, RUN_FILES.expired), 'utf8'))).toEqual(expiry);
    expect(JSON.parse(readFileSync(join(dir, RUN_FILES.epochs), 'utf8'))).toEqual(epoch);
    expect(JSON.parse(readFileSync(join(dir, RUN_FILES.rejects), 'utf8'))).toEqual({
      file: 'a.avro', line: 7, block: 0, record: 6, reason: 'missing id', raw: '{"type":"supply"}',
    });
    expect(JSON.parse(readFileSync(join(dir, RUN_FILES.summary), 'utf8'))).toEqual({ windowMs: 5000 });
  });

  it('replaces an earlier run directory whole on commit; abort leaves it as it was and nothing beside it', async () => {
    const base = tmp();
    const dir = join(base, 'run');
    const first = await openRunDir(dir);
    first.assignment(assignment(0));
    await first.close();
    await first.writeJson(RUN_FILES.summary, { run: 1 });
    await first.writeJson(RUN_FILES.manifest, { run: 1 });
    await first.commit();

    const failed = await openRunDir(dir);
    failed.reject({ pos: { file: 'x.jsonl', line: 1 }, reason: 'bad', raw: '' });
    expect(readdirSync(base).sort()).toEqual(['run', basename(failed.workDir)]);
    expect(basename(failed.workDir)).toMatch(/^run\.partial-/); // a killed run leaves a directory that says so
    await failed.abort();
    expect(readdirSync(base)).toEqual(['run']);
    expect(JSON.parse(readFileSync(join(dir, RUN_FILES.summary), 'utf8'))).toEqual({ run: 1 });
    expect(readFileSync(join(dir, RUN_FILES.rejects), 'utf8')).toBe('');

    const second = await openRunDir(dir);
    await second.close();
    await second.writeJson(RUN_FILES.summary, { run: 2 });
    await second.commit();
    expect(readdirSync(base)).toEqual(['run']);
    expect(readdirSync(dir)).not.toContain(RUN_FILES.manifest); // nothing of the first run is left beside the second
    expect(readFileSync(join(dir, RUN_FILES.assignments), 'utf8')).toBe('');
  });

  it('refuses a directory holding files it did not write, and anything under /proc or /sys', async () => {
    const dir = join(tmp(), 'mine');
    mkdirSync(dir);
    writeFileSync(join(dir, 'notes.txt'), 'keep me');
    await expect(openRunDir(dir)).rejects.toMatchObject({ code: 'PAIRFLOW_ERR_OUTPUT_WRITE', params: { file: dir } });
    expect(readFileSync(join(dir, 'notes.txt'), 'utf8')).toBe('keep me');
    // Node's recursive mkdir spins forever under /proc: refused before any mkdir.
    for (const path of ['/proc/pairflow-run/a', '/proc', '/sys/kernel/pairflow']) {
      await expect(openRunDir(path)).rejects.toMatchObject({ code: 'PAIRFLOW_ERR_OUTPUT_WRITE' });
      await expect(checkOutputPath(path)).rejects.toMatchObject({ code: 'PAIRFLOW_ERR_OUTPUT_WRITE' });
    }
    await expect(checkOutputPath(join(tmp(), 'x', 'y'))).resolves.toBeUndefined();
  });

  it('raises PAIRFLOW_ERR_OUTPUT_WRITE when the directory cannot be created', async () => {
    const base = tmp();
    const file = join(base, 'a-file');
    writeFileSync(file, 'x');
    await expect(openRunDir(join(file, 'run'))).rejects.toMatchObject({ code: 'PAIRFLOW_ERR_OUTPUT_WRITE' });
  });
});

describe('TextFileWriter', () => {
  it('reports backpressure and drains it, keeping every line in order', async () => {
    const path = join(tmp(), 'big.jsonl');
    const w = new TextFileWriter(path, { chunkChars: 1024 });
    let sawPressure = false;
    const n = 20_000;
    for (let i = 0; i < n; i++) {
      w.write(`{"i":${i},"pad":"${'x'.repeat(40)}"}\n`);
      if (w.pressure) {
        sawPressure = true;
        await w.drain();
        expect(w.pressure).toBe(false);
      }
    }
    await w.close();
    expect(sawPressure).toBe(true);
    const lines = readFileSync(path, 'utf8').trimEnd().split('\n');
    expect(lines).toHaveLength(n);
    expect(lines.every((l, i) => (JSON.parse(l) as { i: number }).i === i)).toBe(true);
  });

  it.skipIf(!existsSync('/dev/full'))('close() rejects naming the file when the last buffered write fails (a full device)', async () => {
    // The failed write reports its error after end()'s callback: waiting for that alone lost it.
    for (const lines of [1, 5000]) {
      const w = new TextFileWriter('/dev/full', { chunkChars: 1 << 20 });
      for (let i = 0; i < lines; i++) w.write(`{"i":${i}}\n`);
      await expect(w.close()).rejects.toMatchObject({ code: 'PAIRFLOW_ERR_OUTPUT_WRITE', params: { file: '/dev/full', detail: 'ENOSPC' } });
    }
  });

  it('close() rejects with PAIRFLOW_ERR_OUTPUT_WRITE when the file cannot be opened', async () => {
    const w = new TextFileWriter(join(tmp(), 'missing-dir', 'x.jsonl'));
    w.write('a\n');
    await expect(w.close()).rejects.toMatchObject({ code: 'PAIRFLOW_ERR_OUTPUT_WRITE' });
  });
});

describe('buildManifest()', () => {
  it('records versions, the command, inputs by checksum and the full config', () => {
    const pkg = JSON.parse(readFileSync(new URL('../../../package.json', import.meta.url), 'utf8')) as { version: string };
    const m = buildManifest({
      command: ['pairflow', 'replay', 'x.jsonl'],
      inputs: [{ file: 'x.jsonl', bytes: 3, sha256: 'ab', lines: 1 }],
      config: DEFAULT_CONFIG,
      options: { warm: true },
      outputs: Object.values(RUN_FILES),
    });
    expect(m.pairflow).toBe(pkg.version);
    expect(m.node).toBe(process.version);
    expect(m.config).toEqual(DEFAULT_CONFIG);
    expect(Object.keys(m.config).sort()).toEqual(Object.keys(DEFAULT_CONFIG).sort());
    expect(m.inputs[0]!.sha256).toBe('ab');
    expect(m.command).toEqual(['pairflow', 'replay', 'x.jsonl']);
  });
});
