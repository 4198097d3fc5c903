#!/usr/bin/env node
/**
 * Publishes a time-ordered JSON Lines log in "real time": each event when the wall clock
 * reaches start + (t − t0) / speedup, keyed by market, as `pairflow publish` keys it.
 * Plain JavaScript on the built package, so the bench runs it as its own process.
 *
 *   node bench/lib/paced-publish.mjs BROKERS TOPIC LOG SPEEDUP SECONDS [FROM_HOUR [BACKLOG_FROM_HOUR]]
 *
 * FROM_HOUR skips the log's first hours (a city is quiet at night). With
 * BACKLOG_FROM_HOUR, the events from that hour up to FROM_HOUR are published at once
 * first (a backlog, so the processor's pools are as full as a running one's when the
 * pacing starts); the pacing then starts from FROM_HOUR.
 *
 * Prints one JSON line at the end: {"published": N, "backlog": B, "seconds": S, "behindMaxMs": M}.
 */
import { readFileSync } from 'node:fs';
import kafkajs from 'kafkajs';

const [brokers, topic, file, speedupText, secondsText, fromHourText, backlogHourText] = process.argv.slice(2);
const speedup = Number(speedupText);
const seconds = Number(secondsText);
const lines = readFileSync(file, 'utf8').split('\n').filter((l) => l.trim() !== '');
const all = lines.map((l) => ({ line: l, t: JSON.parse(l).t, market: JSON.parse(l).market }));
const from = all[0].t + Number(fromHourText ?? 0) * 3_600_000;
const events = all.filter((e) => e.t >= from);
const backlogFrom = backlogHourText === undefined ? from : all[0].t + Number(backlogHourText) * 3_600_000;
const backlog = all.filter((e) => e.t >= backlogFrom && e.t < from);

const kafka = new kafkajs.Kafka({ brokers: brokers.split(','), clientId: 'pairflow-paced', logLevel: kafkajs.logLevel.NOTHING });
const producer = kafka.producer({ createPartitioner: kafkajs.Partitioners.DefaultPartitioner, idempotent: true, maxInFlightRequests: 1 });
await producer.connect();
for (let k = 0; k < backlog.length; k += 5000) {
  const slice = backlog.slice(k, k + 5000);
  await producer.send({ topic, messages: slice.map((e) => ({ key: e.market, value: e.line, timestamp: String(e.t) })) });
}
const t0 = events[0].t;
const wall0 = Date.now();
let i = 0;
let behindMax = 0;
const endWall = wall0 + seconds * 1000;
while (i < events.length && Date.now() < endWall) {
  const now = Date.now();
  const dueT = t0 + (now - wall0) * speedup;
  const batch = [];
  while (i < events.length && events[i].t <= dueT) {
    batch.push({ key: events[i].market, value: events[i].line, timestamp: String(events[i].t) });
    i++;
  }
  if (batch.length > 0) {
    await producer.send({ topic, messages: batch });
    behindMax = Math.max(behindMax, Date.now() - now);
  }
  await new Promise((r) => setTimeout(r, 20));
}
await producer.disconnect();
process.stdout.write(`${JSON.stringify({ published: i, backlog: backlog.length, seconds: (Date.now() - wall0) / 1000, behindMaxMs: behindMax })}\n`);
