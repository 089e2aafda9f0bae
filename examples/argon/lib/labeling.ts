/**
 * Labeling a frame with the reference potential (pure apart from updating the frame it is given).
 */
import type { Frame } from '../../../src/atoms/frame.js';
import { COMMITTEE_ENERGY, COMMITTEE_FORCES, realColumn } from './frames.js';
import { ljEnergyForces, type LjParams } from './lj.js';

/**
 * Sets info `energy` (eV) and per-atom `forces` (eV/Å) to the reference values and drops whatever a
 * model produced (committee arrays forces_<m>, info energy_<m> and total_energy). Everything else
 * (info such as source_artifact/source_frame, velocities) is kept.
 */
export function labelFrame(frame: Frame, params: LjParams): Frame {
  const { energy, forces } = ljEnergyForces(frame, params);
  for (const key of [...frame.arrays.keys()]) if (key === 'forces' || COMMITTEE_FORCES.test(key)) frame.arrays.delete(key);
  for (const key of [...frame.info.keys()]) if (key === 'energy' || key === 'total_energy' || COMMITTEE_ENERGY.test(key)) frame.info.delete(key);
  frame.info.set('energy', energy);
  frame.arrays.set('forces', realColumn(forces));
  return frame;
}
