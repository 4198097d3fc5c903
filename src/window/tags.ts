/**
 * Capability lists as bit masks: the candidate scan of the engine tests SPEC §2's
 * `needs ⊆ has` with one AND per pair instead of string compares. Each distinct tag
 * gets one of 31 bits on first sight; past 31 distinct tags the masks stop deciding
 * ({@link TagBits.overflow}) and callers go back to `capabilitiesAllow`. Pure.
 */

/** Distinct tags that get a bit (bits 0..30, so every mask is a non-negative int32). */
const MAX_TAGS = 31;

/**
 * @example
 * const bits = new TagBits();
 * const need = bits.maskOf(['cold-bag']);
 * const lacks = ~bits.maskOf(['cold-bag', 'large-box']);
 * (need & lacks) === 0 // true: every need is held
 */
export class TagBits {
  private readonly bit = new Map<string, number>();
  /**
   * Set once a tag found no free bit: from then on a mask may leave tags out, and only
   * `capabilitiesAllow` decides. Masks made before stay exact.
   */
  overflow = false;

  /** The OR of the bits of `tags` (0 for none); gives unseen tags a bit while bits remain. */
  maskOf(tags: readonly string[] | undefined): number {
    if (tags === undefined || tags.length === 0) return 0;
    let m = 0;
    for (let i = 0; i < tags.length; i++) {
      let b = this.bit.get(tags[i]!);
      if (b === undefined) {
        if (this.bit.size >= MAX_TAGS) {
          this.overflow = true;
          continue;
        }
        b = 1 << this.bit.size;
        this.bit.set(tags[i]!, b);
      }
      m |= b;
    }
    return m;
  }
}
