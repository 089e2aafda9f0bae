/**
 * Fitting the linear pair model (model.ts) to energies and forces by ridge regression.
 *
 * Each labeled frame gives one energy row (per-atom energy, weighted by 1/sigma_E) and 3N force rows
 * (weighted by 1/sigma_F); the fit minimises
 *   sum_frames m_f [ ((E_pred - E)/N)^2 / sigma_E^2 + sum_i |F_pred,i - F_i|^2 / sigma_F^2 ] + lambda |w - w0|^2
 * over the pair weights w and the per-species constants (which are not penalised). m_f is the
 * frame's multiplicity (bootstrap resampling of frames, B. Efron, Ann. Statist. 7 (1979) 1). w0 is zero
 * for plain ridge, or a per-member random anchor drawn from N(0, anchor_scale^2) (a "randomized prior":
 * I. Osband, J. Aslanides, A. Cassirer, "Randomized prior functions for deep reinforcement learning",
 * NeurIPS 2018; from memory), so that members also disagree where the data say nothing. Optionally each
 * member also gets its own jittered basis (basis.ts), so members extrapolate differently beyond the data.
 * The normal equations are accumulated per frame (the parameter count is small) and solved by Cholesky.
 */
import { CholeskyDecomposition, Matrix } from 'ml-matrix';
import { forEachPair } from '../../../src/atoms/neighbours.js';
import { compileBasis, evalCompiled, jitteredBasis, type GaussianBasis } from './basis.js';
import type { PairSystem } from './lj.js';
import { MODEL_FORMAT, pairKey, pairKeys, speciesIndex, type PairModel } from './model.js';
import { createRandom } from './random.js';

export interface LabeledConfig extends PairSystem {
  species: string[];
  /** Reference energy (eV). */
  energy: number;
  /** Reference forces, 3N (eV/Å). */
  forces: Float64Array;
}

export interface FitOptions {
  basis: GaussianBasis;
  /** Species the model knows (default: all species in the data). */
  species?: string[];
  /** Energy scale per atom (eV/atom), default 0.001. */
  sigmaEnergy?: number;
  /** Force scale (eV/Å), default 0.01. */
  sigmaForce?: number;
  /** Ridge strength lambda on the pair weights (dimensionless, like the weighted residuals), default 1. */
  ridge?: number;
  /** Standard deviation of the random anchor w0 (eV); 0 means plain ridge towards zero (default 0). */
  anchorScale?: number;
  /** Member-specific jitter of the basis centres and width (0..1, see basis.ts jitteredBasis; default 0). */
  basisJitter?: number;
  /** Resample frames with replacement (default false). */
  bootstrap?: boolean;
  /** Seed for the resample and the anchor (default 0). */
  seed?: number;
  /** Seed of the basis jitter (default: seed). Give the member index to keep each member's basis the same across rounds. */
  basisSeed?: number;
}

/** A frame's contribution to the normal equations: A^T W A (P x P, row-major) and A^T W b. */
export interface FrameNormal {
  ata: Float64Array;
  atb: Float64Array;
}

/** Parameter layout: pair weights in pairKeys(species) order, K per pair, then one constant per species. */
export function parameterCount(species: string[], K: number): number {
  return pairKeys(species).length * K + species.length;
}

