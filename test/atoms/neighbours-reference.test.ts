/**
 * The neighbour search against published values and an independent library.
 */
import { execFileSync } from 'node:child_process';
import { describe, expect, it } from 'vitest';
import type { Pbc } from '../../src/atoms/frame.js';
import { cellFromParameters } from '../../src/atoms/cell.js';
import { forEachPair, minimumDistance, neighbourList, type AtomsGeometry } from '../../src/atoms/neighbours.js';
import { rng, sortPairs } from './geometry-helpers.js';

const T: Pbc = [true, true, true];

/** fcc conventional cube of side a, 4 atoms (Kittel ch. 1). */
function fcc(a: number): AtomsGeometry {
  return {
    positions: Float64Array.of(0, 0, 0, 0, a / 2, a / 2, a / 2, 0, a / 2, a / 2, a / 2, 0),
    cell: Float64Array.of(a, 0, 0, 0, a, 0, 0, 0, a),
    pbc: T,
  };
}

/** Diamond structure: fcc plus the basis (1/4, 1/4, 1/4) a; conventional cube of 8 atoms. */
function diamondConventional(a: number): AtomsGeometry {
  const f = [0, 0, 0, 0, 0.5, 0.5, 0.5, 0, 0.5, 0.5, 0.5, 0];
  const frac = [...f, ...f.map((x) => x + 0.25)];
  return { positions: Float64Array.from(frac, (x) => x * a), cell: Float64Array.of(a, 0, 0, 0, a, 0, 0, 0, a), pbc: T };
}

/** Diamond structure in the 2-atom primitive (triclinic, 60° angles) cell. */
function diamondPrimitive(a: number): AtomsGeometry {
  const h = a / 2;
  return {
    positions: Float64Array.of(0, 0, 0, a / 4, a / 4, a / 4),
    cell: Float64Array.of(0, h, h, h, 0, h, h, h, 0),
    pbc: T,
  };
}

describe('fcc Lennard-Jones lattice sums (Kittel)', () => {
  // Source: C. Kittel, Introduction to Solid State Physics, ch. 3 (van der Waals-London interaction, fcc lattice sums):
  // A12 = 12.13188, A6 = 14.45392 with p_ij R = r_ij, R the nearest-neighbour distance; cohesive energy at the
  // equilibrium spacing U_tot = -(2.15)(4 N epsilon) = -8.6102 N epsilon... exactly -A6^2/(2 A12) epsilon per atom.
  // Sums are computed through forEachPair on a 4-atom cell with a cutoff of 8 a (each atom meets thousands of images),
  // plus the continuum tail beyond the cutoff, 4 pi rho R^n / ((n - 3) rc^(n - 3)).
  const a = 1;
  const R = a / Math.SQRT2;
  const rc = 8 * a;
  const rho = 4 / a ** 3;
  const sys = fcc(a);
  let s6 = 0, s12 = 0;
  forEachPair(sys, rc, (_i, _j, d) => {
    const x = (R / d) ** 6;
    s6 += x;
    s12 += x * x;
  });
  // each pair belongs to two atoms (an atom's own image pair to that atom twice: S and -S)
  const A6 = (2 * s6) / 4 + (4 * Math.PI * rho * R ** 6) / (3 * rc ** 3);
  const A12 = (2 * s12) / 4 + (4 * Math.PI * rho * R ** 12) / (9 * rc ** 9);

  it('A12 = 12.13188 and A6 = 14.45392', () => {
    expect(Math.abs(A12 - 12.13188)).toBeLessThan(1e-5);
    expect(Math.abs(A6 - 14.45392)).toBeLessThan(1e-5);
  });

  it('cohesive energy -8.6102 epsilon per atom at the equilibrium spacing, computed pair by pair', () => {
    const sigma = 1, eps = 1;
    const R0 = sigma * ((2 * A12) / A6) ** (1 / 6); // Kittel: R0/sigma = 1.09
    expect(R0).toBeCloseTo(1.09, 2);
    const energy = (R: number): number => {
      const aa = R * Math.SQRT2;
      const cut = 8 * aa;
      let e = 0;
      forEachPair(fcc(aa), cut, (_i, _j, d) => {
        const x = (sigma / d) ** 6;
        e += 4 * eps * (x * x - x);
      });
      const n = 4 / aa ** 3;
      // tail of 4 eps [(s/r)^12 - (s/r)^6] beyond the cutoff, per atom: 2 pi n int r^2 u(r) dr
      const tail = 2 * Math.PI * n * 4 * eps * (sigma ** 12 / (9 * cut ** 9) - sigma ** 6 / (3 * cut ** 3));
      return e / 4 + tail;
    };
    const e0 = energy(R0);
    expect(Math.abs(e0 - -8.6102)).toBeLessThan(1e-4);
    // it is the minimum
    expect(energy(R0 * 1.01)).toBeGreaterThan(e0);
    expect(energy(R0 * 0.99)).toBeGreaterThan(e0);
  });
});

