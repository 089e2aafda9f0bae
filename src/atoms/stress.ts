/**
 * Stress and pressure: the one convention every stage, gate and document uses.
 *
 * Convention (the same as ASE's `Atoms.get_stress()` and its extended XYZ writer, a general-purpose library
 * many stage programs use, so files pass through unchanged):
 * - the frame's info key `stress` holds the virial stress of the whole cell in eV/Å^3 (per cell, not per atom),
 *   either 9 numbers (the 3x3 tensor, row-major: xx xy xz yx yy yz zx zy zz) or 6 in Voigt order
 *   (xx yy zz yz xz xy);
 * - sign: stress = (1/V) dE/d(strain); a cell under compression has negative diagonal stress, so the pressure
 *   of the potential part is P = -trace(stress)/3;
 * - it is the potential (configurational) part only; an MD run's instantaneous pressure adds the kinetic
 *   part N k_B T / V (ideal gas) when velocities are known.
 * Units: 1 eV/Å^3 = 160.21766208 GPa = 1,602,176.6 bar (CODATA 2018, src/atoms/units.ts).
 */
import type { Frame } from './frame.js';
import { BAR_EV_PER_A3, GPA_EV_PER_A3, KB_EV_PER_K } from './units.js';
import { cellVolume } from './cell.js';

/** Voigt order of the six independent components. */
export const VOIGT_ORDER = ['xx', 'yy', 'zz', 'yz', 'xz', 'xy'] as const;

/**
 * The stress of a frame as Voigt (xx yy zz yz xz xy) in eV/Å^3, from info `key` (default `stress`);
 * undefined when the frame has none; throws with a clear message when the value has another shape.
 * A 3x3 tensor is symmetrised ((xy + yx)/2 ...).
 */
export function stressVoigt(frame: Frame, key = 'stress'): Float64Array | undefined {
  const v = frame.info.get(key);
  if (v === undefined) return undefined;
  if (!Array.isArray(v) || !v.every((x) => typeof x === 'number')) {
    throw new Error(`info key ${key}: expected 6 (Voigt xx yy zz yz xz xy) or 9 (3x3 row-major) numbers in eV/Å^3, found ${JSON.stringify(v)}`);
  }
  const a = v as number[];
  if (a.length === 6) return Float64Array.from(a);
  if (a.length === 9) {
    return Float64Array.of(a[0], a[4], a[8], (a[5] + a[7]) / 2, (a[2] + a[6]) / 2, (a[1] + a[3]) / 2);
  }
  throw new Error(`info key ${key}: expected 6 (Voigt xx yy zz yz xz xy) or 9 (3x3 row-major) numbers in eV/Å^3, found ${a.length}`);
}

/** Pressure of the potential part, eV/Å^3: -trace(stress)/3 (Voigt input). */
export function pressureFromStress(voigt: ArrayLike<number>): number {
  return -(voigt[0] + voigt[1] + voigt[2]) / 3;
}

/** Ideal-gas (kinetic) pressure N k_B T / V in eV/Å^3. */
export function kineticPressure(atoms: number, temperatureK: number, volumeA3: number): number {
  return (atoms * KB_EV_PER_K * temperatureK) / volumeA3;
}

/** Volume of a frame's cell in Å^3, or undefined when it has no cell or a degenerate one. */
export function frameVolume(frame: Frame): number | undefined {
  if (!frame.cell) return undefined;
  const v = Math.abs(cellVolume(frame.cell));
  return v > 0 && Number.isFinite(v) ? v : undefined;
}

export const evPerA3ToBar = (x: number): number => x / BAR_EV_PER_A3;
export const barToEvPerA3 = (x: number): number => x * BAR_EV_PER_A3;
export const evPerA3ToGPa = (x: number): number => x / GPA_EV_PER_A3;
export const gpaToEvPerA3 = (x: number): number => x * GPA_EV_PER_A3;
