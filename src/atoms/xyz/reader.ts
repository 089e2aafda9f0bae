/**
 * Streaming extended XYZ reader: frames one at a time, in constant memory, from a file (plain or gzip,
 * recognised by its magic bytes) or any byte stream.
 */
import type { Frame } from '../frame.js';
import { parseFrame } from './frame-parse.js';
import { END, FrameScanner } from './scanner.js';
import { openSource, StreamSource, type ByteSource } from './source.js';

export { XyzError } from './errors.js';

export interface ReadOptions {
  /** Per-atom properties to parse besides species and pos; undefined means all. Others are skipped. */
  columns?: string[];
  /**
   * false: do not parse positions (they are still checked to be there: the column count of every line is);
   * frame.positions is then an empty array. Default true.
   */
  positions?: boolean;
}

/** The frames of an extended XYZ (or plain XYZ) file, in file order. Throws XyzError on bad input. */
export async function* readFrames(path: string, opts: ReadOptions = {}): AsyncGenerator<Frame> {
  const source = await openSource(path);
  yield* framesOf(source, path, opts);
}

/**
 * The frames of a byte stream (e.g. process.stdin); `name` is used in error messages.
 * The stream must be plain text (inflate gzip yourself, e.g. with zlib.createGunzip()).
 */
export async function* readFramesFromStream(
  stream: AsyncIterable<Buffer | Uint8Array | string>,
  name: string,
  opts: ReadOptions = {},
): AsyncGenerator<Frame> {
  yield* framesOf(new StreamSource(stream), name, opts);
}

async function* framesOf(source: ByteSource, file: string, opts: ReadOptions): AsyncGenerator<Frame> {
  const wanted = opts.columns ? new Set(opts.columns) : null;
  const positions = opts.positions ?? true;
  const scanner = new FrameScanner(source, file);
  try {
    for (;;) {
      const span = scanner.take();
      if (span === END) return;
      if (span === null) {
        await scanner.fill();
        continue;
      }
      yield parseFrame(scanner.buf, span, file, wanted, scanner.lastLineOpen, positions);
    }
  } finally {
    await source.close();
  }
}
