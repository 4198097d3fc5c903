/**
 * A progress line on stderr for work that runs in phases, drawn only on a terminal
 * (a redirected stderr gets nothing, so logs stay clean).
 */

/** Where a phased progress line is drawn: stderr, or a test's stand-in. */
export interface ProgressStream {
  readonly isTTY?: boolean;
  write(text: string): unknown;
}

/** A progress line: the current phase's bar, its count and unit. */
export interface PhasedProgress {
  /** Reports `done` of `total` in a phase; the line shows the phase last reported as not finished. */
  update(phase: string, done: number, total: number, unit?: string): void;
  /** Clears the line. */
  done(): void;
}

const WIDTH = 30;
const LINE = 78;

/**
 * A progress line that follows phases which may overlap, in the `order` given: each
 * phase keeps its latest count, and the line shows the first phase in that order that
 * has reported and not finished — so while the online replay runs its bar is shown,
 * and once it is done the bar of the hindsight optimum (which ran alongside) takes
 * over instead of a bar stuck at 100 %. Redraws at most every 100 ms.
 * @example const p = phasedProgress(['online replay', 'hindsight optimum']); p.update('online replay', 10, 100, 'events'); p.done();
 */
export function phasedProgress(order: readonly string[], stream: ProgressStream = process.stderr, now: () => number = () => performance.now()): PhasedProgress {
  if (!stream.isTTY) return { update: () => {}, done: () => {} };
  const phases = new Map<string, { done: number; total: number; unit: string }>(order.map((name) => [name, { done: 0, total: -1, unit: '' }]));
  let last = -Infinity;
  let shown = '';
  return {
    update(phase, done, total, unit = '') {
      phases.set(phase, { done, total, unit });
      let current: [string, { done: number; total: number; unit: string }] | undefined;
      for (const entry of phases) {
        if (entry[1].total >= 0 && entry[1].done < entry[1].total) {
          current = entry;
          break;
        }
      }
      current ??= [phase, phases.get(phase)!];
      const [name, p] = current;
      const t = now();
      if (name === shown && t - last < 100 && p.done < p.total) return;
      last = t;
      shown = name;
      const frac = p.total > 0 ? Math.min(1, p.done / p.total) : 1;
      const filled = Math.round(frac * WIDTH);
      const count = p.total > 0 ? ` ${p.done.toLocaleString('en-US')}/${p.total.toLocaleString('en-US')}${p.unit ? ` ${p.unit}` : ''}` : '';
      stream.write(`\r${`${name} [${'#'.repeat(filled)}${'.'.repeat(WIDTH - filled)}] ${(frac * 100).toFixed(0).padStart(3)}%${count}`.padEnd(LINE)}`);
    },
    done() {
      if (shown !== '') stream.write(`\r${' '.repeat(LINE)}\r`);
      shown = '';
    },
  };
}
