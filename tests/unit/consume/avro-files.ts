/** Test helpers for Avro container files, written and inspected with avsc (the reference library). */
import { createWriteStream, readFileSync } from 'node:fs';
import { Readable } from 'node:stream';
import { pipeline } from 'node:stream/promises';
import avro from 'avsc';
import { EVENT_SCHEMA } from '../../../src/consume/schema.js';

/** Writes a container file with avsc 5.7.9's own encoder (the reference writer). */
export async function writeAvro(path: string, records: unknown[], opts: { codec?: string; blockSize?: number; schema?: unknown } = {}): Promise<Buffer> {
  const enc = new avro.streams.BlockEncoder((opts.schema ?? EVENT_SCHEMA) as avro.Schema, { codec: opts.codec ?? 'null', blockSize: opts.blockSize ?? 65536 });
  await pipeline(Readable.from(records), enc, createWriteStream(path));
  return readFileSync(path);
}

/** Block layout by the Avro 1.11 container spec: each block is `count, size, data, sync`. */
export function blockLayout(file: Buffer): { start: number; count: number; dataStart: number; dataEnd: number }[] {
  const sync = file.subarray(file.length - 16);
  const long = avro.Type.forSchema('long');
  let pos = file.indexOf(sync) + 16;
  const out: { start: number; count: number; dataStart: number; dataEnd: number }[] = [];
  while (pos < file.length) {
    const c = long.decode(file, pos);
    const s = long.decode(file, c.offset);
    const dataEnd = s.offset + (s.value as number);
    out.push({ start: pos, count: c.value as number, dataStart: s.offset, dataEnd });
    pos = dataEnd + 16;
  }
  return out;
}

