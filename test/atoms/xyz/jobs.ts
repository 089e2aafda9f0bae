/** Per-frame job functions used by the mapFrames tests (loaded in worker threads). */
import type { Frame } from '../../../src/atoms/frame.js';

export interface Summary {
  index: number;
  natoms: number;
  first: string | null;
  sumPos: number;
  arrays: string[];
  sumForces: number | null;
  energy: unknown;
  scale: number;
}

/** A fingerprint of a frame: order-sensitive sums, so any parsing difference shows. */
export function summary(frame: Frame, index: number, options: { scale?: number } | undefined): Summary {
  let s = 0;
  for (let i = 0; i < frame.positions.length; i++) s = s * 1.0000001 + frame.positions[i];
  const f = frame.arrays.get('forces');
  let sf: number | null = null;
  if (f) {
    sf = 0;
    for (const x of f.values as Float64Array) sf = sf * 1.0000001 + x;
  }
  return {
    index,
    natoms: frame.species.length,
    first: frame.species[0] ?? null,
    sumPos: s,
    arrays: [...frame.arrays.keys()],
    sumForces: sf,
    energy: frame.info.get('energy'),
    scale: options?.scale ?? 1,
  };
}

/** Fails on frame 5 (to test that job errors surface). */
export function failOnFive(frame: Frame, index: number): number {
  if (index === 5) throw new RangeError(`job refused frame ${index} with ${frame.species.length} atoms`);
  return index;
}

export const notAFunction = 42;

/** summary without the frame index, for mapFrames' range-split mode (usesIndex: false: the index may be -1). */
export function summaryNoIndex(frame: Frame, _index: number, options: { scale?: number } | undefined): Omit<Summary, 'index'> & { positions: number } {
  const { index: _, ...rest } = summary(frame, 0, options);
  return { ...rest, positions: frame.positions.length };
}

/** Fails on the first frame with `atoms` atoms (a property of the frame, not of its index). */
export function failOnAtoms(frame: Frame, _index: number, options: { atoms: number }): number {
  if (frame.species.length === options.atoms) throw new RangeError(`job refused a frame of ${options.atoms} atoms`);
  return frame.species.length;
}
