import { afterAll, describe, expect, it } from 'vitest';
import { join } from 'node:path';
import { mean, variance } from 'simple-statistics';
import { atomicMass, massesOf } from '../../../src/atoms/elements.js';
import type { Frame } from '../../../src/atoms/frame.js';
import { AMU_A2_PER_FS2_TO_EV, AMU_KG, EV_J, KB_J_PER_K } from '../../../src/atoms/units.js';
import { writeFrames } from '../../../src/atoms/xyz/writer.js';
import { checkDrift } from '../../../src/gates/index.js';
import { gaussianBasis } from '../../../examples/argon/lib/basis.js';
import { committeeForces } from '../../../examples/argon/lib/committee.js';
import { baoabStep, maxwellBoltzmann, runMd, thermalSpeed, type ForceProvider, type ForceResult } from '../../../examples/argon/lib/dynamics.js';
import { fitModel, type LabeledConfig } from '../../../examples/argon/lib/fit.js';
import { bareCopy, realColumn } from '../../../examples/argon/lib/frames.js';
import { fccCrystal, ljFccLatticeConstant } from '../../../examples/argon/lib/lattice.js';
import { argonLj, ljEnergyForces } from '../../../examples/argon/lib/lj.js';
import { createRandom } from '../../../examples/argon/lib/random.js';
import { rattledFcc, removeScratch, scratchDir } from './helpers.js';

afterAll(removeScratch);

const A = ljFccLatticeConstant(3.405);
const AR = atomicMass('Ar');

describe('units of the integrator', () => {
  it('converts u Å²/fs² to eV with 103.6427 (CODATA 2018) and gives argon its textbook rms speed', () => {
    // 1 u (Å/fs)^2 = 1.66053906660e-27 kg (1e5 m/s)^2 / 1.602176634e-19 J = 103.6427 eV (CODATA 2018 values in design.md)
    expect(AMU_A2_PER_FS2_TO_EV).toBeCloseTo(103.6427, 4);
    // Kinetic theory: v_rms = sqrt(3 k_B T / m); argon at 300 K: 432.9 m/s, computed here in SI units independently.
    const vrmsSI = Math.sqrt((3 * KB_J_PER_K * 300) / (AR * AMU_KG));
    expect(vrmsSI).toBeCloseTo(432.9, 0);
    const vrmsAFs = Math.sqrt(3) * thermalSpeed(300, AR); // Å/fs
    expect(vrmsAFs * 1e5).toBeCloseTo(vrmsSI, 6); // 1 Å/fs = 1e5 m/s
  });

  it('moves an atom under a constant force by x = F t^2 / (2 m) with F/m converted through SI units', () => {
    // a = F/m; 1 eV/Å on 1 u is 1.602176634e-19 J / 1e-10 m / 1.66053906660e-27 kg in m/s^2, times 1e10 Å/m * 1e-30 s^2/fs^2.
    const m = 7.5;
    const F = 0.3; // eV/Å along x
    const aSI = (F * EV_J) / 1e-10 / (m * AMU_KG); // m/s^2
    const a = aSI * 1e10 * 1e-30; // Å/fs^2
    const sys = { positions: Float64Array.of(0, 0, 0), velocities: new Float64Array(3), masses: Float64Array.of(m), cell: null, pbc: [false, false, false] as [boolean, boolean, boolean] };
    const provider: ForceProvider = () => ({ energy: 0, forces: Float64Array.of(F, 0, 0), minDistance: Infinity });
    let cur: ForceResult = provider(sys.positions);
    const opts = { dt: 2, friction: 0, temperature: 0, rng: createRandom(1) };
    for (let s = 0; s < 50; s++) cur = baoabStep(sys, cur, opts, provider);
    const t = 100;
    expect(sys.positions[0]).toBeCloseTo(0.5 * a * t * t, 10); // velocity Verlet is exact for a constant force
    expect(sys.velocities[0]).toBeCloseTo(a * t, 12);
  });

  it('oscillates a harmonic spring with the analytic period 2 pi sqrt(m/k)', () => {
    // Analytic harmonic oscillator; k in eV/Å^2, m in u: omega = sqrt(k / (m * 103.6427)) per fs.
    const m = AR;
    const k = 0.05;
    const omega = Math.sqrt(k / (m * AMU_A2_PER_FS2_TO_EV));
    const period = (2 * Math.PI) / omega;
    const dt = period / 2000;
    const sys = { positions: Float64Array.of(0.1, 0, 0), velocities: new Float64Array(3), masses: Float64Array.of(m), cell: null, pbc: [false, false, false] as [boolean, boolean, boolean] };
    const provider: ForceProvider = (x) => ({ energy: 0.5 * k * x[0] * x[0], forces: Float64Array.of(-k * x[0], 0, 0), minDistance: Infinity });
    let cur = provider(sys.positions);
    const opts = { dt, friction: 0, temperature: 0, rng: createRandom(1) };
    for (let s = 0; s < 500; s++) cur = baoabStep(sys, cur, opts, provider); // a quarter period
    expect(Math.abs(sys.positions[0])).toBeLessThan(1e-5);
    expect(sys.velocities[0]).toBeCloseTo(-0.1 * omega, 7);
    for (let s = 0; s < 1500; s++) cur = baoabStep(sys, cur, opts, provider);
    expect(sys.positions[0]).toBeCloseTo(0.1, 6);
  });
});

