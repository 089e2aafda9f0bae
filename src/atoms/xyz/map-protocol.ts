/** Messages between mapFrames and its worker threads. */
import { XyzError } from './errors.js';

/**
 * A per-frame job: a module exporting a pure function fn(frame, index, options) => result.
 * The result must survive structured cloning (plain objects, arrays, numbers, strings, typed arrays).
 */
export interface FrameJob {
  /** Absolute file URL (import.meta.url-style) of the module that exports the function. */
  module: string;
  /** Name of the exported function. */
  fn: string;
  /** Passed as the third argument. */
  options?: unknown;
  /** Per-atom properties the function needs besides species and pos (others may be skipped while parsing). */
  columns?: string[];
  /**
   * false: the function does not use its `index` argument. This lets mapFrames (workers > 1, plain files) split the
   * file into byte ranges that each thread reads and parses itself; the function is then called with index -1 for
   * frames whose index is not known yet. Default true.
   */
  usesIndex?: boolean;
  /** false: the function does not need positions; they are not parsed and frame.positions is empty. Default true. */
  positions?: boolean;
}

/** Numbers per frame in BatchMessage.spans: index, line, natoms, start, commentStart, commentEnd, atomsStart, end. */
export const SPAN_FIELDS = 8;

export interface BatchMessage {
  id: number;
  /** Holds the batch's bytes (whole frames) from offset 0; transferred there and back. */
  buf: ArrayBuffer;
  /** Bytes of buf in use. */
  length: number;
  /** SPAN_FIELDS numbers per frame, offsets relative to buf. */
  spans: Float64Array;
  /** Offset in buf of the file's last line when it had no newline, else -1. */
  lastLineOpen: number;
}

/** Range-split mode: parse the frames of [from, to) (see range.ts). */
export interface RangeMessage {
  kind: 'range';
  id: number;
  from: number;
  to: number;
  /** Known true start: parse from `from` with these line and frame numbers; null: guess the start. */
  base: { line: number; frame: number } | null;
}

export type RangeReply =
  | { kind: 'range'; id: number; start: number; end: number; lines: number; frames: number; results: unknown[] }
  | { kind: 'range'; id: number; start: number; error: SerializedError };

export type SerializedError =
  | { kind: 'xyz'; file: string; line: number; detail: string }
  | { kind: 'error'; name: string; message: string; stack?: string };

/** A worker's answer to a batch, handing the batch buffer back for reuse. */
export type ReplyMessage = ({ id: number; results: unknown[] } | { id: number; error: SerializedError }) & { buf?: ArrayBuffer };

export function serializeError(err: unknown): SerializedError {
  if (err instanceof XyzError) return { kind: 'xyz', file: err.file, line: err.line, detail: err.detail };
  const e = err instanceof Error ? err : new Error(String(err));
  return { kind: 'error', name: e.name, message: e.message, stack: e.stack };
}

export function deserializeError(s: SerializedError): Error {
  if (s.kind === 'xyz') return new XyzError(s.file, s.line, s.detail);
  const e = new Error(s.message);
  e.name = s.name;
  if (s.stack) e.stack = s.stack;
  return e;
}
