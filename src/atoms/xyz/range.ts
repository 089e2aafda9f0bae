/**
 * Reading a byte range of a plain extended XYZ file on its own, for mapFrames' range-split mode.
 *
 * The file is cut into ranges [from, to). A range owns the frames whose atom-count line starts in it. A thread reading
 * range k does not know where its first frame starts, nor that frame's line number and index: it guesses the start
 * (guessFrameStart: the first line at or after `from` that looks like an atom count followed by a comment line, that
 * many atom lines and another atom count or the end of the file), parses frames from there while its position is
 * before `to`, and reports where it stopped (`end`), how many lines and frames it consumed.
 *
 * The guess is never trusted: the caller accepts range k only if its guessed start equals the `end` of range k - 1 as
 * actually parsed (range 0 starts at 0). A range parse that starts at the true end of the previous one is exactly the
 * sequential reader's parse of those bytes (the scanner carries no other state between frames), so by induction the
 * accepted results are those of the sequential reader. A range whose guess is wrong, or whose parse failed, is parsed
 * again from the true start with its true first line and frame index (`base`), which also makes every error message
 * (file:line, frame numbers) identical to the sequential reader's.
 */
import { readSync } from 'node:fs';
import type { FileHandle } from 'node:fs/promises';
import type { Frame } from '../frame.js';
import { parseFrame } from './frame-parse.js';
import { END, FrameScanner } from './scanner.js';
import { FileRangeSource } from './source.js';

/** True first line and frame index of a range's start (known once the ranges before it are accepted). */
export interface RangeBase {
  line: number;
  frame: number;
}

export interface RangeOutcome<R> {
  /** Where the parse started (the guess, or the given start); -1 when no frame start was guessed in the range. */
  start: number;
  /** Offset where the parse stopped: after the last frame taken (Infinity when the file ended). */
  end: number;
  /** Lines and frames consumed from start to end. */
  lines: number;
  frames: number;
  results: R[];
}

/** Per-thread reusable buffers. */
export interface RangeScratch {
  window?: Buffer;
  guess?: Buffer;
}

type JobFn<R> = (frame: Frame, index: number, options: unknown) => R | Promise<R>;

const WINDOW = 4 << 20;
const GUESS_BLOCK = 1 << 20;
const GUESS_MAX = 64 << 20;

/**
 * Parse the frames of [start, limit) (frames starting before limit; the last one is read to its end) and apply fn.
 * `base` null: speculative (lines and frames counted from 1 and 0, fn gets index -1; errors are only a reason to
 * parse the range again). Throws what the sequential reader would throw there (with `base` given, the same message).
 */
export async function parseRange<R>(
  fh: FileHandle,
  file: string,
  start: number,
  limit: number,
  base: RangeBase | null,
  wanted: Set<string> | null,
  fn: JobFn<R>,
  options: unknown,
  scratch: RangeScratch = {},
  positions = true,
): Promise<RangeOutcome<R>> {
  const line = base?.line ?? 1;
  const frame = base?.frame ?? 0;
  const source = new FileRangeSource(fh, start, limit);
  const scanner = new FrameScanner(source, file, WINDOW, { line, frame, buf: scratch.window });
  const results: R[] = [];
  let end = start;
  try {
    for (;;) {
      if (start + scanner.position >= limit) {
        end = start + scanner.position;
        break;
      }
      const span = scanner.take();
      if (span === END) {
        end = Infinity;
        break;
      }
      if (span === null) {
        await scanner.fill();
        continue;
      }
      const f = parseFrame(scanner.buf, span, file, wanted, scanner.lastLineOpen, positions);
      results.push(await fn(f, base ? span.index : -1, options));
    }
  } finally {
    scratch.window = scanner.buf;
  }
  return { start, end, lines: scanner.lineNumber - line, frames: scanner.frameNumber - frame, results };
}

/**
 * A guess of the first frame start at or after `from` and before `to`, or -1. Only a guess (see the module comment):
 * a line holding a non-negative integer N, followed by N + 1 lines and then another such line, a blank line or the end
 * of the file. Frames too large to check within GUESS_MAX bytes are accepted unchecked.
 */
export async function guessFrameStart(fh: FileHandle, from: number, to: number, scratch: RangeScratch = {}): Promise<number> {
  const at = from > 0 ? from - 1 : 0; // one byte before, to know whether `from` starts a line
  for (let block = GUESS_BLOCK; ; block *= 4) {
    let buf = scratch.guess;
    if (buf === undefined || buf.length < block) buf = scratch.guess = Buffer.allocUnsafe(block);
    const bytesRead = readSync(fh.fd, buf, 0, block, at);
    const eof = bytesRead < block;
    const r = scanGuess(buf.subarray(0, bytesRead), from > 0, to - at, eof);
    if (r.found >= 0) return at + r.found;
    if (!r.more) return -1;
    // a candidate could not be checked within the block: read more, or accept it unchecked
    if (block >= GUESS_MAX) return r.candidate >= 0 ? at + r.candidate : -1;
  }
}

interface Guess {
  /** Offset of the frame start found, or -1. */
  found: number;
  /** More bytes are needed to decide. */
  more: boolean;
  /** The candidate still being checked when more bytes are needed, or -1. */
  candidate: number;
}

/** In buf (the file from the guess's `at`): the first checked frame start before `to`. */
function scanGuess(buf: Buffer, skipFirst: boolean, to: number, eof: boolean): Guess {
  const n = buf.length;
  const none: Guess = { found: -1, more: false, candidate: -1 };
  const found = (p: number): Guess => ({ found: p, more: false, candidate: -1 });
  const more = (candidate: number): Guess => (eof ? none : { found: -1, more: true, candidate });
  let p = 0;
  if (skipFirst) {
    const nl = buf.indexOf(10, 0);
    if (nl < 0) return more(-1);
    p = nl + 1;
  }
  while (p < to) {
    if (p >= n) return more(-1);
    const nl = buf.indexOf(10, p);
    if (nl < 0) return more(-1);
    const count = countLine(buf, p, nl);
    if (count >= 0) {
      // the comment line and `count` atom lines, then the next frame's count line (or a blank line, or the end)
      let q = nl + 1;
      let k = 0;
      for (; k <= count && q < n; k++) {
        const e = buf.indexOf(10, q);
        if (e < 0) break;
        q = e + 1;
      }
      if (k <= count || q >= n) {
        // the file ends inside or right after this frame: still a frame start (a truncated one is reported by the parse)
        if (eof) return found(p);
        return more(p);
      }
      const e = buf.indexOf(10, q);
      if (e < 0 && !eof) return more(p);
      const lineEnd = e < 0 ? n : e;
      if (countLine(buf, q, lineEnd) >= 0 || isBlank(buf, q, lineEnd)) return found(p);
    }
    p = nl + 1;
  }
  return none;
}

/** The integer alone on the line [s, e) (surrounding white space allowed, optional '+'), else -1. */
function countLine(buf: Buffer, s: number, e: number): number {
  while (s < e && buf[s] <= 32) s++;
  while (e > s && buf[e - 1] <= 32) e--;
  if (s < e && buf[s] === 43) s++;
  if (s >= e || e - s > 10) return -1;
  let v = 0;
  for (let p = s; p < e; p++) {
    const c = buf[p];
    if (c < 48 || c > 57) return -1;
    v = v * 10 + (c - 48);
  }
  return v;
}

function isBlank(buf: Buffer, s: number, e: number): boolean {
  for (let p = s; p < e; p++) if (buf[p] > 32) return false;
  return true;
}
