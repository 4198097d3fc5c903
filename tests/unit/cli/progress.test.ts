import { describe, expect, it } from 'vitest';
import { phasedProgress } from '../../../src/cli/progress.js';

/** A terminal stand-in: what was drawn, each redraw as its text after the carriage return. */
function tty(): { isTTY: boolean; write: (t: string) => void; frames: string[] } {
  const frames: string[] = [];
  return { isTTY: true, frames, write: (t: string) => { frames.push(t.replace(/^\r/, '').trimEnd()); } };
}

describe('phasedProgress()', () => {
  it('shows the online replay, then the hindsight optimum that ran alongside, instead of a bar stuck at 100 % (issue #10 item 4)', () => {
    const out = tty();
    let clock = 0;
    const p = phasedProgress(['online replay', 'hindsight optimum'], out, () => (clock += 1000));
    p.update('hindsight optimum', 0, 4, 'markets'); // the hindsight starts first, on worker threads
    p.update('online replay', 50, 100, 'events');
    p.update('hindsight optimum', 1, 4, 'markets');
    p.update('online replay', 100, 100, 'events');
    p.update('hindsight optimum', 3, 4, 'markets');
    p.done();
    const phases = out.frames.filter((f) => f !== '').map((f) => f.split(' [')[0]);
    expect(phases).toEqual(['hindsight optimum', 'online replay', 'online replay', 'hindsight optimum', 'hindsight optimum']);
    expect(out.frames.at(-2)).toMatch(/^hindsight optimum \[#+\.+\]\s+75% 3\/4 markets$/);
    expect(out.frames.at(-1)).toBe(''); // cleared
  });

  it('draws nothing when stderr is not a terminal', () => {
    const out = { ...tty(), isTTY: false };
    const p = phasedProgress(['a'], out);
    p.update('a', 1, 2);
    p.done();
    expect(out.frames).toEqual([]);
  });
});