/** The design rows of one configuration: the energy row (P) and the 3N force rows (3N x P, row-major). */
export function designRows(config: PairSystem & { species: string[] }, basis: GaussianBasis, species: string[]): { energy: Float64Array; forces: Float64Array } {
  const K = basis.centers.length;
  const keys = pairKeys(species);
  const P = keys.length * K + species.length;
  const n = config.species.length;
  const type = speciesIndex(config.species, species);
  const T = species.length;
  const pairOffset = new Int32Array(T * T);
  for (let a = 0; a < T; a++) for (let b = 0; b < T; b++) pairOffset[a * T + b] = keys.indexOf(pairKey(species[a], species[b])) * K;
  const energy = new Float64Array(P);
  const forces = new Float64Array(3 * n * P);
  for (let a = 0; a < n; a++) energy[keys.length * K + type[a]] += 1;
  const g = new Float64Array(K);
  const dg = new Float64Array(K);
  const cb = compileBasis(basis);
  forEachPair(config, basis.r_cut, (i, j, d, dx, dy, dz) => {
    if (d >= basis.r_cut) return;
    evalCompiled(d, cb, g, dg);
    const o = pairOffset[type[i] * T + type[j]];
    for (let k = 0; k < K; k++) energy[o + k] += g[k];
    if (i === j) return;
    for (let k = 0; k < K; k++) {
      const c = dg[k] / d;
      const col = o + k;
      forces[(3 * i) * P + col] += c * dx;
      forces[(3 * i + 1) * P + col] += c * dy;
      forces[(3 * i + 2) * P + col] += c * dz;
      forces[(3 * j) * P + col] -= c * dx;
      forces[(3 * j + 1) * P + col] -= c * dy;
      forces[(3 * j + 2) * P + col] -= c * dz;
    }
  });
  return { energy, forces };
}

/** One frame's weighted normal equations. */
export function frameNormal(config: LabeledConfig, basis: GaussianBasis, species: string[], sigmaEnergy: number, sigmaForce: number): FrameNormal {
  const { energy, forces } = designRows(config, basis, species);
  const P = energy.length;
  const n = config.species.length;
  const ata = new Float64Array(P * P);
  const atb = new Float64Array(P);
  const we = 1 / (sigmaEnergy * sigmaEnergy * n * n);
  for (let p = 0; p < P; p++) {
    atb[p] += we * energy[p] * config.energy;
    for (let q = p; q < P; q++) ata[p * P + q] += we * energy[p] * energy[q];
  }
  const wf = 1 / (sigmaForce * sigmaForce);
  for (let r = 0; r < 3 * n; r++) {
    const o = r * P;
    const b = config.forces[r];
    for (let p = 0; p < P; p++) {
      const ap = forces[o + p];
      if (ap === 0) continue;
      atb[p] += wf * ap * b;
      for (let q = p; q < P; q++) ata[p * P + q] += wf * ap * forces[o + q];
    }
  }
  for (let p = 0; p < P; p++) for (let q = 0; q < p; q++) ata[p * P + q] = ata[q * P + p];
  return { ata, atb };
}

/** Frame multiplicities of a bootstrap resample (or all ones). */
export function multiplicities(frames: number, bootstrap: boolean, seed: number): Float64Array {
  const m = new Float64Array(frames);
  if (!bootstrap) return m.fill(1);
  const rng = createRandom(seed);
  for (let f = 0; f < frames; f++) m[rng.integer(frames)] += 1;
  return m;
}

/**
 * Solves (sum_f m_f A_f^T W A_f + lambda D) x = sum_f m_f A_f^T W b_f + lambda D x0,
 * with D = 1 on the penalised parameters and 0 elsewhere. Throws when the system is singular.
 */
export function solveRidge(normals: FrameNormal[], mult: ArrayLike<number>, lambda: number, penalised: boolean[], anchor?: Float64Array): Float64Array {
  if (normals.length === 0) throw new RangeError('no frames to fit');
  const P = normals[0].atb.length;
  const A = new Float64Array(P * P);
  const b = new Float64Array(P);
  normals.forEach((nf, f) => {
    const m = mult[f];
    if (m === 0) return;
    for (let a = 0; a < P * P; a++) A[a] += m * nf.ata[a];
    for (let a = 0; a < P; a++) b[a] += m * nf.atb[a];
  });
  for (let p = 0; p < P; p++) {
    if (!penalised[p]) continue;
    A[p * P + p] += lambda;
    if (anchor) b[p] += lambda * anchor[p];
  }
  const rows: number[][] = [];
  for (let p = 0; p < P; p++) rows.push(Array.from(A.subarray(p * P, p * P + P)));
  const chol = new CholeskyDecomposition(new Matrix(rows));
  if (!chol.isPositiveDefinite()) {
    throw new RangeError('the normal equations are singular: too few frames for the parameters, or ridge = 0 with basis functions no pair reaches');
  }
  const x = chol.solve(Matrix.columnVector(Array.from(b)));
  return Float64Array.from(x.getColumn(0));
}

