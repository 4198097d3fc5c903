/**
 * `pairflow summarize` (SPEC §6): the committed outputs under a prefix, read with
 * isolation level read_committed, summed up as replay sums its own run — the same
 * `online` object — plus `duplicates`: assignments naming a unit occurrence (market,
 * side, id, arrival time) that an earlier assignment already named. Exactly once means
 * it is 0.
 */
import kafkajs from 'kafkajs';
import type { Logger } from 'pino';
import { quantileLinear, type OnlineStats } from '../replay/summary.js';
import { readToEnd } from './read.js';
import { OutputDecoder, type AssignmentValue, type ExpiredValue } from './records.js';
import { liveTopics } from './topics.js';

type KafkaClient = InstanceType<typeof kafkajs.Kafka>;

/** What `summarize --json` prints. */
export interface LiveSummary {
  prefix: string;
  online: OnlineStats;
  /** Assignments naming an occurrence already assigned (must be 0). */
  duplicates: number;
  /** Occurrences reported both as assigned and as expired (must be 0). */
  assignedAndExpired: number;
  records: { assignments: number; expired: number; expiredDemand: number; expiredSupply: number; windows: number; rejects: number };
  /** Late events counted in the windows records. */
  late: number;
  /** Rejects by reason code (the `pairflow-reason` header). */
  rejectsByReason: Record<string, number>;
  markets: Array<{ market: string; cost: number; matched: number; abandoned: number }>;
}

/** Every committed assignment, expiry, window and reject under a prefix, decoded. */
export interface LiveOutputs {
  assignments: AssignmentValue[];
  expired: ExpiredValue[];
  windows: Array<Record<string, unknown>>;
  rejects: Array<{ value: Record<string, unknown>; reason: string | null; partition: number; offset: number }>;
}

/** Reads the committed outputs under `prefix` to their current end. */
export async function readOutputs(kafka: KafkaClient, prefix: string, logger?: Logger): Promise<LiveOutputs> {
  const topics = liveTopics(prefix);
  const dec = new OutputDecoder();
  const out: LiveOutputs = { assignments: [], expired: [], windows: [], rejects: [] };
  const where = (t: string, p: number, o: string): string => `${t}/${p}@${o}`;
  await Promise.all([
    readToEnd({
      kafka, topic: topics.assignments, ...(logger ? { logger } : {}),
      onRecord: (p, m) => out.assignments.push(dec.decode('assignment', m.value!, where(topics.assignments, p, m.offset))),
    }),
    readToEnd({
      kafka, topic: topics.expired, ...(logger ? { logger } : {}),
      onRecord: (p, m) => out.expired.push(dec.decode('expired', m.value!, where(topics.expired, p, m.offset))),
    }),
    readToEnd({
      kafka, topic: topics.windows, ...(logger ? { logger } : {}),
      onRecord: (p, m) => out.windows.push(dec.decode('window', m.value!, where(topics.windows, p, m.offset))),
    }),
    readToEnd({
      kafka, topic: topics.rejects, ...(logger ? { logger } : {}),
      onRecord: (p, m) => out.rejects.push({
        value: dec.decode('reject', m.value!, where(topics.rejects, p, m.offset)),
        reason: m.headers?.['pairflow-reason']?.toString() ?? null,
        partition: p,
        offset: Number(m.offset),
      }),
    }),
  ]);
  return out;
}

/** Sums committed outputs the way replay sums its run (SPEC §6 `online`). */
export function summarizeOutputs(prefix: string, o: LiveOutputs): LiveSummary {
  const seen = new Set<string>();
  let duplicates = 0;
  const waits = new Float64Array(o.assignments.length);
  let cost = 0;
  const markets = new Map<string, { cost: number; matched: number; abandoned: number }>();
  const market = (name: string): { cost: number; matched: number; abandoned: number } => {
    let m = markets.get(name);
    if (!m) markets.set(name, (m = { cost: 0, matched: 0, abandoned: 0 }));
    return m;
  };
  o.assignments.forEach((a, k) => {
    const d = `${a.market}\u0000d\u0000${a.demandId}\u0000${a.demandT}`;
    const s = `${a.market}\u0000s\u0000${a.supplyId}\u0000${a.supplyT}`;
    if (seen.has(d) || seen.has(s)) duplicates++;
    seen.add(d);
    seen.add(s);
    waits[k] = (a.epoch - a.demandT) / 60_000;
    cost += a.cost;
    const m = market(a.market);
    m.cost += a.cost;
    m.matched++;
  });
  let assignedAndExpired = 0;
  let expiredDemand = 0;
  for (const e of o.expired) {
    if (seen.has(`${e.market}\u0000${e.side === 'demand' ? 'd' : 's'}\u0000${e.id}\u0000${e.t}`)) assignedAndExpired++;
    if (e.side !== 'demand') continue;
    expiredDemand++;
    cost += e.cost;
    const m = market(e.market);
    m.cost += e.cost;
    m.abandoned++;
  }
  let waitSum = 0;
  for (let i = 0; i < waits.length; i++) waitSum += waits[i]!;
  const rejectsByReason: Record<string, number> = {};
  for (const r of o.rejects) {
    const code = r.reason ?? 'unknown';
    rejectsByReason[code] = (rejectsByReason[code] ?? 0) + 1;
  }
  const late = o.windows.reduce((n, w) => n + (typeof w.late === 'number' ? w.late : 0), 0);
  return {
    prefix,
    online: {
      cost,
      matched: o.assignments.length,
      abandoned: expiredDemand,
      meanWaitMin: waits.length > 0 ? waitSum / waits.length : null,
      p95WaitMin: quantileLinear(waits, 0.95),
    },
    duplicates,
    assignedAndExpired,
    records: {
      assignments: o.assignments.length, expired: o.expired.length, expiredDemand, expiredSupply: o.expired.length - expiredDemand,
      windows: o.windows.length, rejects: o.rejects.length,
    },
    late,
    rejectsByReason,
    markets: [...markets.entries()].sort((a, b) => (a[0] < b[0] ? -1 : 1)).map(([name, m]) => ({ market: name, ...m })),
  };
}
