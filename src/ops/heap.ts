/**
 * A full garbage collection on request, for the few moments a process knows it has
 * just let go of most of what it held (the replay, once the online replay has read
 * the whole log): V8 collects its old generation only when that has grown to about
 * twice what survived the last full collection (from memory), and a process that then sits waiting
 * for its worker threads allocates too little to get there, so a log's worth of
 * garbage would stay resident beside the workers' pairs.
 *
 * V8's `gc` extension is normally exposed by `--expose-gc` at start; setting the flag
 * later exposes it to contexts made afterwards, which is how test runners measure
 * heap use (common practice). Where neither works, nothing is collected.
 */

import { setFlagsFromString } from 'node:v8';
import { runInNewContext } from 'node:vm';

let collect: (() => void) | null | undefined;

function collector(): (() => void) | null {
  if (collect !== undefined) return collect;
  const exposed = (globalThis as { gc?: () => void }).gc;
  if (typeof exposed === 'function') return (collect = exposed);
  try {
    setFlagsFromString('--expose-gc');
    const gc: unknown = runInNewContext('gc');
    collect = typeof gc === 'function' ? (gc as () => void) : null;
  } catch {
    collect = null;
  }
  return collect;
}

/** Runs a full garbage collection; false where the runtime offers none. */
export function collectGarbage(): boolean {
  const gc = collector();
  if (gc === null) return false;
  gc();
  return true;
}