export interface FitResult {
  model: PairModel;
  /** Frames with non-zero multiplicity. */
  framesUsed: number;
  /** Root-mean-square errors over all given frames (not only the resample). */
  rmse: { energy_per_atom_eV: number; force_eV_per_A: number };
}

/** Fits one committee member. */
export function fitModel(data: LabeledConfig[], opts: FitOptions): FitResult {
  if (data.length === 0) throw new RangeError('no labeled frames to fit');
  const seed = opts.seed ?? 0;
  // independent streams for the basis jitter, the bootstrap and the anchor
  const basis = jitteredBasis(opts.basis, opts.basisJitter ?? 0, createRandom(((opts.basisSeed ?? seed) % 2 ** 48) + 0xba515));
  const K = basis.centers.length;
  const species = [...(opts.species ?? [...new Set(data.flatMap((c) => c.species))])].sort();
  const sigmaE = opts.sigmaEnergy ?? 0.001;
  const sigmaF = opts.sigmaForce ?? 0.01;
  const lambda = opts.ridge ?? 1;
  const anchorScale = opts.anchorScale ?? 0;
  if (!(sigmaE > 0 && sigmaF > 0)) throw new RangeError('sigma_energy and sigma_force must be positive');
  if (!(lambda >= 0)) throw new RangeError(`ridge must be >= 0, got ${lambda}`);
  if (!(anchorScale >= 0)) throw new RangeError(`anchor_scale must be >= 0, got ${anchorScale}`);
  const keys = pairKeys(species);
  const P = keys.length * K + species.length;
  const normals = data.map((c) => frameNormal(c, basis, species, sigmaE, sigmaF));
  const mult = multiplicities(data.length, opts.bootstrap ?? false, seed);
  const penalised = Array.from({ length: P }, (_, p) => p < keys.length * K);
  let anchor: Float64Array | undefined;
  if (anchorScale > 0) {
    const rng = createRandom((seed % 2 ** 48) + 0x5eed);
    anchor = new Float64Array(P);
    for (let p = 0; p < keys.length * K; p++) anchor[p] = anchorScale * rng.normal();
  }
  const x = solveRidge(normals, mult, lambda, penalised, anchor);
  const model: PairModel = {
    format: MODEL_FORMAT,
    version: 1,
    species,
    basis,
    pair_weights: Object.fromEntries(keys.map((key, p) => [key, Array.from(x.subarray(p * K, p * K + K))])),
    species_energy: Object.fromEntries(species.map((s, t) => [s, x[keys.length * K + t]])),
  };
  // training errors from the design rows: cheap and exact
  let se = 0;
  let sf = 0;
  let nf = 0;
  for (const c of data) {
    const rows = designRows(c, basis, species);
    const n = c.species.length;
    let e = 0;
    for (let p = 0; p < P; p++) e += rows.energy[p] * x[p];
    se += ((e - c.energy) / n) ** 2;
    for (let r = 0; r < 3 * n; r++) {
      let f = 0;
      for (let p = 0; p < P; p++) f += rows.forces[r * P + p] * x[p];
      sf += (f - c.forces[r]) ** 2;
      nf++;
    }
  }
  return {
    model,
    framesUsed: mult.reduce((s, m) => s + (m > 0 ? 1 : 0), 0),
    rmse: { energy_per_atom_eV: Math.sqrt(se / data.length), force_eV_per_A: Math.sqrt(sf / nf) },
  };
}
