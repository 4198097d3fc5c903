import { readdirSync, readFileSync, statSync } from 'node:fs';
import { join } from 'node:path';
import { describe, expect, it } from 'vitest';
import { readEnv } from '../../src/env.js';

const src = new URL('../../src/', import.meta.url).pathname;
function files(dir: string): string[] {
  return readdirSync(dir).flatMap((name) => {
    const path = join(dir, name);
    return statSync(path).isDirectory() ? files(path) : path.endsWith('.ts') ? [path] : [];
  });
}

describe('readEnv()', () => {
  it('is the only place in src/ that reads process.env (docs/principles.md rule 7)', () => {
    // Code, not comments: a comment may say where the variables are read.
    const code = (f: string): string => readFileSync(f, 'utf8').split('\n').filter((l) => !/^\s*(\*|\/\/|\/\*)/.test(l)).join('\n');
    const readers = files(src).filter((f) => code(f).includes('process.env')).map((f) => f.slice(src.length));
    expect(readers).toEqual(['env.ts']);
  });

  it('reads PAIRFLOW_DEBUG, CI and the broker list with their defaults', () => {
    expect(readEnv({})).toMatchObject({ debug: false, ci: false, kafkaBrokers: undefined, logLevel: 'warn' });
    expect(readEnv({ PAIRFLOW_DEBUG: '1', CI: 'true', KAFKA_BROKERS: 'h:1' })).toMatchObject({ debug: true, ci: true, kafkaBrokers: 'h:1' });
  });
});
