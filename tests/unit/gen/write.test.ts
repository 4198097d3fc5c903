import { createHash } from 'node:crypto';
import { existsSync, mkdtempSync, readdirSync, readFileSync, rmSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { gunzipSync } from 'node:zlib';
import avro from 'avsc';
import { afterAll, describe, expect, it } from 'vitest';
import { loadLog } from '../../../src/consume/index.js';
import { toJsonLine } from '../../../src/consume/schema.js';
import type { PairflowEvent } from '../../../src/model.js';
import { generateDay, generateEvents, syncMarkerFor } from '../../../src/gen/gen.js';
import { writeEventLog } from '../../../src/gen/write.js';

const dir = mkdtempSync(join(tmpdir(), 'pairflow-genwrite-'));
afterAll(() => rmSync(dir, { recursive: true, force: true }));

const sha = (path: string): string => createHash('sha256').update(readFileSync(path)).digest('hex');
/** sha256 of events as canonical JSON Lines, the checksum that does not depend on a zlib build. */
function canonicalSha(events: Iterable<PairflowEvent>): string {
  const h = createHash('sha256');
  for (const ev of events) h.update(`${toJsonLine(ev)}\n`);
  return h.digest('hex');
}
const SMALL = { scale: 0.01, seed: 77, days: 2 };

describe('writeEventLog()', () => {
  for (const format of ['jsonl', 'jsonl.gz', 'avro'] as const) {
    it(`writes byte-identical ${format} files for the same seed, which read back to the same events`, async () => {
      const a = join(dir, `a.${format}`);
      const b = join(dir, `b.${format}`);
      const wa = await writeEventLog(a, format, generateEvents(SMALL), { syncMarker: syncMarkerFor(SMALL.seed) });
      const wb = await writeEventLog(b, format, generateEvents(SMALL), { syncMarker: syncMarkerFor(SMALL.seed) });
      expect(sha(a)).toBe(sha(b));
      expect(wa.sha256).toBe(sha(a));
      expect(wa.bytes).toBe(readFileSync(a).length);
      expect(wb.events).toBe(wa.events);
      const expected = [...generateEvents(SMALL)];
      expect(wa.eventsSha256).toBe(canonicalSha(expected));
      expect(wa.events).toBe(expected.length);
      expect(wa.counts.demand + wa.counts.supply + wa.counts.withdrawDemand + wa.counts.withdrawSupply).toBe(expected.length);
      const back = await loadLog([a], { metric: 'haversine' });
      expect(back.rejects).toEqual([]);
      expect(back.events.map((e) => e.event)).toEqual(expected);
      // No temporary file is left beside the output.
      expect(readdirSync(dir).filter((f) => f.includes('.tmp-'))).toEqual([]);
    });
  }

  it('writes files that outside readers accept: gunzip, and avsc 5.7.9 file decoding', async () => {
    const gz = join(dir, 'ref.jsonl.gz');
    const av = join(dir, 'ref.avro');
    const evs = generateDay({ scale: 0.01, seed: 3 }, 0);
    await writeEventLog(gz, 'jsonl.gz', evs);
    await writeEventLog(av, 'avro', evs, { syncMarker: syncMarkerFor(3) });
    const lines = gunzipSync(readFileSync(gz)).toString('utf8').trimEnd().split('\n');
    expect(lines.map((l) => (JSON.parse(l) as { id: string }).id)).toEqual(evs.map((e) => e.id));
    const ids: string[] = [];
    await new Promise<void>((resolve, reject) => {
      avro.createFileDecoder(av).on('data', (r: { id: string }) => ids.push(r.id)).on('end', resolve).on('error', reject);
    });
    expect(ids).toEqual(evs.map((e) => e.id));
    // The sync marker is the seeded one: the file's last 16 bytes (Avro 1.11 container layout).
    expect(new Uint8Array(readFileSync(av).subarray(-16))).toEqual(syncMarkerFor(3));
  });

  it('throws PAIRFLOW_ERR_OUTPUT_WRITE when the file cannot be created', async () => {
    const path = join(dir, 'no-such-dir', 'x.jsonl');
    await expect(writeEventLog(path, 'jsonl', generateDay({ scale: 0.001 }, 0))).rejects.toMatchObject({ code: 'PAIRFLOW_ERR_OUTPUT_WRITE' });
    expect(existsSync(path)).toBe(false);
  });
});

describe('the bundled sample day in replay-logs/', () => {
  const root = new URL('../../../replay-logs/', import.meta.url);
  const manifest = JSON.parse(readFileSync(new URL('MANIFEST.json', root), 'utf8')) as {
    files: Record<string, { sha256: string; eventsSha256: string; bytes: number; events: number; seed: number; scale: number; days: number; markets: number; start: string; shuffle: boolean; coords: 'latlon' | 'xy' }>;
  };
  const gzPath = new URL('demo-day.jsonl.gz', root).pathname;
  const avroPath = new URL('demo-day.avro', root).pathname;

  it('matches the sha256 and size recorded in MANIFEST.json', () => {
    for (const name of ['demo-day.jsonl.gz', 'demo-day.avro']) {
      const entry = manifest.files[name]!;
      const path = new URL(name, root).pathname;
      expect(sha(path), name).toBe(entry.sha256);
      expect(readFileSync(path).length, name).toBe(entry.bytes);
    }
  });

  it('reads back from both formats with zero rejects and the same events, as many as the manifest says', async () => {
    const gz = await loadLog([gzPath], { metric: 'haversine' });
    const av = await loadLog([avroPath], { metric: 'haversine' });
    expect(gz.rejects).toEqual([]);
    expect(av.rejects).toEqual([]);
    expect(gz.events.length).toBe(manifest.files['demo-day.jsonl.gz']!.events);
    expect(canonicalSha(gz.events.map((e) => e.event))).toBe(manifest.files['demo-day.jsonl.gz']!.eventsSha256);
    expect(canonicalSha(av.events.map((e) => e.event))).toBe(manifest.files['demo-day.avro']!.eventsSha256);
  });

  it('is what the generator makes today from the manifest options', () => {
    // Events, not compressed bytes: gzip and deflate output may differ between zlib builds.
    const made = new Map<string, string>();
    for (const name of ['demo-day.jsonl.gz', 'demo-day.avro']) {
      const e = manifest.files[name]!;
      const key = JSON.stringify([e.seed, e.scale, e.days, e.markets, e.start, e.shuffle, e.coords]);
      if (!made.has(key)) made.set(key, canonicalSha(generateEvents({ seed: e.seed, scale: e.scale, days: e.days, markets: e.markets, startMs: Date.parse(e.start), shuffle: e.shuffle, coords: e.coords })));
      expect(made.get(key), name).toBe(e.eventsSha256);
    }
  });
});
