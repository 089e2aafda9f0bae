/**
 * Molecular dynamics for the demo: velocity Verlet with an optional Langevin thermostat in the BAOAB
 * splitting (B. Leimkuhler and C. Matthews, "Rational construction of stochastic numerical methods for
 * molecular sampling", Appl. Math. Res. Express 2013 (2013) 34-56; from memory).
 *
 * One step of length dt:
 *   B: v += (dt/2) F/m      A: x += (dt/2) v      O: v = c1 v + sqrt((1 - c1^2) k_B T / m) xi,  c1 = exp(-gamma dt)
 *   A: x += (dt/2) v        (new forces)          B: v += (dt/2) F/m
 * With friction gamma = 0 the O step is the identity and this is exactly velocity Verlet (constant energy).
 *
 * Units: positions Å, velocities Å/fs, time fs, masses u, forces eV/Å, energies eV. An acceleration
 * F/m in eV/(Å u) is converted to Å/fs^2 by dividing by 103.6427 (AMU_A2_PER_FS2_TO_EV, from CODATA 2018).
 */
import type { Pbc } from '../../../src/atoms/frame.js';
import { wrapPositions } from '../../../src/atoms/cell.js';
import { AMU_A2_PER_FS2_TO_EV, KB_EV_PER_K, kineticEnergy, temperatureFromKinetic } from '../../../src/atoms/units.js';
import type { Random } from './random.js';

export interface ForceResult<X = unknown> {
  /** Potential energy (eV). */
  energy: number;
  /** Driving forces, 3N (eV/Å). */
  forces: Float64Array;
  /** Shortest interatomic distance seen (Å). */
  minDistance: number;
  /** Anything else the force provider wants to hand to the frame writer (e.g. committee forces). */
  extra?: X;
}

/** Computes forces for positions (3N, Å); the cell and periodicity are fixed by the caller. */
export type ForceProvider<X = unknown> = (positions: Float64Array) => ForceResult<X>;

export interface MdSystem {
  positions: Float64Array;
  velocities: Float64Array;
  /** Per-atom masses (u). */
  masses: Float64Array;
  cell: Float64Array | null;
  pbc: Pbc;
}

/** Standard deviation of one velocity component at temperature T for mass m (Å/fs). */
export function thermalSpeed(temperature: number, mass: number): number {
  return Math.sqrt((KB_EV_PER_K * temperature) / (mass * AMU_A2_PER_FS2_TO_EV));
}

/** Degrees of freedom for the kinetic temperature: 3N - 3 when total momentum is conserved (NVE), else 3N. */
export function degreesOfFreedom(atoms: number, conservesMomentum: boolean): number {
  return conservesMomentum && atoms > 1 ? 3 * atoms - 3 : 3 * atoms;
}

export function removeDrift(velocities: Float64Array, masses: Float64Array): void {
  let px = 0, py = 0, pz = 0, mt = 0;
  for (let a = 0; a < masses.length; a++) {
    px += masses[a] * velocities[3 * a];
    py += masses[a] * velocities[3 * a + 1];
    pz += masses[a] * velocities[3 * a + 2];
    mt += masses[a];
  }
  for (let a = 0; a < masses.length; a++) {
    velocities[3 * a] -= px / mt;
    velocities[3 * a + 1] -= py / mt;
    velocities[3 * a + 2] -= pz / mt;
  }
}

/**
 * Maxwell-Boltzmann velocities at temperature T with zero total momentum, rescaled so the kinetic
 * temperature over 3N - 3 degrees of freedom is exactly T.
 */
export function maxwellBoltzmann(masses: Float64Array, temperature: number, rng: Random): Float64Array {
  const n = masses.length;
  const v = new Float64Array(3 * n);
  if (temperature <= 0 || n === 0) return v;
  for (let a = 0; a < n; a++) {
    const s = thermalSpeed(temperature, masses[a]);
    for (let k = 0; k < 3; k++) v[3 * a + k] = s * rng.normal();
  }
  removeDrift(v, masses);
  const t = temperatureFromKinetic(kineticEnergy(masses, v), degreesOfFreedom(n, true));
  if (t > 0) {
    const f = Math.sqrt(temperature / t);
    for (let i = 0; i < v.length; i++) v[i] *= f;
  }
  return v;
}

export interface StepOptions {
  /** Time step (fs). */
  dt: number;
  /** Langevin friction gamma (1/fs); 0 for constant energy. */
  friction: number;
  /** Thermostat temperature (K); unused when friction is 0. */
  temperature: number;
  rng: Random;
}

/** One BAOAB step; updates positions (wrapped into the cell) and velocities in place and returns the new forces. */
export function baoabStep<X>(sys: MdSystem, current: ForceResult<X>, opts: StepOptions, compute: ForceProvider<X>): ForceResult<X> {
  const { dt, friction, temperature, rng } = opts;
  const { positions: x, velocities: v, masses } = sys;
  const n = masses.length;
  const half = 0.5 * dt;
  let f = current.forces;
  for (let a = 0; a < n; a++) {
    const k = half / (masses[a] * AMU_A2_PER_FS2_TO_EV);
    for (let c = 3 * a; c < 3 * a + 3; c++) {
      v[c] += k * f[c];
      x[c] += half * v[c];
    }
  }
  if (friction > 0) {
    const c1 = Math.exp(-friction * dt);
    const c2 = Math.sqrt(1 - c1 * c1);
    for (let a = 0; a < n; a++) {
      const s = c2 * thermalSpeed(temperature, masses[a]);
      for (let c = 3 * a; c < 3 * a + 3; c++) v[c] = c1 * v[c] + s * rng.normal();
    }
  }
  for (let c = 0; c < 3 * n; c++) x[c] += half * v[c];
  x.set(wrapPositions(sys.cell, sys.pbc, x));
  const next = compute(x);
  f = next.forces;
  for (let a = 0; a < n; a++) {
    const k = half / (masses[a] * AMU_A2_PER_FS2_TO_EV);
    for (let c = 3 * a; c < 3 * a + 3; c++) v[c] += k * f[c];
  }
  return next;
}

