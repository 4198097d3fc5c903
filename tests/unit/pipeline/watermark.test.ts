/** The watermark of one input partition (SPEC §3), with an injected clock. */
import { describe, expect, it } from 'vitest';
import { Watermark } from '../../../src/pipeline/watermark.js';

function clock(): { now: () => number; set: (ms: number) => void } {
  let t = 0;
  return { now: () => t, set: (ms) => { t = ms; } };
}

describe('Watermark', () => {
  it('is the largest event time seen minus allowedLatenessMs, and never moves back', () => {
    const wm = new Watermark({ allowedLatenessMs: 2000, idleMs: 5000 });
    expect(wm.value()).toBe(-Infinity);
    wm.observe(10_000);
    expect(wm.value()).toBe(8000);
    wm.observe(9_000); // out of order: the watermark stays
    expect(wm.value()).toBe(8000);
    wm.observe(null); // a reject says nothing about event time
    expect(wm.value()).toBe(8000);
    wm.observe(12_500);
    expect(wm.value()).toBe(10_500);
  });

  it('follows the wall clock once the partition has received nothing for idleMs', () => {
    const c = clock();
    const wm = new Watermark({ allowedLatenessMs: 2000, idleMs: 5000, clock: c });
    c.set(100);
    wm.observe(50_000);
    c.set(5099);
    expect(wm.value()).toBe(48_000); // silent 4999 ms: not idle yet
    c.set(5100);
    expect(wm.value()).toBe(48_000 + 5000); // idle: event time moves on with the clock
    c.set(8100);
    expect(wm.value()).toBe(48_000 + 8000);
    // A record (even a rejected one) resets the idle timer; the watermark keeps its value.
    wm.observe(null);
    expect(wm.value()).toBe(56_000);
    c.set(9000);
    expect(wm.value()).toBe(56_000);
  });

  it('does not move by the clock before the first event', () => {
    const c = clock();
    const wm = new Watermark({ allowedLatenessMs: 0, idleMs: 10, clock: c });
    c.set(1_000_000);
    expect(wm.value()).toBe(-Infinity);
  });

  it('resume() stands where the stored state put it, and counts idleness from then', () => {
    const c = clock();
    const wm = new Watermark({ allowedLatenessMs: 2000, idleMs: 5000, clock: c });
    c.set(777);
    wm.resume({ maxT: 40_000, watermark: 41_000 });
    expect(wm.value()).toBe(41_000);
    expect(wm.state()).toEqual({ maxT: 40_000, watermark: 41_000 });
    c.set(777 + 4999);
    expect(wm.value()).toBe(41_000);
    c.set(777 + 6000);
    // maxT − lateness + silence = 38 000 + 6000, past the stored 41 000.
    expect(wm.value()).toBe(44_000);
  });
});
