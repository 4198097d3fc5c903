/**
 * Which market a hindsight worker takes next, within a memory budget. A market's
 * solve holds its largest time segment's allowed pairs (three bytes each, plus the
 * restricted solve and the match ceiling's arrays); on a long log of a dense city
 * one district alone holds gigabytes, so two big ones side by side can double what
 * the process needs. Markets run largest first, a second one beside those running
 * only while their estimated pairs together fit the budget. Results never depend on
 * the schedule: each market is solved exactly on its own.
 */

import { totalmem } from 'node:os';

import type { PairflowConfig } from '../model.js';
import { buildCompactGraph, GraphStore, type PackedMarket } from './graph.js';
import { subMarket, timeSegments } from './segments.js';

/**
 * Bytes a held pair costs in a worker, all told: three in the graph (16-bit column,
 * 8-bit code), the rest the restricted solve and the match ceiling's arrays. Measured
 * on the busiest district of a week at `gen --scale 4` (797 M pairs, one thread): the
 * process grew by 2.7–3.0 GB from the market's start to its peak (in the ceiling).
 */
export const BYTES_PER_HELD_PAIR = 3.75;

/** Budget bytes at least this many: 3 GiB. */
const MIN_BUDGET_BYTES = 3 * 2 ** 30;

/**
 * The default budget for the pairs held at once over all workers: an eighth of the
 * machine's memory, and never under 3 GiB (so a week of a dense city, whose largest
 * district alone needs about that, still runs with the rest waiting).
 */
export function defaultMemoryBudget(machineBytes = totalmem()): number {
  return Math.max(MIN_BUDGET_BYTES, Math.floor(machineBytes / 8));
}

/** Rows a pair estimate builds (spread evenly over the market's demands). */
export const SAMPLE_ROWS = 512;

/**
 * The allowed pairs a market's largest time segment holds, estimated from the
 * graph of a sample of its demands (every k-th, so rush hours and nights are both
 * seen) against all its supplies: each segment's sampled pairs scaled by its demands
 * over its sampled ones. Exact when the sample is every demand.
 */
export function estimatePeakPairs(m: PackedMarket, config: PairflowConfig, sampleRows = SAMPLE_ROWS): number {
  if (m.nDemand === 0 || m.nSupply === 0) return 0;
  const stride = Math.max(1, Math.ceil(m.nDemand / Math.max(1, sampleRows)));
  const dIdx = new Int32Array(Math.ceil(m.nDemand / stride));
  for (let i = 0; i < dIdx.length; i++) dIdx[i] = i * stride;
  // The sampled demands with every supply (the market's own arrays, not copies).
  const rows = subMarket(m, dIdx, new Int32Array(0));
  const sample: PackedMarket = { ...m, nDemand: rows.nDemand, demandT: rows.demandT, demandEnd: rows.demandEnd, demandA: rows.demandA, demandB: rows.demandB, demandNeeds: rows.demandNeeds };
  const g = buildCompactGraph(sample, config, new GraphStore(), Math.min(dIdx.length * m.nSupply, 1 << 20));

  const seg = timeSegments(m);
  const segOf = new Int32Array(m.nDemand);
  for (let q = 0; q < seg.count; q++) {
    for (let e = seg.demand.start[q]!; e < seg.demand.start[q + 1]!; e++) segOf[seg.demand.idx[e]!] = q;
  }
  const sampledPairs = new Float64Array(seg.count);
  const sampledRows = new Float64Array(seg.count);
  for (let r = 0; r < g.nRows; r++) {
    const q = segOf[dIdx[g.rowDemand[r]!]!]!;
    sampledPairs[q]! += g.rowPtr[r + 1]! - g.rowPtr[r]!;
    sampledRows[q]!++;
  }
  let peak = 0;
  for (let q = 0; q < seg.count; q++) {
    if (sampledRows[q] === 0) continue;
    const rows = seg.demand.start[q + 1]! - seg.demand.start[q]!;
    peak = Math.max(peak, Math.round((sampledPairs[q]! * rows) / sampledRows[q]!));
  }
  return peak;
}

/**
 * An upper bound of the allowed pairs a market's largest time segment holds, with no
 * distance computed: its pairs of a demand and a supply present together (a pair
 * needs that to be allowed, SPEC §4). Where the reach spans most of a city, nearly
 * every such pair is allowed: on a generated day at `gen --scale 4` the bound stood
 * 7–10 % above the sampled estimates ({@link estimatePeakPairs}) and took about 40 %
 * of their time (13–25 ms a district against 29–63 ms); the four districts' bounds
 * together fit the default budget beside the online replay, so none was estimated.
 */
