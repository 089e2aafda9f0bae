import { describe, expect, it } from 'vitest';
import { linearRegression, standardDeviation, mean } from 'simple-statistics';
import { driftFrame, summarizeDrift, seriesFigures, defaultDof, DRIFT_DEFAULTS } from '../../src/gates/drift.js';
import { GateInputError } from '../../src/gates/types.js';
import { atomicMass } from '../../src/atoms/elements.js';
import type { Frame } from '../../src/atoms/frame.js';
import { oscillatorRun } from './oscillator.js';
import { ase, lcg, makeFrame } from './helpers.js';

const run = (frames: Frame[], opts = {}) => summarizeDrift(frames.map((f, k) => driftFrame(f, k, opts)), opts);

/** Energy per atom in eV from our per-frame samples, for the independent statistics below. */
function series(frames: Frame[]) {
  const s = frames.map((f, k) => driftFrame(f, k));
  return { t: s.map((x) => x.time as number), e: s.map((x) => (x.total as number) / x.atoms) };
}

describe('drift: harmonic oscillators integrated with velocity Verlet (bounded error, no drift)', () => {
  // 2 Ar + 2 H atoms, each an independent 3-D oscillator, k = 2 eV/Å², h = 1 fs, 40 000 steps (40 ps), every 20th written.
  const r = lcg(7);
  const q0 = Array.from({ length: 12 }, () => 0.2 * (r() - 0.5));
  const v0 = Array.from({ length: 12 }, () => 0.01 * (r() - 0.5));
  const osc = oscillatorRun({ species: ['Ar', 'H', 'Ar', 'H'], k: 2, h: 1, steps: 40_000, every: 20, q0, v0 });

  it('the generator is right: forces are -dU/dx by central finite differences, and the modified energy is conserved', () => {
    // U = 1/2 k x^2 per component; central difference of U at x against the written force -k x
    const k = 2;
    const f0 = osc.frames[3];
    const forces = f0.arrays.get('forces')!.values as Float64Array;
    const U = (x: number) => 0.5 * k * x * x;
    for (let c = 0; c < 12; c++) {
      const x = -forces[c] / k;
      const h = 1e-5;
      expect(-(U(x + h) - U(x - h)) / (2 * h)).toBeCloseTo(forces[c], 8);
    }
    // Hairer, Lubich, Wanner 2003: the modified energy of velocity Verlet is exactly conserved for a harmonic oscillator
    for (const inv of osc.invariant) expect(Math.abs(inv - osc.invariant[0])).toBeLessThan(1e-12);
  });

  it('reads energy + kinetic energy from velocities; figures agree with simple-statistics; slope ~ 0 within the analytic bound', () => {
    const res = run(osc.frames);
    const f = res.figures;
    expect(f.frames).toBe(2001);
    expect(f.atoms).toBe(4);
    expect(f.energy_source).toBe('energy+kinetic');
    const { t, e } = series(osc.frames);
    // independent: simple-statistics linear regression on (t in ps, e in meV/atom)
    const lr = linearRegression(t.map((x, k) => [x / 1000, e[k] * 1000]));
    expect(f.slope_meV_per_atom_per_ps!).toBeCloseTo(lr.m, 9);
    // simple-statistics standardDeviation is the population form, as documented for the gate
    expect(f.std_meV_per_atom!).toBeCloseTo(standardDeviation(e.map((x) => x * 1000)), 9);
    const exc = Math.max(...e.map((x) => Math.abs(x - e[0]))) * 1000;
    expect(f.max_excursion_meV_per_atom!).toBeCloseTo(exc, 12);
    // analytic: |E(t) - E(0)| <= bound (from the conserved modified energy); so the LS slope of a function bounded by A
    // over a duration T is at most 3A/T (sum |t - mean| / sum (t - mean)^2 = (T/4)/(T^2/12) for evenly spaced t).
    const boundMeV = (osc.bound / 4) * 1000;
    expect(f.max_excursion_meV_per_atom!).toBeLessThanOrEqual(boundMeV);
    expect(f.max_excursion_meV_per_atom!).toBeGreaterThan(0); // the error is there, it just does not grow
    const T = 40; // ps
    expect(Math.abs(f.slope_meV_per_atom_per_ps!)).toBeLessThanOrEqual((3.05 * boundMeV) / T);
    expect(res.verdict).toBe('pass');
    expect(f.duration_ps).toBeCloseTo(40, 12);
  });

  it('mean temperature by equipartition with 3N dof (given) for a molecule (non-periodic) matches ASE', () => {
    // ASE's get_temperature counts 3N degrees of freedom (less only its constraints): give the gate the same.
    const res = run(osc.frames, { dof: 12 });
    // Independent cross-check: Debian's ASE computes the kinetic energy and temperature (3N dof, no constraints) of the
    // same atoms with the same masses (ASE's own table differs from IUPAC 2021 in the 5th digit for Ar); its velocity
    // unit is Å per ASE time unit, with 1 fs = ase.units.fs; ASE uses CODATA 2014 constants, hence 1e-6 agreement.
    const sample = osc.frames.filter((_, k) => k % 100 === 0);
    const temps = ase<number[]>(
      `from ase import Atoms, units
out = []
for fr in data:
    a = Atoms(fr['species'], positions=fr['positions'], masses=fr['masses'])
    a.set_velocities([[v / units.fs for v in fr['v'][3*i:3*i+3]] for i in range(len(fr['species']))])
    out.append(a.get_temperature())
print(json.dumps(out))`,
      sample.map((f) => ({ species: f.species, masses: osc.masses, positions: chunk(f.positions), v: Array.from(f.arrays.get('velocities')!.values as Float64Array) })),
    );
    expect(res.figures.dof).toBe(12);
    expect(res.figures.dof_rule).toBe('given');
    const ours = sample.map((f) => run([f], { dof: 12 }).figures.mean_temperature_K!);
    ours.forEach((T, k) => expect(T / temps[k]).toBeCloseTo(1, 6));
    // and the gate's mean is the mean of the per-frame temperatures
    const all = osc.frames.map((f) => run([f], { dof: 12 }).figures.mean_temperature_K!);
    expect(res.figures.mean_temperature_K!).toBeCloseTo(mean(all), 9);
  });

  it('periodic cells and clusters default to 3N - 3 degrees of freedom (centre-of-mass motion removed); --dof overrides', () => {
    const per = oscillatorRun({ species: ['Ar', 'H', 'Ar', 'H'], k: 2, h: 1, steps: 200, every: 20, q0, v0, cell: [20, 0, 0, 0, 20, 0, 0, 0, 20] });
    const a = run(per.frames);
    const b = run(osc.frames.slice(0, 11));
    expect(a.figures.dof).toBe(9);
    expect(a.figures.dof_rule).toBe('3N - 3 (centre-of-mass motion removed)');
    expect(b.figures.dof).toBe(9);
    expect(defaultDof(4, true)).toBe(9);
    expect(defaultDof(4, false)).toBe(9);
    expect(defaultDof(1, false)).toBe(3);
    // same velocities, T scales as 1/dof
    const b12 = run(osc.frames.slice(0, 11), { dof: 12 });
    expect(a.figures.mean_temperature_K! * 9).toBeCloseTo(b12.figures.mean_temperature_K! * 12, 6);
    const c = run(per.frames, { dof: 12 });
    expect(c.figures.mean_temperature_K!).toBeCloseTo(b12.figures.mean_temperature_K!, 9);
  });

  it('a deliberately drifting series: the known slope is recovered (within the oscillation bound), and the verdict follows the limits', () => {
    const T = 40;
    const boundMeV = (osc.bound / 4) * 1000;
    for (const [slope, verdict] of [
      [0.5, 'warn'],
      [2, 'fail'],
      [-2, 'fail'],
      [0.02, 'pass'],
    ] as const) {
      // slope meV/atom/ps -> eV/fs for the whole 4-atom system: x 4 atoms / 1000 (meV->eV) / 1000 (ps->fs)
      const d = oscillatorRun({ species: ['Ar', 'H', 'Ar', 'H'], k: 2, h: 1, steps: 40_000, every: 20, q0, v0, driftEvPerFs: (slope * 4) / 1e6 });
      const res = run(d.frames);
      expect(res.figures.energy_source).toBe('total_energy');
      expect(Math.abs(res.figures.slope_meV_per_atom_per_ps! - slope)).toBeLessThanOrEqual((3.05 * boundMeV) / T);
      expect(res.verdict).toBe(verdict);
    }
  });
});

