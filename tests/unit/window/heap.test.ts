import { describe, expect, it } from 'vitest';
import { KeyedHeap } from '../../../src/window/heap.js';
import { mulberry32 } from '../../helpers/random.js';

describe('KeyedHeap', () => {
  it('pop() returns entries by key, then by id, matching a sort (seeded random)', () => {
    for (let seed = 1; seed <= 20; seed++) {
      const rand = mulberry32(seed);
      const h = new KeyedHeap();
      const ref: Array<[number, number]> = [];
      const out: number[] = [];
      const want: number[] = [];
      for (let step = 0; step < 500; step++) {
        if (rand() < 0.6) {
          const e: [number, number] = [Math.floor(rand() * 20) * 1000, Math.floor(rand() * 50)];
          h.push(e[0], e[1]);
          ref.push(e);
        } else if (ref.length > 0) {
          ref.sort((a, b) => a[0] - b[0] || a[1] - b[1]);
          expect(h.peekKey(), `seed ${seed}`).toBe(ref[0]![0]);
          want.push(ref.shift()![1]);
          out.push(h.pop());
        }
        expect(h.size).toBe(ref.length);
      }
      expect(out, `seed ${seed}`).toEqual(want);
    }
  });

  it('an empty heap peeks +Infinity and pops -1', () => {
    const h = new KeyedHeap();
    expect(h.peekKey()).toBe(Infinity);
    expect(h.pop()).toBe(-1);
    h.push(5, 1);
    expect(h.entries()).toEqual([[5, 1]]);
  });
});
