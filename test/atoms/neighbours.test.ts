import { describe, expect, it } from 'vitest';
import type { Pbc } from '../../src/atoms/frame.js';
import { cellFromParameters, cellInverse } from '../../src/atoms/cell.js';
import {
  NeighbourError, boxMinNorm2, countNeighbours, forEachPair, minimumDistance, minimumDistanceByGroup, minimumDistanceBySpecies,
  neighbourList, type AtomsGeometry,
} from '../../src/atoms/neighbours.js';
import { bruteForcePairs, rng, sortPairs } from './geometry-helpers.js';

interface Pair { i: number; j: number; d: number; v: [number, number, number] }

function collect(sys: AtomsGeometry, cutoff: number, binFraction?: number): Pair[] {
  const out: Pair[] = [];
  forEachPair(sys, cutoff, (i, j, d, dx, dy, dz) => out.push({ i, j, d, v: [dx, dy, dz] }), { binFraction });
  return out;
}

function randomCell(r: () => number, lo: number, hi: number, len: [number, number]): Float64Array {
  for (;;) {
    try {
      const L = () => len[0] + (len[1] - len[0]) * r();
      return cellFromParameters(L(), L(), L(), lo + (hi - lo) * r(), lo + (hi - lo) * r(), lo + (hi - lo) * r());
    } catch {
      /* no positive volume: retry */
    }
  }
}

/** Every reported pair: i <= j, |v| = d, and v - (r_j - r_i) is an integer combination of the periodic lattice vectors. */
function checkVectors(sys: AtomsGeometry, pairs: Pair[]): void {
  const pos = sys.positions;
  const periodic = sys.cell !== null && sys.pbc.some((p) => p);
  const inv = periodic ? cellInverse(sys.cell!) : null;
  const problems: string[] = [];
  for (const p of pairs) {
    if (p.i > p.j) problems.push(`i > j in (${p.i}, ${p.j})`);
    if (Math.abs(Math.hypot(...p.v) - p.d) > 1e-9) problems.push(`|v| != d for (${p.i}, ${p.j})`);
    const t = [0, 1, 2].map((k) => p.v[k] - (pos[3 * p.j + k] - pos[3 * p.i + k]));
    if (p.i === p.j && !(Math.hypot(...t) > 0)) problems.push(`self pair (${p.i}) without a lattice shift`);
    for (let k = 0; k < 3; k++) {
      const n = inv ? t[0] * inv[k] + t[1] * inv[3 + k] + t[2] * inv[6 + k] : t[k];
      const integral = Math.abs(n - Math.round(n)) < 1e-8;
      const allowed = inv !== null && sys.pbc[k];
      if (!integral || (!allowed && Math.abs(n) > 1e-8)) problems.push(`shift of (${p.i}, ${p.j}) along axis ${k} is ${n}`);
    }
  }
  expect(problems.slice(0, 5)).toEqual([]);
}

function expectSameMultiset(got: { i: number; j: number; d: number }[], ref: { i: number; j: number; d: number }[]): void {
  sortPairs(got);
  sortPairs(ref);
  expect(got.length).toBe(ref.length);
  for (let k = 0; k < got.length; k++) {
    if (got[k].i !== ref[k].i || got[k].j !== ref[k].j || Math.abs(got[k].d - ref[k].d) > 1e-9) {
      throw new Error(`pair ${k} differs: got (${got[k].i}, ${got[k].j}, ${got[k].d}), brute force (${ref[k].i}, ${ref[k].j}, ${ref[k].d})`);
    }
  }
}

/** An upper bound on the closest accepted pair: plain distances between accepted atoms and periodic cell-vector lengths. */
function upperBound(positions: Float64Array, cell: Float64Array, pbc: Pbc, accept: (i: number, j: number) => boolean): number {
  const n = positions.length / 3;
  let ub = Infinity;
  for (let i = 0; i < n; i++)
    for (let j = 0; j < n; j++) {
      if (!accept(i, j)) continue;
      if (i !== j) ub = Math.min(ub, Math.hypot(positions[3 * j] - positions[3 * i], positions[3 * j + 1] - positions[3 * i + 1], positions[3 * j + 2] - positions[3 * i + 2]));
      else for (let k = 0; k < 3; k++) if (pbc[k]) ub = Math.min(ub, Math.hypot(cell[3 * k], cell[3 * k + 1], cell[3 * k + 2]));
    }
  return ub * (1 + 1e-9) + 1e-9;
}

