import { describe, expect, it } from 'vitest';
import { forEachPair } from '../../../src/atoms/neighbours.js';
import { KB_EV_PER_K } from '../../../src/atoms/units.js';
import { fccCrystal, KITTEL_A12, KITTEL_A6, LJ_FCC_NN_OVER_SIGMA } from '../../../examples/argon/lib/lattice.js';
import { argonLj, ljEnergyForces, ljPair, tailEnergyPerAtom } from '../../../examples/argon/lib/lj.js';
import { switchValue } from '../../../examples/argon/lib/switching.js';
import { finiteDifferenceForces, maxAbs, maxAbsDiff, randomPacking, skewedCell } from './helpers.js';

const P = argonLj();

describe('Lennard-Jones argon reference', () => {
  it('uses epsilon/k_B = 119.8 K and sigma = 3.405 Å', () => {
    // Argon LJ parameters: a widely used fit (from memory; cited as such in design.md).
    expect(P.epsilon / KB_EV_PER_K).toBeCloseTo(119.8, 10);
    expect(P.sigma).toBe(3.405);
    // default cutoff: switching from 2.5 sigma to 3 sigma
    expect(P.rOn).toBeCloseTo(2.5 * 3.405, 12);
    expect(P.rCut).toBeCloseTo(3 * 3.405, 12);
  });

  it('has its minimum -epsilon at 2^(1/6) sigma and crosses zero at sigma (inside r_on)', () => {
    // Textbook properties of the 12-6 potential (common practice).
    const out = new Float64Array(2);
    ljPair(2 ** (1 / 6) * P.sigma, P, out);
    expect(out[0] / P.epsilon).toBeCloseTo(-1, 12);
    expect(Math.abs(out[1])).toBeLessThan(1e-12);
    ljPair(P.sigma, P, out);
    expect(Math.abs(out[0])).toBeLessThan(1e-15);
  });

  it('reproduces Kittel\'s fcc cohesive energy -8.6102 epsilon per atom at r0 = 1.0902 sigma (long cutoff)', () => {
    // C. Kittel, Introduction to Solid State Physics, ch. 3: A12 = 12.13188, A6 = 14.45392,
    // U = 2 N eps [A12 (s/R)^12 - A6 (s/R)^6], minimum at R0/s = (2 A12/A6)^(1/6) = 1.0902, U0 = -8.6102 N eps.
    expect(LJ_FCC_NN_OVER_SIGMA).toBeCloseTo(1.0902, 4);
    expect(-(KITTEL_A6 ** 2) / (2 * KITTEL_A12)).toBeCloseTo(-8.6102, 4);
    const a = Math.SQRT2 * LJ_FCC_NN_OVER_SIGMA * P.sigma;
    // Switching from 8 to 10 sigma, plus the long-range correction for the uniform density beyond it.
    const p = argonLj({ rOn: 8 * P.sigma, rCut: 10 * P.sigma });
    const crystal = fccCrystal('Ar', a, 1); // 4 atoms: every neighbour is a periodic image
    const { energy, forces } = ljEnergyForces(crystal, p);
    const perAtom = (energy / 4 + tailEnergyPerAtom(4 / a ** 3, p)) / p.epsilon;
    expect(Math.abs(perAtom - -8.6102)).toBeLessThan(5e-5); // Kittel's value to its last digit
    expect(maxAbs(forces)).toBeLessThan(1e-12); // perfect lattice: no net force on any atom
    // Without any correction the plain lattice sum with a 24 sigma cutoff is within 0.001 epsilon (tail ~ 1/R^3).
    const far = argonLj({ rOn: 20 * P.sigma, rCut: 24 * P.sigma });
    const plain = ljEnergyForces(crystal, far).energy / 4 / far.epsilon;
    expect(Math.abs(plain - -8.6102)).toBeLessThan(1e-3);
    // and the same number from a 2x2x2 supercell (32 atoms): the sum does not depend on the cell chosen
    const big = ljEnergyForces(fccCrystal('Ar', a, 2), p).energy / 32 / p.epsilon + tailEnergyPerAtom(4 / a ** 3, p) / p.epsilon;
    expect(big).toBeCloseTo(perAtom, 9);
  });

  it('puts the minimum of the fcc lattice energy at Kittel\'s spacing r0 = 1.0902 sigma', () => {
    // Same source (Kittel ch. 3): dU/dR = 0 at R0 = 1.09 sigma. Parabola through three spacings.
    const p = argonLj({ rOn: 8 * P.sigma, rCut: 10 * P.sigma });
    const e = (r: number) => {
      const a = Math.SQRT2 * r * P.sigma;
      return ljEnergyForces(fccCrystal('Ar', a, 1), p).energy / 4 + tailEnergyPerAtom(4 / a ** 3, p);
    };
    const h = 0.01;
    const [em, e0, ep] = [e(1.09 - h), e(1.09), e(1.09 + h)];
    const rMin = 1.09 - (h * (ep - em)) / (2 * (ep - 2 * e0 + em));
    expect(rMin).toBeCloseTo(1.0902, 3);
  });

  it('switching: S, dS/dr continuous; long-range correction matches the truncated-potential formula when r_on -> r_c', () => {
    const sw = { rOn: 2, rCut: 3 };
    const out = new Float64Array(2);
    expect(switchValue(2, sw)).toBe(1);
    expect(switchValue(3, sw)).toBe(0);
    expect(switchValue(2.5, sw)).toBeCloseTo(0.5, 14);
    // derivative by central differences at interior points
    for (const r of [2.1, 2.37, 2.8, 2.99]) {
      switchValue(r, sw, out);
      const fd = (switchValue(r + 1e-6, sw) - switchValue(r - 1e-6, sw)) / 2e-6;
      expect(out[1]).toBeCloseTo(fd, 7);
    }
    // Allen & Tildesley, Computer Simulation of Liquids (1987) sec. 2.8 (from memory):
    // E_tail/N = (8/3) pi rho eps sigma^3 [ (1/3)(sigma/rc)^9 - (sigma/rc)^3 ] for a potential truncated at rc.
    const rho = 0.02;
    const rc = 2.5 * P.sigma;
    const p = argonLj({ rOn: rc - 1e-6, rCut: rc });
    const at = (8 / 3) * Math.PI * rho * P.epsilon * P.sigma ** 3 * ((P.sigma / rc) ** 9 / 3 - (P.sigma / rc) ** 3);
    expect(Math.abs(tailEnergyPerAtom(rho, p) / at - 1)).toBeLessThan(1e-6); // the 1e-6 Å switching sliver adds ~1e-7
  });

  it('forces are minus the gradient of the energy (central differences) in a skewed cell with the switching region populated', () => {
    // Finite differences: forces must equal -dE/dx (common practice for checking any force code).
    const p = argonLj({ rOn: 5.0, rCut: 7.5 }); // short enough that many pairs sit in the switching region
    const frame = randomPacking(skewedCell(), 20, 3.0, 7);
    let switching = 0;
    forEachPair(frame, p.rCut, (_i, _j, d) => {
      if (d > p.rOn && d < p.rCut) switching++;
    });
    expect(switching).toBeGreaterThan(100);
    const { forces } = ljEnergyForces(frame, p);
    const fd = finiteDifferenceForces(frame.positions, (x) => ljEnergyForces({ ...frame, positions: x }, p).energy);
    expect(maxAbs(forces)).toBeGreaterThan(1e-3);
    expect(maxAbsDiff(forces, fd)).toBeLessThan(1e-7 + 1e-6 * maxAbs(forces));
    // Newton's third law: the forces sum to zero
    const sum = [0, 1, 2].map((c) => forces.filter((_, i) => i % 3 === c).reduce((s, v) => s + v, 0));
    expect(maxAbs(sum)).toBeLessThan(1e-12);
  });

  it('forces match finite differences with the default 3 sigma cutoff in a small cell (atoms see their own images)', () => {
    const p = argonLj();
    const frame = randomPacking(skewedCell(), 12, 3.1, 11);
    const { forces } = ljEnergyForces(frame, p);
    const fd = finiteDifferenceForces(frame.positions, (x) => ljEnergyForces({ ...frame, positions: x }, p).energy);
    expect(maxAbsDiff(forces, fd)).toBeLessThan(1e-7 + 1e-6 * maxAbs(forces));
  });
});
