import { afterAll, describe, expect, it } from 'vitest';
import { writeFile } from 'node:fs/promises';
import { join } from 'node:path';
import { linearRegression } from 'simple-statistics';
import { gaussianBasis, evalBasis } from '../../../examples/argon/lib/basis.js';
import { fitModel, solveRidge, multiplicities, type LabeledConfig } from '../../../examples/argon/lib/fit.js';
import { ljFccLatticeConstant } from '../../../examples/argon/lib/lattice.js';
import { argonLj, ljEnergyForces } from '../../../examples/argon/lib/lj.js';
import { evaluateCommittee, evaluateModel, loadModel, MODEL_FORMAT, ModelError, type PairModel } from '../../../examples/argon/lib/model.js';
import { createRandom } from '../../../examples/argon/lib/random.js';
import { finiteDifferenceForces, maxAbs, maxAbsDiff, randomPacking, rattledFcc, skewedCell, removeScratch, scratchDir } from './helpers.js';

afterAll(removeScratch);

const A = ljFccLatticeConstant(3.405);

function randomModel(seed: number, count = 8): PairModel {
  const rng = createRandom(seed);
  const basis = gaussianBasis({ count, rMin: 2.8, rCut: 6.0 });
  return {
    format: MODEL_FORMAT,
    version: 1,
    species: ['Ar'],
    basis,
    pair_weights: { 'Ar-Ar': basis.centers.map(() => 0.02 * rng.normal()) },
    species_energy: { Ar: -0.05 },
  };
}

function labeledBy(model: PairModel, frames: ReturnType<typeof rattledFcc>[]): LabeledConfig[] {
  return frames.map((f) => {
    const { energy, forces } = evaluateModel(f, f.species, model);
    return { ...f, energy, forces };
  });
}

describe('radial basis and pair model', () => {
  it('basis derivatives match finite differences, and every function vanishes smoothly at the cutoff', () => {
    const b = gaussianBasis();
    const K = b.centers.length;
    const g = new Float64Array(K), dg = new Float64Array(K), gp = new Float64Array(K), gm = new Float64Array(K), scratch = new Float64Array(K);
    for (const r of [2.5, 3.3, 4.1, 5.2, 5.7, 5.95]) {
      evalBasis(r, b, g, dg);
      evalBasis(r + 1e-6, b, gp, scratch);
      evalBasis(r - 1e-6, b, gm, scratch);
      for (let k = 0; k < K; k++) expect(dg[k]).toBeCloseTo((gp[k] - gm[k]) / 2e-6, 6);
      // each function is a Gaussian times the quintic switch between r_on = 5 and r_cut = 6 Å
      const x = Math.min(1, Math.max(0, (r - 5) / 1));
      const sw = 1 - 10 * x ** 3 + 15 * x ** 4 - 6 * x ** 5;
      expect(g[3]).toBeCloseTo(Math.exp(-((r - b.centers[3]) ** 2) / (2 * b.width ** 2)) * sw, 14);
    }
    evalBasis(b.r_cut - 1e-9, b, g, dg);
    expect(maxAbs(g)).toBeLessThan(1e-20);
    expect(maxAbs(dg)).toBeLessThan(1e-12);
    evalBasis(b.r_cut + 0.5, b, g, dg);
    expect(maxAbs(g) + maxAbs(dg)).toBe(0);
  });

  it('model forces are minus the gradient of the model energy (central differences, skewed cell)', () => {
    const model = randomModel(3);
    const frame = randomPacking(skewedCell(), 20, 2.9, 5);
    const { forces } = evaluateModel(frame, frame.species, model);
    const fd = finiteDifferenceForces(frame.positions, (x) => evaluateModel({ ...frame, positions: x }, frame.species, model).energy);
    expect(maxAbs(forces)).toBeGreaterThan(1e-3);
    expect(maxAbsDiff(forces, fd)).toBeLessThan(1e-8 + 1e-6 * maxAbs(forces));
  });

  it('a committee evaluated in one pass equals its members evaluated one by one', () => {
    const models = [randomModel(1), randomModel(2), randomModel(3)];
    const frame = rattledFcc(A, 2, 0.1, 0.01, 4);
    const c = evaluateCommittee(frame, frame.species, models);
    models.forEach((m, i) => {
      const one = evaluateModel(frame, frame.species, m);
      expect(c.energies[i]).toBeCloseTo(one.energy, 12);
      expect(maxAbsDiff(c.forces[i], one.forces)).toBeLessThan(1e-14);
    });
  });
});

