/**
 * drift gate: the slope with its standard error, the documented verdict rule, the minimum run, ASE's momenta and the
 * unit-error check. Independent references: simple-statistics (linearRegression, linearRegressionLine,
 * sampleVariance) for the least-squares slope and its standard error; Debian's ASE (/usr/bin/python3) for its time
 * unit, its momenta and a constant-energy run of its EMT potential for fcc Cu with its VelocityVerlet integrator.
 */
import { afterAll, describe, expect, it } from 'vitest';
import { execFileSync, spawnSync } from 'node:child_process';
import { mkdtempSync, rmSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { linearRegression, linearRegressionLine, sampleVariance } from 'simple-statistics';
import { checkDrift, driftFrame, seriesFigures, summarizeDrift, type DriftOptions } from '../../src/gates/drift.js';
import { ASE_TIME_UNIT_FS, kineticEnergy, momentaToVelocities } from '../../src/atoms/units.js';
import type { Frame } from '../../src/atoms/frame.js';
import { lcg, makeFrame } from './helpers.js';

const hasAse = spawnSync('/usr/bin/python3', ['-c', 'import ase, numpy'], { encoding: 'utf8' }).status === 0;
if (!hasAse) console.warn('drift-uncertainty.test.ts: ASE checks skipped, /usr/bin/python3 cannot import ase and numpy (Debian python3-ase)');

/** Gaussian noise by Box-Muller over the test LCG. */
function gauss(seed: number): () => number {
  const r = lcg(seed);
  return () => Math.sqrt(-2 * Math.log(1 - r())) * Math.cos(2 * Math.PI * r());
}

/** A series E(t) per atom = slope t + noise, as frames of `atoms` atoms with total_energy (eV) and time (fs). */
function series(n: number, dtFs: number, slopeMeV: number, noiseMeV: number, seed = 1, atoms = 2): { frames: Frame[]; t: number[]; e: number[] } {
  const g = gauss(seed);
  const t: number[] = [];
  const e: number[] = [];
  const frames: Frame[] = [];
  for (let k = 0; k < n; k++) {
    const time = k * dtFs;
    const ePerAtom = -3 + (slopeMeV * 1e-6) * time + noiseMeV * 1e-3 * g(); // meV/atom/ps x fs -> eV: 1e-6
    t.push(time);
    e.push(ePerAtom);
    frames.push(makeFrame({ species: Array(atoms).fill('Ar'), positions: Array.from({ length: 3 * atoms }, (_, c) => 3 * c), info: { total_energy: ePerAtom * atoms, time } }));
  }
  return { frames, t, e };
}
const run = (frames: Frame[], o: DriftOptions = {}) => summarizeDrift(frames.map((f, k) => driftFrame(f, k, o)), o);

describe('drift: slope and its standard error against simple-statistics', () => {
  for (const [slope, noise, seed] of [
    [0.3, 0.5, 2],
    [-1.5, 2, 3],
    [0, 0.05, 4],
  ] as const) {
    it(`slope ${slope} meV/atom/ps with noise ${noise} meV/atom`, () => {
      const { t, e } = series(201, 5, slope, noise, seed);
      const f = seriesFigures(t, e);
      const pts = t.map((x, k) => [x / 1000, e[k] * 1000]); // ps, meV/atom
      const lr = linearRegression(pts);
      const line = linearRegressionLine(lr);
      const ssr = pts.reduce((s, [x, y]) => s + (y - line(x)) ** 2, 0);
      const sxx = (pts.length - 1) * sampleVariance(pts.map((p) => p[0]));
      const se = Math.sqrt(ssr / (pts.length - 2) / sxx);
      expect(f.slope_meV_per_atom_per_ps!).toBeCloseTo(lr.m, 8);
      expect(f.slope_se_meV_per_atom_per_ps! / se).toBeCloseTo(1, 8);
      // the known slope lies within a few standard errors of the estimate
      expect(Math.abs(f.slope_meV_per_atom_per_ps! - slope)).toBeLessThan(4 * se);
    });
  }

  it('a perfect line has a zero standard error; two points have none', () => {
    const f = seriesFigures([0, 1000, 2000], [0, 0.001, 0.002]);
    expect(f.slope_meV_per_atom_per_ps!).toBeCloseTo(1, 9);
    expect(f.slope_se_meV_per_atom_per_ps!).toBeCloseTo(0, 9);
    expect(seriesFigures([0, 5], [0, 5e-5]).slope_se_meV_per_atom_per_ps).toBeNull();
  });
});

describe('drift: the verdict rule (fail above fail; warn above warn only beyond 2 standard errors)', () => {
  it('a clear drift above the warn limit warns, with the standard error in the reason', () => {
    const { frames } = series(401, 5, 0.5, 0.02, 5); // 2 ps
    const res = run(frames);
    expect(res.verdict).toBe('warn');
    expect(res.reasons[0]).toMatch(/^energy drifts by 0\.\d+ ± [\d.e-]+ meV\/atom\/ps: above the warn limit 0\.1 meV\/atom\/ps in magnitude and more than 2 standard errors from zero$/);
  });

  it('a slope above the warn limit but within 2 standard errors of zero passes, saying so', () => {
    // 400 steps of 5 fs as in the reported run: a slope of about 0.2 with a standard error of about 0.17
    const { frames } = series(401, 5, 0.2, 2, 6);
    const res = run(frames);
    const f = res.figures;
    expect(Math.abs(f.slope_meV_per_atom_per_ps!)).toBeGreaterThan(0.1);
    expect(Math.abs(f.slope_meV_per_atom_per_ps!)).toBeLessThanOrEqual(2 * f.slope_se_meV_per_atom_per_ps!);
    expect(res.verdict).toBe('pass');
    expect(res.reasons.some((r) => r.includes('within 2 standard errors of zero: not distinguishable from no drift'))).toBe(true);
  });

  it('above the fail limit fails whatever the standard error', () => {
    const res = run(series(401, 5, 3, 2, 7).frames);
    expect(res.verdict).toBe('fail');
    expect(res.reasons[0]).toMatch(/^energy drifts by [\d.]+ ± [\d.]+ meV\/atom\/ps: above the fail limit 1 meV\/atom\/ps in magnitude$/);
  });

  it('a one-frame run and two frames 5 fs apart fail, naming frames and time found and required', () => {
    const one = run(series(1, 5, 0, 0).frames);
    expect(one.verdict).toBe('fail');
    expect(one.reasons).toEqual(['1 usable frame over 0 ps: too few to judge the drift (at least 10 frames over at least 1 ps needed)']);
    const two = series(2, 5, 0, 0).frames;
    two[1].info.set('total_energy', (two[0].info.get('total_energy') as number) + 2 * 0.05e-3); // 10 meV/atom/ps
    const res = run(two);
    expect(res.verdict).toBe('fail');
    expect(res.reasons).toEqual(['2 usable frames over 0.005 ps: too few to judge the drift (at least 10 frames over at least 1 ps needed)']);
  });

  it('enough frames but too short a run fails; the minimums can be set', () => {
    const { frames } = series(51, 10, 0, 0.01, 8); // 0.5 ps
    expect(run(frames).reasons[0]).toBe('51 usable frames over 0.5 ps: too short to judge the drift (at least 10 frames over at least 1 ps needed)');
    expect(run(frames, { minSpan: 0.5 }).verdict).toBe('pass');
    expect(() => run(frames, { minFrames: 2 })).toThrow('minimum number of frames (drift_min_frames, --drift-min-frames): expected a whole number of at least 3');
  });

  it('the argon demo run (1000 steps of 5 fs, a frame every 20) meets the minimums: 51 frames over 5 ps', () => {
    const res = run(series(51, 100, 0, 0.01, 9).frames);
    expect(res.figures.frames_used).toBe(51);
    expect(res.figures.duration_ps).toBe(5);
    expect(res.verdict).toBe('pass');
  });
});

describe('drift: ASE momenta and unit errors', () => {
  it.skipIf(!hasAse)("ASE's time unit: 1 / ase.units.fs", () => {
    const aseFs = Number(execFileSync('/usr/bin/python3', ['-c', 'from ase import units; print(repr(1 / units.fs))'], { encoding: 'utf8' }));
    // ASE's default constants are CODATA 2014, ratchet's CODATA 2018: they agree to about 1e-8
    expect(ASE_TIME_UNIT_FS / aseFs).toBeCloseTo(1, 7);
    expect(ASE_TIME_UNIT_FS).toBeCloseTo(10.1805, 4);
  });

  it('momenta are converted: the kinetic energy equals sum p^2 / 2m in ASE units (eV)', () => {
    const masses = [39.948, 1.008];
    const p = [0.3, -0.2, 0.1, 0.01, 0.02, -0.03]; // u Å per ASE time unit
    const v = momentaToVelocities(masses, p);
    expect(v[0]).toBeCloseTo(0.3 / 39.948 / ASE_TIME_UNIT_FS, 15);
    // in ASE units (u, Å, eV) K = p^2 / 2m is in eV directly
    const kAse = (0.09 + 0.04 + 0.01) / (2 * 39.948) + (0.0001 + 0.0004 + 0.0009) / (2 * 1.008);
    expect(kineticEnergy(masses, v) / kAse).toBeCloseTo(1, 7);
  });

  it('velocities in the wrong unit (momenta under the velocities key) fail, naming the key and the likely cause', () => {
    const g = gauss(3);
    const frames = Array.from({ length: 11 }, (_, k) =>
      makeFrame({
        species: ['Cu', 'Cu', 'Cu', 'Cu'],
        positions: [0, 0, 0, 1.8, 1.8, 0, 1.8, 0, 1.8, 0, 1.8, 1.8],
        cell: [3.6, 0, 0, 0, 3.6, 0, 0, 0, 3.6],
        info: { energy: -1, time: k * 100 },
        arrays: { velocities: Array.from({ length: 12 }, () => 0.3 * g()) }, // ASE momenta of Cu near 300 K are ~0.3
      }),
    );
    const res = run(frames);
    expect(res.verdict).toBe('fail');
    expect(res.figures.mean_temperature_K!).toBeGreaterThan(1e5);
    expect(res.reasons.find((r) => r.startsWith('mean temperature'))).toMatch(
      /^mean temperature [\d.e+]+ K from per-atom 'velocities' is not physical \(above 100000 K\): the velocities are almost surely in another unit than Å\/fs \(ASE writes momenta in u·Å per its time unit of 10\.1805 fs: name them 'momenta' to have them converted\)$/,
    );
  });
});

describe.skipIf(!hasAse)('drift: a constant-energy run of ASE EMT Cu (VelocityVerlet), cross-checked with ASE', () => {
  const dir = mkdtempSync(join(tmpdir(), 'ratchet-drift-ase-'));
  afterAll(() => rmSync(dir, { recursive: true, force: true }));
  const path = join(dir, 'nve.xyz');
  // fcc Cu 2x2x2 (32 atoms), 300 K Maxwell-Boltzmann, centre-of-mass motion removed, 600 steps of 2 fs (1.2 ps),
  // a frame every 10 steps with the potential energy, forces and momenta (ASE's writer) and the time in fs.
  const SCRIPT = String.raw`
import json, sys
import numpy as np
from ase.build import bulk
from ase.calculators.emt import EMT
from ase.calculators.singlepoint import SinglePointCalculator
from ase.md.velocitydistribution import MaxwellBoltzmannDistribution, Stationary
from ase.md.verlet import VelocityVerlet
from ase.io import write
from ase import units
path = sys.argv[1]
a = bulk('Cu', 'fcc', a=3.61, cubic=True).repeat((2, 2, 2))
a.calc = EMT()
MaxwellBoltzmannDistribution(a, temperature_K=300, rng=np.random.default_rng(5))
Stationary(a)
dyn = VelocityVerlet(a, 2 * units.fs)
frames, etot, t = [], [], []
def keep():
    c = a.copy()
    c.calc = SinglePointCalculator(c, energy=a.get_potential_energy(), forces=a.get_forces())
    c.set_momenta(a.get_momenta())
    c.info['time'] = dyn.get_time() / units.fs
    frames.append(c); etot.append(a.get_total_energy() / len(a)); t.append(dyn.get_time() / units.fs)
dyn.attach(keep, interval=10)
dyn.run(600)
write(path, frames, format='extxyz')
t = np.array(t); e = np.array(etot)
b, c0 = np.polyfit(t, e, 1)
print(json.dumps({'frames': len(frames), 'slope': b * 1e6, 'e0': float(e[0]), 'std': float(np.std(e) * 1e3), 'exc': float(np.max(np.abs(e - e[0])) * 1e3), 'span': float(t[-1] - t[0])}))
`;
  const want = hasAse ? (JSON.parse(execFileSync('/usr/bin/python3', ['-c', SCRIPT, path], { encoding: 'utf8' })) as Record<string, number>) : {};

  it("the gate reads ASE's momenta and recovers ASE's total energy per atom, slope, spread and excursion", async () => {
    const res = await checkDrift([path], { workers: 1 });
    const f = res.figures;
    expect(f.frames).toBe(want.frames);
    expect(f.velocities_source).toBe('momenta');
    expect(f.energy_source).toBe('energy+kinetic');
    expect(f.duration_ps! * 1000).toBeCloseTo(want.span, 6);
    // total energy per atom: ASE's get_total_energy (CODATA 2014 units) against ratchet's (CODATA 2018): ~1e-8 relative
    expect(f.initial_energy_eV_per_atom!).toBeCloseTo(want.e0, 6);
    expect(f.slope_meV_per_atom_per_ps!).toBeCloseTo(want.slope, 3);
    expect(f.std_meV_per_atom!).toBeCloseTo(want.std, 3);
    expect(f.max_excursion_meV_per_atom!).toBeCloseTo(want.exc, 3);
    expect(f.dof).toBe(93);
    expect(f.dof_rule).toBe('3N - 3 (centre-of-mass motion removed)');
    // a sane temperature (started at 300 K, about half goes to potential energy in a harmonic-like crystal)
    expect(f.mean_temperature_K!).toBeGreaterThan(50);
    expect(f.mean_temperature_K!).toBeLessThan(400);
    expect(res.verdict).not.toBe('fail');
  });
});
