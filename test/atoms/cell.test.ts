import { execFileSync } from 'node:child_process';
import { describe, expect, it } from 'vitest';
import type { Pbc } from '../../src/atoms/frame.js';
import {
  CellError, MinimumImager, cartesianToFractional, cellAngles, cellFromParameters, cellInverse, cellLengths, cellVolume,
  effectiveCell, fractionalToCartesian, minimumImage, minimumImageDistance, perpendicularWidths, wrapPositions,
} from '../../src/atoms/cell.js';
import { rng } from './geometry-helpers.js';

const T: Pbc = [true, true, true];

/** A random cell with angles in [lo, hi] degrees (retrying combinations without positive volume). */
function randomCell(r: () => number, lo = 30, hi = 150): Float64Array {
  for (;;) {
    try {
      return cellFromParameters(2 + 6 * r(), 2 + 6 * r(), 2 + 6 * r(), lo + (hi - lo) * r(), lo + (hi - lo) * r(), lo + (hi - lo) * r());
    } catch {
      /* retry */
    }
  }
}

/** Same lattice, much worse basis: b' = b + p a, c' = c + q a + s b (unimodular, so the lattice is unchanged). */
function skewBasis(h: Float64Array, p: number, q: number, s: number): Float64Array {
  const o = Float64Array.from(h);
  for (let k = 0; k < 3; k++) {
    o[3 + k] = h[3 + k] + p * h[k];
    o[6 + k] = h[6 + k] + q * h[k] + s * h[3 + k];
  }
  return o;
}

/** Brute-force minimum image over a box of lattice shifts (|n_k| <= R[k] along periodic axes). */
function bruteMin(h: ArrayLike<number>, pbc: Pbc, d: number[], R: number[]): number {
  let best = Infinity;
  const r = pbc.map((p, k) => (p ? R[k] : 0));
  for (let a = -r[0]; a <= r[0]; a++)
    for (let b = -r[1]; b <= r[1]; b++)
      for (let c = -r[2]; c <= r[2]; c++) {
        const x = d[0] + a * h[0] + b * h[3] + c * h[6];
        const y = d[1] + a * h[1] + b * h[4] + c * h[7];
        const z = d[2] + a * h[2] + b * h[5] + c * h[8];
        best = Math.min(best, Math.hypot(x, y, z));
      }
  return best;
}

describe('cell from lengths and angles', () => {
  it('round-trips lengths and angles and gives the crystallographic volume', () => {
    const r = rng(11);
    for (let t = 0; t < 50; t++) {
      const a = 2 + 8 * r(), b = 2 + 8 * r(), c = 2 + 8 * r();
      const al = 60 + 60 * r(), be = 60 + 60 * r(), ga = 60 + 60 * r();
      let h: Float64Array;
      try {
        h = cellFromParameters(a, b, c, al, be, ga);
      } catch {
        continue;
      }
      const [la, lb, lc] = cellLengths(h);
      const [xa, xb, xg] = cellAngles(h);
      expect(la).toBeCloseTo(a, 12);
      expect(lb).toBeCloseTo(b, 12);
      expect(lc).toBeCloseTo(c, 12);
      expect(xa).toBeCloseTo(al, 9);
      expect(xb).toBeCloseTo(be, 9);
      expect(xg).toBeCloseTo(ga, 9);
      // V = abc sqrt(1 - cos²α - cos²β - cos²γ + 2 cosα cosβ cosγ) (standard crystallographic formula, common practice)
      const [ca, cb, cg] = [al, be, ga].map((x) => Math.cos((x * Math.PI) / 180));
      const V = a * b * c * Math.sqrt(1 - ca * ca - cb * cb - cg * cg + 2 * ca * cb * cg);
      expect(cellVolume(h)).toBeCloseTo(V, 9);
    }
  });

  it('matches ASE cellpar_to_cell (independent library)', () => {
    // Independent cross-check: Debian's python3-ase, ase.geometry.cellpar_to_cell (same a-along-x, b-in-xy convention).
    const par = [4.1, 5.2, 6.3, 75, 100, 115];
    const out = execFileSync('/usr/bin/python3', [
      '-c',
      `import json; from ase.geometry import cellpar_to_cell; print(json.dumps(cellpar_to_cell(${JSON.stringify(par)}).flatten().tolist()))`,
    ]).toString();
    const ref = JSON.parse(out) as number[];
    const h = cellFromParameters(par[0], par[1], par[2], par[3], par[4], par[5]);
    for (let k = 0; k < 9; k++) expect(h[k]).toBeCloseTo(ref[k], 12);
  });

  it('keeps orthorhombic cells exactly diagonal and refuses impossible angles', () => {
    expect(Array.from(cellFromParameters(3, 4, 5, 90, 90, 90))).toEqual([3, 0, 0, 0, 4, 0, 0, 0, 5]);
    expect(() => cellFromParameters(1, 1, 1, 30, 30, 120)).toThrow(CellError);
    expect(() => cellFromParameters(1, 1, 1, 30, 30, 120)).toThrow(/positive volume/);
    expect(() => cellFromParameters(-1, 1, 1, 90, 90, 90)).toThrow(/cell length a/);
    expect(() => cellFromParameters(1, 1, 1, 180, 90, 90)).toThrow(/alpha/);
  });
});

