/**
 * Starting structures for the demo: a face-centred cubic crystal.
 */
import type { Frame } from '../../../src/atoms/frame.js';

/**
 * Nearest-neighbour distance of the Lennard-Jones fcc crystal at equilibrium, in units of sigma:
 * r0/sigma = (2 A12 / A6)^(1/6) = 1.0902 with the lattice sums A12 = 12.13188, A6 = 14.45392
 * (C. Kittel, Introduction to Solid State Physics, ch. 3).
 */
export const KITTEL_A12 = 12.13188;
export const KITTEL_A6 = 14.45392;
export const LJ_FCC_NN_OVER_SIGMA = (2 * KITTEL_A12 / KITTEL_A6) ** (1 / 6);

/** Cubic lattice constant of the LJ fcc crystal at equilibrium (Å): a = sqrt(2) r0. */
export function ljFccLatticeConstant(sigma: number): number {
  return Math.SQRT2 * LJ_FCC_NN_OVER_SIGMA * sigma;
}

/** fcc basis in fractional coordinates of the conventional cubic cell. */
const FCC_BASIS = [
  [0, 0, 0],
  [0, 0.5, 0.5],
  [0.5, 0, 0.5],
  [0.5, 0.5, 0],
];

/** An fcc crystal of n x n x n conventional cubic cells (4 n^3 atoms) with lattice constant a (Å), periodic. */
export function fccCrystal(symbol: string, a: number, n: number | [number, number, number]): Frame {
  const [nx, ny, nz] = typeof n === 'number' ? [n, n, n] : n;
  for (const m of [nx, ny, nz]) if (!Number.isInteger(m) || m < 1) throw new RangeError(`cell repeats must be positive integers, got ${m}`);
  if (!(a > 0 && Number.isFinite(a))) throw new RangeError(`lattice constant must be positive, got ${a}`);
  const count = 4 * nx * ny * nz;
  const positions = new Float64Array(3 * count);
  let p = 0;
  for (let i = 0; i < nx; i++)
    for (let j = 0; j < ny; j++)
      for (let k = 0; k < nz; k++)
        for (const b of FCC_BASIS) {
          positions[p++] = (i + b[0]) * a;
          positions[p++] = (j + b[1]) * a;
          positions[p++] = (k + b[2]) * a;
        }
  return {
    species: new Array<string>(count).fill(symbol),
    positions,
    cell: Float64Array.of(nx * a, 0, 0, 0, ny * a, 0, 0, 0, nz * a),
    pbc: [true, true, true],
    arrays: new Map(),
    info: new Map(),
  };
}

/** Scales a periodic frame's cell and positions uniformly by `factor` (in place). */
export function scaleFrame(frame: Frame, factor: number): void {
  if (!frame.cell) throw new RangeError('cannot scale a frame without a cell');
  for (let i = 0; i < 9; i++) frame.cell[i] *= factor;
  for (let i = 0; i < frame.positions.length; i++) frame.positions[i] *= factor;
}
