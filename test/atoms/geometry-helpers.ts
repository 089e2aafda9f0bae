/** Test helpers for the geometry tests: a seeded random generator and an independent brute-force pair search. */
import { expect } from 'vitest';
import type { Pbc } from '../../src/atoms/frame.js';

/** mulberry32: small deterministic PRNG (common practice for reproducible tests). */
export function rng(seed: number): () => number {
  let a = seed >>> 0;
  return () => {
    a = (a + 0x6d2b79f5) >>> 0;
    let t = a;
    t = Math.imul(t ^ (t >>> 15), t | 1);
    t ^= t + Math.imul(t ^ (t >>> 7), t | 61);
    return ((t ^ (t >>> 14)) >>> 0) / 4294967296;
  };
}

/**
 * Random atoms (invented test data): fractional coordinates uniform in [-margin, 1 + margin) of the cell, so some lie
 * outside it and wrapping is exercised; without a cell, Cartesian coordinates in the same fractions of a `box` Å cube.
 */
export function randomSystem(
  seed: number,
  n: number,
  cell: Float64Array | null,
  pbc: Pbc,
  { margin = 0.1, box = 12 }: { margin?: number; box?: number } = {},
): { positions: Float64Array; cell: Float64Array | null; pbc: Pbc } {
  const r = rng(seed);
  const positions = new Float64Array(3 * n);
  const span = 1 + 2 * margin;
  for (let a = 0; a < n; a++) {
    const f = [r() * span - margin, r() * span - margin, r() * span - margin];
    for (let k = 0; k < 3; k++) positions[3 * a + k] = cell ? f[0] * cell[k] + f[1] * cell[3 + k] + f[2] * cell[6 + k] : box * f[k];
  }
  return { positions, cell, pbc };
}

export interface BrutePair {
  i: number;
  j: number;
  d: number;
  n: [number, number, number];
}

function inv3(m: ArrayLike<number>): number[] {
  const d =
    m[0] * (m[4] * m[8] - m[5] * m[7]) - m[1] * (m[3] * m[8] - m[5] * m[6]) + m[2] * (m[3] * m[7] - m[4] * m[6]);
  return [
    (m[4] * m[8] - m[5] * m[7]) / d, (m[2] * m[7] - m[1] * m[8]) / d, (m[1] * m[5] - m[2] * m[4]) / d,
    (m[5] * m[6] - m[3] * m[8]) / d, (m[0] * m[8] - m[2] * m[6]) / d, (m[2] * m[3] - m[0] * m[5]) / d,
    (m[3] * m[7] - m[4] * m[6]) / d, (m[1] * m[6] - m[0] * m[7]) / d, (m[0] * m[4] - m[1] * m[3]) / d,
  ];
}

/**
 * Brute force over lattice images, independent of the cell-list code: for every pair i <= j and every lattice
 * shift n (periodic axes only) with |r_j + n H - r_i| < cutoff. The image range per pair follows from
 * |fractional_k(v)| <= |v| * |column k of H^-1| for any vector v; `cell` must be a full-rank matrix.
 */
export function bruteForcePairs(positions: Float64Array, cell: Float64Array | null, pbc: Pbc, cutoff: number): BrutePair[] {
  const n = positions.length / 3;
  const out: BrutePair[] = [];
  const periodic = cell !== null && (pbc[0] || pbc[1] || pbc[2]);
  const H = periodic ? Array.from(cell!) : [1, 0, 0, 0, 1, 0, 0, 0, 1];
  const P = periodic ? pbc : [false, false, false];
  const G = inv3(H);
  const colNorm = [0, 1, 2].map((k) => Math.hypot(G[k], G[3 + k], G[6 + k]));
  for (let i = 0; i < n; i++) {
    for (let j = i; j < n; j++) {
      const dx = positions[3 * j] - positions[3 * i], dy = positions[3 * j + 1] - positions[3 * i + 1], dz = positions[3 * j + 2] - positions[3 * i + 2];
      const s = [0, 1, 2].map((k) => dx * G[k] + dy * G[3 + k] + dz * G[6 + k]);
      const lo = [0, 1, 2].map((k) => (P[k] ? Math.ceil(-s[k] - cutoff * colNorm[k]) - 1 : 0));
      const hi = [0, 1, 2].map((k) => (P[k] ? Math.floor(-s[k] + cutoff * colNorm[k]) + 1 : 0));
      for (let a = lo[0]; a <= hi[0]; a++) {
        for (let b = lo[1]; b <= hi[1]; b++) {
          for (let c = lo[2]; c <= hi[2]; c++) {
            if (i === j) {
              // an atom and its own image: n and -n are the same pair; keep the lexicographically positive one
              if (a === 0 && b === 0 && c === 0) continue;
              if (a < 0 || (a === 0 && (b < 0 || (b === 0 && c < 0)))) continue;
            }
            const x = dx + a * H[0] + b * H[3] + c * H[6];
            const y = dy + a * H[1] + b * H[4] + c * H[7];
            const z = dz + a * H[2] + b * H[5] + c * H[8];
            const d = Math.sqrt(x * x + y * y + z * z);
            if (d < cutoff) out.push({ i, j, d, n: [a, b, c] });
          }
        }
      }
    }
  }
  return out;
}

/** Sort pairs by (i, j, d) for multiset comparison. */
export function sortPairs<T extends { i: number; j: number; d: number }>(pairs: T[]): T[] {
  return pairs.sort((p, q) => p.i - q.i || p.j - q.j || p.d - q.d);
}

/** Same multiset of (i, j) pairs as brute force over lattice images, distances equal to 1e-12 Å (sorts `got`). */
export function expectBrute(sys: { positions: Float64Array; cell: Float64Array | null; pbc: Pbc }, cutoff: number, got: { i: number; j: number; d: number }[]): void {
  const want = bruteForcePairs(sys.positions, sys.cell, sys.pbc, cutoff);
  const order = (a: { i: number; j: number; d: number }, b: { i: number; j: number; d: number }) => a.i - b.i || a.j - b.j || a.d - b.d;
  got.sort(order);
  want.sort(order);
  expect(got.length).toBe(want.length);
  got.forEach((p, k) => {
    expect([p.i, p.j]).toEqual([want[k].i, want[k].j]);
    expect(Math.abs(p.d - want[k].d)).toBeLessThan(1e-12);
  });
}