const PBCS: Pbc[] = [
  [true, true, true], [true, true, false], [true, false, true], [false, true, true],
  [true, false, false], [false, false, true], [false, false, false],
];

describe('forEachPair against brute force over lattice images', () => {
  it('random triclinic cells, angles 30..150°, all periodicities, cutoffs up to twice the cell', () => {
    const r = rng(101);
    for (let t = 0; t < 140; t++) {
      const cell = randomCell(r, 30, 150, [3, 9]);
      const pbc = PBCS[t % PBCS.length];
      const n = 1 + Math.floor(r() * 14);
      // positions partly outside the cell, to exercise wrapping
      const positions = Float64Array.from({ length: 3 * n }, () => 24 * r() - 8);
      const cutoff = 0.5 + 10 * r();
      const sys = { positions, cell, pbc };
      const got = collect(sys, cutoff);
      checkVectors(sys, got);
      expectSameMultiset(got, bruteForcePairs(positions, cell, pbc, cutoff));
    }
  });

  it('extreme angles (30° and 150°) and tiny cells where the cutoff is many cell widths', () => {
    const r = rng(7);
    const cells = [
      cellFromParameters(3, 3, 3, 30, 30, 30),
      cellFromParameters(3, 4, 5, 150, 100, 100),
      cellFromParameters(2, 2.5, 2, 40, 130, 100),
      cellFromParameters(1.2, 1.5, 1.1, 90, 90, 60),
    ];
    for (const cell of cells) {
      for (const pbc of PBCS) {
        const n = 1 + Math.floor(r() * 4);
        const positions = Float64Array.from({ length: 3 * n }, () => 6 * r() - 2);
        for (const cutoff of [0.7, 2.9, 6.5]) {
          const sys = { positions, cell, pbc };
          const got = collect(sys, cutoff);
          checkVectors(sys, got);
          expectSameMultiset(got, bruteForcePairs(positions, cell, pbc, cutoff));
        }
      }
    }
  });

  it('one atom in a small cell sees each of its own images exactly once', () => {
    // simple cubic a = 1, cutoff 1.5: 6 images at 1 and 12 at √2, i.e. 9 pairs (i = j), each of S and -S once
    const sys = { positions: Float64Array.of(0.3, 0.3, 0.3), cell: Float64Array.of(1, 0, 0, 0, 1, 0, 0, 0, 1), pbc: [true, true, true] as Pbc };
    const got = collect(sys, 1.5);
    expect(got.length).toBe(9);
    expect(got.filter((p) => Math.abs(p.d - 1) < 1e-12).length).toBe(3);
    expect(got.every((p) => p.i === 0 && p.j === 0)).toBe(true);
    expect(countNeighbours(sys, 1.5)[0]).toBe(18);
  });

  it('non-periodic clusters (cell null, or a cell with pbc all false, or far-flung atoms) equal the all-pairs loop', () => {
    const r = rng(23);
    for (let t = 0; t < 30; t++) {
      const n = 2 + Math.floor(r() * 60);
      const spread = t % 3 === 0 ? 1000 : 15;
      const positions = Float64Array.from({ length: 3 * n }, () => spread * r());
      const cutoff = 1 + 4 * r();
      const cell = t % 2 === 0 ? null : Float64Array.of(5, 0, 0, 1, 5, 0, 0, 2, 5);
      const sys = { positions, cell, pbc: [false, false, false] as Pbc };
      const got = collect(sys, cutoff);
      checkVectors(sys, got);
      expectSameMultiset(got, bruteForcePairs(positions, null, [false, false, false], cutoff));
    }
  });

  it('a slab (T T F) whose stored c vector is zero gives the same pairs as one with a real c vector', () => {
    const r = rng(31);
    const base = randomCell(r, 50, 130, [4, 7]);
    const zeroC = Float64Array.from(base);
    zeroC.fill(0, 6, 9);
    const positions = Float64Array.from({ length: 45 }, () => 10 * r() - 2);
    const pbc: Pbc = [true, true, false];
    const a = collect({ positions, cell: zeroC, pbc }, 4.5);
    expectSameMultiset(a, bruteForcePairs(positions, base, pbc, 4.5));
  });

  it('dilute gas in a huge periodic box (coarsened bins) and different bin sizes give the same pairs', () => {
    const r = rng(41);
    const L = 400;
    const positions = Float64Array.from({ length: 90 }, () => L * r());
    // a few close pairs so there is something to find
    for (let k = 0; k < 9; k++) positions[30 + k] = positions[k] + (k % 3 === 0 ? 1.5 : 0.2);
    const sys = { positions, cell: Float64Array.of(L, 0, 0, 0, L, 0, 30, 0, L), pbc: [true, true, true] as Pbc };
    const ref = bruteForcePairs(positions, sys.cell, sys.pbc, 5);
    expect(ref.length).toBeGreaterThanOrEqual(3);
    for (const bf of [0.2, 0.5, 1, 3]) expectSameMultiset(collect(sys, 5, bf), ref.slice());
  });

  it('random liquid-like boxes with a skewed cell: many atoms, same multiset as brute force', () => {
    const r = rng(55);
    const cell = cellFromParameters(14, 13, 15, 55, 120, 70);
    const n = 250;
    const positions = Float64Array.from({ length: 3 * n }, () => 14 * r());
    const sys = { positions, cell, pbc: [true, true, true] as Pbc };
    for (const bf of [0.25, 0.5, 1]) expectSameMultiset(collect(sys, 6, bf), bruteForcePairs(positions, cell, sys.pbc, 6));
  });

  it('rejects bad input with clear messages', () => {
    const cell = Float64Array.of(3, 0, 0, 0, 3, 0, 0, 0, 3);
    const noop = (): void => {};
    expect(() => forEachPair({ positions: Float64Array.of(0, 0, NaN), cell, pbc: [true, true, true] }, 2, noop)).toThrow(
      /position of atom 0 is not finite \(z = NaN\)/,
    );
    expect(() => forEachPair({ positions: Float64Array.of(0, 0, 0), cell, pbc: [true, true, true] }, 0, noop)).toThrow(NeighbourError);
    expect(() => forEachPair({ positions: Float64Array.of(0, 0), cell, pbc: [true, true, true] }, 1, noop)).toThrow(/3 numbers per atom/);
    expect(() => forEachPair({ positions: Float64Array.of(0, 0, 0), cell: null, pbc: [true, false, false] }, 1, noop)).toThrow(/no cell/);
    let visited = 0;
    forEachPair({ positions: new Float64Array(0), cell: null, pbc: [false, false, false] }, 3, () => visited++);
    expect(visited).toBe(0);
  });
});

