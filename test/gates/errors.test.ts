import { describe, expect, it } from 'vitest';
import { mean, rootMeanSquare, meanSimple } from 'simple-statistics';
import { errorsFrame, summarizeErrors, ERRORS_DEFAULTS } from '../../src/gates/errors.js';
import { GateInputError } from '../../src/gates/types.js';
import type { Frame } from '../../src/atoms/frame.js';
import { lcg, makeFrame } from './helpers.js';

const species = ['O', 'H', 'H', 'Si'];
const positions = [0, 0, 0, 0.96, 0, 0, -0.24, 0.93, 0, 3, 3, 3];

function pairOfSets(nFrames: number, seed: number) {
  const r = lcg(seed);
  const ref: Frame[] = [];
  const pred: Frame[] = [];
  for (let k = 0; k < nFrames; k++) {
    const fr = Array.from({ length: 12 }, () => 4 * (r() - 0.5));
    const fp = fr.map((x) => x + 0.3 * (r() - 0.5));
    const er = -20 + r();
    const ep = er + 0.05 * (r() - 0.5);
    ref.push(makeFrame({ species, positions, info: { energy: er }, arrays: { forces: fr } }));
    pred.push(makeFrame({ species, positions, info: { energy: ep }, arrays: { forces: fp } }));
  }
  return { ref, pred };
}
const compare = (ref: Frame[], pred: Frame[], opts = {}) => summarizeErrors(ref.map((f, k) => errorsFrame(f, pred[k], k, opts)), opts);

describe('errors: statistics against simple-statistics', () => {
  const { ref, pred } = pairOfSets(25, 5);
  const res = compare(ref, pred);
  const f = res.figures;

  it('energy MAE and RMSE in meV/atom', () => {
    const d = ref.map((r, k) => (((pred[k].info.get('energy') as number) - (r.info.get('energy') as number)) / 4) * 1000);
    expect(f.frames).toBe(25);
    expect(f.energy_frames).toBe(25);
    expect(f.energy_mae_meV_per_atom!).toBeCloseTo(mean(d.map(Math.abs)), 10);
    expect(f.energy_rmse_meV_per_atom!).toBeCloseTo(rootMeanSquare(d), 10);
    expect(f.energy_mean_error_meV_per_atom!).toBeCloseTo(meanSimple(d), 10);
    const worst = d.map(Math.abs).indexOf(Math.max(...d.map(Math.abs)));
    expect(f.max_energy_error).toEqual({ value_meV_per_atom: Math.abs(d[worst]), frame: worst });
  });

  it('force-component MAE and RMSE in meV/Å, overall and per element, and the largest component error', () => {
    const all: number[] = [];
    const by: Record<string, number[]> = {};
    let best = { v: -1, frame: 0, atom: 0, c: 0 };
    ref.forEach((r, k) => {
      const a = r.arrays.get('forces')!.values as Float64Array;
      const b = pred[k].arrays.get('forces')!.values as Float64Array;
      for (let i = 0; i < 12; i++) {
        const d = (b[i] - a[i]) * 1000;
        all.push(d);
        (by[species[Math.floor(i / 3)]] ??= []).push(d);
        if (Math.abs(d) > best.v) best = { v: Math.abs(d), frame: k, atom: Math.floor(i / 3), c: i % 3 };
      }
    });
    expect(f.force_components).toBe(300);
    expect(f.force_mae_meV_per_A!).toBeCloseTo(mean(all.map(Math.abs)), 9);
    expect(f.force_rmse_meV_per_A!).toBeCloseTo(rootMeanSquare(all), 9);
    expect(Object.keys(f.per_element)).toEqual(['H', 'O', 'Si']);
    for (const el of ['H', 'O', 'Si']) {
      expect(f.per_element[el].force_mae_meV_per_A).toBeCloseTo(mean(by[el].map(Math.abs)), 9);
      expect(f.per_element[el].force_rmse_meV_per_A).toBeCloseTo(rootMeanSquare(by[el]), 9);
      expect(f.per_element[el].components).toBe(by[el].length);
    }
    expect(f.max_force_error).toEqual({
      value_meV_per_A: best.v,
      frame: best.frame,
      atom: best.atom,
      component: 'xyz'[best.c],
      species: species[best.atom],
    });
  });

  it('verdict against the default limits (force RMSE ~ 87 meV/Å: pass; tightened: warn, fail)', () => {
    expect(f.force_rmse_meV_per_A!).toBeGreaterThan(50);
    expect(f.force_rmse_meV_per_A!).toBeLessThan(150);
    // 25 frames, 300 force components: enough to judge (no sample-size warn)
    expect(res.verdict).toBe('pass');
    expect(res.reasons[0]).toBe('judged on 25 frames (100 atoms, 300 force components)');
    expect(compare(ref, pred, { limits: { force_rmse: { warn: 50, fail: 1000 } } }).verdict).toBe('warn');
    const failed = compare(ref, pred, { limits: { force_rmse: { warn: 10, fail: 50 } } });
    expect(failed.verdict).toBe('fail');
    expect(failed.reasons[0]).toMatch(/^force RMSE \(all elements\) \d+(\.\d+)? meV\/Å is above the fail limit 50 meV\/Å$/);
    expect(ERRORS_DEFAULTS).toEqual({
      energyRmseWarn: 5,
      energyRmseFail: 10,
      forceRmseWarn: 100,
      forceRmseFail: 150,
      minFrames: 10,
      minForceComponents: 100,
      positionTolerance: 1e-4,
    });
  });

  it('a perfect prediction has zero errors', () => {
    const z = compare(ref, ref);
    expect(z.figures.energy_rmse_meV_per_atom).toBe(0);
    expect(z.figures.force_mae_meV_per_A).toBe(0);
    expect(z.verdict).toBe('pass');
  });
});

