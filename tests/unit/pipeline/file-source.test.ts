/** The source contract (tests/contract/sources.ts) for log files: `fileSource` over `loadLog`. */
import { mkdtempSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { describe, expect, it } from 'vitest';
import { loadLog } from '../../../src/consume/index.js';
import { fileSource } from '../../../src/pipeline/drive.js';
import { sourceContract } from '../../contract/sources.js';

function writeLog(lines: readonly string[]): string {
  const file = join(mkdtempSync(join(tmpdir(), 'pairflow-contract-')), 'log.jsonl');
  writeFileSync(file, lines.join('\n') + '\n');
  return file;
}

describe('fileSource()', () => {
  sourceContract('file source', async (log) => fileSource(await loadLog([writeLog(log.lines)], { metric: log.config.metric, strict: false })));
  sourceContract('file source, drained', async (log) => fileSource(await loadLog([writeLog(log.lines)], { metric: log.config.metric, strict: false }), { drain: true }));

  it('with drain, lets each event go as it is read and leaves the log empty', async () => {
    const lines = Array.from({ length: 6 }, (_, i) => JSON.stringify({ type: i % 2 === 0 ? 'demand' : 'supply', id: `u${i}`, market: 'm', t: 1_000 * (6 - i), x: i, y: 0 }));
    const loaded = await loadLog([writeLog(lines)], { metric: 'euclidean' });
    const before = [...loaded.events];
    const seen: unknown[] = [];
    for await (const item of fileSource(loaded, { drain: true }).items()) {
      if (item.kind !== 'event') continue;
      seen.push(item.ev);
      // Read so far: gone from the log; still to come: there.
      expect(loaded.events.slice(0, seen.length).every((e) => e === undefined)).toBe(true);
      expect(loaded.events.slice(seen.length)).toEqual(before.slice(seen.length));
    }
    expect(seen).toEqual(before);
    expect(loaded.events).toEqual([]);
    // Without drain the log is left as it was.
    const kept = await loadLog([writeLog(lines)], { metric: 'euclidean' });
    for await (const _ of fileSource(kept).items());
    expect(kept.events).toHaveLength(6);
  });
});