describe('ridge regression', () => {
  it('worked check: with lambda = 0 it is ordinary least squares (slope and intercept as simple-statistics computes them)', () => {
    // Independent library: simple-statistics linearRegression (least squares line). Data invented.
    const xs = [0.5, 1.1, 2.0, 2.9, 4.2, 5.0];
    const ys = [1.2, 1.9, 3.2, 3.9, 5.8, 6.1];
    const normals = xs.map((x, i) => ({ ata: Float64Array.of(x * x, x, x, 1), atb: Float64Array.of(x * ys[i], ys[i]) }));
    const [m, b] = solveRidge(normals, new Float64Array(xs.length).fill(1), 0, [false, false]);
    const ref = linearRegression(xs.map((x, i) => [x, ys[i]]));
    expect(m).toBeCloseTo(ref.m, 12);
    expect(b).toBeCloseTo(ref.b, 12);
  });

  it('worked check: one parameter, w = (sum xy + lambda w0) / (sum x^2 + lambda)', () => {
    // Closed form of ridge regression towards an anchor w0 (A. E. Hoerl and R. W. Kennard, Technometrics 12 (1970) 55, with w0 = 0).
    const xs = [1, 2, 3];
    const ys = [2.1, 3.9, 6.2];
    const normals = xs.map((x, i) => ({ ata: Float64Array.of(x * x), atb: Float64Array.of(x * ys[i]) }));
    const sxy = 1 * 2.1 + 2 * 3.9 + 3 * 6.2;
    const sxx = 14;
    expect(solveRidge(normals, [1, 1, 1], 2, [true])[0]).toBeCloseTo(sxy / (sxx + 2), 14);
    expect(solveRidge(normals, [1, 1, 1], 2, [true], Float64Array.of(5))[0]).toBeCloseTo((sxy + 10) / (sxx + 2), 14);
    // multiplicities weight frames: counting the first frame twice
    expect(solveRidge(normals, [2, 1, 1], 0, [true])[0]).toBeCloseTo((sxy + 2.1) / (sxx + 1), 14);
  });

  it('recovers the exact weights from energies and forces generated by the model itself', () => {
    const truth = randomModel(42, 6);
    const frames = Array.from({ length: 12 }, (_, s) => rattledFcc(A, 2, 0.15, 0.02, 100 + s));
    const data = labeledBy(truth, frames);
    const fit = fitModel(data, { basis: truth.basis, ridge: 1e-12, anchorScale: 0, bootstrap: false });
    const w = fit.model.pair_weights['Ar-Ar'];
    const w0 = truth.pair_weights['Ar-Ar'];
    expect(maxAbsDiff(w, w0)).toBeLessThan(1e-6 * maxAbs(w0));
    expect(fit.model.species_energy.Ar).toBeCloseTo(-0.05, 8);
    expect(fit.rmse.force_eV_per_A).toBeLessThan(1e-9);
  });

  it('fits LJ argon with a real, small error (shorter cutoff), and bootstrap members differ', () => {
    const lj = argonLj();
    const frames = Array.from({ length: 24 }, (_, s) => rattledFcc(A, 2, 0.1, 0.02, 200 + s));
    const data: LabeledConfig[] = frames.map((f) => ({ ...f, ...ljEnergyForces(f, lj) }));
    const basis = gaussianBasis();
    const m0 = fitModel(data, { basis, seed: 1, bootstrap: true, anchorScale: 0.05, ridge: 1e-3 });
    const m1 = fitModel(data, { basis, seed: 2, bootstrap: true, anchorScale: 0.05, ridge: 1e-3 });
    // error is real (the reference reaches 10.2 Å, the model 6 Å) but far below the force scale
    const fScale = Math.sqrt(data.flatMap((d) => Array.from(d.forces)).reduce((s, f) => s + f * f, 0) / (data.length * 96));
    expect(m0.rmse.force_eV_per_A).toBeGreaterThan(1e-6);
    expect(m0.rmse.force_eV_per_A).toBeLessThan(0.2 * fScale);
    expect(maxAbsDiff(m0.model.pair_weights['Ar-Ar'], m1.model.pair_weights['Ar-Ar'])).toBeGreaterThan(1e-6);
    // bootstrap: about 1 - 1/e = 63% of the frames drawn at least once (Efron 1979)
    const mult = multiplicities(2000, true, 9);
    const distinct = mult.reduce((s, m) => s + (m > 0 ? 1 : 0), 0) / 2000;
    expect(Math.abs(distinct - (1 - Math.exp(-1)))).toBeLessThan(0.03);
    expect(mult.reduce((s, m) => s + m, 0)).toBe(2000);
  });
});

describe('model files', () => {
  it('refuses a malformed model file naming the file and key', async () => {
    const dir = await scratchDir('argon-model-');
    const good = randomModel(1);
    const bad = { ...good, pair_weights: { 'Ar-Ar': [1, 2] } };
    await writeFile(join(dir, 'bad.json'), JSON.stringify(bad));
    await expect(loadModel(join(dir, 'bad.json'))).rejects.toThrow(/bad\.json: key pair_weights\.Ar-Ar: expected 8 weights/);
    await writeFile(join(dir, 'nojson.json'), '{ not json');
    await expect(loadModel(join(dir, 'nojson.json'))).rejects.toThrow(ModelError);
    await writeFile(join(dir, 'format.json'), JSON.stringify({ ...good, format: 'other' }));
    await expect(loadModel(join(dir, 'format.json'))).rejects.toThrow(/key format/);
    await writeFile(join(dir, 'good.json'), JSON.stringify(good));
    expect((await loadModel(join(dir, 'good.json'))).pair_weights['Ar-Ar']).toEqual(good.pair_weights['Ar-Ar']);
  });
});
