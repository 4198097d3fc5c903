/**
 * An output directory that is either complete or visibly incomplete. Its files are
 * written into a work directory beside the target (`DIR.partial-<pid>`, on the same
 * file system) and the whole directory is renamed into place only when the run has
 * finished. A failed run removes its work directory and leaves an earlier `DIR` as
 * it was; a killed one leaves `DIR.partial-<pid>`, whose name says what it is. So a
 * `summary.json` never sits beside the files of another run.
 */
import { randomBytes } from 'node:crypto';
import { lstat, mkdir, readdir, realpath, rename, rm, rmdir } from 'node:fs/promises';
import { basename, dirname, join, resolve, sep } from 'node:path';
import { pairflowError } from '../errors.js';

/** Kernel file systems: files there are not data, and Node's recursive mkdir can spin forever under /proc. */
const KERNEL_FS = ['/proc', '/sys'];

function writeError(file: string, detail: string, cause?: unknown) {
  return pairflowError('PAIRFLOW_ERR_OUTPUT_WRITE', { file, detail }, cause);
}

async function exists(path: string): Promise<boolean> {
  try {
    await lstat(path);
    return true;
  } catch {
    return false;
  }
}

/**
 * Refuses an output path on a kernel file system (/proc, /sys), where writing is
 * meaningless and creating directories never ends. Follows symbolic links of the part
 * of the path that exists. Throws `PAIRFLOW_ERR_OUTPUT_WRITE`.
 * @example await checkOutputPath('runs/w5s')
 */
export async function checkOutputPath(path: string): Promise<void> {
  let probe = resolve(path);
  let rest = '';
  // The nearest existing ancestor, resolved; the part below it does not exist yet.
  for (;;) {
    try {
      probe = join(await realpath(probe), rest);
      break;
    } catch {
      const parent = dirname(probe);
      if (parent === probe) break;
      rest = join(basename(probe), rest);
      probe = parent;
    }
  }
  for (const root of KERNEL_FS) {
    if (probe === root || probe.startsWith(root + sep)) {
      throw writeError(path, `${root} is a kernel file system, not a place for output; choose a directory on a disk`);
    }
  }
}

/** A directory being written aside; see the module comment. */
export interface StagedDir {
  /** The directory the caller asked for. */
  readonly target: string;
  /** Where the files are written until {@link commit}. */
  readonly workDir: string;
  /** Moves the work directory into place, replacing an earlier run directory at the target. */
  commit(): Promise<void>;
  /** Removes the work directory; the target stays as it was. Never throws. */
  abort(): Promise<void>;
}

/**
 * Prepares `target` to be written aside. `target` must be new, an empty directory, or
 * a directory holding only files named in `owned` (an earlier run of the same kind):
 * anything else there would be replaced, so it is refused. Throws
 * `PAIRFLOW_ERR_OUTPUT_WRITE` naming the directory.
 * @example const staged = await stageDir('runs/w5s', Object.values(RUN_FILES)); … await staged.commit();
 */
export async function stageDir(target: string, owned: readonly string[]): Promise<StagedDir> {
  await checkOutputPath(target);
  if (await exists(target)) {
    let entries: string[];
    try {
      entries = await readdir(target);
    } catch (err) {
      const code = (err as NodeJS.ErrnoException).code;
      throw writeError(target, code === 'ENOTDIR' ? 'exists and is not a directory' : `cannot read the directory (${code ?? String(err)})`, err);
    }
    const known = new Set(owned);
    const foreign = entries.filter((e) => !known.has(e));
    if (foreign.length > 0) {
      const shown = foreign.slice(0, 3).join(', ') + (foreign.length > 3 ? `, … (${foreign.length} in all)` : '');
      throw writeError(target, `holds files pairflow did not write (${shown}); give a new or empty directory, or an earlier run directory to replace`);
    }
  }
  const parent = dirname(resolve(target));
  const workDir = join(dirname(target), `${basename(resolve(target))}.partial-${process.pid}-${randomBytes(3).toString('hex')}`);
  try {
    await mkdir(parent, { recursive: true });
    await mkdir(workDir);
  } catch (err) {
    const code = (err as NodeJS.ErrnoException).code ?? String(err);
    throw writeError(target, `cannot create the directory (${code})`, err);
  }
  let done = false;
  return {
    target,
    workDir,
    async commit() {
      if (done) throw pairflowError('PAIRFLOW_ERR_INTERNAL_BUG', { detail: `${target}: committed or aborted twice` });
      done = true;
      const old = `${target}.old-${process.pid}-${randomBytes(3).toString('hex')}`;
      let moved = false;
      try {
        if (await exists(target)) {
          // An empty directory can simply go; an earlier run is moved aside, then removed.
          try {
            await rmdir(target);
          } catch {
            await rename(target, old);
            moved = true;
          }
        }
        await rename(workDir, target);
      } catch (err) {
        if (moved && !(await exists(target))) await rename(old, target).catch(() => {});
        await rm(workDir, { recursive: true, force: true }).catch(() => {});
        const code = (err as NodeJS.ErrnoException).code ?? String(err);
        throw writeError(target, `cannot move the finished run into place (${code})`, err);
      }
      if (moved) await rm(old, { recursive: true, force: true }).catch(() => {});
    },
    async abort() {
      if (done) return;
      done = true;
      await rm(workDir, { recursive: true, force: true }).catch(() => {});
    },
  };
}