describe('bond lengths and angles of known crystals', () => {
  // Source: C. Kittel, Introduction to Solid State Physics, ch. 1 (Table 4: diamond a = 3.567 Å; Si 5.43 Å), and the
  // design notes' values: diamond 3.5668 Å -> C-C 1.5445 Å; silicon 5.431 Å -> Si-Si 2.3517 Å (nearest neighbour a√3/4).
  for (const [name, a, bond] of [['diamond', 3.5668, 1.5445], ['silicon', 5.431, 2.3517]] as const) {
    for (const [shape, build] of [['conventional cube', diamondConventional], ['primitive triclinic cell', diamondPrimitive]] as const) {
      it(`${name} (${shape}): nearest neighbour ${bond} Å, 4 neighbours at 109.47°`, () => {
        const sys = build(a);
        const md = minimumDistance(sys);
        expect(Math.abs(md.distance - bond)).toBeLessThan(5e-5);
        const list = neighbourList(sys, md.distance * 1.1);
        const n = sys.positions.length / 3;
        for (let i = 0; i < n; i++) {
          expect(list.offsets[i + 1] - list.offsets[i]).toBe(4);
          const v: number[][] = [];
          for (let e = list.offsets[i]; e < list.offsets[i + 1]; e++) v.push(Array.from(list.vectors.subarray(3 * e, 3 * e + 3)));
          for (let p = 0; p < 4; p++) {
            for (let q = p + 1; q < 4; q++) {
              const c = (v[p][0] * v[q][0] + v[p][1] * v[q][1] + v[p][2] * v[q][2]) / (Math.hypot(...v[p]) * Math.hypot(...v[q]));
              // tetrahedral angle arccos(-1/3) = 109.47° (common practice)
              expect((Math.acos(c) * 180) / Math.PI).toBeCloseTo(109.47, 2);
            }
          }
        }
      });
    }
  }
});