/** Runs MD and writes the trajectory like md.ts does (energy, total_energy, time, velocities). */
async function trajectory(start: Frame, provider: ForceProvider, opts: { T: number; steps: number; dt: number; friction: number; seed: number; eq?: number }, file: string) {
  const masses = massesOf(start.species);
  const rng = createRandom(opts.seed);
  const sys = { positions: Float64Array.from(start.positions), velocities: maxwellBoltzmann(masses, opts.T, rng), masses, cell: start.cell, pbc: start.pbc };
  const frames: Frame[] = [];
  const temps: number[] = [];
  const summary = runMd(sys, provider, { dt: opts.dt, steps: opts.steps, interval: 10, temperature: opts.T, friction: opts.friction, equilibrationSteps: opts.eq ?? 0, minDistance: 2.0, rng }, (s) => {
    const f = bareCopy(start);
    f.positions = Float64Array.from(s.positions);
    f.info.set('time', s.time);
    f.info.set('energy', s.result.energy);
    f.info.set('total_energy', s.result.energy + s.kinetic);
    f.arrays.set('velocities', realColumn(Float64Array.from(s.velocities)));
    frames.push(f);
    temps.push(s.temperature);
  });
  await writeFrames(file, frames);
  return { summary, temps };
}

function smallCommittee(members: number) {
  const lj = argonLj();
  const data: LabeledConfig[] = Array.from({ length: 12 }, (_, s) => rattledFcc(A, 2, 0.08, 0.01, 300 + s)).map((f) => ({ ...f, ...ljEnergyForces(f, lj) }));
  return Array.from({ length: members }, (_, m) => fitModel(data, { basis: gaussianBasis(), seed: m, bootstrap: true, basisJitter: 1, anchorScale: 0.05, ridge: 1e-3 }).model);
}

describe('constant-energy MD on a cold argon crystal (5 fs step)', () => {
  // Threshold: drift below 0.1 meV/atom/ps (common practice), measured with ratchet's drift gate on the written trajectory.
  it('conserves energy when driven by the LJ reference', async () => {
    const dir = await scratchDir('argon-nve-');
    const crystal = fccCrystal('Ar', A, 2);
    const lj = argonLj();
    const provider: ForceProvider = (x) => ljEnergyForces({ positions: x, cell: crystal.cell, pbc: crystal.pbc }, lj);
    const file = join(dir, 'nve-lj.xyz');
    const { summary } = await trajectory(crystal, provider, { T: 60, steps: 2000, dt: 5, friction: 0, seed: 3 }, file); // 60 K start -> about 30 K by equipartition with the lattice
    expect(summary.reason).toBe('completed');
    const gate = await checkDrift([file], { workers: 1 });
    expect(gate.verdict).toBe('pass');
    expect(gate.figures.duration_ps).toBeCloseTo(10, 6);
    expect(Math.abs(gate.figures.slope_meV_per_atom_per_ps as number)).toBeLessThan(0.1);
    const tMean = gate.figures.mean_temperature_K as number;
    expect(tMean).toBeGreaterThan(20);
    expect(tMean).toBeLessThan(40);
  });

  it('conserves energy when driven by the committee mean of trained pair models', async () => {
    const dir = await scratchDir('argon-nve-');
    const crystal = fccCrystal('Ar', A, 2);
    const models = smallCommittee(4);
    const provider = committeeForces(models, crystal.species, crystal.cell, crystal.pbc, 'mean');
    const file = join(dir, 'nve-model.xyz');
    const { summary } = await trajectory(crystal, provider, { T: 30, steps: 2000, dt: 5, friction: 0, seed: 4, eq: 200 }, file);
    expect(summary.reason).toBe('completed');
    const gate = await checkDrift([file], { workers: 1 });
    expect(gate.verdict).toBe('pass');
    expect(Math.abs(gate.figures.slope_meV_per_atom_per_ps as number)).toBeLessThan(0.1);
    const tMean = gate.figures.mean_temperature_K as number;
    expect(tMean).toBeGreaterThan(20);
    expect(tMean).toBeLessThan(40);
    // Velocity Verlet is second order: energy fluctuations grow about as dt^2 (common practice); a 3x longer step
    // must fluctuate clearly more, which shows the figure above measures the integrator and is not trivially zero.
    const file15 = join(dir, 'nve-model-15fs.xyz');
    await trajectory(crystal, provider, { T: 30, steps: 700, dt: 15, friction: 0, seed: 4, eq: 70 }, file15);
    const gate15 = await checkDrift([file15], { workers: 1 });
    const ratio = (gate15.figures.std_meV_per_atom as number) / (gate.figures.std_meV_per_atom as number);
    expect(ratio).toBeGreaterThan(3);
  });
});

