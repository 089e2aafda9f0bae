/**
 * The radial basis of the demo's machine-learned potential: Gaussians of the pair distance times a
 * smooth cutoff function,
 *   g_k(r) = exp(-(r - mu_k)^2 / (2 w^2)) * S(r),
 * with S the switching function of switching.ts going from 1 at r_on to 0 at r_cut (the same quintic,
 * inlined in evalCompiled for speed).
 * Each g_k and its derivative are continuous and vanish smoothly at r_cut.
 */
import { checkSwitch } from './switching.js';

export interface GaussianBasis {
  kind: 'gaussian';
  /** Centres mu_k (Å). */
  centers: number[];
  /** Common width w (Å). */
  width: number;
  /** Switching start (Å). */
  r_on: number;
  /** Cutoff (Å): every basis function is zero beyond it. */
  r_cut: number;
}

export interface BasisOptions {
  /** Number of functions (default 12). */
  count?: number;
  /** Smallest centre (Å; default 2.6, about 0.76 sigma of argon: closer pairs are a runaway). */
  rMin?: number;
  /** Cutoff (Å; default 6.0, shorter than the reference's 3 sigma = 10.2 Å, so the model can never be exact). */
  rCut?: number;
  /** Width of the switching region before rCut (Å; default 1.0). */
  switchWidth?: number;
  /** Gaussian width as a multiple of the centre spacing (default 1.0). */
  widthFactor?: number;
}

/** Evenly spaced centres from rMin to rCut. */
export function gaussianBasis(opts: BasisOptions = {}): GaussianBasis {
  const count = opts.count ?? 12;
  const rMin = opts.rMin ?? 2.6;
  const rCut = opts.rCut ?? 6.0;
  const switchWidth = opts.switchWidth ?? 1.0;
  const widthFactor = opts.widthFactor ?? 1.0;
  if (!Number.isInteger(count) || count < 1) throw new RangeError(`basis count must be a positive integer, got ${count}`);
  if (!(rMin > 0 && rCut > rMin)) throw new RangeError(`basis needs 0 < r_min < r_cut, got r_min=${rMin}, r_cut=${rCut}`);
  const spacing = count > 1 ? (rCut - rMin) / (count - 1) : rCut - rMin;
  const centers = Array.from({ length: count }, (_, k) => rMin + k * spacing);
  const basis: GaussianBasis = { kind: 'gaussian', centers, width: widthFactor * spacing, r_on: rCut - switchWidth, r_cut: rCut };
  checkBasis(basis);
  return basis;
}

export function checkBasis(b: GaussianBasis): void {
  if (b.kind !== 'gaussian') throw new RangeError(`unknown basis kind '${String(b.kind)}', expected 'gaussian'`);
  if (!(b.width > 0)) throw new RangeError(`basis width must be positive, got ${b.width}`);
  if (b.centers.length === 0 || !b.centers.every(Number.isFinite)) throw new RangeError('basis centres must be finite numbers');
  checkSwitch({ rOn: b.r_on, rCut: b.r_cut }, 'basis cutoff');
}

/**
 * Evaluates every g_k(r) into g and dg_k/dr into dg (both of length K); zero at and beyond r_cut.
 * (Convenience form; loops over many pairs should compile the basis once and call evalCompiled.)
 */
export function evalBasis(r: number, b: GaussianBasis, g: Float64Array, dg: Float64Array): void {
  evalCompiled(r, compileBasis(b), g, dg);
}

/** A basis prepared for fast repeated evaluation (same values as evalBasis). */
export interface CompiledBasis {
  K: number;
  centers: Float64Array;
  inv: number;
  rOn: number;
  rCut: number;
}

export function compileBasis(b: GaussianBasis): CompiledBasis {
  return { K: b.centers.length, centers: Float64Array.from(b.centers), inv: 1 / (b.width * b.width), rOn: b.r_on, rCut: b.r_cut };
}

/** evalBasis for a compiled basis (no allocation). */
export function evalCompiled(r: number, b: CompiledBasis, g: Float64Array, dg: Float64Array): void {
  let s = 1;
  let ds = 0;
  if (r >= b.rCut) {
    s = 0;
  } else if (r > b.rOn) {
    const w = b.rCut - b.rOn;
    const x = (r - b.rOn) / w;
    const x2 = x * x;
    s = 1 - x2 * x * (10 - 15 * x + 6 * x2);
    ds = (-30 * x2 * (1 - 2 * x + x2)) / w;
  }
  const inv = b.inv;
  const c = b.centers;
  for (let k = 0; k < b.K; k++) {
    const x = r - c[k];
    const e = Math.exp(-0.5 * x * x * inv);
    g[k] = e * s;
    dg[k] = e * (ds - x * inv * s);
  }
}

/**
 * A member-specific variant of a basis: every centre shifted by up to +-jitter/2 of the centre spacing
 * and the width scaled by a factor in [1 - jitter/2, 1 + jitter/2], drawn from the member's seed.
 * Members that differ in their basis (not only in their data) extrapolate differently where the data
 * say little, so their spread grows there; with the same basis they agree too readily (measured on this
 * demo, see the README). jitter = 0 returns the basis unchanged.
 */
export function jitteredBasis(base: GaussianBasis, jitter: number, rng: { uniform(): number }): GaussianBasis {
  if (!(jitter >= 0 && jitter <= 1)) throw new RangeError(`basis jitter must be in [0, 1], got ${jitter}`);
  if (jitter === 0) return base;
  const c = base.centers;
  const spacing = c.length > 1 ? (c[c.length - 1] - c[0]) / (c.length - 1) : base.width;
  const basis: GaussianBasis = {
    ...base,
    centers: c.map((x) => x + jitter * spacing * (rng.uniform() - 0.5)),
    width: base.width * (1 + jitter * (rng.uniform() - 0.5)),
  };
  checkBasis(basis);
  return basis;
}
