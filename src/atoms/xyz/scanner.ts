/**
 * Finding frames in a byte stream: a window buffer refilled from a ByteSource, and a scan for line ends
 * with Buffer.indexOf (native memchr). Memory stays at the window size (grown only for a frame larger
 * than it), whatever the file size.
 */
import { XyzError, shown } from './errors.js';
import type { ByteSource } from './source.js';

/** One frame's byte layout inside the scanner's window (offsets valid until the next fill()). */
export interface FrameSpan {
  /** 0-based frame index in the file. */
  index: number;
  /** 1-based line number of the atom-count line. */
  line: number;
  natoms: number;
  start: number;
  commentStart: number;
  /** End of the comment line, before its '\n'. */
  commentEnd: number;
  atomsStart: number;
  /** Offset after the frame's last '\n'. */
  end: number;
}

export const END = Symbol('end of frames');

/** Where a scanner starts when it does not start at the beginning of a file (see range.ts). */
export interface ScanStart {
  /** 1-based line number of the first byte the source delivers (default 1). */
  line?: number;
  /** 0-based index of the first frame found (default 0). */
  frame?: number;
  /** A window buffer to reuse (avoids the page faults of a fresh large buffer). */
  buf?: Buffer;
}

const MAX_ATOMS = 2 ** 31 - 1;
const MAX_HEADER_BYTES = 1 << 20;

export class FrameScanner {
  buf: Buffer;
  private view: Buffer;
  private len = 0;
  private pos = 0;
  /** Bytes dropped from the window start so far: the source offset of buf[0]. */
  private dropped = 0;
  private eof = false;
  /** Line number of the byte at pos. */
  private line = 1;
  private frame = 0;
  /** Line number of the first blank line seen between frames, 0 if none. */
  private blankLine = 0;
  /** Offset of the last line's start when the file lacked a final newline (one was added), else -1. */
  lastLineOpen = -1;
  // A frame whose lines are still being found.
  private fStart = -1;
  private fLine = 0;
  private fNatoms = 0;
  private fFound = 0;
  private fScan = 0;
  private fCommentEnd = 0;

  constructor(
    private readonly source: ByteSource,
    readonly file: string,
    windowBytes = 4 << 20,
    start: ScanStart = {},
  ) {
    this.buf = start.buf ?? Buffer.allocUnsafe(windowBytes);
    this.view = this.buf.subarray(0, 0);
    this.line = start.line ?? 1;
    this.frame = start.frame ?? 0;
  }

  /** Bytes consumed so far relative to the window start (frames before pos are done). */
  get consumed(): number {
    return this.pos;
  }

  /** Bytes of the source consumed so far (every frame before this offset has been taken). */
  get position(): number {
    return this.dropped + this.pos;
  }

  /** Line number of the next byte to be consumed. */
  get lineNumber(): number {
    return this.line;
  }

  /** Frames taken so far, plus the starting frame index. */
  get frameNumber(): number {
    return this.frame;
  }

  /**
   * The next complete frame in the window; null when more bytes are needed (call fill()); END after the
   * last frame. Throws XyzError for a bad atom count, a blank line between frames or a truncated frame.
   */
  take(): FrameSpan | null | typeof END {
    const view = this.view;
    if (this.fStart < 0) {
      for (;;) {
        if (this.pos >= this.len) {
          if (this.eof) return END;
          return null;
        }
        const nl = view.indexOf(10, this.pos);
        if (nl < 0) {
          // At the end of the data a newline was added, so this means: more bytes are needed.
          if (this.len - this.pos > MAX_HEADER_BYTES) {
            throw new XyzError(this.file, this.line, `expected the atom count of frame ${this.frame}, found a line longer than ${MAX_HEADER_BYTES} bytes (is this an XYZ file?)`);
          }
          return null;
        }
        if (isBlank(view, this.pos, nl)) {
          if (this.blankLine === 0) this.blankLine = this.line;
          this.pos = nl + 1;
          this.line++;
          continue;
        }
        if (this.blankLine !== 0) {
          throw new XyzError(this.file, this.blankLine, `expected the atom count of frame ${this.frame}, found a blank line (blank lines are allowed only at the end of the file)`);
        }
        this.fNatoms = this.natomsOf(view, this.pos, nl);
        this.fStart = this.pos;
        this.fLine = this.line;
        this.fFound = 0;
        this.fScan = nl + 1;
        break;
      }
    }
    const needed = this.fNatoms + 1;
    while (this.fFound < needed) {
      const nl = view.indexOf(10, this.fScan);
      if (nl < 0) {
        if (this.eof) throw this.truncated();
        return null;
      }
      if (this.fFound === 0) this.fCommentEnd = nl;
      this.fFound++;
      this.fScan = nl + 1;
    }
    const commentStart = view.indexOf(10, this.fStart) + 1;
    const span: FrameSpan = {
      index: this.frame,
      line: this.fLine,
      natoms: this.fNatoms,
      start: this.fStart,
      commentStart,
      commentEnd: this.fCommentEnd,
      atomsStart: this.fCommentEnd + 1,
      end: this.fScan,
    };
    this.pos = this.fScan;
    this.line += this.fNatoms + 2;
    this.frame++;
    this.fStart = -1;
    return span;
  }