describe('neighbour counts and lists', () => {
  it('the CSR list holds every pair from both sides with opposite vectors, and counts agree', () => {
    const r = rng(61);
    const cell = cellFromParameters(6, 7, 5, 70, 110, 80);
    const positions = Float64Array.from({ length: 60 }, () => 7 * r());
    const sys = { positions, cell, pbc: [true, true, false] as Pbc };
    const list = neighbourList(sys, 4);
    const counts = countNeighbours(sys, 4);
    const pairs = collect(sys, 4);
    expect(list.neighbours.length).toBe(2 * pairs.length);
    for (let a = 0; a < 20; a++) expect(list.offsets[a + 1] - list.offsets[a]).toBe(counts[a]);
    // every entry (a -> b, v) has a mirror (b -> a, -v)
    const key = (a: number, b: number, v: ArrayLike<number>): string => `${a} ${b} ${Array.from(v, (x) => x.toFixed(9)).join(' ')}`;
    const entries = new Map<string, number>();
    for (let a = 0; a < 20; a++) {
      for (let e = list.offsets[a]; e < list.offsets[a + 1]; e++) {
        const k = key(a, list.neighbours[e], list.vectors.subarray(3 * e, 3 * e + 3));
        entries.set(k, (entries.get(k) ?? 0) + 1);
        expect(Math.hypot(...list.vectors.subarray(3 * e, 3 * e + 3))).toBeCloseTo(list.distances[e], 12);
      }
    }
    for (let a = 0; a < 20; a++) {
      for (let e = list.offsets[a]; e < list.offsets[a + 1]; e++) {
        const v = Array.from(list.vectors.subarray(3 * e, 3 * e + 3), (x) => -x + 0);
        expect(entries.get(key(list.neighbours[e], a, v))).toBe(entries.get(key(a, list.neighbours[e], list.vectors.subarray(3 * e, 3 * e + 3))));
      }
    }
  });
});

