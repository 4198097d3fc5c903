/**
 * README's reference is checked against the commands' own definitions, as the error
 * registry is checked against docs/errors.md (issue #10 item 3: docs and code
 * disagreed). A changed option, default or config range fails here until README says so.
 */
import { readFileSync } from 'node:fs';
import type { Command, Option } from 'commander';
import { describe, expect, it } from 'vitest';
import { buildProgram } from '../../../src/cli/main.js';
import { CONFIG_RANGES, intervalOf } from '../../../src/config.js';
import { ERROR_CODES } from '../../../src/errors.js';
import { DEFAULT_CONFIG } from '../../../src/model.js';

const readme = readFileSync(new URL('../../../README.md', import.meta.url), 'utf8');
const errorsDoc = readFileSync(new URL('../../../docs/errors.md', import.meta.url), 'utf8');
const program = buildProgram();
const command = (name: string): Command => program.commands.find((c) => c.name() === name)!;
const longFlags = (cmd: Command): string[] => cmd.options.map((o: Option) => o.long!).filter((f) => f !== '--help').sort();

/** The README section of one command: from its `### \`pairflow NAME` heading to the next heading. */
function section(name: string): string {
  const at = readme.indexOf(`### \`pairflow ${name}`);
  expect(at, `README has no reference section for pairflow ${name}`).toBeGreaterThanOrEqual(0);
  const next = readme.slice(at + 4).search(/\n##/);
  return readme.slice(at, next < 0 ? undefined : at + 4 + next);
}

/** The rows of the option table of a section: flags of the first cell, and the default cell. */
function optionRows(text: string): { flags: string[]; defaultCell: string }[] {
  // An escaped pipe (`jsonl` \| `avro`) is part of a cell.
  return [...text.replaceAll('\\|', '¦').matchAll(/^\| (`--[^|]+) \| [^|]+ \| ([^|]+) \|/gm)].map((m) => ({
    flags: [...m[1]!.matchAll(/`(--[a-z-]+)/g)].map((f) => f[1]!),
    defaultCell: m[2]!.trim(),
  }));
}

describe('README reference', () => {
  it('documents every command the program registers, and no other', () => {
    const documented = [...readme.matchAll(/^### `pairflow ([a-z]+)/gm)].map((m) => m[1]!).sort();
    expect(documented).toEqual(program.commands.map((c) => c.name()).sort());
  });

  for (const name of program.commands.map((c) => c.name())) {
    it(`the option table of pairflow ${name} lists exactly its options, with their defaults`, () => {
      const text = section(name);
      const rows = optionRows(text);
      if (rows.length === 0) return; // no table: its heading names the options (see solve below)
      const tabled = rows.flatMap((r) => r.flags);
      // No phantom options; an option left out of the table is documented on a page the section points to.
      expect(tabled.filter((f) => !longFlags(command(name)).includes(f)), `${name}: options that do not exist`).toEqual([]);
      const pages = [...text.matchAll(/`(docs\/[a-z-]+\.md)`/g)].map((m) => readFileSync(new URL(`../../../${m[1]}`, import.meta.url), 'utf8'));
      const missing = longFlags(command(name)).filter((f) => !tabled.includes(f) && !pages.some((page) => page.includes(`\`${f}`)));
      expect(missing, `${name}: options documented nowhere`).toEqual([]);
      for (const opt of command(name).options) {
        const v = opt.defaultValue as unknown;
        if (typeof v !== 'string' && typeof v !== 'number') continue; // flags: off/on in words
        const row = rows.find((r) => r.flags.includes(opt.long!));
        if (!row) continue; // documented on another page
        expect(row.defaultCell, `${name} ${opt.long}`).toContain(String(v));
      }
    });
  }

  it('the heading of pairflow solve names exactly its options', () => {
    const heading = /^### `pairflow solve ([^`]*)`/m.exec(readme)![1]!;
    expect([...heading.matchAll(/(--[a-z-]+)/g)].map((m) => m[1]!).sort()).toEqual(longFlags(command('solve')));
  });

  it('the configuration table lists every field with its default and range', () => {
    const at = readme.indexOf('## Configuration');
    const rows = [...readme.slice(at).matchAll(/^\| `([a-zA-Z]+)` \| ([^|]+) \| ([^|]+) \|/gm)];
    expect(rows.map((r) => r[1]).sort()).toEqual(Object.keys(DEFAULT_CONFIG).sort());
    for (const [, field, def, range] of rows) {
      expect(def!.trim(), field).toBe(`\`${JSON.stringify(DEFAULT_CONFIG[field as keyof typeof DEFAULT_CONFIG])}\``);
      const r = CONFIG_RANGES[field as keyof typeof CONFIG_RANGES];
      if (r) expect(range!.trim(), field).toBe(`\`${intervalOf(r)}\``);
    }
  });
});

describe('docs/errors.md', () => {
  it('names only commands and options that exist', () => {
    const commands = new Set(program.commands.map((c) => c.name()));
    for (const m of errorsDoc.matchAll(/`pairflow ([a-z]+)/g)) expect(commands, `pairflow ${m[1]}`).toContain(m[1]);
    const flags = new Set(program.commands.flatMap((c) => c.options.map((o: Option) => o.long!)));
    for (const m of errorsDoc.matchAll(/`(--[a-z-]+)/g)) expect(flags, m[1]).toContain(m[1]);
    expect(Object.keys(ERROR_CODES).length).toBeGreaterThan(0);
  });
});