describe('independent cross-check with ASE neighbor_list', () => {
  // Independent cross-check: Debian's python3-ase, ase.neighborlist.neighbor_list('ijdS'), on structures we make here,
  // passed as JSON on stdin. ASE returns the full list (both directions), so the half list is i < j, plus i == j with
  // the shift lexicographically positive.
  const script = `
import sys, json
import numpy as np
from ase import Atoms
from ase.neighborlist import neighbor_list
out = []
for s in json.load(sys.stdin):
    cell = np.array(s['cell']).reshape(3, 3) if s['cell'] is not None else np.zeros((3, 3))
    atoms = Atoms('X%d' % (len(s['positions']) // 3), positions=np.array(s['positions']).reshape(-1, 3), cell=cell, pbc=s['pbc'])
    i, j, d, S = neighbor_list('ijdS', atoms, s['cutoff'])
    keep = (i < j) | ((i == j) & ((S[:, 0] > 0) | ((S[:, 0] == 0) & ((S[:, 1] > 0) | ((S[:, 1] == 0) & (S[:, 2] > 0))))))
    out.append({'i': i[keep].tolist(), 'j': j[keep].tolist(), 'd': d[keep].tolist(), 'full': int(len(i))})
print(json.dumps(out))
`;
  const r = rng(2024);
  const cases: { positions: number[]; cell: number[] | null; pbc: Pbc; cutoff: number }[] = [];
  // a skewed triclinic box of 120 atoms, fully periodic; the same as a slab; a small cell with a cutoff past its width;
  // a non-periodic cluster
  const big = cellFromParameters(11, 12, 10, 50, 115, 72);
  const pos120 = Array.from({ length: 360 }, () => 12 * r() - 1);
  cases.push({ positions: pos120, cell: Array.from(big), pbc: T, cutoff: 5.5 });
  cases.push({ positions: pos120, cell: Array.from(big), pbc: [true, true, false], cutoff: 5.5 });
  const small = cellFromParameters(3.1, 2.7, 3.4, 35, 105, 80);
  cases.push({ positions: Array.from({ length: 9 }, () => 4 * r()), cell: Array.from(small), pbc: [true, false, true], cutoff: 6.25 });
  cases.push({ positions: Array.from({ length: 150 }, () => 14 * r()), cell: null, pbc: [false, false, false], cutoff: 4 });
  const ase = JSON.parse(
    execFileSync('/usr/bin/python3', ['-c', script], { input: JSON.stringify(cases) }).toString(),
  ) as { i: number[]; j: number[]; d: number[]; full: number }[];

  cases.forEach((c, k) => {
    it(`case ${k}: same pair count and distances (${c.pbc.map((p) => (p ? 'T' : 'F')).join('')}, cutoff ${c.cutoff} Å)`, () => {
      const sys = { positions: Float64Array.from(c.positions), cell: c.cell ? Float64Array.from(c.cell) : null, pbc: c.pbc };
      const ours: { i: number; j: number; d: number }[] = [];
      forEachPair(sys, c.cutoff, (i, j, d) => ours.push({ i, j, d }));
      const ref = ase[k].i.map((i, q) => ({ i, j: ase[k].j[q], d: ase[k].d[q] }));
      expect(ours.length).toBeGreaterThan(0);
      expect(ase[k].full).toBe(2 * ours.length);
      expect(ours.length).toBe(ref.length);
      sortPairs(ours);
      sortPairs(ref);
      let worst = 0;
      for (let q = 0; q < ours.length; q++) {
        expect(ours[q].i).toBe(ref[q].i);
        expect(ours[q].j).toBe(ref[q].j);
        worst = Math.max(worst, Math.abs(ours[q].d - ref[q].d));
      }
      expect(worst).toBeLessThan(1e-9);
    });
  });
});

describe('neighbour count at liquid density', () => {
  it('0.1 atoms/Å³ gives about 90-100 atoms within 6 Å', () => {
    // common practice check value (design notes): liquid water holds ~0.1 atoms/Å³, so a 6 Å sphere holds
    // (4/3) pi 6³ 0.1 = 90.5 atoms on average. Uniform random positions in a periodic cube of 4000 atoms.
    const n = 4000;
    const L = Math.cbrt(n / 0.1);
    const r = rng(9);
    const positions = Float64Array.from({ length: 3 * n }, () => L * r());
    let pairs = 0;
    forEachPair({ positions, cell: Float64Array.of(L, 0, 0, 0, L, 0, 0, 0, L), pbc: T }, 6, () => pairs++);
    const mean = (2 * pairs) / n;
    expect(mean).toBeGreaterThan(88);
    expect(mean).toBeLessThan(100);
    // and the ideal-gas expectation (n - 1)/V (4/3) pi r³ within 1 %
    expect(Math.abs(mean / (((n - 1) / L ** 3) * (4 / 3) * Math.PI * 216) - 1)).toBeLessThan(0.01);
  });
});