describe('minimum distance', () => {
  it('equals the brute-force closest pair, including self images, for random systems', () => {
    const r = rng(71);
    for (let t = 0; t < 80; t++) {
      const cell = randomCell(r, 30, 150, [2, 9]);
      const pbc = PBCS[t % PBCS.length];
      const n = 1 + Math.floor(r() * 10);
      const positions = Float64Array.from({ length: 3 * n }, () => 12 * r() - 3);
      const sys = { positions, cell, pbc };
      const got = minimumDistance(sys);
      // brute force with a cutoff that surely holds the closest pair: the plain distance of atoms 0 and 1, or the
      // length of a periodic cell vector (an atom's image), whichever is shorter
      const all = bruteForcePairs(positions, cell, pbc, upperBound(positions, cell, pbc, () => true));
      if (all.length === 0) {
        expect(got.distance).toBe(Infinity);
        continue;
      }
      const best = all.reduce((p, q) => (q.d < p.d ? q : p));
      expect(got.distance).toBeCloseTo(best.d, 10);
      expect(Math.hypot(...got.vector)).toBeCloseTo(got.distance, 10);
      // the reported atoms are a pair at that distance
      expect(all.some((p) => p.i === got.i && p.j === got.j && Math.abs(p.d - got.distance) < 1e-9)).toBe(true);
    }
  });

  it('one atom: its nearest image when periodic, none when not; coincident atoms: zero', () => {
    const cell = cellFromParameters(3, 4, 5, 90, 90, 90);
    expect(minimumDistance({ positions: Float64Array.of(1, 1, 1), cell, pbc: [true, true, true] })).toMatchObject({ distance: 3, i: 0, j: 0 });
    expect(minimumDistance({ positions: Float64Array.of(1, 1, 1), cell, pbc: [false, true, true] })).toMatchObject({ distance: 4, i: 0, j: 0 });
    expect(minimumDistance({ positions: Float64Array.of(1, 1, 1), cell: null, pbc: [false, false, false] }).distance).toBe(Infinity);
    const two = minimumDistance({ positions: Float64Array.of(1, 1, 1, 1, 1, 1, 9, 9, 9), cell: null, pbc: [false, false, false] });
    expect(two).toMatchObject({ distance: 0, i: 0, j: 1 });
    // two atoms 500 Å apart in vacuum
    expect(minimumDistance({ positions: Float64Array.of(0, 0, 0, 300, 400, 0), cell: null, pbc: [false, false, false] }).distance).toBe(500);
  });

  it('per group pair (species) equals brute force, including a rare species far from the others', () => {
    const r = rng(83);
    for (let t = 0; t < 30; t++) {
      const cell = randomCell(r, 40, 140, [5, 12]);
      const pbc = PBCS[t % PBCS.length];
      const n = 3 + Math.floor(r() * 40);
      const positions = Float64Array.from({ length: 3 * n }, () => 12 * r());
      const species = Array.from({ length: n }, (_, a) => (a === 0 ? 'Na' : r() < 0.6 ? 'O' : 'H'));
      const got = minimumDistanceBySpecies({ positions, cell, pbc, species });
      let cut = 0;
      for (const x of ['Na', 'O', 'H'])
        for (const y of ['Na', 'O', 'H']) {
          const ub = upperBound(positions, cell, pbc, (i, j) => species[i] === x && species[j] === y);
          if (ub < Infinity) cut = Math.max(cut, ub);
        }
      const all = bruteForcePairs(positions, cell, pbc, cut);
      const ref = new Map<string, number>();
      for (const p of all) {
        const k = [species[p.i], species[p.j]].sort().join('-');
        ref.set(k, Math.min(ref.get(k) ?? Infinity, p.d));
      }
      expect([...got.keys()].sort()).toEqual([...ref.keys()].sort());
      for (const [k, v] of ref) {
        const g = got.get(k)!;
        expect(g.distance, k).toBeCloseTo(v, 10);
        expect(`${species[g.i]}-${species[g.j]}`).toBe(k); // i has the first species of the key, j the second
        if (species[g.i] === species[g.j]) expect(g.i).toBeLessThanOrEqual(g.j);
      }
    }
  });

  it('per group: a lone atom far from a dense cluster in a big periodic box', () => {
    const r = rng(89);
    const n = 400;
    const positions = Float64Array.from({ length: 3 * n }, () => 10 * r());
    positions.set([70, 70, 70], 0); // atom 0 alone, far from the 0..10 Å cluster
    const group = Int32Array.from({ length: n }, (_, a) => (a === 0 ? 1 : 0));
    const cell = Float64Array.of(100, 0, 0, 0, 100, 0, 0, 0, 100);
    const res = minimumDistanceByGroup({ positions, cell, pbc: [true, true, true] }, group, 2);
    let ref = Infinity;
    for (let b = 1; b < n; b++) {
      let best = Infinity;
      for (let a = -1; a <= 1; a++)
        for (let c = -1; c <= 1; c++)
          for (let e = -1; e <= 1; e++)
            best = Math.min(best, Math.hypot(positions[3 * b] + 100 * a - 70, positions[3 * b + 1] + 100 * c - 70, positions[3 * b + 2] + 100 * e - 70));
      ref = Math.min(ref, best);
    }
    expect(res.distance[1]).toBeCloseTo(ref, 10);
    expect(res.distance[2]).toBeCloseTo(ref, 10);
    expect(res.distance[3]).toBe(100); // the lone atom and its own image
    expect(() => minimumDistanceByGroup({ positions, cell, pbc: [true, true, true] }, group, 1)).toThrow(/group label of atom 0 is 1/);
  });
});