export function presentPairs(m: PackedMarket): number {
  // The supplies that leave after they arrive (no other meets anyone), by arrival and
  // by departure: each that left before a demand came also arrived before it left.
  let n = 0;
  const arrive = new Float64Array(m.nSupply);
  const leave = new Float64Array(m.nSupply);
  for (let j = 0; j < m.nSupply; j++) {
    if (!(m.supplyEnd[j]! >= m.supplyT[j]!)) continue;
    arrive[n] = m.supplyT[j]!;
    leave[n++] = m.supplyEnd[j]!;
  }
  const arrived = arrive.subarray(0, n).sort();
  const left = leave.subarray(0, n).sort();
  const seg = timeSegments(m);
  let peak = 0;
  for (let q = 0; q < seg.count; q++) {
    let pairs = 0;
    for (let e = seg.demand.start[q]!; e < seg.demand.start[q + 1]!; e++) {
      const d = seg.demand.idx[e]!;
      const t = m.demandT[d]!;
      const end = m.demandEnd[d]!;
      // Arrived by its end, less those gone before it came.
      if (end >= t) pairs += countBelow(arrived, end, true) - countBelow(left, t);
    }
    peak = Math.max(peak, pairs);
  }
  return peak;
}

/** Entries of ascending `a` below `x` (or at most `x`, `orEqual`): a binary search. */
function countBelow(a: Float64Array, x: number, orEqual = false): number {
  let lo = 0;
  let hi = a.length;
  while (lo < hi) {
    const mid = (lo + hi) >>> 1;
    if (a[mid]! < x || (orEqual && a[mid] === x)) lo = mid + 1;
    else hi = mid;
  }
  return lo;
}

/**
 * Position in `queue` of the market a free worker takes now, or -1 to wait for a
 * running one to end (or the caller to let go of what it holds). The queue is in
 * the order markets should start (largest first); the first that fits beside the
 * `held` pairs of the `running` markets and the `caller`'s share is taken. With
 * nothing running and nothing held by the caller the first is taken whatever its
 * size (a market larger than the budget still runs, alone).
 *
 * @param pairs estimated pairs held by each market, by market index
 * @param budget pairs that may be held at once
 * @param caller pairs' worth of memory the caller holds for now (see HindsightOptions.callerHolds)
 */
export function nextMarket(queue: readonly number[], pairs: ArrayLike<number>, held: number, running: number, budget: number, caller = 0): number {
  if (queue.length === 0) return -1;
  if (running === 0 && caller <= 0) return 0;
  for (let at = 0; at < queue.length; at++) {
    if (held + caller + pairs[queue[at]!]! <= budget) return at;
  }
  return -1;
}

/**
 * The pairs a market is counted for in the budget: its upper bound nDemand·nSupply
 * where that is under a thousandth of the budget (nothing built), else
 * {@link estimatePeakPairs}, never above the {@link presentPairs} bound when that is
 * given.
 */
export function heldPairs(m: PackedMarket, config: PairflowConfig, budget: number, present = Infinity): number {
  const bound = Math.min(m.nDemand * m.nSupply, present);
  return bound < budget / 1000 ? bound : Math.min(bound, estimatePeakPairs(m, config));
}

/**
 * How many workers may run at once: `threads`, less one while the caller computes on
 * a core of its own (`callerBusy`) where the workers and the caller would otherwise
 * outnumber the `cores`; never fewer than one. With more runnable threads than cores,
 * the system shares them out evenly, so the largest market, which decides when the
 * solve ends, runs at a fraction of a core for as long as the caller runs; held back
 * instead, a market waits while the largest runs at full speed. Measured on a
 * generated day at scale 4 (`gen --scale 4`, 2 cores, replay with the online pass
 * beside the hindsight, alternating runs): 16.6–17.0 s against 17.6–18.1 s, the peak
 * 969 MB against 1,014 MB; at scale 1 3.0–3.1 s either way.
 */
export function workersBeside(threads: number, cores: number, callerBusy: boolean): number {
  if (!callerBusy || threads < cores) return threads;
  return Math.max(1, cores - 1);
}
