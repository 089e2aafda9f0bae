import type { Band } from '../gates/committee.js';
import { farthestPointSelect } from './farthest.js';

/** One frame offered for selection. */
export interface Candidate {
  /** The frame's committee spread (eV/Å): max over atoms of the per-atom force deviation. */
  spread: number;
  band: Band;
  /** False when the frame failed the contacts gate (atoms unphysically close): never labeled. */
  sane: boolean;
  fingerprint: ArrayLike<number>;
}

export interface PickResult {
  /** Indices into the candidate list, in pick order. */
  picked: number[];
  counts: Record<Band, number>;
  /** Informative frames left out because they failed the contacts gate. */
  insane: number;
}

/**
 * Pick at most `cap` frames worth labeling: only informative frames (never confident ones, which teach
 * little, nor runaway ones, which left the region the committee knows) that passed the contacts gate,
 * spread out by farthest-point selection on their fingerprints, starting from the largest spread.
 */
export function pickInformative(candidates: Candidate[], cap: number): PickResult {
  const counts: Record<Band, number> = { confident: 0, informative: 0, runaway: 0 };
  const pool: number[] = [];
  let insane = 0;
  candidates.forEach((c, i) => {
    counts[c.band]++;
    if (c.band !== 'informative') return;
    if (!c.sane) insane++;
    else pool.push(i);
  });
  if (pool.length === 0 || cap <= 0) return { picked: [], counts, insane };
  let first = 0;
  for (let k = 1; k < pool.length; k++) if (candidates[pool[k]].spread > candidates[pool[first]].spread) first = k;
  const chosen = farthestPointSelect(
    pool.map((i) => candidates[i].fingerprint),
    cap,
    first,
  );
  return { picked: chosen.map((k) => pool[k]), counts, insane };
}