describe('bin-to-bin distance used to prune the stencil', () => {
  it('boxMinNorm2 equals a dense sampling of the box (never larger, and attained)', () => {
    const r = rng(97);
    for (let t = 0; t < 40; t++) {
      const h = randomCell(r, 30, 150, [1, 3]);
      const G = new Float64Array(9);
      for (let p = 0; p < 3; p++) for (let q = 0; q < 3; q++) G[3 * p + q] = h[3 * p] * h[3 * q] + h[3 * p + 1] * h[3 * q + 1] + h[3 * p + 2] * h[3 * q + 2];
      const O: [number, number, number] = [Math.floor(5 * r()) - 2, Math.floor(5 * r()) - 2, Math.floor(5 * r()) - 2];
      const exact = boxMinNorm2(G, O);
      let sampled = Infinity;
      const steps = 24;
      for (let a = 0; a <= steps; a++)
        for (let b = 0; b <= steps; b++)
          for (let c = 0; c <= steps; c++) {
            const u = [O[0] - 1 + (2 * a) / steps, O[1] - 1 + (2 * b) / steps, O[2] - 1 + (2 * c) / steps];
            let v = 0;
            for (let p = 0; p < 3; p++) for (let q = 0; q < 3; q++) v += u[p] * G[3 * p + q] * u[q];
            sampled = Math.min(sampled, v);
          }
      expect(exact).toBeLessThanOrEqual(sampled + 1e-9);
      // the grid is within half a step of the minimiser: sqrt(sampled) - sqrt(exact) <= half the box diagonal step
      const step = (Math.hypot(h[0], h[1], h[2]) + Math.hypot(h[3], h[4], h[5]) + Math.hypot(h[6], h[7], h[8])) / steps;
      expect(Math.sqrt(sampled) - Math.sqrt(exact)).toBeLessThanOrEqual(step + 1e-9);
    }
  });
});