describe('drift: series figures on exact data', () => {
  it('a straight line: slope equals the finite difference (E_end - E_0)/(t_end - t_0); std and excursion by hand', () => {
    // e = -3 eV/atom + 2e-6 eV/atom/fs * t: 2 meV/atom/ps; t = 0, 10, ..., 1000 fs
    const t = Array.from({ length: 101 }, (_, k) => 10 * k);
    const e = t.map((x) => -3 + 2e-6 * x);
    const f = seriesFigures(t, e);
    const fd = ((e[100] - e[0]) / (t[100] - t[0])) * 1e6;
    expect(f.slope_meV_per_atom_per_ps!).toBeCloseTo(fd, 9);
    expect(f.slope_meV_per_atom_per_ps!).toBeCloseTo(2, 9);
    // population std of a uniform grid of 101 points spanning 2 meV: 2 * sqrt((101^2 - 1)/12) / 100
    expect(f.std_meV_per_atom!).toBeCloseTo((2 * Math.sqrt((101 * 101 - 1) / 12)) / 100, 9);
    expect(f.max_excursion_meV_per_atom!).toBeCloseTo(2, 9);
  });

  it('noisy data: slope and std agree with simple-statistics', () => {
    const r = lcg(11);
    const t = Array.from({ length: 500 }, (_, k) => 2 * k + r());
    const e = t.map((x) => -1.5 + 3e-7 * x + 1e-4 * (r() - 0.5));
    const f = seriesFigures(t, e);
    const lr = linearRegression(t.map((x, k) => [x / 1000, e[k] * 1000]));
    expect(f.slope_meV_per_atom_per_ps!).toBeCloseTo(lr.m, 8);
    expect(f.std_meV_per_atom!).toBeCloseTo(standardDeviation(e.map((x) => x * 1000)), 10);
  });
});

