import { createWriteStream, type WriteStream } from 'node:fs';
import { pairflowError, type PairflowError } from '../errors.js';

/** Options of {@link TextFileWriter}. */
export interface TextFileWriterOptions {
  /** Characters gathered before one `write` to the stream: fewer, larger writes. @default 65536 */
  chunkChars?: number;
}

/**
 * A streamed text file: lines are gathered into chunks, handed to a write stream, and
 * `pressure` reports the stream's backpressure so the producer can await `drain()`.
 * Write errors are kept and raised (as `PAIRFLOW_ERR_OUTPUT_WRITE`) by `drain` or `close`.
 */
export class TextFileWriter {
  readonly path: string;
  private readonly stream: WriteStream;
  private readonly chunkChars: number;
  private parts: string[] = [];
  private size = 0;
  private error: PairflowError | null = null;
  private closed = false;

  constructor(path: string, opts: TextFileWriterOptions = {}) {
    this.path = path;
    this.chunkChars = opts.chunkChars ?? 65_536;
    this.stream = createWriteStream(path, { encoding: 'utf8' });
    this.stream.on('error', (err: NodeJS.ErrnoException) => this.fail(err));
  }

  private fail(err: NodeJS.ErrnoException): void {
    this.error ??= pairflowError('PAIRFLOW_ERR_OUTPUT_WRITE', { file: this.path, detail: err.code ?? err.message }, err);
  }

  /** Appends text (normally one whole line). */
  write(text: string): void {
    if (this.closed) throw pairflowError('PAIRFLOW_ERR_INTERNAL_BUG', { detail: `write to closed ${this.path}` });
    this.parts.push(text);
    this.size += text.length;
    if (this.size >= this.chunkChars) this.flush();
  }

  /** True while the stream holds more than its high-water mark, or an error happened. */
  get pressure(): boolean {
    return this.error !== null || this.stream.writableNeedDrain;
  }

  /** Resolves when the stream has drained; rejects with the first write error. */
  async drain(): Promise<void> {
    if (this.error) throw this.error;
    if (!this.stream.writableNeedDrain) return;
    await new Promise<void>((resolve) => {
      const done = (): void => {
        this.stream.off('drain', done);
        this.stream.off('error', done);
        resolve();
      };
      this.stream.on('drain', done);
      this.stream.on('error', done);
    });
    if (this.error) throw this.error;
  }

  /**
   * Writes what is gathered and closes the file; rejects with the first write error.
   * It waits for the stream's 'close', which comes after its 'error': the callback of
   * `end()` runs before a failed last write reports its error (ENOSPC on a full disk),
   * and waiting for that alone would lose the error and report the data as written.
   */
  async close(): Promise<void> {
    if (this.closed) {
      if (this.error) throw this.error;
      return;
    }
    this.flush();
    this.closed = true;
    await new Promise<void>((resolve) => {
      if (this.stream.closed) {
        resolve();
        return;
      }
      this.stream.once('close', () => resolve());
      if (this.error) this.stream.destroy();
      else this.stream.end();
    });
    if (this.error) throw this.error;
  }

  private flush(): void {
    if (this.parts.length === 0) return;
    const chunk = this.parts.length === 1 ? this.parts[0]! : this.parts.join('');
    this.parts = [];
    this.size = 0;
    if (this.error === null) this.stream.write(chunk, (err) => { if (err) this.fail(err); });
  }
}
