import type { Frame } from '../frame.js';
import { readFrames } from './reader.js';

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

export interface MapOptions {
  /** Worker threads to use; 1 means parse on the calling thread. */
  workers?: number;
}

/**
 * Apply a job to every frame of an extended XYZ file, returning results in file order.
 * (Sequential reference version; may be replaced by a worker-thread version with the same contract.)
 */
export async function mapFrames<R>(path: string, job: FrameJob, _opts: MapOptions = {}): Promise<R[]> {
  const mod = (await import(job.module)) as Record<string, unknown>;
  const fn = mod[job.fn] as (frame: Frame, index: number, options: unknown) => R;
  if (typeof fn !== 'function') throw new Error(`${job.module} does not export a function '${job.fn}'`);
  const out: R[] = [];
  let index = 0;
  for await (const frame of readFrames(path, { columns: job.columns })) out.push(fn(frame, index++, job.options));
  return out;
}
