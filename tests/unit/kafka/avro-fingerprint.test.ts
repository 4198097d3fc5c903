/**
 * The single-object encoding's schema fingerprint (src/kafka/avro.ts) against an outside
 * implementation: the Apache Avro project's own Python package `avro` (PyPI, version
 * pinned in requirements-dev.txt), which computes the Parsing Canonical Form
 * (`Schema.canonical_form`) and the CRC-64-AVRO fingerprint (`Schema.fingerprint`) of the
 * Avro specification. Every schema pairflow puts on the bus is checked.
 */
import { readFileSync } from 'node:fs';
import avsc from 'avsc';
import { describe, expect, it } from 'vitest';
import { canonicalSchema, createAvroSerde, crc64Avro } from '../../../src/kafka/avro.js';
import { runPythonJson } from '../../helpers/python.js';
import { pythonModuleVersion } from '../../helpers/python-modules.js';

const SCHEMAS = ['event', 'assignment', 'expired', 'window', 'reject'];
const avroVersion = pythonModuleVersion('avro');

const PY = `
import json, sys
import avro.schema
out = {}
for name, text in json.load(sys.stdin).items():
    s = avro.schema.parse(text)
    out[name] = {"canonical": s.canonical_form, "fingerprint": s.fingerprint("CRC-64-AVRO").hex()}
print(json.dumps(out))
`;

describe.skipIf(avroVersion === null)(`CRC-64-AVRO fingerprints against Apache Avro's Python package (avro ${avroVersion})`, () => {
  it('the Parsing Canonical Form and the fingerprint of every schema on the bus agree with avro', () => {
    const texts = Object.fromEntries(SCHEMAS.map((n) => [n, readFileSync(new URL(`../../../schemas/${n}.avsc`, import.meta.url), 'utf8')]));
    const ref = runPythonJson<Record<string, { canonical: string; fingerprint: string }>>(PY, texts);
    for (const name of SCHEMAS) {
      const type = avsc.Type.forSchema(JSON.parse(texts[name]!));
      const canonical = canonicalSchema(type);
      expect(canonical, name).toBe(ref[name]!.canonical);
      // avro gives the fingerprint as the 8 bytes the single-object header carries (little-endian).
      const le = Buffer.alloc(8);
      le.writeBigUInt64LE(crc64Avro(Buffer.from(canonical, 'utf8')));
      expect(le.toString('hex'), name).toBe(ref[name]!.fingerprint);
      const serde = createAvroSerde(JSON.parse(texts[name]!) as avsc.Schema);
      expect(serde.header.subarray(2).toString('hex'), name).toBe(ref[name]!.fingerprint);
    }
  });
});
