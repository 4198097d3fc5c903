/** Settings of the topics pairflow creates. */
import { describe, expect, it } from 'vitest';
import { POOL_TOPIC_CONFIG } from '../../../src/live/topics.js';

const setting = (name: string): number => Number(POOL_TOPIC_CONFIG.find((c) => c.name === name)?.value);

describe('POOL_TOPIC_CONFIG', () => {
  it('lets a segment hold the largest batch a record may be: the broker refuses a batch larger than segment.bytes, and a transaction writes a partition’s pool records as one batch', () => {
    expect(setting('segment.bytes')).toBeGreaterThanOrEqual(setting('max.message.bytes'));
    // Segments still roll by time, so compaction keeps up whatever their size.
    expect(setting('segment.ms')).toBeLessThanOrEqual(60_000);
  });
});
