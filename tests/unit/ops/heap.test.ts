import { describe, expect, it } from 'vitest';

import { collectGarbage } from '../../../src/ops/heap.js';

describe('collectGarbage()', () => {
  it('runs a full collection: an object no longer referenced is gone', async () => {
    const ref = await (async () => new WeakRef({ payload: new Array(1000).fill(7) }))();
    // A WeakRef's target lives at least until the job that made it ends.
    await new Promise((resolve) => setImmediate(resolve));
    expect(collectGarbage()).toBe(true);
    expect(ref.deref()).toBeUndefined();
  });
});
