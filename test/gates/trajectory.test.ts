/**
 * The trajectory gate: frames and time span against what was asked, mean temperature and pressure against the
 * condition's. Cross-checks: ASE (Debian python3-ase) for the kinetic temperature and the stress with its ideal-gas
 * part; simple-statistics for the mean and standard deviation; the canonical fluctuation of the kinetic temperature,
 * relative sqrt(2/dof) (D. Frenkel & B. Smit, "Understanding Molecular Simulation", 2nd ed. 2002, sec. 4.1; from
 * memory), for velocities drawn from the Maxwell-Boltzmann distribution.
 */
import { mkdtempSync, rmSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { afterAll, describe, expect, it } from 'vitest';
import { mean, sampleStandardDeviation } from 'simple-statistics';
import type { Frame } from '../../src/atoms/frame.js';
import { atomicMass } from '../../src/atoms/elements.js';
import { AMU_A2_PER_FS2_TO_EV, KB_EV_PER_K } from '../../src/atoms/units.js';
import { barToEvPerA3 } from '../../src/atoms/stress.js';
import { writeFrames } from '../../src/atoms/xyz/writer.js';
import { checkTrajectory, meanWithError, summarizeTrajectory, trajectoryFrame, type TrajectoryOptions } from '../../src/gates/trajectory.js';
import { GateInputError } from '../../src/gates/types.js';
import { ase, lcg, makeFrame } from './helpers.js';

const A = 10.0; // cubic cell side, Å
const N = 8;

/** Standard normal deviates from the LCG (Box-Muller). */
function gauss(r: () => number): () => number {
  return () => Math.sqrt(-2 * Math.log(1 - r())) * Math.cos(2 * Math.PI * r());
}

/** Velocities (Å/fs) of N argon atoms drawn at temperature T (Maxwell-Boltzmann, each component normal). */
function mbVelocities(n: number, T: number, g: () => number): number[] {
  const s = Math.sqrt((KB_EV_PER_K * T) / (atomicMass('Ar') * AMU_A2_PER_FS2_TO_EV));
  return Array.from({ length: 3 * n }, () => s * g());
}

/** Velocities scaled so that 2K / (dof k_B) is exactly T. */
function exactVelocities(n: number, T: number, dof: number, g: () => number): number[] {
  const v = mbVelocities(n, T, g);
  const m = atomicMass('Ar');
  const K = 0.5 * m * AMU_A2_PER_FS2_TO_EV * v.reduce((a, x) => a + x * x, 0);
  const f = Math.sqrt(T / ((2 * K) / (dof * KB_EV_PER_K)));
  return v.map((x) => x * f);
}

interface RunSpec {
  frames: number;
  writeEvery?: number;
  timestep?: number;
  firstStep?: number;
  info?: (k: number) => Record<string, number | number[]>;
  velocities?: (k: number) => number[] | undefined;
  atoms?: number;
  noTime?: boolean;
}

function run(spec: RunSpec): Frame[] {
  const n = spec.atoms ?? N;
  const W = spec.writeEvery ?? 10;
  const dt = spec.timestep ?? 1;
  const r = lcg(11);
  const out: Frame[] = [];
  for (let k = 0; k < spec.frames; k++) {
    const step = (spec.firstStep ?? 0) + k * W;
    const v = spec.velocities?.(k);
    out.push(
      makeFrame({
        species: Array(n).fill('Ar'),
        positions: Array.from({ length: 3 * n }, () => A * r()),
        cell: [A, 0, 0, 0, A, 0, 0, 0, A],
        arrays: v ? { velocities: v } : {},
        info: { ...(spec.noTime ? {} : { step, time: step * dt }), energy: -1, ...(spec.info?.(k) ?? {}) },
      }),
    );
  }
  return out;
}

const judge = (frames: Frame[], o: TrajectoryOptions) => summarizeTrajectory(frames.map((f, k) => trajectoryFrame(f, k)), o);

describe('trajectory: length against steps, write_every and time step', () => {
  const ask = { steps: 1000, writeEvery: 10, timestep: 1, what: 'condition c300' };

  it('a full run (step 0 to 1000, a frame every 10: 101 frames over 1000 fs) passes', () => {
    const r = judge(run({ frames: 101 }), ask);
    expect(r.verdict).toBe('pass');
    expect(r.figures).toMatchObject({ frames: 101, expected_frames: 101, span_fs: 1000, expected_span_fs: 1000, short: false, long: false, first_frame_step: 0 });
  });

  it('a run that writes only its first frame fails, naming frames and time span expected and found', () => {
    const r = judge(run({ frames: 1 }), ask);
    expect(r.verdict).toBe('fail');
    expect(r.reasons[0]).toBe(
      'condition c300: trajectory ends after 1 of 101 expected frames (0 of 1000 fs): the run stopped before the 1000 steps asked (a frame every 10 steps of 1 fs)',
    );
    expect(r.figures.short).toBe(true);
  });

  it('19 of 400 steps is short (the frames say how far the run got)', () => {
    const r = judge(run({ frames: 2, writeEvery: 19, timestep: 0.5 }), { steps: 400, writeEvery: 19, timestep: 0.5 });
    expect(r.verdict).toBe('fail');
    expect(r.reasons[0]).toMatch(/ends after 2 of 22 expected frames \(9\.5 of 199\.5 fs\)/);
  });

  it('accepts a program that does not write step 0 (100 frames from step 10 to 1000)', () => {
    const r = judge(run({ frames: 100, firstStep: 10 }), ask);
    expect(r.verdict).toBe('pass');
    expect(r.figures).toMatchObject({ first_frame_step: 10, span_fs: 1000, min_frames: 100 });
  });

  it('the time span counts: 101 frames written every step instead of every 10 reach only 100 of 1000 fs', () => {
    const r = judge(run({ frames: 101, writeEvery: 1 }), ask);
    expect(r.verdict).toBe('fail');
    expect(r.reasons[0]).toMatch(/ends after 101 of 101 expected frames \(100 of 1000 fs\)/);
  });

  it('a run much longer than asked warns and says by how much', () => {
    const r = judge(run({ frames: 1001 }), ask);
    expect(r.verdict).toBe('warn');
    expect(r.reasons[0]).toBe('condition c300: trajectory is longer than asked: 1001 frames over 10000 fs, expected 101 frames over 1000 fs (1000 steps, a frame every 10 steps of 1 fs)');
  });

  it('steps not a multiple of write_every: the last written step is floor(S/W) W; writing the final step too is fine', () => {
    expect(judge(run({ frames: 11 }), { steps: 105, writeEvery: 10, timestep: 1 }).verdict).toBe('pass');
    const plusLast = run({ frames: 11 });
    plusLast.push(makeFrame({ species: Array(N).fill('Ar'), positions: Array(3 * N).fill(1), cell: [A, 0, 0, 0, A, 0, 0, 0, A], info: { step: 105, time: 105 } }));
    expect(judge(plusLast, { steps: 105, writeEvery: 10, timestep: 1 }).verdict).toBe('pass');
  });

  it('a run cut by ratchet at a contact is not short when it ends at or after the cut; one that ends before it is', () => {
    const r = judge(run({ frames: 7 }), { ...ask, cutAt: 6 });
    expect(r.verdict).toBe('pass');
    expect(r.reasons[0]).toMatch(/at or after its first contact violation or non-finite frame \(frame 6\): cut there by ratchet, not counted as short/);
    expect(judge(run({ frames: 7 }), { ...ask, cutAt: 9 }).verdict).toBe('fail');
  });

  it('without time or step info only the frame count is checked, and says so', () => {
    const ok = judge(run({ frames: 101, noTime: true }), ask);
    expect(ok.verdict).toBe('pass');
    expect(ok.figures.span_fs).toBeNull();
    const bad = judge(run({ frames: 3, noTime: true }), ask);
    expect(bad.verdict).toBe('fail');
    expect(bad.reasons[0]).toMatch(/ends after 3 of 101 expected frames \(the frames carry no time or step: frame count only\)/);
  });

  it('no frames fails; a frame without time after frame 0 had one is an input error naming the frame', () => {
    expect(judge([], ask).verdict).toBe('fail');
    const f = run({ frames: 3 });
    f[2].info.delete('time');
    expect(() => judge(f, ask)).toThrow(GateInputError);
    expect(() => judge(f, ask)).toThrow(/frame 2: no 'time' in the frame info, though frame 0 has one/);
  });

  it('refuses nonsense asks with the key named', () => {
    expect(() => judge(run({ frames: 2 }), { ...ask, writeEvery: 0 })).toThrow(/write_every must be a whole number of at least 1, found 0/);
    expect(() => judge(run({ frames: 2 }), { ...ask, timestep: -1 })).toThrow(/time step must be positive \(fs\), found -1/);
  });
});

describe('trajectory: mean temperature', () => {
  const ask = { steps: 500, writeEvery: 10, timestep: 1, what: 'condition c300' };
  const dof = 3 * N - 3;

  it('kinetic temperature agrees with ASE (3N degrees of freedom, as ASE counts them)', () => {
    const g = gauss(lcg(3));
    const v = mbVelocities(N, 300, g);
    const [f] = run({ frames: 1, velocities: () => v });
    const r = summarizeTrajectory([trajectoryFrame(f, 0)], { ...ask, dof: 3 * N, steps: 0 });
    const T = ase<number>(
      'from ase import Atoms, units\nimport numpy as np\na = Atoms("Ar%d" % len(data["v"]), positions=np.zeros((len(data["v"]), 3)))\na.set_masses([data["m"]] * len(a))\na.set_velocities(np.array(data["v"]) / units.fs)\nprint(json.dumps(a.get_temperature()))',
      // our standard atomic weight of Ar, so only the kinetic-temperature arithmetic is compared
      { v: Array.from({ length: N }, (_, i) => v.slice(3 * i, 3 * i + 3)), m: atomicMass('Ar') },
    );
    // ASE's units are CODATA 2014 by default, ours CODATA 2018: agreement to a part in a million
    expect(Math.abs((r.figures.mean_temperature_K as number) - T) / T).toBeLessThan(1e-6);
  });

  it('velocities at the asked temperature pass and report the mean', () => {
    const g = gauss(lcg(5));
    const r = judge(run({ frames: 51, velocities: () => exactVelocities(N, 300, dof, g) }), { ...ask, temperature: 300 });
    expect(r.verdict).toBe('pass');
    expect(r.figures.mean_temperature_K).toBeCloseTo(300, 8);
    expect(r.figures.equilibration_frames).toBe(10);
    expect(r.figures.frames_judged).toBe(41);
  });

  it('a run 30 % cold fails; 15 % cold (400 K asked, 340 K found) warns; both name the figures', () => {
    const g = gauss(lcg(5));
    const cold = judge(run({ frames: 51, velocities: () => exactVelocities(N, 210, dof, g) }), { ...ask, temperature: 300 });
    expect(cold.verdict).toBe('fail');
    expect(cold.reasons.join('\n')).toMatch(/condition c300: mean temperature 210 K over frames 10-50 \(from velocities \(21 degrees of freedom\)\) is 30 % below the 300 K asked/);
    const cool = judge(run({ frames: 51, velocities: () => exactVelocities(N, 340, dof, g) }), { ...ask, temperature: 400 });
    expect(cool.verdict).toBe('warn');
    expect(cool.reasons.join('\n')).toMatch(/mean temperature 340 K .* is 15 % below the 400 K asked/);
  });

  it('a small cell with honest canonical noise is not failed: its scatter matches sqrt(2/dof) and widens the band', () => {
    // 4 atoms, velocities redrawn from Maxwell-Boltzmann every frame: per-frame temperature scatters by about 50 %.
    const g = gauss(lcg(17));
    const n = 4;
    const frames = run({ frames: 201, atoms: n, velocities: () => mbVelocities(n, 300, g) });
    const r = summarizeTrajectory(frames.map((f, k) => trajectoryFrame(f, k)), { ...ask, steps: 2000, dof: 3 * n, temperature: 300 });
    expect(r.verdict).not.toBe('fail');
    const rel = (r.figures.temperature_std_K as number) / (r.figures.mean_temperature_K as number);
    expect(rel).toBeGreaterThan(0.8 * Math.sqrt(2 / (3 * n)));
    expect(rel).toBeLessThan(1.2 * Math.sqrt(2 / (3 * n)));
  });

  it('uses the temperature info key without velocities; neither: warns that the temperature could not be checked', () => {
    const r = judge(run({ frames: 51, info: () => ({ temperature: 295 }) }), { ...ask, temperature: 300 });
    expect(r.verdict).toBe('pass');
    expect(r.figures).toMatchObject({ mean_temperature_K: 295, temperature_source: "info 'temperature'" });
    const none = judge(run({ frames: 51 }), { ...ask, temperature: 300 });
    expect(none.verdict).toBe('warn');
    expect(none.reasons.join('\n')).toMatch(/condition c300: the temperature could not be checked: the frames carry neither per-atom 'velocities' nor info 'temperature'/);
  });

  it('takes the mean over the frames before a contact cut only', () => {
    const g = gauss(lcg(5));
    const r = judge(run({ frames: 51, velocities: (k) => exactVelocities(N, k < 30 ? 300 : 3000, dof, g) }), { ...ask, temperature: 300, cutAt: 30 });
    expect(r.figures.mean_temperature_K).toBeCloseTo(300, 8);
    expect(r.figures.frames_judged).toBe(24);
  });
});

describe('trajectory: mean pressure', () => {
  const ask = { steps: 500, writeEvery: 10, timestep: 1, temperature: 300, what: 'condition p1' };
  const V = A ** 3;
  const dof = 3 * N - 3;

  /** Stress (Voigt, eV/Å^3) whose potential part, plus the kinetic part of velocities v, makes pressure P bar. */
  function stressFor(Pbar: number, v: number[]): number[] {
    const K = 0.5 * atomicMass('Ar') * AMU_A2_PER_FS2_TO_EV * v.reduce((a, x) => a + x * x, 0);
    const p = barToEvPerA3(Pbar) - (2 * K) / (3 * V);
    return [-p, -p, -p, 0, 0, 0];
  }

  it('stress plus the kinetic part agrees with ASE get_stress(include_ideal_gas=True)', () => {
    const g = gauss(lcg(9));
    const v = mbVelocities(N, 300, g);
    const stress = [-0.001, -0.002, -0.0015, 1e-4, 0, 0];
    const [f] = run({ frames: 1, velocities: () => v, info: () => ({ stress }) });
    const r = summarizeTrajectory([trajectoryFrame(f, 0)], { ...ask, steps: 0, pressure: 0 });
    const P = ase<number>(
      'from ase import Atoms, units\nfrom ase.calculators.singlepoint import SinglePointCalculator\nimport numpy as np\n' +
        'v = np.array(data["v"]).reshape(-1, 3)\na = Atoms("Ar%d" % len(v), positions=np.zeros((len(v), 3)), cell=[data["a"]] * 3, pbc=True)\n' +
        'a.set_masses([data["m"]] * len(a))\na.set_velocities(v / units.fs)\na.calc = SinglePointCalculator(a, stress=np.array(data["s"]))\n' +
        's = a.get_stress(include_ideal_gas=True)\nprint(json.dumps(-float(s[:3].sum()) / 3 / units.bar))',
      { v, s: stress, a: A, m: atomicMass('Ar') },
    );
    expect(r.figures.mean_pressure_bar).toBeCloseTo(P, 3);
  });

  it('at the asked pressure passes; 10 kbar off fails; no stress warns', () => {
    const g = gauss(lcg(5));
    const vel = Array.from({ length: 51 }, () => exactVelocities(N, 300, dof, g));
    const at = (P: number) => run({ frames: 51, velocities: (k) => vel[k], info: (k) => ({ stress: stressFor(P, vel[k]) }) });
    const ok = judge(at(20000), { ...ask, pressure: 20000 });
    expect(ok.verdict).toBe('pass');
    expect(ok.figures.mean_pressure_bar).toBeCloseTo(20000, 4);
    const off = judge(at(30000), { ...ask, pressure: 20000 });
    expect(off.verdict).toBe('fail');
    expect(off.reasons.join('\n')).toMatch(/condition p1: mean pressure 30000 bar over frames 10-50 is 10000 bar above the 20000 bar asked/);
    const none = judge(run({ frames: 51, velocities: (k) => vel[k] }), { ...ask, pressure: 1 });
    expect(none.verdict).toBe('warn');
    expect(none.reasons.join('\n')).toMatch(/condition p1: the pressure could not be checked: the frames carry no 'stress'/);
  });

  it('a badly shaped stress is an input error naming the frame and the key', () => {
    const f = run({ frames: 3, info: (k): Record<string, number[]> => (k === 1 ? { stress: [1, 2, 3] } : {}) });
    expect(() => judge(f, { ...ask, pressure: 1 })).toThrow(/frame 1: info key stress: expected 6 \(Voigt xx yy zz yz xz xy\) or 9/);
  });
});

describe('meanWithError', () => {
  it('mean and standard deviation agree with simple-statistics; an uncorrelated series has se = sd / sqrt(n)', () => {
    const g = gauss(lcg(21));
    const x = Array.from({ length: 400 }, () => 5 + g());
    const m = meanWithError(x);
    expect(m.mean).toBeCloseTo(mean(x), 12);
    expect(m.std).toBeCloseTo(sampleStandardDeviation(x), 12);
    const alt = Array.from({ length: 100 }, (_, k) => (k % 2 ? 1 : -1)); // lag-1 correlation -1: clipped to 0
    expect(meanWithError(alt).se).toBeCloseTo(sampleStandardDeviation(alt) / 10, 12);
  });

  it('a first-order autoregressive series x_k = 0.8 x_{k-1} + noise: lag-1 near 0.8, se wider by sqrt((1 + 0.8)/(1 - 0.8)) = 3', () => {
    const g = gauss(lcg(23));
    const x: number[] = [0];
    for (let k = 1; k < 20000; k++) x.push(0.8 * x[k - 1] + g());
    const m = meanWithError(x);
    expect(m.lag1).toBeGreaterThan(0.78);
    expect(m.lag1).toBeLessThan(0.82);
    const plain = (m.std as number) / Math.sqrt(x.length);
    expect(m.se / plain).toBeGreaterThan(2.9);
    expect(m.se / plain).toBeLessThan(3.1);
  });
});

describe('checkTrajectory on a file', () => {
  const dir = mkdtempSync(join(tmpdir(), 'ratchet-traj-'));
  afterAll(() => rmSync(dir, { recursive: true, force: true }));

  it('reads the frames written by the extended XYZ writer', async () => {
    const g = gauss(lcg(5));
    const path = join(dir, 't.xyz');
    await writeFrames(path, run({ frames: 2, timestep: 2, velocities: () => exactVelocities(N, 300, 3 * N - 3, g) }));
    const r = await checkTrajectory([path], { steps: 100, writeEvery: 10, timestep: 2, temperature: 300, what: 'condition x' });
    expect(r.verdict).toBe('fail');
    expect(r.reasons[0]).toMatch(/condition x: trajectory ends after 2 of 11 expected frames \(20 of 200 fs\)/);
    expect(r.figures.mean_temperature_K).toBeCloseTo(300, 5);
  });
});
