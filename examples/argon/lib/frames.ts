/**
 * Reading and writing the demo's frames with ratchet's extended XYZ library, and turning frames into
 * the plain arrays the physics works on.
 */
import type { AtomColumn, Frame } from '../../../src/atoms/frame.js';
import { numberInfo, realArray } from '../../../src/atoms/frame.js';
import { readFrames } from '../../../src/atoms/xyz/reader.js';
import type { LabeledConfig } from './fit.js';

/** A frame that lacks what a program needs: names the file and the frame (0-based, in file order). */
export class FrameDataError extends Error {
  constructor(message: string) {
    super(message);
    this.name = 'FrameDataError';
  }
}

/** All frames of one or more files, in order, with the file and index of each. */
export async function readAll(paths: string[], columns?: string[]): Promise<{ frame: Frame; file: string; index: number }[]> {
  const out: { frame: Frame; file: string; index: number }[] = [];
  for (const file of paths) {
    let index = 0;
    for await (const frame of readFrames(file, { columns })) out.push({ frame, file, index: index++ });
  }
  return out;
}

export function requirePeriodicOrFree(frame: Frame, file: string, index: number): void {
  if (frame.positions.length !== 3 * frame.species.length) {
    throw new FrameDataError(`${file}: frame ${index}: expected ${3 * frame.species.length} coordinates, found ${frame.positions.length}`);
  }
  if ((frame.pbc[0] || frame.pbc[1] || frame.pbc[2]) && !frame.cell) {
    throw new FrameDataError(`${file}: frame ${index}: periodic (pbc) but has no Lattice`);
  }
}

/** A labeled configuration (info energy, per-atom forces) for fitting; throws FrameDataError naming what is missing. */
export function labeledConfig(frame: Frame, file: string, index: number, energyKey = 'energy', forcesKey = 'forces'): LabeledConfig {
  requirePeriodicOrFree(frame, file, index);
  const energy = numberInfo(frame, energyKey);
  if (energy === undefined || !Number.isFinite(energy)) {
    throw new FrameDataError(`${file}: frame ${index}: expected a finite number in info key '${energyKey}' (eV), found ${JSON.stringify(frame.info.get(energyKey) ?? null)}`);
  }
  const forces = realArray(frame, forcesKey, 3);
  if (!forces) throw new FrameDataError(`${file}: frame ${index}: expected a per-atom real array '${forcesKey}' of width 3 (eV/Å)`);
  for (let i = 0; i < forces.length; i++) {
    if (!Number.isFinite(forces[i])) throw new FrameDataError(`${file}: frame ${index}: '${forcesKey}' of atom ${Math.floor(i / 3)} is not finite`);
  }
  return { species: frame.species, positions: frame.positions, cell: frame.cell, pbc: frame.pbc, energy, forces };
}

export function realColumn(values: Float64Array, width = 3): AtomColumn {
  return { type: 'R', width, values };
}

/** A new frame with the same atoms, cell and pbc and no arrays or info. */
export function bareCopy(frame: Frame): Frame {
  return {
    species: [...frame.species],
    positions: Float64Array.from(frame.positions),
    cell: frame.cell ? Float64Array.from(frame.cell) : null,
    pbc: [frame.pbc[0], frame.pbc[1], frame.pbc[2]],
    arrays: new Map(),
    info: new Map(),
  };
}

/** Committee force arrays are named forces_0 ... forces_{M-1} (design.md). */
export const COMMITTEE_FORCES = /^forces_\d+$/;
export const COMMITTEE_ENERGY = /^energy_\d+$/;
