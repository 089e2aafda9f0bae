import type { Frame } from '../frame.js';

export interface ReadOptions {
  /** Per-atom properties to parse besides species and pos; undefined means all. Others are skipped. */
  columns?: string[];
}

// Placeholder until the streaming reader lands.
export async function* readFrames(_path: string, _opts: ReadOptions = {}): AsyncGenerator<Frame> {
  throw new Error('extended XYZ reader not built yet');
}
