/**
 * errors gate: limits from the one table (limits.ts), judged per element as documented, and honest sample sizes.
 * Expected figures come from simple-statistics (rootMeanSquare, mean) over the same error lists, not from the gate.
 */
import { describe, expect, it } from 'vitest';
import { mean, rootMeanSquare } from 'simple-statistics';
import { errorsFrame, summarizeErrors } from '../../src/gates/errors.js';
import { LIMITS, resolveLimit } from '../../src/gates/limits.js';
import { GateInputError } from '../../src/gates/types.js';
import type { Frame } from '../../src/atoms/frame.js';
import { lcg, makeFrame } from './helpers.js';

/**
 * AuCu3 frames: every Au force component is off by ±55.6 meV/Å and every Cu component by ±46.2 meV/Å (random
 * signs), so the Au RMSE is 55.6, the Cu RMSE 46.2 and the overall RMSE sqrt((55.6² + 3·46.2²)/4) = 48.72 meV/Å.
 */
function auCu3(frames: number, seed = 3) {
  const r = lcg(seed);
  const species = ['Au', 'Cu', 'Cu', 'Cu'];
  const positions = [0, 0, 0, 1.8, 1.8, 0, 1.8, 0, 1.8, 0, 1.8, 1.8];
  const ref: Frame[] = [];
  const pred: Frame[] = [];
  const errs: Record<string, number[]> = { Au: [], Cu: [] };
  for (let k = 0; k < frames; k++) {
    const fr = Array.from({ length: 12 }, () => r() - 0.5);
    const fp = fr.map((x, c) => {
      const sp = species[Math.floor(c / 3)];
      const d = (sp === 'Au' ? 0.0556 : 0.0462) * (r() < 0.5 ? -1 : 1);
      errs[sp].push(d * 1000);
      return x + d;
    });
    ref.push(makeFrame({ species, positions, info: { energy: -10 }, arrays: { forces: fr } }));
    pred.push(makeFrame({ species, positions, info: { energy: -10.004 }, arrays: { forces: fp } }));
  }
  return { ref, pred, errs };
}
const compare = (ref: Frame[], pred: Frame[], opts = {}) => summarizeErrors(ref.map((f, k) => errorsFrame(f, pred[k], k, opts)), opts);

describe('errors: per-element limits', () => {
  const { ref, pred, errs } = auCu3(12);

  it('figures per element and overall agree with simple-statistics', () => {
    const f = compare(ref, pred).figures;
    expect(f.per_element.Au.force_rmse_meV_per_A).toBeCloseTo(rootMeanSquare(errs.Au), 9);
    expect(f.per_element.Cu.force_rmse_meV_per_A).toBeCloseTo(rootMeanSquare(errs.Cu), 9);
    expect(f.force_rmse_meV_per_A!).toBeCloseTo(rootMeanSquare([...errs.Au, ...errs.Cu]), 9);
    expect(f.force_mae_meV_per_A!).toBeCloseTo(mean([...errs.Au, ...errs.Cu].map(Math.abs)), 9);
    expect(f.per_element.Au.force_rmse_meV_per_A).toBeCloseTo(55.6, 9);
    expect(f.per_element.Cu.force_rmse_meV_per_A).toBeCloseTo(46.2, 9);
    expect(f.force_rmse_meV_per_A!).toBeCloseTo(Math.sqrt((55.6 ** 2 + 3 * 46.2 ** 2) / 4), 9);
    expect(f.per_element.Au.atoms).toBe(12);
    expect(f.per_element.Cu.atoms).toBe(36);
  });

  it('a fail limit of 50 meV/Å fails on Au (55.6) although the overall RMSE (48.7) is below it', () => {
    const res = compare(ref, pred, { limits: { force_rmse: 50 } });
    expect(res.verdict).toBe('fail');
    expect(res.reasons).toContain('Au force RMSE 55.6 meV/Å is above the fail limit 50 meV/Å');
    expect(res.reasons.some((x) => x.startsWith('Cu force RMSE'))).toBe(false);
    expect(res.reasons.some((x) => x.startsWith('force RMSE (all elements)'))).toBe(false);
    // a number is the fail limit; the default warn limit (100) drops to it
    expect(res.figures.limits.force_rmse).toEqual({ warn: 50, fail: 50 });
  });

  it('MAE limits apply per element too; the defaults pass this data', () => {
    // Au MAE 55.6, Cu MAE 46.2 (every error has the same magnitude), overall (55.6 + 3 x 46.2) / 4 = 48.55
    const res = compare(ref, pred, { limits: { force_mae: { warn: 47, fail: 60 } } });
    expect(res.verdict).toBe('warn');
    expect(res.reasons).toContain('Au force MAE 55.6 meV/Å is above the warn limit 47 meV/Å');
    expect(res.reasons).toContain('force MAE (all elements) 48.55 meV/Å is above the warn limit 47 meV/Å');
    expect(compare(ref, pred).verdict).toBe('pass');
  });

  it('the energy limits: default warn 5, fail 10 meV/atom (1 meV/atom here passes; 0.5 fails)', () => {
    const res = compare(ref, pred, { limits: { energy_rmse: { warn: 0.2, fail: 0.5 } } });
    expect(res.verdict).toBe('fail');
    expect(res.reasons[0]).toBe('energy RMSE 1 meV/atom is above the fail limit 0.5 meV/atom');
  });
});

