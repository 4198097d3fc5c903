/**
 * The watermark of one input partition (SPEC §3): the largest event time seen minus
 * `allowedLatenessMs`; once the partition has received nothing for `idleMs` of wall
 * clock, it advances with the wall clock from where it stood. It never moves back.
 *
 * Replay feeds a sorted log through one watermark without a clock (no idle advance:
 * the log's end closes what is left). Live mode keeps one per input partition, with the
 * process clock; tests inject a clock they move by hand.
 */
import type { Clock } from '../ports.js';

/** Options of {@link Watermark}. */
export interface WatermarkOptions {
  /** Subtracted from the largest event time seen. @default 2000 (SPEC §2) */
  allowedLatenessMs: number;
  /** Wall-clock silence after which the watermark follows the clock. @default 5000 */
  idleMs: number;
  /** Wall clock for the idle rule; without one the watermark never advances by itself. */
  clock?: Clock;
}

/**
 * @example
 * const wm = new Watermark({ allowedLatenessMs: 2000, idleMs: 5000, clock });
 * wm.observe(ev.t); engine.advanceTo(wm.value());
 */
export class Watermark {
  private readonly lateness: number;
  private readonly idleMs: number;
  private readonly clock: Clock | undefined;
  /** Largest event time seen. */
  private maxT = -Infinity;
  /** Wall time of the last record received (valid or not); NaN before any. */
  private lastRecordWall = NaN;
  private wm = -Infinity;

  constructor(opts: WatermarkOptions) {
    this.lateness = opts.allowedLatenessMs;
    this.idleMs = opts.idleMs;
    this.clock = opts.clock;
  }

  /**
   * A record arrived. `t` is its event time, or null for a record that was rejected
   * (it resets the idle timer but says nothing about event time).
   */
  observe(t: number | null): void {
    if (this.clock) this.lastRecordWall = this.clock.now();
    if (t !== null && t > this.maxT) {
      this.maxT = t;
      const v = t - this.lateness;
      if (v > this.wm) this.wm = v;
    }
  }

  /** The current watermark (event time, ms); -Infinity before the first event. */
  value(): number {
    if (this.clock && this.maxT > -Infinity && !Number.isNaN(this.lastRecordWall)) {
      const silent = this.clock.now() - this.lastRecordWall;
      if (silent >= this.idleMs) {
        const v = this.maxT - this.lateness + silent;
        if (v > this.wm) this.wm = v;
      }
    }
    return this.wm;
  }

  /** Largest event time seen (-Infinity before any). */
  get maxEventTime(): number {
    return this.maxT;
  }

  /** Wall-clock ms since the last record, or null before any record or without a clock. */
  silentMs(): number | null {
    if (!this.clock || Number.isNaN(this.lastRecordWall)) return null;
    return this.clock.now() - this.lastRecordWall;
  }

  /** State to carry across a restart (live mode stores it with the pool). */
  state(): { maxT: number | null; watermark: number | null } {
    return { maxT: this.maxT === -Infinity ? null : this.maxT, watermark: this.wm === -Infinity ? null : this.wm };
  }

  /**
   * Resumes from {@link state} (or from a stored watermark the engine was advanced to):
   * the watermark stands where it stood, and the idle rule counts from now.
   */
  resume(s: { maxT: number | null; watermark?: number | null }): void {
    if (s.maxT !== null && s.maxT > this.maxT) {
      this.maxT = s.maxT;
      const v = s.maxT - this.lateness;
      if (v > this.wm) this.wm = v;
    }
    if (s.watermark !== undefined && s.watermark !== null && s.watermark > this.wm) this.wm = s.watermark;
    if (this.clock) this.lastRecordWall = this.clock.now();
  }
}
