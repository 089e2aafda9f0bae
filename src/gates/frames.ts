/**
 * Running a per-frame gate function over one or more extended XYZ files.
 * Frames are numbered across the files in order (0-based); FileSpan says where each file starts.
 */
import { availableParallelism } from 'node:os';
import type { FrameJob } from '../atoms/xyz/map.js';
import { GateInputError, type FileSpan } from './types.js';

/** Default worker threads for a gate: min(2, cpus) (the speed path of the reader's benchmark). */
export function defaultWorkers(): number {
  return Math.max(1, Math.min(2, availableParallelism()));
}

/** Apply `job` to every frame of every file, in order; results indexed by global frame number. */
export async function mapFiles<R>(paths: string[], job: FrameJob, workers = defaultWorkers()): Promise<{ results: R[]; files: FileSpan[] }> {
  // imported here, not at the top: worker threads load the gate modules for their per-frame functions only
  const { mapFrames } = await import('../atoms/xyz/map.js');
  const results: R[] = [];
  const files: FileSpan[] = [];
  for (const path of paths) {
    const part = await mapFrames<R>(path, job, { workers });
    // A file without frames, or a frame without atoms, is input no gate can judge (bad input, not a verdict).
    if (part.length === 0) throw new GateInputError(`${path}: no frame in the file (it is empty or holds only blank lines); expected extended XYZ with at least one frame`);
    const empty = part.findIndex((r) => (r as { atoms?: unknown }).atoms === 0);
    if (empty >= 0) throw new GateInputError(`${path}: frame ${empty} has 0 atoms; expected at least one atom in every frame`);
    files.push({ path, first_frame: results.length, frames: part.length });
    for (const r of part) results.push(r);
  }
  return { results, files };
}

/** "frame 17 of a.xyz" for one file; "frame 17 (frame 5 of b.xyz)" when several files were read; "frame 17" without files. */
export function frameLabel(index: number, files: FileSpan[] | undefined): string {
  if (!files || files.length === 0) return `frame ${index}`;
  if (files.length === 1) return `frame ${index} of ${files[0].path}`;
  const f = locate(index, files);
  return f ? `frame ${index} (frame ${index - f.first_frame} of ${f.path})` : `frame ${index}`;
}

/** The file holding a global frame index. */
export function locate(index: number, files: FileSpan[]): FileSpan | undefined {
  for (const f of files) if (index >= f.first_frame && index < f.first_frame + f.frames) return f;
  return undefined;
}

/** Index of the first non-finite value in a typed array, or -1. */
export function firstNonFinite(values: ArrayLike<number>): number {
  for (let k = 0; k < values.length; k++) if (!Number.isFinite(values[k])) return k;
  return -1;
}

const NON_FINITE_TEXT = /^[+-]?(nan|inf|infinity)$/i;

/**
 * A numeric info value: a number, or a non-finite one written as text (nan, inf, -inf, Infinity),
 * which a reader may keep as a string. Undefined when absent or not numeric.
 */
export function infoNumber(info: Map<string, unknown>, key: string): number | undefined {
  const v = info.get(key);
  if (typeof v === 'number') return v;
  if (typeof v === 'string' && NON_FINITE_TEXT.test(v.trim())) {
    const t = v.trim().toLowerCase();
    return t.includes('nan') ? NaN : t.startsWith('-') ? -Infinity : Infinity;
  }
  return undefined;
}