describe('drift: runs that blew up fail, naming the first bad frame (never a crash)', () => {
  const base = (k: number, extra: Partial<Parameters<typeof makeFrame>[0]> = {}) =>
    makeFrame({
      species: ['Ar', 'Ar'],
      positions: [0, 0, 0, 3.8, 0, 0],
      info: { total_energy: -0.02 + 1e-9 * k, time: 10 * k },
      ...extra,
    });
  const frames = (bad: (k: number) => Frame | null) => Array.from({ length: 12 }, (_, k) => bad(k) ?? base(k));

  it.each([
    ['NaN positions', (k: number) => (k === 7 ? base(k, { positions: [0, 0, 0, NaN, 0, 0] }) : null), 'non-finite positions (atom 1)'],
    ['Inf forces', (k: number) => (k === 7 ? base(k, { arrays: { forces: [0, 0, 0, 0, Infinity, 0] } }) : null), 'non-finite forces (atom 1)'],
    ['NaN velocities', (k: number) => (k === 7 ? base(k, { arrays: { velocities: [NaN, 0, 0, 0, 0, 0] } }) : null), 'non-finite velocities (atom 0)'],
    [
      'NaN total energy',
      (k: number) => (k === 7 ? makeFrame({ species: ['Ar', 'Ar'], positions: [0, 0, 0, 3.8, 0, 0], info: { total_energy: NaN, time: 70 } }) : null),
      'non-finite total energy (NaN)',
    ],
    [
      "energy written as the text 'inf'",
      (k: number) => (k === 7 ? makeFrame({ species: ['Ar', 'Ar'], positions: [0, 0, 0, 3.8, 0, 0], info: { total_energy: 'inf', time: 70 } }) : null),
      'non-finite total energy (Infinity)',
    ],
  ])('%s', (_name, bad, what) => {
    const res = run(frames(bad));
    expect(res.verdict).toBe('fail');
    expect(res.figures.first_bad_frame).toBe(7);
    expect(res.figures.frames).toBe(12);
    expect(res.figures.frames_used).toBe(7);
    expect(res.reasons[0]).toBe(`the run blew up: frame 7 has ${what}; figures cover the 7 frame(s) before it`);
    // 1e-9 eV per frame for 2 atoms, frames 10 fs apart: 0.5e-10 eV/atom/fs = 5e-5 meV/atom/ps
    expect(res.figures.slope_meV_per_atom_per_ps!).toBeCloseTo(5e-5, 12);
  });

  it('the first frame already bad: no figures, still a verdict', () => {
    const res = run(frames((k) => (k === 0 ? base(0, { positions: [Infinity, 0, 0, 0, 0, 0] }) : null)));
    expect(res.verdict).toBe('fail');
    expect(res.figures.first_bad_frame).toBe(0);
    expect(res.figures.slope_meV_per_atom_per_ps).toBeNull();
  });
});

