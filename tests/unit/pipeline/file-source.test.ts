/** The source contract (tests/contract/sources.ts) for log files: `fileSource` over `loadLog`. */
import { mkdtempSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { describe } from 'vitest';
import { loadLog } from '../../../src/consume/index.js';
import { fileSource } from '../../../src/pipeline/drive.js';
import { sourceContract } from '../../contract/sources.js';

describe('fileSource()', () => {
  sourceContract('file source', async (log) => {
    const file = join(mkdtempSync(join(tmpdir(), 'pairflow-contract-')), 'log.jsonl');
    writeFileSync(file, log.lines.join('\n') + '\n');
    return fileSource(await loadLog([file], { metric: log.config.metric, strict: false }));
  });
});
