/**
 * The demo's reference potential: Lennard-Jones argon with a long smooth cutoff.
 *
 * u(r) = 4 epsilon [(sigma/r)^12 - (sigma/r)^6], multiplied by the switching function S(r) of
 * switching.ts between r_on and r_c, so energy and forces go smoothly to zero and the forces are
 * exactly minus the gradient of the energy that is reported.
 *
 * Parameters for argon: epsilon/k_B = 119.8 K, sigma = 3.405 Å, a widely used fit (from memory;
 * cite as such). Default cutoff: switching from 2.5 sigma to 3 sigma (common practice for LJ
 * argon is a cutoff of 2.5-3 sigma).
 *
 * This is a toy reference for a demonstration, not a production model of argon.
 */
import { forEachPair } from '../../../src/atoms/neighbours.js';
import { KB_EV_PER_K } from '../../../src/atoms/units.js';
import type { Pbc } from '../../../src/atoms/frame.js';
import { checkSwitch, switchValue, type Switch } from './switching.js';

export interface PairSystem {
  positions: Float64Array;
  cell: Float64Array | null;
  pbc: Pbc;
}

export interface LjParams extends Switch {
  /** Well depth (eV). */
  epsilon: number;
  /** Zero crossing of u(r) (Å). */
  sigma: number;
}

export const ARGON_EPSILON_K = 119.8;
export const ARGON_SIGMA = 3.405;

/** Argon LJ with switching from 2.5 sigma to 3 sigma. */
export function argonLj(overrides: Partial<LjParams> = {}): LjParams {
  const p: LjParams = {
    epsilon: ARGON_EPSILON_K * KB_EV_PER_K,
    sigma: ARGON_SIGMA,
    rOn: 2.5 * ARGON_SIGMA,
    rCut: 3.0 * ARGON_SIGMA,
    ...overrides,
  };
  checkLj(p);
  return p;
}

export function checkLj(p: LjParams): void {
  if (!(p.epsilon > 0 && Number.isFinite(p.epsilon))) throw new RangeError(`epsilon must be positive, got ${p.epsilon}`);
  if (!(p.sigma > 0 && Number.isFinite(p.sigma))) throw new RangeError(`sigma must be positive, got ${p.sigma}`);
  checkSwitch(p, 'Lennard-Jones cutoff');
}

/** The switched pair energy and its derivative d/dr, written into out[0], out[1]. */
export function ljPair(r: number, p: LjParams, out: Float64Array): void {
  const sr2 = (p.sigma * p.sigma) / (r * r);
  const sr6 = sr2 * sr2 * sr2;
  const sr12 = sr6 * sr6;
  const u = 4 * p.epsilon * (sr12 - sr6);
  const du = (-4 * p.epsilon * (12 * sr12 - 6 * sr6)) / r;
  switchValue(r, p, out);
  const s = out[0];
  const ds = out[1];
  out[0] = u * s;
  out[1] = du * s + u * ds;
}

export interface EnergyForces {
  /** Total potential energy (eV). */
  energy: number;
  /** 3N forces (eV/Å). */
  forces: Float64Array;
  /** Shortest interatomic distance seen within the cutoff (Infinity if none). */
  minDistance: number;
}

/** Energy and forces of a configuration under the switched LJ potential. */
export function ljEnergyForces(system: PairSystem, p: LjParams): EnergyForces {
  const n = system.positions.length / 3;
  const forces = new Float64Array(3 * n);
  const tmp = new Float64Array(2);
  let energy = 0;
  let minDistance = Infinity;
  forEachPair(system, p.rCut, (i, j, d, dx, dy, dz) => {
    if (d >= p.rCut) return;
    if (d < minDistance) minDistance = d;
    ljPair(d, p, tmp);
    energy += tmp[0];
    if (i === j) return; // an atom and its own image: the pair moves rigidly, no force
    const f = tmp[1] / d; // dU/dr / r ; F_j = -dU/dr * d_hat, F_i = +dU/dr * d_hat
    forces[3 * i] += f * dx;
    forces[3 * i + 1] += f * dy;
    forces[3 * i + 2] += f * dz;
    forces[3 * j] -= f * dx;
    forces[3 * j + 1] -= f * dy;
    forces[3 * j + 2] -= f * dz;
  });
  return { energy, forces, minDistance };
}

/**
 * The energy per atom that the cutoff leaves out, for a uniform fluid of number density rho (Å^-3):
 * (rho/2) * integral from r_on to infinity of 4 pi r^2 u(r) (1 - S(r)) dr.
 * The standard long-range correction (M. P. Allen and D. J. Tildesley, Computer Simulation of Liquids,
 * 1987, section 2.8; from memory), here for a switched rather than a truncated potential.
 * Computed by Simpson's rule over the switching region plus the analytic tail beyond r_c.
 */
export function tailEnergyPerAtom(rho: number, p: LjParams): number {
  const s3 = p.sigma ** 3;
  // analytic: integral_{rc}^{inf} 4 pi r^2 4 eps [(s/r)^12 - (s/r)^6] dr
  const rc = p.rCut;
  const beyond = 16 * Math.PI * p.epsilon * s3 * ((p.sigma / rc) ** 9 / (9 * 1) - (p.sigma / rc) ** 3 / 3);
  const m = 2000; // even number of Simpson intervals
  const h = (p.rCut - p.rOn) / m;
  const tmp = new Float64Array(2);
  let sum = 0;
  for (let k = 0; k <= m; k++) {
    const r = p.rOn + k * h;
    const sr6 = (p.sigma / r) ** 6;
    const u = 4 * p.epsilon * (sr6 * sr6 - sr6);
    const s = switchValue(r, p, tmp);
    const g = 4 * Math.PI * r * r * u * (1 - s);
    sum += (k === 0 || k === m ? 1 : k % 2 === 1 ? 4 : 2) * g;
  }
  return 0.5 * rho * (beyond + (sum * h) / 3);
}
