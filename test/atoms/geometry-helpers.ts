/** Test helpers for the geometry tests: a seeded random generator and an independent brute-force pair search. */
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