describe('inverse, widths, fractional coordinates', () => {
  it('H H^-1 = I and fractional round trip', () => {
    const r = rng(3);
    for (let t = 0; t < 20; t++) {
      const h = randomCell(r);
      const inv = cellInverse(h);
      for (let p = 0; p < 3; p++)
        for (let q = 0; q < 3; q++) {
          let s = 0;
          for (let k = 0; k < 3; k++) s += h[3 * p + k] * inv[3 * k + q];
          expect(s).toBeCloseTo(p === q ? 1 : 0, 10);
        }
      const pos = Float64Array.from({ length: 30 }, () => 20 * r() - 10);
      const back = fractionalToCartesian(h, cartesianToFractional(h, pos));
      for (let k = 0; k < pos.length; k++) expect(back[k]).toBeCloseTo(pos[k], 10);
      // fractional coordinates of the lattice vectors are unit vectors
      const f = cartesianToFractional(h, h);
      for (let k = 0; k < 9; k++) expect(f[k]).toBeCloseTo(k % 4 === 0 ? 1 : 0, 10);
    }
  });

  it('perpendicular widths: V / |b x c| etc.; a for a cube; a sin 60° across a hexagonal cell', () => {
    expect(perpendicularWidths(cellFromParameters(3, 3, 3, 90, 90, 90))).toEqual([3, 3, 3]);
    const hex = cellFromParameters(2, 2, 5, 90, 90, 120);
    const w = perpendicularWidths(hex);
    expect(w[0]).toBeCloseTo(2 * Math.sin(Math.PI / 3), 12);
    expect(w[1]).toBeCloseTo(2 * Math.sin(Math.PI / 3), 12);
    expect(w[2]).toBeCloseTo(5, 12);
  });

  it('singular cells are refused', () => {
    expect(() => cellInverse([1, 0, 0, 2, 0, 0, 0, 0, 1])).toThrow(/singular/);
  });
});

describe('wrap', () => {
  it('puts fractional coordinates in [0,1) along periodic axes and moves atoms by lattice vectors only', () => {
    const r = rng(5);
    const h = randomCell(r);
    const pbc: Pbc = [true, false, true];
    const pos = Float64Array.from({ length: 60 }, () => 60 * r() - 30);
    const w = wrapPositions(h, pbc, pos);
    const fw = cartesianToFractional(h, w), f0 = cartesianToFractional(h, pos);
    for (let a = 0; a < 20; a++) {
      for (let k = 0; k < 3; k++) {
        const shift = fw[3 * a + k] - f0[3 * a + k];
        expect(Math.abs(shift - Math.round(shift))).toBeLessThan(1e-9);
        if (pbc[k]) {
          expect(fw[3 * a + k]).toBeGreaterThanOrEqual(-1e-12);
          expect(fw[3 * a + k]).toBeLessThan(1 + 1e-12);
        } else expect(Math.abs(shift)).toBeLessThan(1e-9);
      }
    }
    // non-periodic: unchanged copy
    const same = wrapPositions(null, [false, false, false], pos);
    expect(Array.from(same)).toEqual(Array.from(pos));
  });
});

