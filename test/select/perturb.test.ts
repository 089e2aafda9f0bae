import { describe, expect, it } from 'vitest';
import type { Frame } from '../../src/atoms/frame.js';
import { perturbFrame } from '../../src/select/perturb.js';
import { seededRandom } from '../../src/select/random.js';
import { mean, standardDeviation } from 'simple-statistics';

function crystal(): Frame {
  // simple cubic grid, 4x4x4 in a 12 Å box (invented structure for a transformation check)
  const positions: number[] = [];
  for (let i = 0; i < 4; i++) for (let j = 0; j < 4; j++) for (let k = 0; k < 4; k++) positions.push(3 * i, 3 * j, 3 * k);
  return {
    species: positions.filter((_, i) => i % 3 === 0).map(() => 'Ar'),
    positions: Float64Array.from(positions),
    cell: Float64Array.from([12, 0, 0, 0, 12, 0, 0, 0, 12]),
    pbc: [true, true, true],
    arrays: new Map([['forces', { type: 'R', width: 3, values: new Float64Array(192) }]]),
    info: new Map<string, number | string>([['energy', -1], ['note', 'x']]),
  };
}

describe('round-0 perturbation', () => {
  it('keeps fractional coordinates under strain alone and strains within the bound', () => {
    const f = crystal();
    const p = perturbFrame(f, { displacement: 0, strain: 0.02 }, seededRandom(1));
    const c = p.cell!;
    // fractional coordinates: solve r = s C for each atom (C rows are lattice vectors)
    const det =
      c[0] * (c[4] * c[8] - c[5] * c[7]) - c[1] * (c[3] * c[8] - c[5] * c[6]) + c[2] * (c[3] * c[7] - c[4] * c[6]);
    expect(Math.abs(det / 12 ** 3 - 1)).toBeLessThan(0.07);
    for (let k = 0; k < 9; k++) expect(Math.abs(c[k] / 12 - (k % 4 === 0 ? 1 : 0))).toBeLessThanOrEqual(0.02 + 1e-12);
    // the atom at fractional (0.25, 0.5, 0.75) maps to 0.25 a + 0.5 b + 0.75 c
    const idx = 1 * 16 + 2 * 4 + 3;
    for (let d = 0; d < 3; d++)
      expect(p.positions[3 * idx + d]).toBeCloseTo(0.25 * c[d] + 0.5 * c[3 + d] + 0.75 * c[6 + d], 12);
  });

  it('displaces with the requested standard deviation, drops labels, and repeats with the same seed', () => {
    const f = crystal();
    const p = perturbFrame(f, { displacement: 0.1, strain: 0 }, seededRandom('s'));
    const d = Array.from(p.positions, (x, k) => x - f.positions[k]);
    // 192 normal samples: mean within ~3 standard errors of 0, std within ~15% of 0.1
    expect(Math.abs(mean(d))).toBeLessThan(3 * (0.1 / Math.sqrt(192)));
    expect(Math.abs(standardDeviation(d) / 0.1 - 1)).toBeLessThan(0.15);
    expect(p.arrays.has('forces')).toBe(false);
    expect(p.info.has('energy')).toBe(false);
    // the copy is the structure alone: no info key of the start survives (src/select/hygiene.ts)
    expect(p.info.size).toBe(0);
    expect(p.arrays.size).toBe(0);
    const q = perturbFrame(f, { displacement: 0.1, strain: 0 }, seededRandom('s'));
    expect(Array.from(q.positions)).toEqual(Array.from(p.positions));
    expect(f.arrays.has('forces')).toBe(true);
  });
});
