import { readFileSync } from 'node:fs';
import type { PairflowConfig } from '../model.js';

/** One input file as the manifest records it, so a rerun can check it has the same bytes. */
export interface ManifestInput {
  file: string;
  bytes: number;
  sha256: string;
  /** Lines (JSON Lines) or records (Avro) read. */
  lines: number;
}

/** Everything needed to reproduce a run: inputs by checksum, the full config, versions, the command. */
export interface RunManifest {
  pairflow: string;
  node: string;
  command: string[];
  inputs: ManifestInput[];
  config: PairflowConfig;
  /** Options outside the config that change results (warm start, hindsight, bootstrap seed…). */
  options: Record<string, unknown>;
  /** Output files of the run directory. */
  outputs: string[];
}

let version: string | undefined;

/** pairflow's version from package.json (two levels above this file in both src/ and dist/). */
export function pairflowVersion(): string {
  version ??= (JSON.parse(readFileSync(new URL('../../package.json', import.meta.url), 'utf8')) as { version: string }).version;
  return version;
}

/**
 * Builds the manifest of a run. `command` is the command line as given (argv after
 * `node`), or a description of the API call.
 */
export function buildManifest(args: {
  command: readonly string[];
  inputs: readonly ManifestInput[];
  config: PairflowConfig;
  options?: Record<string, unknown>;
  outputs: readonly string[];
}): RunManifest {
  return {
    pairflow: pairflowVersion(),
    node: process.version,
    command: [...args.command],
    inputs: args.inputs.map((i) => ({ file: i.file, bytes: i.bytes, sha256: i.sha256, lines: i.lines })),
    config: { ...args.config },
    options: { ...(args.options ?? {}) },
    outputs: [...args.outputs],
  };
}
