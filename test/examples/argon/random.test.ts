import { describe, expect, it } from 'vitest';
import { mean, sampleSkewness, variance } from 'simple-statistics';
import { createRandom } from '../../../examples/argon/lib/random.js';

describe('seeded random numbers', () => {
  it('are reproducible from the seed and differ between seeds', () => {
    const a = createRandom(42), b = createRandom(42), c = createRandom(43);
    const xa = Array.from({ length: 5 }, () => a.uniform());
    expect(Array.from({ length: 5 }, () => b.uniform())).toEqual(xa);
    expect(Array.from({ length: 5 }, () => c.uniform())).not.toEqual(xa);
    expect(() => createRandom(1.5)).toThrow(/safe integer/);
  });

  it('uniform and normal deviates have the right moments (simple-statistics as the estimator)', () => {
    // Uniform on [0,1): mean 1/2, variance 1/12; standard normal: mean 0, variance 1, skewness 0.
    // Tolerances are about 5 standard errors for n = 200,000 (common practice).
    const r = createRandom(7);
    const n = 200_000;
    const u = Array.from({ length: n }, () => r.uniform());
    expect(u.every((x) => x >= 0 && x < 1)).toBe(true);
    expect(Math.abs(mean(u) - 0.5)).toBeLessThan(5 * Math.sqrt(1 / 12 / n));
    expect(Math.abs(variance(u) - 1 / 12)).toBeLessThan(0.002);
    const z = Array.from({ length: n }, () => r.normal());
    expect(Math.abs(mean(z))).toBeLessThan(5 / Math.sqrt(n));
    expect(Math.abs(variance(z) - 1)).toBeLessThan(5 * Math.sqrt(2 / n));
    expect(Math.abs(sampleSkewness(z))).toBeLessThan(5 * Math.sqrt(6 / n));
    const k = Array.from({ length: 60_000 }, () => r.integer(6));
    for (let face = 0; face < 6; face++) expect(Math.abs(k.filter((x) => x === face).length / 60_000 - 1 / 6)).toBeLessThan(0.01);
  });
});
