/**
 * The benchmark's child processes: scipy timed in-process by a Python child, and each
 * npm peer in its own Node child so a slow one can be stopped at the time cap.
 * Instances travel as raw little-endian arrays in a temporary directory.
 */

import { spawn, spawnSync } from 'node:child_process';
import { mkdirSync, writeFileSync } from 'node:fs';
import { join } from 'node:path';
import type { DenseInstance, SparseInstance } from '../../src/matching/types.js';

const here = new URL('.', import.meta.url).pathname;
export const PYTHON = process.env.PAIRFLOW_PYTHON ?? 'python3';

function bytes(a: Float64Array | Int32Array): Uint8Array {
  return new Uint8Array(a.buffer, a.byteOffset, a.byteLength);
}

/** Writes a dense instance's matrix as `cost.f64` into a fresh `dir`. */
export function writeDense(dir: string, inst: DenseInstance): void {
  mkdirSync(dir, { recursive: true });
  writeFileSync(join(dir, 'cost.f64'), bytes(inst.cost));
}

/** Writes a CSR instance as `rowptr.i32`, `colidx.i32`, `cost.f64` (and `delta.f64`). */
export function writeSparse(dir: string, inst: SparseInstance): void {
  mkdirSync(dir, { recursive: true });
  writeFileSync(join(dir, 'rowptr.i32'), bytes(inst.rowPtr));
  writeFileSync(join(dir, 'colidx.i32'), bytes(inst.colIdx));
  writeFileSync(join(dir, 'cost.f64'), bytes(inst.cost));
  if (inst.unmatchedCost) writeFileSync(join(dir, 'delta.f64'), bytes(inst.unmatchedCost));
}

/** One case for the scipy child. */
export interface ScipyCase {
  readonly name: string;
  readonly kind: 'dense' | 'sparse';
  readonly dir: string;
  readonly nRows: number;
  readonly nCols: number;
  readonly repeats: number;
  /** No new repeat starts once this much solving time is spent (at least one runs). */
  readonly budgetMs?: number;
  /** Sparse only: the instance has per-row unmatched costs in `delta.f64`. */
  readonly delta?: boolean;
  /** Untimed solves before timing, until this many are done or `warmMs` is spent. */
  readonly warmSolves?: number;
  readonly warmMs?: number;
}

/**
 * The warm-up rule, the same for every solver of a case (pairflow, scipy, each npm
 * peer): untimed solves of the case's own instance until `solves` are done or `ms` of
 * solving is spent (the first always runs when `solves` > 0). Each warm-up solve is
 * bound by the time cap like a timed one.
 */
export interface WarmUp {
  readonly solves: number;
  readonly ms: number;
}

export interface ScipyOutcome {
  readonly ms?: number[];
  readonly cost?: number;
  readonly error?: string;
}

export interface ScipyRun {
  readonly python: string;
  readonly scipy: string;
  readonly numpy: string;
  readonly results: Record<string, ScipyOutcome>;
}

/** Whether python3 can import scipy; the bench then leaves scipy's columns empty. */
export function scipyAvailable(): boolean {
  return spawnSync(PYTHON, ['-c', 'import scipy, numpy'], { encoding: 'utf8' }).status === 0;
}

/** Runs every scipy case in one Python process (one import of scipy). */
export function runScipy(cases: readonly ScipyCase[]): ScipyRun {
  const r = spawnSync(PYTHON, [join(here, 'scipy_bench.py')], {
    input: JSON.stringify({ cases }),
    encoding: 'utf8',
    maxBuffer: 1 << 28,
  });
  if (r.status !== 0) throw new Error(`scipy bench failed (${r.status}): ${r.stderr}`);
  return JSON.parse(r.stdout) as ScipyRun;
}

export type PeerName = 'munkres' | 'linear-sum-assignment' | 'munkres-js';
export const PEERS: readonly PeerName[] = ['munkres', 'linear-sum-assignment', 'munkres-js'];

export interface PeerOutcome {
  /** Solve times of the repeats that finished. */
  readonly ms: number[];
  readonly cost?: number;
  /** pairflow only: whether the last result's certificate held. */
  readonly certified?: boolean;
  /** True when the first solve did not finish within the cap. */
  readonly capped: boolean;
  readonly error?: string;
}

/**
 * Runs one npm peer on one dense instance. The child stops repeating once `capMs` of
 * solving is spent; the parent kills it when one solve runs longer than `capMs`.
 */
export function runPeer(peer: PeerName, dir: string, nRows: number, nCols: number, repeats: number, capMs: number, warm: WarmUp): Promise<PeerOutcome> {
  const script = join(here, '..', 'peers', 'run-peer.mjs');
  return runCapped([script, peer, dir, String(nRows), String(nCols), String(repeats), String(capMs), String(warm.solves), String(warm.ms)], capMs);
}

/**
 * Runs pairflow's solver on one instance in a child (see run-pairflow.ts): killed when
 * one solve exceeds `capMs`, no new repeat once `budgetMs` of solving is spent.
 */
export function runPairflow(
  kind: 'dense' | 'sparse',
  dir: string,
  nRows: number,
  nCols: number,
  repeats: number,
  capMs: number,
  budgetMs: number,
  warm: WarmUp,
): Promise<PeerOutcome> {
  const script = join(here, 'run-pairflow.ts');
  return runCapped(['--import', 'tsx', script, kind, dir, String(nRows), String(nCols), String(repeats), String(budgetMs), String(warm.solves), String(warm.ms)], capMs);
}

function runCapped(argv: string[], capMs: number): Promise<PeerOutcome> {
  return new Promise((resolve) => {
    const child = spawn(process.execPath, argv, { stdio: ['ignore', 'pipe', 'pipe'] });
    const ms: number[] = [];
    let cost: number | undefined;
    let certified: boolean | undefined;
    let buffered = '';
    let stderr = '';
    let capped = false;
    let timer: NodeJS.Timeout | undefined;
    const arm = () => {
      if (timer) clearTimeout(timer);
      timer = setTimeout(() => {
        capped = ms.length === 0;
        child.kill('SIGKILL');
      }, capMs);
    };
    child.stdout.setEncoding('utf8');
    child.stdout.on('data', (chunk: string) => {
      buffered += chunk;
      let nl = buffered.indexOf('\n');
      while (nl >= 0) {
        const line = buffered.slice(0, nl);
        buffered = buffered.slice(nl + 1);
        // "ready" once loaded, "warm" after each untimed warm-up solve: the cap
        // restarts for the next solve either way
        if (line === 'ready' || line === 'warm') arm();
        else if (line !== '') {
          const rec = JSON.parse(line) as { ms: number; cost: number; certified?: boolean };
          ms.push(rec.ms);
          cost = rec.cost;
          certified = rec.certified;
          arm();
        }
        nl = buffered.indexOf('\n');
      }
    });
    child.stderr.setEncoding('utf8');
    child.stderr.on('data', (chunk: string) => {
      stderr += chunk;
    });
    child.on('close', (code) => {
      if (timer) clearTimeout(timer);
      const failed = !capped && ms.length === 0 && code !== 0;
      resolve({
        ms,
        capped,
        ...(cost === undefined ? {} : { cost }),
        ...(certified === undefined ? {} : { certified }),
        ...(failed ? { error: stderr.split('\n').find((l) => l.trim() !== '') ?? `exit ${code}` } : {}),
      });
    });
  });
}
