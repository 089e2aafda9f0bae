import { describe, expect, it } from 'vitest';
import type { Frame } from '../../src/atoms/frame.js';
import { isHeldOut } from '../../src/select/holdout.js';
import { seededRandom } from '../../src/select/random.js';

function randomFrame(seed: number): Frame {
  const rng = seededRandom(seed);
  return {
    species: ['Ar', 'Ar', 'Ar'],
    positions: Float64Array.from({ length: 9 }, () => 10 * rng.uniform()),
    cell: Float64Array.from([10, 0, 0, 0, 10, 0, 0, 0, 10]),
    pbc: [true, true, true],
    arrays: new Map(),
    info: new Map(),
  };
}

describe('held-out split', () => {
  it('holds out about the requested fraction (binomial bound)', () => {
    const n = 4000;
    const p = 0.1;
    let held = 0;
    for (let s = 0; s < n; s++) if (isHeldOut(randomFrame(s), p)) held++;
    // binomial standard deviation sqrt(n p (1-p)) = 19; allow 4 of them
    expect(Math.abs(held - n * p)).toBeLessThan(4 * Math.sqrt(n * p * (1 - p)));
  });

  it('decides by structure only: labels and info do not change the decision, and it repeats', () => {
    for (let s = 0; s < 200; s++) {
      const f = randomFrame(s);
      const labeled: Frame = {
        ...f,
        arrays: new Map([['forces', { type: 'R', width: 3, values: new Float64Array(9).fill(0.5) }]]),
        info: new Map<string, number | string>([['energy', -3.2], ['source_frame', 7]]),
      };
      expect(isHeldOut(labeled, 0.25)).toBe(isHeldOut(f, 0.25));
      expect(isHeldOut(randomFrame(s), 0.25)).toBe(isHeldOut(f, 0.25));
    }
    expect(() => isHeldOut(randomFrame(0), 1)).toThrow(/holdout fraction must be in \[0, 1\), got 1/);
  });
});
