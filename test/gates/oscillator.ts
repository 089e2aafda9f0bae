/**
 * Independent 3-D harmonic oscillators (one per atom, spring k about a fixed site) integrated with velocity Verlet,
 * written as Frames with potential `energy`, `velocities`, `forces` and `time`: a known NVE run for the drift gate.
 *
 * Velocity Verlet on a harmonic oscillator exactly conserves the modified energy
 *   I = 1/2 m v^2 + 1/2 k q^2 (1 - h^2 w^2 / 4),  w^2 = k/m
 * (E. Hairer, C. Lubich, G. Wanner, "Geometric numerical integration illustrated by the Störmer-Verlet method",
 * Acta Numerica 12 (2003) 399-450; quoted from memory, and checked numerically by the tests), so the true energy
 * E = I + (h^2 w^2/4) 1/2 k q^2 stays within [I, I / (1 - h^2 w^2/4)]: a bounded, oscillating error and no drift.
 */
import { atomicMass } from '../../src/atoms/elements.js';
import { EV_TO_AMU_A2_PER_FS2 } from '../../src/atoms/units.js';
import type { Frame } from '../../src/atoms/frame.js';
import { makeFrame } from './helpers.js';

export interface OscillatorRun {
  frames: Frame[];
  /** Modified energy (eV) at every written frame: should be constant. */
  invariant: number[];
  /** Upper bound on |E(t) - E(0)| in eV (whole system) from the invariant. */
  bound: number;
  masses: number[];
}

export function oscillatorRun(opts: {
  species: string[];
  k: number; // eV/Å^2
  h: number; // fs
  steps: number;
  every: number;
  q0: number[]; // initial displacements, 3N Å
  v0: number[]; // initial velocities, 3N Å/fs
  cell?: number[];
  pbc?: [boolean, boolean, boolean];
  /** Added to the written total energy: a deliberate drift of slope eV/fs (whole system). */
  driftEvPerFs?: number;
}): OscillatorRun {
  const n = opts.species.length;
  const m = opts.species.map(atomicMass);
  const site = Array.from({ length: 3 * n }, (_, c) => 3.0 * Math.floor(c / 3) + 1.0 + (c % 3)); // well separated
  const q = Float64Array.from(opts.q0);
  const v = Float64Array.from(opts.v0);
  const acc = (c: number): number => ((-opts.k * q[c]) / m[Math.floor(c / 3)]) * EV_TO_AMU_A2_PER_FS2; // Å/fs^2
  const w2 = (a: number): number => (opts.k / m[a]) * EV_TO_AMU_A2_PER_FS2;
  const energy = (): { pot: number; kin: number; inv: number } => {
    let pot = 0;
    let kin = 0;
    let inv = 0;
    for (let c = 0; c < 3 * n; c++) {
      const a = Math.floor(c / 3);
      const u = 0.5 * opts.k * q[c] * q[c];
      const t = (0.5 * m[a] * v[c] * v[c]) / EV_TO_AMU_A2_PER_FS2;
      pot += u;
      kin += t;
      inv += t + u * (1 - (opts.h * opts.h * w2(a)) / 4);
    }
    return { pot, kin, inv };
  };
  const frames: Frame[] = [];
  const invariant: number[] = [];
  const write = (step: number): void => {
    const e = energy();
    const time = step * opts.h;
    frames.push(
      makeFrame({
        species: opts.species,
        positions: Array.from(q, (x, c) => site[c] + x),
        cell: opts.cell ?? null,
        pbc: opts.pbc,
        arrays: { velocities: Array.from(v), forces: Array.from(q, (x) => -opts.k * x) },
        info: { energy: e.pot, time, ...(opts.driftEvPerFs ? { total_energy: e.pot + e.kin + opts.driftEvPerFs * time } : {}) },
      }),
    );
    invariant.push(e.inv);
  };
  write(0);
  for (let s = 1; s <= opts.steps; s++) {
    for (let c = 0; c < 3 * n; c++) v[c] += 0.5 * opts.h * acc(c);
    for (let c = 0; c < 3 * n; c++) q[c] += opts.h * v[c];
    for (let c = 0; c < 3 * n; c++) v[c] += 0.5 * opts.h * acc(c);
    if (s % opts.every === 0) write(s);
  }
  let worst = 0;
  for (let a = 0; a < n; a++) worst = Math.max(worst, (opts.h * opts.h * w2(a)) / 4);
  return { frames, invariant, bound: (invariant[0] * worst) / (1 - worst), masses: m };
}
