/**
 * Shared pieces of the Kafka integration tests: the broker from the global setup, unique
 * topic and group names, and bounded collection of consumed messages.
 */
import { randomBytes } from 'node:crypto';
import { readFileSync } from 'node:fs';
import { inject } from 'vitest';
import type { Consumer, EachMessagePayload } from 'kafkajs';
import type avro from 'avsc';

/** The broker list the global setup found ('' when none, outside CI). */
export const BROKERS: string = inject('kafkaBrokers');

/**
 * A name no other test or run uses. Names need uniqueness, not reproducibility, so they
 * come from the OS generator; the data written under them is seeded.
 */
export function uniqueName(prefix: string): string {
  return `pairflow-it.${prefix}.${randomBytes(6).toString('hex')}`;
}

/** The event schema of schemas/event.avsc (written by the event-model side of pairflow). */
export function eventSchema(): avro.Schema {
  return JSON.parse(readFileSync(new URL('../../../schemas/event.avsc', import.meta.url), 'utf8')) as avro.Schema;
}

/** Consumer settings that keep the tests quick on a one-node broker. */
export const FAST_CONSUMER = { sessionTimeout: 10_000, heartbeatInterval: 1_000, maxWaitTimeInMs: 100, rebalanceTimeout: 10_000 } as const;

/**
 * Runs `consumer` on `topic` from the beginning and resolves with the messages seen once
 * `done(messages)` holds; rejects after `timeoutMs` naming what arrived. Stops the
 * consumer either way (it stays connected; the caller disconnects).
 */
export async function collect(
  consumer: Consumer,
  topic: string,
  done: (seen: EachMessagePayload[]) => boolean,
  timeoutMs = 60_000,
): Promise<EachMessagePayload[]> {
  const seen: EachMessagePayload[] = [];
  await consumer.subscribe({ topics: [topic], fromBeginning: true });
  await consumer.run({
    autoCommit: false,
    eachMessage: async (payload) => {
      seen.push(payload);
    },
  });
  const deadline = Date.now() + timeoutMs;
  try {
    while (!done(seen)) {
      if (Date.now() > deadline) {
        throw new Error(`collect(${topic}): condition not met within ${timeoutMs} ms; got ${seen.length} messages`);
      }
      await new Promise((r) => setTimeout(r, 50));
    }
    return seen.slice();
  } finally {
    await consumer.stop();
  }
}