describe('errors: honest sample sizes', () => {
  it('2 frames of 3 atoms: warn, naming frames, atoms and force components', () => {
    const { ref, pred } = auCu3(2);
    const r3 = ref.map((f) => makeFrame({ species: f.species.slice(0, 3), positions: Array.from(f.positions.slice(0, 9)), info: { energy: -10 }, arrays: { forces: Array.from(f.arrays.get('forces')!.values as Float64Array).slice(0, 9) } }));
    const p3 = pred.map((f) => makeFrame({ species: f.species.slice(0, 3), positions: Array.from(f.positions.slice(0, 9)), info: { energy: -10 }, arrays: { forces: Array.from(f.arrays.get('forces')!.values as Float64Array).slice(0, 9) } }));
    const res = compare(r3, p3);
    expect(res.verdict).toBe('warn');
    expect(res.reasons).toContain('judged on 2 frames (6 atoms, 18 force components): too few to trust (fewer than 10 frames, fewer than 100 force components)');
    expect(res.figures.judged_frames).toBe(2);
    expect(res.figures.atoms).toBe(6);
  });

  it('a warn for too few frames does not hide a fail', () => {
    const { ref, pred } = auCu3(2);
    const res = compare(ref, pred, { limits: { force_rmse: 50 } });
    expect(res.verdict).toBe('fail');
    expect(res.reasons).toContain('Au force RMSE 55.6 meV/Å is above the fail limit 50 meV/Å');
    expect(res.reasons).toContain('judged on 2 frames (8 atoms, 24 force components): too few to trust (fewer than 10 frames, fewer than 100 force components)');
  });

  it('10 frames but fewer than 100 force components still warns; enough of both does not', () => {
    const one = (k: number, d: number) => makeFrame({ species: ['Ar'], positions: [0, 0, 0], info: { energy: -1 + d * k }, arrays: { forces: [0, 0, d] } });
    const ref = Array.from({ length: 10 }, (_, k) => one(k, 0));
    const pred = Array.from({ length: 10 }, (_, k) => one(k, 0));
    expect(compare(ref, pred).reasons[0]).toBe('judged on 10 frames (10 atoms, 30 force components): too few to trust (fewer than 100 force components)');
    const { ref: r, pred: p } = auCu3(10);
    const ok = compare(r, p);
    expect(ok.verdict).toBe('pass');
    expect(ok.reasons[0]).toBe('judged on 10 frames (40 atoms, 120 force components)');
  });
});

describe('limits: one table, one rule', () => {
  it('a number is the fail limit; giving one side moves the other default just enough to keep warn <= fail', () => {
    expect(resolveLimit('force_rmse', undefined)).toEqual({ warn: LIMITS.force_rmse.warn, fail: LIMITS.force_rmse.fail });
    expect(resolveLimit('force_rmse', 120)).toEqual({ warn: 100, fail: 120 });
    expect(resolveLimit('force_rmse', 50)).toEqual({ warn: 50, fail: 50 });
    expect(resolveLimit('force_rmse', { warn: 200 })).toEqual({ warn: 200, fail: 200 });
    expect(resolveLimit('force_mae', 80)).toEqual({ warn: null, fail: 80 });
    expect(resolveLimit('max_drift', { warn: 0.05, fail: 0.5 })).toEqual({ warn: 0.05, fail: 0.5 });
  });

  it('warn above fail is refused, naming both keys', () => {
    expect(() => resolveLimit('force_rmse', { warn: 150, fail: 50 }, (w) => `--force-rmse-${w}`)).toThrow(
      new GateInputError('--force-rmse-warn 150 is above --force-rmse-fail 50: the warn limit must not be above the fail limit'),
    );
    expect(() => resolveLimit('energy_rmse', { fail: -1 })).toThrow('energy_rmse.fail: expected a positive number in meV/atom, found -1');
  });
});
