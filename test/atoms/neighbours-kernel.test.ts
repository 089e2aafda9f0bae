/**
 * forEachPair's WebAssembly fast path (kernels/neighbours.ts through src/atoms/neighbours-kernel.ts): the same pairs in
 * the same order with the same numbers, bit for bit, as the TypeScript loops, for triclinic cells down to 30 degrees,
 * slabs, wires, molecules and cutoffs longer than the cell; and against an independent brute-force loop over lattice
 * images (geometry-helpers.ts). Never against stored numbers.
 */
import { afterEach, describe, expect, it } from 'vitest';
import { cellFromParameters } from '../../src/atoms/cell.js';
import type { Pbc } from '../../src/atoms/frame.js';
import { forEachPair, minimumDistance, type AtomsGeometry } from '../../src/atoms/neighbours.js';
import { neighbourKernelStats } from '../../src/atoms/neighbours-kernel.js';
import { loadKernel, setKernels } from '../../src/atoms/wasm.js';
import { bruteForcePairs, rng } from './geometry-helpers.js';

afterEach(() => {
  setKernels(true);
});

type Row = [number, number, number, number, number, number];

function rows(sys: AtomsGeometry, cutoff: number, kernel: boolean): Row[] {
  setKernels(kernel);
  const out: Row[] = [];
  try {
    forEachPair(sys, cutoff, (i, j, d, dx, dy, dz) => out.push([i, j, d, dx, dy, dz]));
  } finally {
    setKernels(true);
  }
  return out;
}

function system(seed: number, n: number, cell: Float64Array | null, pbc: Pbc): AtomsGeometry {
  const r = rng(seed);
  const positions = new Float64Array(3 * n);
  for (let a = 0; a < n; a++) {
    // fractional coordinates partly outside [0, 1): wrapping is exercised
    const f = [r() * 1.4 - 0.2, r() * 1.4 - 0.2, r() * 1.4 - 0.2];
    for (let k = 0; k < 3; k++) positions[3 * a + k] = cell ? f[0] * cell[k] + f[1] * cell[3 + k] + f[2] * cell[6 + k] : 15 * f[k];
  }
  return { positions, cell, pbc };
}

const PBCS: Pbc[] = [
  [true, true, true],
  [true, true, false],
  [false, true, false],
  [false, false, false],
];

describe('the WebAssembly neighbour search', () => {
  it('is built and loads (npm run build:kernels)', () => {
    const k = loadKernel('neighbours');
    expect('error' in k ? k.error : null).toBeNull();
  });

  it('lists the same pairs, in the same order, with the same distances and vectors as the TypeScript loops', () => {
    const before = neighbourKernelStats().searches;
    const r = rng(31);
    let total = 0;
    let ran = 0;
    for (let t = 0; t < 48; t++) {
      // cells from cubic to strongly skewed (angles down to 30 degrees)
      const a = 4 + r() * 12, b = 4 + r() * 12, c = 4 + r() * 12;
      const alpha = 30 + r() * 120, beta = 30 + r() * 120, gamma = 30 + r() * 120;
      let cell: Float64Array | null;
      try {
        cell = cellFromParameters(a, b, c, alpha, beta, gamma);
      } catch {
        continue; // angles that make no cell
      }
      const pbc = PBCS[t % 4];
      const n = 1 + Math.floor(r() * 200);
      const sys = system(100 + t, n, t % 8 === 3 ? null : cell, pbc);
      const cutoff = t % 6 === 0 ? 1.5 * Math.max(a, b, c) : 0.5 + r() * 5; // some longer than the cell
      const fast = rows(sys, cutoff, true);
      const ts = rows(sys, cutoff, false);
      expect(fast.length, `case ${t}`).toBe(ts.length);
      // bit for bit (-0 and 0 differ here)
      const bits = (x: Row[]) => Buffer.from(Float64Array.from(x.flat()).buffer);
      expect(bits(fast).equals(bits(ts)), `case ${t}`).toBe(true);
      total += fast.length;
      ran++;
    }
    // enough pairs that the kernel's chunks (4096 pairs) were filled and continued many times
    expect(total).toBeGreaterThan(100_000);
    // and the kernel did run those searches
    expect(ran).toBeGreaterThan(30);
    expect(neighbourKernelStats().searches - before).toBe(ran);
  });

  it('agrees with brute force over lattice images in a 30-degree cell', () => {
    const cell = cellFromParameters(7, 8, 9, 30, 35, 40);
    const sys = system(7, 60, cell, [true, true, true]);
    const got = rows(sys, 4.5, true).map(([i, j, d]) => ({ i, j, d }));
    const want = bruteForcePairs(sys.positions, sys.cell, sys.pbc, 4.5);
    const order = (p: { i: number; j: number; d: number }, q: { i: number; j: number; d: number }) => p.i - q.i || p.j - q.j || p.d - q.d;
    got.sort(order);
    want.sort(order);
    expect(got.length).toBe(want.length);
    got.forEach((p, k) => {
      expect([p.i, p.j]).toEqual([want[k].i, want[k].j]);
      expect(Math.abs(p.d - want[k].d)).toBeLessThan(1e-12);
    });
  });

  it('lets a visitor start another search (that one runs in TypeScript) and recovers after a visitor throws', () => {
    const cell = cellFromParameters(10, 10, 10, 90, 90, 90);
    const sys = system(3, 80, cell, [true, true, true]);
    const inner = minimumDistance(sys).distance;
    let seen = 0;
    forEachPair(sys, 3, () => {
      if (seen++ < 3) expect(minimumDistance(sys).distance).toBe(inner);
    });
    expect(seen).toBe(rows(sys, 3, false).length);
    expect(() =>
      forEachPair(sys, 3, () => {
        throw new Error('stop');
      }),
    ).toThrow('stop');
    // the kernel is usable again
    expect(rows(sys, 3, true)).toEqual(rows(sys, 3, false));
  });
});
