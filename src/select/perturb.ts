import type { Frame } from '../atoms/frame.js';
import { structureOf } from './hygiene.js';
import type { Random } from './random.js';

export interface PerturbOptions {
  /** Standard deviation of the Gaussian displacement of each Cartesian component, Å. */
  displacement: number;
  /** Largest magnitude of each component of the symmetric strain applied to the cell (dimensionless). */
  strain: number;
}

/**
 * A perturbed copy of a starting structure for round 0: the cell is strained by a random symmetric
 * strain (atoms keep their fractional coordinates), then every atom is displaced at random.
 * Only periodic directions are strained. The copy is the structure alone (species, positions, cell, pbc):
 * every info key and per-atom array of the start is dropped (./hygiene.ts), labels no longer apply and
 * nothing else of the start may reach the labeler.
 */
export function perturbFrame(frame: Frame, opts: PerturbOptions, rng: Random): Frame {
  const n = frame.species.length;
  const positions = new Float64Array(frame.positions);
  let cell = frame.cell ? new Float64Array(frame.cell) : null;
  if (cell && opts.strain > 0) {
    const e = [0, 0, 0, 0, 0, 0, 0, 0, 0];
    for (let a = 0; a < 3; a++)
      for (let b = a; b < 3; b++) {
        if (!frame.pbc[a] || !frame.pbc[b]) continue;
        const v = (2 * rng.uniform() - 1) * opts.strain;
        e[3 * a + b] = v;
        e[3 * b + a] = v;
      }
    // Deformation F = I + e applied to row vectors: r' = r (I + e); cell rows transform the same way,
    // so fractional coordinates are preserved.
    const apply = (arr: Float64Array, count: number) => {
      for (let i = 0; i < count; i++) {
        const x = arr[3 * i], y = arr[3 * i + 1], z = arr[3 * i + 2];
        for (let c = 0; c < 3; c++) arr[3 * i + c] = x * ((c === 0 ? 1 : 0) + e[c]) + y * ((c === 1 ? 1 : 0) + e[3 + c]) + z * ((c === 2 ? 1 : 0) + e[6 + c]);
      }
    };
    apply(positions, n);
    cell = new Float64Array(cell);
    apply(cell, 3);
  }
  for (let k = 0; k < 3 * n; k++) positions[k] += opts.displacement * rng.normal();
  return { ...structureOf(frame), positions, cell };
}