describe('drift: time and input problems', () => {
  const f = (info: Record<string, number>) => makeFrame({ species: ['Ar'], positions: [0, 0, 0], info });

  it('time = step x time step when frames carry a step; else frame index x time step', () => {
    // steps 0, 100, 200 at 2 fs: t = 0, 200, 400 fs; energy rises 1e-6 eV/fs = 1 meV/atom/ps (one atom)
    const byStep = [0, 1, 2].map((k) => f({ total_energy: -1 + 1e-6 * 200 * k, step: 100 * k }));
    expect(run(byStep, { timestep: 2 }).figures.slope_meV_per_atom_per_ps!).toBeCloseTo(1, 9);
    expect(run(byStep, { timestep: 2 }).figures.time_source).toBe("info 'step' x 2 fs");
    const byIndex = [0, 1, 2].map((k) => f({ total_energy: -1 + 1e-6 * k }));
    // frames 0.5 fs apart, 1e-6 eV per frame: 2e-6 eV/fs = 2 meV/atom/ps
    expect(run(byIndex, { timestep: 0.5 }).figures.slope_meV_per_atom_per_ps!).toBeCloseTo(2, 9);
  });

  it('refuses frames without time and without a time step, naming the frame', () => {
    expect(() => run([f({ total_energy: -1 })])).toThrow(new GateInputError("frame 0: no 'time' in the frame info; give the time step in fs"));
  });

  it('refuses a frame without any energy, and mixed energy sources', () => {
    const a = f({ total_energy: -1, time: 0 });
    const b = f({ time: 1 });
    expect(() => run([a, b])).toThrow(new GateInputError("frame 1: neither 'total_energy' nor 'energy' with per-atom 'velocities' (or ASE's 'momenta')"));
    const c = makeFrame({ species: ['Ar'], positions: [0, 0, 0], arrays: { velocities: [0, 0, 0] }, info: { energy: -1, time: 2 } });
    expect(() => run([a, c])).toThrow('frame 1: energy from energy+kinetic, earlier frames from total_energy');
    expect(() => run([c], { source: 'total' })).toThrow("frame 0: no 'total_energy' in the frame info");
  });

  it('refuses a changing atom count and unknown species without masses', () => {
    const a = f({ total_energy: -1, time: 0 });
    const two = makeFrame({ species: ['Ar', 'Ar'], positions: [0, 0, 0, 4, 0, 0], info: { total_energy: -2, time: 1 } });
    expect(() => run([a, two])).toThrow('frame 1: has 2 atoms, frame 0 has 1; drift needs a fixed number of atoms');
    const x = makeFrame({ species: ['Xx'], positions: [0, 0, 0], arrays: { velocities: [0, 0, 0] }, info: { energy: -1, time: 0 } });
    expect(() => run([x])).toThrow("frame 0: atom 0: unknown element symbol 'Xx'");
    // per-atom masses make it usable
    const xm = makeFrame({ species: ['Xx'], positions: [0, 0, 0], arrays: { velocities: [0.01, 0, 0], masses: [[50], 1] }, info: { energy: -1, time: 0 } });
    expect(run([xm]).figures.frames_used).toBe(1);
  });

  it('no frames: fail, not a crash', () => {
    const res = run([]);
    expect(res.verdict).toBe('fail');
    expect(res.reasons).toEqual(['no frames to check']);
  });

  it('defaults are the documented ones', () => {
    expect(DRIFT_DEFAULTS).toEqual({ slopeWarn: 0.1, slopeFail: 1, excursionWarn: 10, excursionFail: 100, minFrames: 10, minSpan: 1 });
    expect(atomicMass('Ar')).toBeCloseTo(39.95, 2); // IUPAC standard atomic weight of argon (abridged), used for kinetic energy
  });
});

function chunk(p: Float64Array): number[][] {
  const out: number[][] = [];
  for (let k = 0; k < p.length; k += 3) out.push([p[k], p[k + 1], p[k + 2]]);
  return out;
}
