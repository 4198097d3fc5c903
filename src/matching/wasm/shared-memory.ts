/*
 * What the WebAssembly kernels over shared memories have in common: the memory
 * (a shared WebAssembly.Memory, whose buffer is a SharedArrayBuffer and which grows
 * without detaching anything: typed arrays over it stay valid, and no other array in
 * the process is slowed by a detached buffer, see dense-jv.ts), compiling a kernel
 * once per thread, and an arena of typed arrays in one memory. The kernels:
 * sparse-search.wat (the growing assignment's searches, incremental.ts), and the
 * hindsight's pricing-scan.wat and graph-rows.wat.
 */

/** The parts of the WebAssembly API used here (the project's TS libs do not declare it). */
export interface WasmApi {
  readonly Module: new (bytes: Uint8Array) => object;
  readonly Instance: new (mod: object, imports: object) => { readonly exports: unknown };
  readonly Memory: new (desc: { initial: number; maximum: number; shared: boolean }) => KernelMemory;
}

/** A shared WebAssembly memory. */
export interface KernelMemory {
  readonly buffer: ArrayBufferLike;
  grow(pages: number): number;
}

export const wasmApi = (globalThis as unknown as { WebAssembly?: WasmApi }).WebAssembly;

/** Bytes of a WebAssembly page. */
export const PAGE_BYTES = 65536;
/** The most a 32-bit memory can address. */
export const MAX_KERNEL_BYTES = 65536 * PAGE_BYTES;

/**
 * A shared memory of at least `bytes` (at most 4 GiB can be addressed), or null where
 * there is no WebAssembly or the system will not reserve it.
 */
export function kernelMemory(bytes: number): KernelMemory | null {
  if (wasmApi === undefined || !(bytes <= MAX_KERNEL_BYTES)) return null;
  try {
    return new wasmApi.Memory({ initial: Math.max(1, Math.ceil(bytes / PAGE_BYTES)), maximum: MAX_KERNEL_BYTES / PAGE_BYTES, shared: true });
  } catch {
    return null;
  }
}

/** `memory` holding at least `bytes` (grown if need be); false when it cannot. */
export function holdBytes(memory: KernelMemory, bytes: number): boolean {
  if (!(bytes <= MAX_KERNEL_BYTES)) return false;
  const have = memory.buffer.byteLength;
  if (bytes <= have) return true;
  try {
    memory.grow(Math.ceil((bytes - have) / PAGE_BYTES));
    return true;
  } catch {
    return false;
  }
}

/**
 * A kernel compiled from its base64 bytes, once per thread: `get()` gives the module,
 * or null where WebAssembly (with the features the kernel uses) is not available.
 */
export function lazyModule(base64: string): { get(): object | null } {
  let compiled: object | null | undefined;
  return {
    get(): object | null {
      if (compiled === undefined) {
        try {
          compiled = wasmApi === undefined ? null : new wasmApi.Module(decodeBase64(base64));
        } catch {
          compiled = null;
        }
      }
      return compiled;
    },
  };
}

/** The exports of `mod` instantiated over `memory` (imported as env.memory), or null when that fails. */
export function instantiate<T>(mod: object | null, memory: KernelMemory): T | null {
  if (mod === null || wasmApi === undefined) return null;
  try {
    return new wasmApi.Instance(mod, { env: { memory } }).exports as T;
  } catch {
    return null;
  }
}

/**
 * Typed arrays carved one after another out of one kernel memory, for a structure
 * whose arrays a kernel reads: nothing is given back (an array outgrown is left
 * where it was), so it suits structures that grow by a quarter or more at a time.
 */
export class KernelArena {
  private top = 0;

  private constructor(readonly memory: KernelMemory) {}

  /** An arena in a memory of its own, `bytes` to start with; null where none can be had. */
  static create(bytes: number): KernelArena | null {
    const memory = kernelMemory(bytes);
    return memory === null ? null : new KernelArena(memory);
  }

  /** An arena over `memory` from byte `at` on (what was there is overwritten). */
  static within(memory: KernelMemory, at: number): KernelArena {
    const arena = new KernelArena(memory);
    arena.top = at;
    return arena;
  }

  private take(bytes: number): number {
    const at = Math.ceil(this.top / 8) * 8;
    if (!holdBytes(this.memory, at + bytes)) throw new RangeError(`a kernel memory cannot hold ${at + bytes} bytes`);
    this.top = at + bytes;
    return at;
  }

  // (The offset first: taking room may grow the memory, and only its buffer after that covers it.)
  i32(n: number): Int32Array {
    const at = this.take(4 * n);
    return new Int32Array(this.memory.buffer, at, n);
  }

  f64(n: number): Float64Array {
    const at = this.take(8 * n);
    return new Float64Array(this.memory.buffer, at, n);
  }
}

/** Node's Buffer where there is one: its base64 decoder is native. */
const nodeBuffer = (globalThis as unknown as { Buffer?: { from: (text: string, encoding: 'base64') => Uint8Array } }).Buffer;

/**
 * The bytes of base64 text: by Buffer where there is one, else by atob and a plain
 * loop (measured in a process's first solve: atob and Uint8Array.from with a mapping
 * function took 0.5–1.5 ms for the dense kernel's 4.6 KB, Buffer.from 0.1 ms).
 */
export function decodeBase64(text: string): Uint8Array {
  if (nodeBuffer !== undefined) return nodeBuffer.from(text, 'base64');
  const s = atob(text);
  const out = new Uint8Array(s.length);
  for (let i = 0; i < s.length; i++) out[i] = s.charCodeAt(i);
  return out;
}