describe('errors: refusals and keys', () => {
  const a = makeFrame({ species: ['O', 'H'], positions: [0, 0, 0, 1, 0, 0], info: { energy: -1 }, arrays: { forces: [0, 0, 0, 0, 0, 0] } });

  it('species, atom count and positions must match (exact messages)', () => {
    const b = makeFrame({ species: ['O', 'O'], positions: [0, 0, 0, 1, 0, 0], info: { energy: -1 }, arrays: { forces: [0, 0, 0, 0, 0, 0] } });
    expect(() => errorsFrame(a, b, 3)).toThrow(new GateInputError('frame 3: atom 1 is H in the reference but O in the prediction'));
    const c = makeFrame({ species: ['O'], positions: [0, 0, 0], info: { energy: -1 } });
    expect(() => errorsFrame(a, c, 0)).toThrow('frame 0: the reference has 2 atoms, the prediction 1');
    const d = makeFrame({ species: ['O', 'H'], positions: [0, 0, 0, 1.001, 0, 0], info: { energy: -1 }, arrays: { forces: [0, 0, 0, 0, 0, 0] } });
    expect(() => errorsFrame(a, d, 0)).toThrow(
      'frame 0: atom 1 (H) is at (1, 0, 0) in the reference but (1.001, 0, 0) in the prediction (0.001 Å apart, tolerance 0.0001 Å): not the same structure',
    );
    expect(() => errorsFrame(a, d, 0, { positionTolerance: 0.01 })).not.toThrow();
  });

  it('positions wrapped into a periodic cell still match (minimum image, triclinic cell)', () => {
    const cell = [5, 0, 0, 2, 5, 0, 1, 1, 6];
    const p = makeFrame({ species: ['Ar'], positions: [6.5, 5.5, 0.5], cell, info: { energy: -1 } });
    // the same atom shifted by -a - b: (6.5 - 5 - 2, 5.5 - 0 - 5, 0.5)
    const q = makeFrame({ species: ['Ar'], positions: [-0.5, 0.5, 0.5], cell, info: { energy: -1.002 } });
    expect(compare([p], [q]).figures.energy_mae_meV_per_atom!).toBeCloseTo(2, 9);
    const bigger = makeFrame({ species: ['Ar'], positions: [-0.5, 0.5, 0.5], cell: [5.01, 0, 0, 2, 5, 0, 1, 1, 6], info: { energy: -1 } });
    expect(() => errorsFrame(p, bigger, 4)).toThrow(
      new GateInputError('frame 4: the cell differs (component 0: 5 Å in the reference, 5.01 Å in the prediction, tolerance 0.0001 Å): not the same structure'),
    );
    const slab = makeFrame({ species: ['Ar'], positions: [6.5, 5.5, 0.5], cell, pbc: [true, true, false], info: { energy: -1 } });
    expect(() => errorsFrame(p, slab, 0)).toThrow('frame 0: pbc is "T T T" in the reference but "T T F" in the prediction');
    const nonPeriodic = makeFrame({ species: ['Ar'], positions: [6.5, 5.5, 0.5], info: { energy: -1 } });
    const shifted = makeFrame({ species: ['Ar'], positions: [-0.5, 0.5, 0.5], info: { energy: -1 } });
    expect(() => errorsFrame(nonPeriodic, shifted, 0)).toThrow('not the same structure');
  });

  it('what one file has the other must have; custom keys', () => {
    const noF = makeFrame({ species: ['O', 'H'], positions: [0, 0, 0, 1, 0, 0], info: { energy: -1 } });
    expect(() => errorsFrame(a, noF, 2)).toThrow("frame 2: the reference has per-atom 'forces' but the prediction has no 'forces'");
    const noE = makeFrame({ species: ['O', 'H'], positions: [0, 0, 0, 1, 0, 0], arrays: { forces: [0, 0, 0, 0, 0, 0] } });
    expect(() => errorsFrame(a, noE, 2)).toThrow("frame 2: the reference has energy 'energy' but the prediction has no 'energy'");
    const custom = makeFrame({ species: ['O', 'H'], positions: [0, 0, 0, 1, 0, 0], info: { mlp_energy: -1.01 }, arrays: { mlp_forces: [0, 0, 0, 0.1, 0, 0] } });
    const res = compare([a], [custom], { predEnergyKey: 'mlp_energy', predForcesKey: 'mlp_forces' });
    expect(res.figures.energy_mae_meV_per_atom!).toBeCloseTo(5, 9);
    expect(res.figures.max_force_error).toEqual({ value_meV_per_A: 100, frame: 0, atom: 1, component: 'x', species: 'H' });
  });

  it('non-finite predictions fail, naming the frame; other frames still count', () => {
    const bad = makeFrame({ species: ['O', 'H'], positions: [0, 0, 0, 1, 0, 0], info: { energy: -1 }, arrays: { forces: [0, 0, 0, 0, NaN, 0] } });
    const ok = makeFrame({ species: ['O', 'H'], positions: [0, 0, 0, 1, 0, 0], info: { energy: -1.002 }, arrays: { forces: [0, 0, 0, 0, 0, 0] } });
    const res = compare([a, a], [ok, bad]);
    expect(res.verdict).toBe('fail');
    expect(res.figures.first_bad_frame).toBe(1);
    expect(res.figures.energy_frames).toBe(1);
    expect(res.reasons[0]).toBe('1 frame(s) hold non-finite values and were left out; the first is frame 1 with non-finite predicted forces (atom 1)');
  });

  it('nothing to compare is bad input; no frames is a fail', () => {
    const bare = makeFrame({ species: ['O'], positions: [0, 0, 0] });
    expect(() => compare([bare], [bare])).toThrow(
      "reference and predicted: no energies ('energy' / 'energy') and no forces ('forces' / 'forces') to compare",
    );
    expect(compare([], []).verdict).toBe('fail');
  });
});
