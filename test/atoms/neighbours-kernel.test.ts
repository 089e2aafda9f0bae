/**
 * forEachPair's WebAssembly fast path (kernels/neighbours.ts through src/atoms/neighbours-kernel.ts): the same pairs in
 * the same order with the same numbers, bit for bit, as the TypeScript loops, for triclinic cells down to 30 degrees,
 * slabs, wires, molecules and cutoffs longer than the cell; and against an independent brute-force loop over lattice
 * images (geometry-helpers.ts). Never against stored numbers.
 */
import { afterEach, describe, expect, it } from 'vitest';
import { cellFromParameters } from '../../src/atoms/cell.js';
import type { Pbc } from '../../src/atoms/frame.js';
import { forEachPair, minimumDistance, minimumDistanceByGroup, type AtomsGeometry } from '../../src/atoms/neighbours.js';
import { neighbourKernelStats } from '../../src/atoms/neighbours-kernel.js';
import { loadKernel, setKernels } from '../../src/atoms/wasm.js';
import { expectBrute, randomSystem, rng } from './geometry-helpers.js';

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

/** Fractional coordinates from -0.2 to 1.2 (wrapping exercised); 15 Å box without a cell. */
const system = (seed: number, n: number, cell: Float64Array | null, pbc: Pbc): AtomsGeometry => randomSystem(seed, n, cell, pbc, { margin: 0.2, box: 15 });

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
    expectBrute(sys, 4.5, rows(sys, 4.5, true).map(([i, j, d]) => ({ i, j, d })));
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

  it('finds the same group minima and the same close pairs (contact limits) as the TypeScript pass', () => {
    const r = rng(99);
    const before = neighbourKernelStats().searches;
    let ran = 0;
    let closeSeen = 0;
    for (let t = 0; t < 24; t++) {
      let cell: Float64Array;
      try {
        cell = cellFromParameters(6 + r() * 10, 6 + r() * 10, 6 + r() * 10, 40 + r() * 100, 40 + r() * 100, 40 + r() * 100);
      } catch {
        continue;
      }
      const n = 2 + Math.floor(r() * 300);
      const sys = t % 5 === 4 ? system(500 + t, n, null, [false, false, false]) : system(500 + t, n, cell, PBCS[t % 4]);
      const G = 1 + (t % 4);
      const group = Int32Array.from({ length: n }, () => Math.floor(r() * G));
      const limits = new Float64Array(G * G);
      for (let p = 0; p < G; p++) for (let q = p; q < G; q++) limits[p * G + q] = limits[q * G + p] = 0.3 + r() * 1.5;
      setKernels(true);
      const fast = minimumDistanceByGroup(sys, group, G, { limits });
      setKernels(false);
      const ts = minimumDistanceByGroup(sys, group, G, { limits });
      setKernels(true);
      expect([...fast.distance]).toEqual([...ts.distance]);
      expect([...fast.i]).toEqual([...ts.i]);
      expect([...fast.j]).toEqual([...ts.j]);
      expect(fast.close!.count).toBe(ts.close!.count);
      expect([...fast.close!.i]).toEqual([...ts.close!.i]);
      expect([...fast.close!.j]).toEqual([...ts.close!.j]);
      expect([...fast.close!.d]).toEqual([...ts.close!.d]);
      // the close pairs are exactly the pairs of a search at each pair's own limit (an independent listing)
      const want: string[] = [];
      forEachPair(sys, Math.max(...limits) + 1e-9, (i, j, d) => {
        if (d < limits[group[i] * G + group[j]]) want.push(`${i} ${j} ${d}`);
      });
      const got = [...fast.close!.i].map((i, q) => `${i} ${fast.close!.j[q]} ${fast.close!.d[q]}`);
      expect(got.sort()).toEqual(want.sort());
      closeSeen += fast.close!.count;
      ran++;
    }
    expect(closeSeen).toBeGreaterThan(50);
    // (each group search runs one kernel pass at least, unless a pass at a larger cutoff follows in TypeScript)
    expect(neighbourKernelStats().searches - before).toBeGreaterThanOrEqual(ran);
  });

  it('hands a frame with more close pairs than it lists (a collapsed frame) to the TypeScript pass, with the same result', () => {
    // 3000 atoms in a 12 Å box with a 2 Å limit: about 90,000 close pairs, more than the kernel lists (65,536)
    const cell = cellFromParameters(12, 12, 12, 90, 90, 90);
    const sys = system(17, 3000, cell, [true, true, true]);
    const group = new Int32Array(3000);
    const limits = Float64Array.of(2);
    const fast = minimumDistanceByGroup(sys, group, 1, { limits });
    setKernels(false);
    const ts = minimumDistanceByGroup(sys, group, 1, { limits });
    setKernels(true);
    expect(fast.close!.count).toBeGreaterThan(65_536);
    expect(fast.close!.count).toBe(ts.close!.count);
    expect(Buffer.from(fast.close!.d.buffer, fast.close!.d.byteOffset, fast.close!.d.byteLength).equals(Buffer.from(ts.close!.d.buffer, ts.close!.d.byteOffset, ts.close!.d.byteLength))).toBe(true);
    expect(fast.distance[0]).toBe(ts.distance[0]);
  });
});
