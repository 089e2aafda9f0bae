/**
 * Committee predictions on a frame (pure).
 */
import type { Frame } from '../../../src/atoms/frame.js';
import { COMMITTEE_ENERGY, bareCopy, realColumn } from './frames.js';
import { committeeMean, evaluateCommittee, type PairModel } from './model.js';

/**
 * A copy of the frame (same atoms, cell, pbc and info) with the committee's mean energy and forces as
 * info `energy` and per-atom `forces`, and each member's as `energy_<m>` and `forces_<m>`.
 * Reference labels of the input are not carried over (compare against the reference file instead).
 */
export function predictFrame(frame: Frame, models: PairModel[]): Frame {
  const c = evaluateCommittee(frame, frame.species, models);
  const mean = committeeMean(c);
  const out = bareCopy(frame);
  for (const [k, v] of frame.info) {
    if (k === 'energy' || k === 'total_energy' || COMMITTEE_ENERGY.test(k)) continue;
    out.info.set(k, v);
  }
  out.info.set('energy', mean.energy);
  c.energies.forEach((e, m) => out.info.set(`energy_${m}`, e));
  out.arrays.set('forces', realColumn(mean.forces));
  c.forces.forEach((f, m) => out.arrays.set(`forces_${m}`, realColumn(f)));
  return out;
}