describe('exact minimum image', () => {
  it('equals brute force for random triclinic cells with angles 30..150° and deliberately bad bases', () => {
    const r = rng(17);
    let naiveWrong = 0;
    for (let t = 0; t < 200; t++) {
      const base = randomCell(r);
      const h = t % 2 === 0 ? base : skewBasis(base, Math.round(4 * r() - 2), Math.round(4 * r() - 2), Math.round(4 * r() - 2));
      const pbcs: Pbc[] = [T, [true, true, false], [false, true, false]];
      const pbc = pbcs[t % 3];
      const mi = new MinimumImager(h, pbc);
      for (let q = 0; q < 5; q++) {
        const d = [24 * r() - 12, 24 * r() - 12, 24 * r() - 12];
        const got = mi.image(d[0], d[1], d[2]);
        // brute force over every shift with |n_k| <= |s_k(d)| + |d| / w_k + 1: the shortest image v = d + n H is no longer
        // than d, and any vector's fractional component k is at most |v| / w_k (w_k = perpendicular width).
        const w = perpendicularWidths(h);
        const inv = cellInverse(h);
        const R = [0, 1, 2].map(
          (k) => Math.ceil(Math.abs(d[0] * inv[k] + d[1] * inv[3 + k] + d[2] * inv[6 + k]) + Math.hypot(d[0], d[1], d[2]) / w[k]) + 1,
        );
        const ref = bruteMin(h, pbc, d, R);
        expect(got.distance).toBeCloseTo(ref, 9);
        // the reported vector is d + n H with the reported integer shift and has the reported length
        const v = [0, 1, 2].map((k) => d[k] + got.shift[0] * h[k] + got.shift[1] * h[3 + k] + got.shift[2] * h[6 + k]);
        for (let k = 0; k < 3; k++) expect(got.vector[k]).toBeCloseTo(v[k], 9);
        expect(Math.hypot(...got.vector)).toBeCloseTo(got.distance, 9);
        for (let k = 0; k < 3; k++) if (!pbc[k]) expect(got.shift[k]).toBe(0);
        // naive rounding of fractional coordinates (for fully periodic cases)
        if (pbc[0] && pbc[1] && pbc[2]) {
          const s = [0, 1, 2].map((k) => d[0] * inv[k] + d[1] * inv[3 + k] + d[2] * inv[6 + k]).map((x) => x - Math.round(x));
          const naive = Math.hypot(...[0, 1, 2].map((k) => s[0] * h[k] + s[1] * h[3 + k] + s[2] * h[6 + k]));
          if (naive > ref + 1e-9) naiveWrong++;
        }
      }
    }
    // the cells are skewed enough that rounding fractional coordinates alone is wrong in many cases
    expect(naiveWrong).toBeGreaterThan(50);
  });

  it('slab (T T F) with a zero c vector shifts only in the plane', () => {
    const h = Float64Array.of(4, 0, 0, 1, 3, 0, 0, 0, 0);
    const pbc: Pbc = [true, true, false];
    expect(() => effectiveCell(h, pbc)).not.toThrow();
    const m = minimumImage(h, pbc, [3.5, 0.2, 7]);
    expect(m.vector[2]).toBe(7);
    expect(m.distance).toBeCloseTo(Math.hypot(-0.5, 0.2, 7), 12);
    expect(m.shift).toEqual([-1, 0, 0]);
  });

  it('non-periodic systems use the plain distance', () => {
    const pos = Float64Array.of(0, 0, 0, 10, 0, 0);
    expect(minimumImageDistance(null, [false, false, false], pos, 0, 1)).toBe(10);
    expect(minimumImageDistance(Float64Array.of(3, 0, 0, 0, 3, 0, 0, 0, 3), [false, false, false], pos, 0, 1)).toBe(10);
    expect(minimumImageDistance(Float64Array.of(3, 0, 0, 0, 3, 0, 0, 0, 3), T, pos, 0, 1)).toBeCloseTo(1, 12);
  });

  it('shortest lattice vector: fcc primitive cell a/√2; a skewed basis of a cube still gives a', () => {
    // fcc primitive vectors (a/2)(0,1,1), (a/2)(1,0,1), (a/2)(1,1,0): nearest neighbour a/√2 (Kittel, ch. 1)
    const a = 4;
    const fcc = Float64Array.of(0, a / 2, a / 2, a / 2, 0, a / 2, a / 2, a / 2, 0);
    expect(new MinimumImager(fcc, T).shortestLatticeVector().distance).toBeCloseTo(a / Math.SQRT2, 12);
    const cube = skewBasis(Float64Array.of(a, 0, 0, 0, a, 0, 0, 0, a), 5, -4, 7);
    expect(new MinimumImager(cube, T).shortestLatticeVector().distance).toBeCloseTo(a, 12);
    expect(new MinimumImager(cube, [false, true, false]).shortestLatticeVector().distance).toBeCloseTo(Math.hypot(5 * a, a), 12);
    expect(new MinimumImager(null, [false, false, false]).shortestLatticeVector().distance).toBe(Infinity);
  });

  it('refuses periodicity the cell cannot give, naming the axis', () => {
    expect(() => new MinimumImager(null, [true, false, false])).toThrow(/no cell/);
    expect(() => new MinimumImager(Float64Array.of(1, 0, 0, 0, 0, 0, 0, 0, 1), T)).toThrow(/cell vector b is zero/);
    expect(() => new MinimumImager(Float64Array.of(1, 0, 0, 2, 0, 0, 0, 0, 1), [true, true, false])).toThrow(/parallel/);
    expect(() => new MinimumImager(Float64Array.of(1, 0, 0, 2, 0, 0, 0, 0, 1), T)).toThrow(/singular/);
  });
});
