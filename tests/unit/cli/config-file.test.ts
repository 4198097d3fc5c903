import { mkdtempSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { describe, expect, it } from 'vitest';
import { readConfigFile, resolveConfig } from '../../../src/cli/config-file.js';
import { DEFAULT_CONFIG } from '../../../src/model.js';

const dir = mkdtempSync(join(tmpdir(), 'pairflow-config-'));
const file = (name: string, text: string): string => {
  const p = join(dir, name);
  writeFileSync(p, text);
  return p;
};

describe('readConfigFile()', () => {
  it('applies the SPEC §2 defaults to the fields it does not set', async () => {
    const c = await readConfigFile(file('ok.json', '{"windowMs": 10000, "commit": "due"}'));
    expect(c).toEqual({ ...DEFAULT_CONFIG, windowMs: 10_000, commit: 'due' });
  });

  it('a bad field is PAIRFLOW_ERR_CONFIG_INVALID naming the file and the field', async () => {
    const p = file('bad.json', '{"speedKmh": -3}');
    await expect(readConfigFile(p)).rejects.toMatchObject({ code: 'PAIRFLOW_ERR_CONFIG_INVALID', params: { file: p, field: 'speedKmh' } });
    const q = file('unknown.json', '{"windowMS": 5}');
    await expect(readConfigFile(q)).rejects.toMatchObject({ code: 'PAIRFLOW_ERR_CONFIG_INVALID', params: { file: q, field: 'windowMS' } });
  });

  it('a repeated field is PAIRFLOW_ERR_CONFIG_INVALID naming it; a directory is PAIRFLOW_ERR_INPUT_UNREADABLE', async () => {
    const p = file('twice.json', '{"windowMs": 10000, "speedKmh": 20, "windowMs": 2000}');
    await expect(readConfigFile(p)).rejects.toMatchObject({ code: 'PAIRFLOW_ERR_CONFIG_INVALID', params: { field: 'windowMs' } });
    await expect(readConfigFile(dir)).rejects.toMatchObject({ code: 'PAIRFLOW_ERR_INPUT_UNREADABLE' });
  });

  it('accepts a byte-order mark, as every other input does', async () => {
    const c = await readConfigFile(file('bom.json', '\uFEFF{"windowMs": 10000}'));
    expect(c.windowMs).toBe(10_000);
  });

  it('bad JSON is PAIRFLOW_ERR_CONFIG_INVALID and a missing file PAIRFLOW_ERR_INPUT_NOT_FOUND', async () => {
    const p = file('syntax.json', '{"windowMs": ');
    await expect(readConfigFile(p)).rejects.toMatchObject({ code: 'PAIRFLOW_ERR_CONFIG_INVALID', params: { file: p } });
    await expect(readConfigFile(join(dir, 'nope.json'))).rejects.toMatchObject({ code: 'PAIRFLOW_ERR_INPUT_NOT_FOUND' });
  });
});

describe('resolveConfig()', () => {
  it('--window overrides the file\'s windowMs', async () => {
    const p = file('w.json', '{"windowMs": 10000, "abandonPenalty": 40}');
    expect(await resolveConfig({ configFile: p, windowMs: 2000 })).toMatchObject({ windowMs: 2000, abandonPenalty: 40 });
    expect(await resolveConfig({ configFile: p })).toMatchObject({ windowMs: 10_000 });
    expect(await resolveConfig({})).toEqual(DEFAULT_CONFIG);
  });
});
