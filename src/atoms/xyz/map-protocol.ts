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
