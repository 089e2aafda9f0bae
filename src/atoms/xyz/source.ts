/**
 * Byte sources for the reader: a plain file read in place, or a gzip stream (detected by its magic
 * bytes 1f 8b, whatever the file is called) inflated with node:zlib.
 */
import { readSync } from 'node:fs';
import { open, type FileHandle } from 'node:fs/promises';
import type { Readable } from 'node:stream';
import { createGunzip } from 'node:zlib';

export interface ByteSource {
  /** Read up to `length` bytes into buf at `offset`; resolves 0 at the end of the data. */
  read(buf: Buffer, offset: number, length: number): Promise<number>;
  close(): Promise<void>;
  /** True when the bytes are inflated from gzip. */
  readonly gzip: boolean;
}

/** Chunks of an async iterable (a stream) delivered on demand. */
export class StreamSource implements ByteSource {
  private iter: AsyncIterator<Buffer | Uint8Array | string>;
  private chunk: Buffer | null = null;
  private at = 0;
  constructor(
    private readonly stream: AsyncIterable<Buffer | Uint8Array | string> & Partial<Pick<Readable, 'destroy'>>,
    readonly gzip = false,
  ) {
    this.iter = stream[Symbol.asyncIterator]();
  }

  async read(buf: Buffer, offset: number, length: number): Promise<number> {
    while (this.chunk === null || this.at >= this.chunk.length) {
      const next = await this.iter.next();
      if (next.done) return 0;
      const v = next.value;
      this.chunk = typeof v === 'string' ? Buffer.from(v, 'utf8') : Buffer.isBuffer(v) ? v : Buffer.from(v.buffer, v.byteOffset, v.byteLength);
      this.at = 0;
    }
    const n = Math.min(length, this.chunk.length - this.at);
    this.chunk.copy(buf, offset, this.at, this.at + n);
    this.at += n;
    return n;
  }

  async close(): Promise<void> {
    this.stream.destroy?.();
    await this.iter.return?.();
  }
}

/** Open a file for reading: gzip is recognised by its first two bytes (0x1f 0x8b). */
/**
 * Throws a system-style error naming the path when `st` is not a regular file (a directory, a pipe, a
 * terminal, a device): such a thing cannot be read by position, and reading it may never end.
 */
export function requireRegularFile(path: string, st: { isFile(): boolean; isDirectory(): boolean }): void {
  if (st.isFile()) return;
  const code = st.isDirectory() ? 'EISDIR' : 'ESPIPE';
  throw Object.assign(new Error(`${path}: ${st.isDirectory() ? 'is a directory, expected a file' : 'not a regular file'}`), { code, path });
}

export async function openSource(path: string): Promise<ByteSource & { size: number }> {
  const fh = await open(path, 'r');
  try {
    const st = await fh.stat();
    requireRegularFile(path, st);
    const { size } = st;
    const head = Buffer.alloc(2);
    const { bytesRead } = await fh.read(head, 0, 2, 0);
    if (bytesRead === 2 && head[0] === 0x1f && head[1] === 0x8b) {
      const raw = fh.createReadStream({ start: 0, autoClose: true, highWaterMark: 1 << 20 });
      const gunzip = createGunzip({ chunkSize: 1 << 18 });
      raw.on('error', (err) => gunzip.destroy(err));
      raw.pipe(gunzip);
      const src = new StreamSource(gunzip, true);
      const close = src.close.bind(src);
      return Object.assign(src, {
        size,
        async close() {
          raw.destroy();
          await close();
          await fh.close().catch(() => undefined);
        },
      });
    }
    let position = 0;
    let closed = false;
    return {
      gzip: false,
      size,
      async read(buf, offset, length) {
        const { bytesRead: n } = await fh.read(buf, offset, length, position);
        position += n;
        return n;
      },
      async close() {
        if (!closed) {
          closed = true;
          await fh.close();
        }
      },
    };
  } catch (err) {
    await fh.close().catch(() => undefined);
    throw err;
  }
}

/** The bytes of an open plain file from `start` on (for range-split reading; the handle is not closed). */
export class FileRangeSource implements ByteSource {
  readonly gzip = false;
  private position: number;
  /**
   * @param softEnd reads stop at this offset where they can (a frame crossing it is then read on in
   *   small pieces), so that a range is not read far past its end.
   */
  constructor(
    private readonly fh: FileHandle,
    start: number,
    private readonly softEnd = Infinity,
  ) {
    this.position = start;
  }

  async read(buf: Buffer, offset: number, length: number): Promise<number> {
    const want = Math.min(length, Math.max(this.softEnd - this.position, RANGE_TAIL_READ));
    // A synchronous read: from the page cache it takes about a millisecond, less than the round trip through libuv's
    // thread pool when every core is busy parsing (the thread pool then waits for a core).
    const bytesRead = readSync(this.fh.fd, buf, offset, want, this.position);
    this.position += bytesRead;
    return bytesRead;
  }

  async close(): Promise<void> {}
}

/** Read size past a range's end (to finish its last frame). */
const RANGE_TAIL_READ = 256 << 10;