export type StopReason = 'completed' | 'contact' | 'non_finite';

export interface RunOptions {
  /** Time step (fs). */
  dt: number;
  /** Production steps. */
  steps: number;
  /** Call onFrame every this many steps (and at step 0). */
  interval: number;
  /** Thermostat temperature (K). */
  temperature: number;
  /** Langevin friction (1/fs) for production; 0 = constant energy. */
  friction: number;
  /** Langevin steps before production (not reported), at `equilibrationFriction`. */
  equilibrationSteps?: number;
  /** Friction during equilibration (default: 0.01 /fs). */
  equilibrationFriction?: number;
  /** Stop when two atoms come closer than this (Å). */
  minDistance: number;
  rng: Random;
}

export interface FrameSnapshot<X> {
  step: number;
  /** Time since the start of production (fs). */
  time: number;
  positions: Float64Array;
  velocities: Float64Array;
  result: ForceResult<X>;
  kinetic: number;
  temperature: number;
  /** Set on the last frame when the run stopped early. */
  stopped?: StopReason;
}

export interface RunSummary {
  reason: StopReason;
  /** Production steps done. */
  steps: number;
  frames: number;
  /** Step at which the run stopped early, if it did. */
  stopStep?: number;
  /** Mean kinetic temperature over production steps (K). */
  meanTemperature: number;
}

function finite(r: ForceResult, positions: Float64Array): boolean {
  if (!Number.isFinite(r.energy)) return false;
  for (let i = 0; i < r.forces.length; i++) if (!Number.isFinite(r.forces[i])) return false;
  for (let i = 0; i < positions.length; i++) if (!Number.isFinite(positions[i])) return false;
  return true;
}

/**
 * Equilibrate (optional), then run `steps` production steps, reporting every `interval` steps.
 * Stops early, reporting the offending configuration as the last frame, when atoms come closer than
 * the floor distance or anything goes non-finite.
 */
export function runMd<X>(sys: MdSystem, compute: ForceProvider<X>, opts: RunOptions, onFrame: (s: FrameSnapshot<X>) => void): RunSummary {
  const n = sys.masses.length;
  if (!(opts.dt > 0)) throw new RangeError(`time step must be positive, got ${opts.dt}`);
  if (!Number.isInteger(opts.steps) || opts.steps < 0) throw new RangeError(`steps must be a non-negative integer, got ${opts.steps}`);
  if (!Number.isInteger(opts.interval) || opts.interval < 1) throw new RangeError(`interval must be a positive integer, got ${opts.interval}`);
  if (!(opts.friction >= 0)) throw new RangeError(`friction must be >= 0, got ${opts.friction}`);
  const dof = degreesOfFreedom(n, opts.friction === 0);
  let current = compute(sys.positions);
  const bad = (r: ForceResult): StopReason | undefined =>
    !finite(r, sys.positions) ? 'non_finite' : r.minDistance < opts.minDistance ? 'contact' : undefined;
  const snapshot = (step: number, r: ForceResult<X>, stopped?: StopReason): FrameSnapshot<X> => {
    const kinetic = kineticEnergy(sys.masses, sys.velocities);
    return {
      step,
      time: step * opts.dt,
      positions: sys.positions,
      velocities: sys.velocities,
      result: r,
      kinetic,
      temperature: temperatureFromKinetic(kinetic, dof),
      stopped,
    };
  };
  let reason = bad(current);
  if (reason) {
    onFrame(snapshot(0, current, reason));
    return { reason, steps: 0, frames: 1, stopStep: 0, meanTemperature: NaN };
  }
  const eq = opts.equilibrationSteps ?? 0;
  const eqOpts: StepOptions = { dt: opts.dt, friction: opts.equilibrationFriction ?? 0.01, temperature: opts.temperature, rng: opts.rng };
  for (let s = 0; s < eq; s++) {
    current = baoabStep(sys, current, eqOpts, compute);
    reason = bad(current);
    if (reason) {
      onFrame(snapshot(0, current, reason));
      return { reason, steps: 0, frames: 1, stopStep: 0, meanTemperature: NaN };
    }
  }
  if (eq > 0 && opts.friction === 0) removeDrift(sys.velocities, sys.masses);
  const stepOpts: StepOptions = { dt: opts.dt, friction: opts.friction, temperature: opts.temperature, rng: opts.rng };
  let frames = 0;
  let tSum = 0;
  onFrame(snapshot(0, current));
  frames++;
  for (let step = 1; step <= opts.steps; step++) {
    current = baoabStep(sys, current, stepOpts, compute);
    reason = bad(current);
    const snap = snapshot(step, current, reason);
    tSum += snap.temperature;
    if (reason) {
      onFrame(snap);
      return { reason, steps: step, frames: frames + 1, stopStep: step, meanTemperature: tSum / step };
    }
    if (step % opts.interval === 0) {
      onFrame(snap);
      frames++;
    }
  }
  return { reason: 'completed', steps: opts.steps, frames, meanTemperature: opts.steps > 0 ? tSum / opts.steps : snapshot(0, current).temperature };
}
