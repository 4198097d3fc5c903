import { mkdtempSync, readFileSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { describe, expect, it } from 'vitest';
import { writePart } from '../../../bench/lib/report.js';

describe('writePart', () => {
  it('replaces one ### subsection of a bench section and leaves the rest as written', () => {
    const dir = mkdtempSync(join(tmpdir(), 'pairflow-part-'));
    try {
      const file = join(dir, 'b.md');
      const before = '# B\n\n<!-- bench:x:start -->\n## X\n\nrun line\n\n### One\n\nold one\n\n### Two\n\nold two\n<!-- bench:x:end -->\n\ntail\n';
      writeFileSync(file, before);
      expect(writePart(file, 'x', '### One', '### One\n\nnew one\n')).toBe(true);
      expect(readFileSync(file, 'utf8')).toBe(before.replace('old one', 'new one'));
      expect(writePart(file, 'x', '### Three', '### Three\n')).toBe(false);
      expect(writePart(file, 'y', '### One', '### One\n')).toBe(false);
      expect(readFileSync(file, 'utf8')).toBe(before.replace('old one', 'new one'));
    } finally {
      rmSync(dir, { recursive: true, force: true });
    }
  });
});
