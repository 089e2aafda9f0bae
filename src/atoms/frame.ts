/**
 * The Frame: one configuration of atoms, as read from or written to extended XYZ.
 * Units follow the project's data contract: positions in Å, cell vectors in Å,
 * energies in eV, forces in eV/Å, velocities in Å/fs, time in fs, temperature in K.
 */

/** Extended XYZ column types: string, real, integer, logical. */
export type ColumnType = 'S' | 'R' | 'I' | 'L';

/**
 * One per-atom property (a `Properties=` entry other than species and pos).
 * Values are row-major: atom a, component k is values[a * width + k].
 * R and I columns are Float64Array (integers are exact up to 2^53), L is Uint8Array (0/1), S is string[].
 */
export interface AtomColumn {
  type: ColumnType;
  width: number;
  values: Float64Array | Uint8Array | string[];
}

/** A per-frame value from the comment line (anything but Lattice, Properties and pbc). */
export type InfoValue = number | boolean | string | number[] | boolean[] | string[];

export type Pbc = [boolean, boolean, boolean];

export interface Frame {
  /** Chemical symbols, one per atom. */
  species: string[];
  /** 3N Cartesian positions in Å, atom-major (x0, y0, z0, x1, ...). */
  positions: Float64Array;
  /** 9 numbers, the lattice vectors a, b, c as rows (ax ay az bx by bz cx cy cz) in Å; null when the file gives none. */
  cell: Float64Array | null;
  /** Periodicity along a, b, c. */
  pbc: Pbc;
  /** Per-atom properties other than species and pos, in file order. */
  arrays: Map<string, AtomColumn>;
  /** Per-frame values, in file order. */
  info: Map<string, InfoValue>;
}

export function atomCount(frame: Frame): number {
  return frame.species.length;
}

/** A real-valued per-atom array of the given width, or undefined when absent or of another shape. */
export function realArray(frame: Frame, name: string, width = 3): Float64Array | undefined {
  const col = frame.arrays.get(name);
  if (!col || col.type !== 'R' || col.width !== width) return undefined;
  return col.values as Float64Array;
}

/** A finite numeric info value, or undefined. */
export function numberInfo(frame: Frame, name: string): number | undefined {
  const v = frame.info.get(name);
  return typeof v === 'number' ? v : undefined;
}