  /** Read more bytes: moves the unconsumed tail to the window start (invalidating earlier spans). */
  async fill(): Promise<void> {
    if (this.eof) return;
    const keep = this.fStart >= 0 ? this.fStart : this.pos;
    if (keep > 0) {
      this.buf.copyWithin(0, keep, this.len);
      this.dropped += keep;
      this.len -= keep;
      this.pos -= keep;
      if (this.fStart >= 0) {
        this.fStart -= keep;
        this.fScan -= keep;
        this.fCommentEnd -= keep;
      }
    }
    if (this.len === this.buf.length) {
      const bigger = Buffer.allocUnsafe(this.buf.length * 2);
      this.buf.copy(bigger, 0, 0, this.len);
      this.buf = bigger;
    }
    let n: number;
    try {
      n = await this.source.read(this.buf, this.len, this.buf.length - this.len);
    } catch (err) {
      const e = err as NodeJS.ErrnoException;
      const what = this.source.gzip ? `gzip data could not be inflated (${e.message}${e.code ? `, ${e.code}` : ''})` : `read failed (${e.message})`;
      throw new XyzError(this.file, this.fStart >= 0 ? this.fLine + 1 + this.fFound : this.line, what);
    }
    if (n === 0) {
      this.eof = true;
      if (this.len > this.pos && this.buf[this.len - 1] !== 10) {
        if (this.len === this.buf.length) {
          const bigger = Buffer.allocUnsafe(this.buf.length + 1);
          this.buf.copy(bigger, 0, 0, this.len);
          this.buf = bigger;
        }
        this.lastLineOpen = this.buf.lastIndexOf(10, this.len - 1) + 1;
        this.buf[this.len++] = 10;
      }
    } else {
      this.len += n;
    }
    this.view = this.buf.subarray(0, this.len);
  }

  private natomsOf(view: Buffer, start: number, nl: number): number {
    let s = start;
    let e = nl;
    while (s < e && view[s] <= 32) s++;
    while (e > s && view[e - 1] <= 32) e--;
    let ok = e > s;
    let v = 0;
    let p = s;
    if (ok && view[p] === 43) p++;
    if (p === e) ok = false;
    for (; ok && p < e; p++) {
      const c = view[p];
      if (c < 48 || c > 57) ok = false;
      else v = v * 10 + (c - 48);
    }
    if (!ok || v > MAX_ATOMS) {
      const text = view.toString('utf8', start, Math.min(nl, start + 200)).replace(/\r$/, '');
      const found = ok ? `${text} (more than ${MAX_ATOMS})` : shown(text);
      throw new XyzError(this.file, this.line, `expected the atom count of frame ${this.frame} (a non-negative integer alone on its line), found ${found}`);
    }
    return v;
  }

  private truncated(): XyzError {
    const where = `frame ${this.frame} (starting at line ${this.fLine})`;
    const cut = this.lastLineOpen >= 0 ? '; the last line has no line end, it may be cut short' : '';
    if (this.fFound === 0) {
      return new XyzError(this.file, this.fLine + 1, `file ends after the atom count line of ${where}: expected a comment line and ${this.fNatoms} atom lines`);
    }
    const k = this.fFound - 1;
    return new XyzError(this.file, this.fLine + 1 + this.fFound, `file ends after ${k} of ${this.fNatoms} atom lines of ${where}${cut}`);
  }
}

function isBlank(buf: Buffer, s: number, e: number): boolean {
  for (let p = s; p < e; p++) if (buf[p] > 32) return false;
  return true;
}