describe('Langevin thermostat (BAOAB)', () => {
  it('holds the target temperature on average (equipartition: <m v_x^2> = k_B T per component)', async () => {
    // Equipartition theorem (e.g. D. Frenkel and B. Smit, Understanding Molecular Simulation, 2nd ed. 2002; from memory).
    // Expected statistical error: instantaneous T fluctuates by sqrt(2/(3N)) = 14% for N = 32; with about 400
    // independent samples the mean is good to ~0.7%, so 3% is a 4-sigma tolerance.
    const crystal = fccCrystal('Ar', A, 2);
    const lj = argonLj();
    const provider: ForceProvider = (x) => ljEnergyForces({ positions: x, cell: crystal.cell, pbc: crystal.pbc }, lj);
    const masses = massesOf(crystal.species);
    const rng = createRandom(11);
    const target = 50;
    const sys = { positions: Float64Array.from(crystal.positions), velocities: new Float64Array(96), masses, cell: crystal.cell, pbc: crystal.pbc }; // starts at 0 K
    const temps: number[] = [];
    const vx2: number[] = [];
    runMd(sys, provider, { dt: 5, steps: 4000, interval: 5, temperature: target, friction: 0.01, equilibrationSteps: 400, minDistance: 2, rng }, (s) => {
      temps.push(s.temperature);
      for (let i = 0; i < s.velocities.length; i++) vx2.push(s.velocities[i]);
    });
    expect(Math.abs(mean(temps) / target - 1)).toBeLessThan(0.03);
    // per-component velocity variance against k_B T / m (simple-statistics as an independent estimator)
    expect(Math.abs(variance(vx2) / thermalSpeed(target, AR) ** 2 - 1)).toBeLessThan(0.03);
  });

  it('starts Maxwell-Boltzmann velocities at exactly the requested temperature with zero momentum', () => {
    const masses = massesOf(new Array(108).fill('Ar'));
    const v = maxwellBoltzmann(masses, 87, createRandom(5));
    let px = 0, ke = 0;
    for (let a = 0; a < 108; a++) {
      px += masses[a] * v[3 * a];
      ke += 0.5 * masses[a] * (v[3 * a] ** 2 + v[3 * a + 1] ** 2 + v[3 * a + 2] ** 2) * AMU_A2_PER_FS2_TO_EV;
    }
    expect(Math.abs(px)).toBeLessThan(1e-12);
    // K = (3N - 3) k_B T / 2 with k_B = 8.617333262e-5 eV/K (CODATA 2018)
    expect(ke).toBeCloseTo((3 * 108 - 3) * 8.617333262e-5 * 87 / 2, 10);
  });
});

describe('early stop', () => {
  it('stops at a contact closer than the floor and flags the last frame', () => {
    const crystal = fccCrystal('Ar', A, 2);
    const lj = argonLj();
    const provider: ForceProvider = (x) => ljEnergyForces({ positions: x, cell: crystal.cell, pbc: crystal.pbc }, lj);
    const masses = massesOf(crystal.species);
    const sys = { positions: Float64Array.from(crystal.positions), velocities: new Float64Array(96), masses, cell: crystal.cell, pbc: crystal.pbc };
    const seen: (string | undefined)[] = [];
    // nearest neighbours sit at 3.71 Å: a 3.8 Å floor is violated at once
    const s = runMd(sys, provider, { dt: 5, steps: 100, interval: 10, temperature: 30, friction: 0, minDistance: 3.8, rng: createRandom(1) }, (f) => seen.push(f.stopped));
    expect(s.reason).toBe('contact');
    expect(seen).toEqual(['contact']);
  });

  it('stops when energies go non-finite and reports the step', () => {
    let calls = 0;
    const provider: ForceProvider = () => ({ energy: ++calls > 25 ? NaN : 0, forces: new Float64Array(3), minDistance: Infinity });
    const sys = { positions: new Float64Array(3), velocities: new Float64Array(3), masses: Float64Array.of(AR), cell: null, pbc: [false, false, false] as [boolean, boolean, boolean] };
    const seen: { step: number; stopped?: string }[] = [];
    const s = runMd(sys, provider, { dt: 5, steps: 100, interval: 10, temperature: 0, friction: 0, minDistance: 0, rng: createRandom(1) }, (f) => seen.push({ step: f.step, stopped: f.stopped }));
    expect(s.reason).toBe('non_finite');
    expect(s.stopStep).toBe(25);
    expect(seen.map((x) => x.step)).toEqual([0, 10, 20, 25]);
    expect(seen[3].stopped).toBe('non_finite');
  });
});
