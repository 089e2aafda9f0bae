/**
 * Periodic cells: a cell is a Float64Array(9) holding the lattice vectors a, b, c as rows
 * (ax ay az bx by bz cx cy cz), in Å, as in Frame.cell. A Cartesian row vector r and its fractional
 * coordinates s are related by r = s H, s = r H^-1 (H = the 3x3 cell matrix).
 *
 * Periodicity is per axis (Pbc). A system is non-periodic when the cell is null or pbc is all false.
 * For the axes that are not periodic the cell vector plays no role in distances: when it is unusable
 * (often zeros in files), `effectiveCell` replaces it by a unit vector orthogonal to the periodic ones,
 * so slabs (T T F) and wires (T F F) work whatever the file stores there.
 */
import type { Pbc } from './frame.js';

export type Cell = Float64Array;
export type Vec3 = [number, number, number];

/** Thrown for a cell that cannot describe the requested periodicity. */
export class CellError extends Error {
  constructor(message: string) {
    super(message);
    this.name = 'CellError';
  }
}

const AXIS = ['a', 'b', 'c'];

export function det3(m: ArrayLike<number>): number {
  return (
    m[0] * (m[4] * m[8] - m[5] * m[7]) -
    m[1] * (m[3] * m[8] - m[5] * m[6]) +
    m[2] * (m[3] * m[7] - m[4] * m[6])
  );
}

/** Volume |det H| in Å^3. */
export function cellVolume(cell: ArrayLike<number>): number {
  return Math.abs(det3(cell));
}

/** Inverse of a 3x3 matrix (row-major); throws CellError when singular. */
export function cellInverse(cell: ArrayLike<number>): Float64Array {
  const d = det3(cell);
  const scale = Math.max(rowLength(cell, 0), rowLength(cell, 1), rowLength(cell, 2));
  if (!(Math.abs(d) > 1e-12 * scale * scale * scale) || !Number.isFinite(d)) {
    throw new CellError(`cell matrix is singular or not finite (determinant ${d}): expected three linearly independent lattice vectors`);
  }
  const m = cell;
  const inv = new Float64Array(9);
  inv[0] = (m[4] * m[8] - m[5] * m[7]) / d;
  inv[1] = (m[2] * m[7] - m[1] * m[8]) / d;
  inv[2] = (m[1] * m[5] - m[2] * m[4]) / d;
  inv[3] = (m[5] * m[6] - m[3] * m[8]) / d;
  inv[4] = (m[0] * m[8] - m[2] * m[6]) / d;
  inv[5] = (m[2] * m[3] - m[0] * m[5]) / d;
  inv[6] = (m[3] * m[7] - m[4] * m[6]) / d;
  inv[7] = (m[1] * m[6] - m[0] * m[7]) / d;
  inv[8] = (m[0] * m[4] - m[1] * m[3]) / d;
  return inv;
}

function rowLength(m: ArrayLike<number>, k: number): number {
  return Math.hypot(m[3 * k], m[3 * k + 1], m[3 * k + 2]);
}

/** Lengths |a|, |b|, |c| in Å. */
export function cellLengths(cell: ArrayLike<number>): Vec3 {
  return [rowLength(cell, 0), rowLength(cell, 1), rowLength(cell, 2)];
}

/** Angles alpha (b,c), beta (a,c), gamma (a,b) in degrees. */
export function cellAngles(cell: ArrayLike<number>): Vec3 {
  const ang = (p: number, q: number): number => {
    const dot = cell[3 * p] * cell[3 * q] + cell[3 * p + 1] * cell[3 * q + 1] + cell[3 * p + 2] * cell[3 * q + 2];
    const c = dot / (rowLength(cell, p) * rowLength(cell, q));
    return (Math.acos(Math.max(-1, Math.min(1, c))) * 180) / Math.PI;
  };
  return [ang(1, 2), ang(0, 2), ang(0, 1)];
}

/**
 * Perpendicular widths: the distance between opposite faces of the cell, V/|b x c|, V/|c x a|, V/|a x b|.
 * A sphere of radius r fits in the cell without touching its images iff 2r <= min width.
 */
export function perpendicularWidths(cell: ArrayLike<number>): Vec3 {
  const inv = cellInverse(cell);
  // Column k of H^-1 is the reciprocal vector a_k* (without 2 pi); width_k = 1/|a_k*|.
  return [
    1 / Math.hypot(inv[0], inv[3], inv[6]),
    1 / Math.hypot(inv[1], inv[4], inv[7]),
    1 / Math.hypot(inv[2], inv[5], inv[8]),
  ];
}

/**
 * Cell from lengths (Å) and angles (degrees): a along x, b in the xy plane, c completing a right-handed set
 * (the usual crystallographic convention).
 */
export function cellFromParameters(a: number, b: number, c: number, alpha: number, beta: number, gamma: number): Cell {
  for (const [name, v] of [['a', a], ['b', b], ['c', c]] as const) {
    if (!(v > 0) || !Number.isFinite(v)) throw new CellError(`cell length ${name} must be a positive finite number, got ${v}`);
  }
  for (const [name, v] of [['alpha', alpha], ['beta', beta], ['gamma', gamma]] as const) {
    if (!(v > 0 && v < 180)) throw new CellError(`cell angle ${name} must be strictly between 0 and 180 degrees, got ${v}`);
  }
  const rad = Math.PI / 180;
  // Exact values for right angles keep orthorhombic cells exactly diagonal.
  const cos = (x: number): number => (x === 90 ? 0 : Math.cos(x * rad));
  const sin = (x: number): number => (x === 90 ? 1 : Math.sin(x * rad));
  const ca = cos(alpha), cb = cos(beta), cg = cos(gamma), sg = sin(gamma);
  const cx = c * cb;
  const cy = (c * (ca - cb * cg)) / sg;
  const cz2 = c * c - cx * cx - cy * cy;
  if (!(cz2 > 1e-12 * c * c)) {
    throw new CellError(`cell angles alpha=${alpha}, beta=${beta}, gamma=${gamma} do not describe a cell with positive volume`);
  }
  return Float64Array.of(a, 0, 0, b * cg, b * sg, 0, cx, cy, Math.sqrt(cz2));
}

/** Fractional coordinates (3N) of Cartesian positions (3N). */
export function cartesianToFractional(cell: ArrayLike<number>, positions: ArrayLike<number>): Float64Array {
  return applyMatrix(cellInverse(cell), positions);
}

/** Cartesian positions (3N) of fractional coordinates (3N). */
export function fractionalToCartesian(cell: ArrayLike<number>, fractional: ArrayLike<number>): Float64Array {
  return applyMatrix(cell, fractional);
}

/** out = v M for each row vector v (3N values). */
function applyMatrix(m: ArrayLike<number>, v: ArrayLike<number>): Float64Array {
  if (v.length % 3 !== 0) throw new CellError(`expected 3N coordinates, found ${v.length} numbers`);
  const out = new Float64Array(v.length);
  for (let i = 0; i < v.length; i += 3) {
    const x = v[i], y = v[i + 1], z = v[i + 2];
    out[i] = x * m[0] + y * m[3] + z * m[6];
    out[i + 1] = x * m[1] + y * m[4] + z * m[7];
    out[i + 2] = x * m[2] + y * m[5] + z * m[8];
  }
  return out;
}

/** True when the system has at least one periodic axis (and so needs a cell). */
export function isPeriodic(cell: ArrayLike<number> | null, pbc: Pbc): boolean {
  return cell !== null && (pbc[0] || pbc[1] || pbc[2]);
}

/**
 * The cell to compute with: periodic axes keep their lattice vectors; non-periodic axes keep the stored vector
 * when it completes a well-conditioned cell, and otherwise (zero, parallel or missing) get unit vectors
 * orthogonal to the periodic ones.
 * Non-periodic systems get the identity. Throws CellError when pbc asks for a periodic axis the cell cannot give
 * (no cell, a zero or non-finite vector, or periodic vectors that are linearly dependent).
 */
export function effectiveCell(cell: ArrayLike<number> | null, pbc: Pbc): Cell {
  const periodic = [0, 1, 2].filter((k) => pbc[k]);
  if (periodic.length === 0) return Float64Array.of(1, 0, 0, 0, 1, 0, 0, 0, 1);
  if (cell === null) {
    throw new CellError(`pbc is ${fmtPbc(pbc)} but there is no cell: expected a Lattice for the periodic axes`);
  }
  if (cell.length !== 9) throw new CellError(`expected a cell of 9 numbers, found ${cell.length}`);
  for (const k of periodic) {
    const len = rowLength(cell, k);
    if (!(len > 0) || !Number.isFinite(len)) {
      throw new CellError(`cell vector ${AXIS[k]} is zero or not finite but pbc is true along it: expected a non-zero lattice vector`);
    }
  }
  const out = new Float64Array(9);
  for (const k of periodic) for (let c = 0; c < 3; c++) out[3 * k + c] = cell[3 * k + c];
  const row = (k: number): Vec3 => [out[3 * k], out[3 * k + 1], out[3 * k + 2]];
  if (periodic.length === 3) {
    cellInverse(out); // throws when singular
    return out;
  }
  const free = [0, 1, 2].filter((k) => !pbc[k]);
  // Keep the stored vectors of non-periodic axes when they complete a well-conditioned cell (so wrapping agrees with
  // fractional coordinates of the stored cell, as other libraries do); otherwise substitute orthonormal vectors.
  if (free.every((k) => Number.isFinite(rowLength(cell, k)))) {
    const given = Float64Array.from(cell);
    const d = Math.abs(det3(given));
    const lens = rowLength(given, 0) * rowLength(given, 1) * rowLength(given, 2);
    if (d > 1e-8 * lens && lens > 0) return given;
  }
  if (periodic.length === 2) {
    const n = cross(row(periodic[0]), row(periodic[1]));
    const len = Math.hypot(n[0], n[1], n[2]);
    const scale = rowLength(out, periodic[0]) * rowLength(out, periodic[1]);
    if (!(len > 1e-12 * scale)) {
      throw new CellError(`periodic cell vectors ${AXIS[periodic[0]]} and ${AXIS[periodic[1]]} are parallel: expected linearly independent vectors`);
    }
    setRow(out, free[0], [n[0] / len, n[1] / len, n[2] / len]);
    return out;
  }
  // One periodic axis: two unit vectors spanning the plane normal to it.
  const p = row(periodic[0]);
  const pl = Math.hypot(p[0], p[1], p[2]);
  const u: Vec3 = [p[0] / pl, p[1] / pl, p[2] / pl];
  // Pick the Cartesian axis least aligned with u to start a Gram-Schmidt step.
  const ax = Math.abs(u[0]) <= Math.abs(u[1]) && Math.abs(u[0]) <= Math.abs(u[2]) ? 0 : Math.abs(u[1]) <= Math.abs(u[2]) ? 1 : 2;
  const e: Vec3 = [0, 0, 0];
  e[ax] = 1;
  const v = cross(u, e);
  const vl = Math.hypot(v[0], v[1], v[2]);
  const v1: Vec3 = [v[0] / vl, v[1] / vl, v[2] / vl];
  const w = cross(u, v1);
  setRow(out, free[0], v1);
  setRow(out, free[1], w);
  return out;
}

function setRow(m: Float64Array, k: number, v: Vec3): void {
  m[3 * k] = v[0];
  m[3 * k + 1] = v[1];
  m[3 * k + 2] = v[2];
}

export function cross(a: Vec3, b: Vec3): Vec3 {
  return [a[1] * b[2] - a[2] * b[1], a[2] * b[0] - a[0] * b[2], a[0] * b[1] - a[1] * b[0]];
}

function fmtPbc(pbc: Pbc): string {
  return `"${pbc.map((p) => (p ? 'T' : 'F')).join(' ')}"`;
}

/**
 * Wrap positions into the cell along periodic axes (fractional coordinates in [0, 1)); other axes unchanged.
 * Returns a new array.
 */
export function wrapPositions(cell: ArrayLike<number> | null, pbc: Pbc, positions: ArrayLike<number>): Float64Array {
  const out = Float64Array.from(positions);
  if (!isPeriodic(cell, pbc)) return out;
  const h = effectiveCell(cell, pbc);
  const inv = cellInverse(h);
  for (let i = 0; i < out.length; i += 3) {
    const x = out[i], y = out[i + 1], z = out[i + 2];
    const s0 = x * inv[0] + y * inv[3] + z * inv[6];
    const s1 = x * inv[1] + y * inv[4] + z * inv[7];
    const s2 = x * inv[2] + y * inv[5] + z * inv[8];
    const n0 = pbc[0] ? Math.floor(s0) : 0, n1 = pbc[1] ? Math.floor(s1) : 0, n2 = pbc[2] ? Math.floor(s2) : 0;
    if (n0 === 0 && n1 === 0 && n2 === 0) continue;
    out[i] = x - (n0 * h[0] + n1 * h[3] + n2 * h[6]);
    out[i + 1] = y - (n0 * h[1] + n1 * h[4] + n2 * h[7]);
    out[i + 2] = z - (n0 * h[2] + n1 * h[5] + n2 * h[8]);
  }
  return out;
}

/** Result of a minimum-image query. */
export interface MinimumImage {
  /** The shortest vector d + n1 a + n2 b + n3 c (n along periodic axes only), Å. */
  vector: Vec3;
  distance: number;
  /** The lattice shift (n1, n2, n3) that was added. */
  shift: Vec3;
}

/**
 * A prepared minimum-image calculator for one cell and pbc: exact for every cell shape, however skewed.
 *
 * Method: reduce the fractional components by rounding to get a candidate of length r0; any shorter image
 * d + n H has fractional component s_k + n_k bounded by |d + n H| / w_k (w_k = perpendicular width),
 * so only the integers with |s_k + n_k| <= r0 / w_k need to be tried. For well-shaped cells that is
 * a handful of images; for strongly skewed cells it is as many as needed to be exact.
 */
export class MinimumImager {
  readonly cell: Cell;
  readonly inverse: Float64Array;
  readonly pbc: Pbc;
  readonly widths: Vec3;
  readonly periodic: boolean;
  /** Output of the last `distance` call: vector and shift. */
  readonly last = { dx: 0, dy: 0, dz: 0, n0: 0, n1: 0, n2: 0 };

  constructor(cell: ArrayLike<number> | null, pbc: Pbc) {
    this.pbc = [pbc[0], pbc[1], pbc[2]];
    this.periodic = isPeriodic(cell, pbc);
    this.cell = effectiveCell(cell, pbc);
    this.inverse = cellInverse(this.cell);
    this.widths = perpendicularWidths(this.cell);
  }

  /** Minimum-image distance of the displacement (dx, dy, dz); the vector and shift are left in `last`. */
  distance(dx: number, dy: number, dz: number): number {
    const last = this.last;
    if (!this.periodic) {
      last.dx = dx; last.dy = dy; last.dz = dz; last.n0 = last.n1 = last.n2 = 0;
      return Math.sqrt(dx * dx + dy * dy + dz * dz);
    }
    const h = this.cell, inv = this.inverse, pbc = this.pbc, w = this.widths;
    const s0 = dx * inv[0] + dy * inv[3] + dz * inv[6];
    const s1 = dx * inv[1] + dy * inv[4] + dz * inv[7];
    const s2 = dx * inv[2] + dy * inv[5] + dz * inv[8];
    // Candidate from rounding.
    // (+ 0 turns -0 into 0)
    const r0 = (pbc[0] ? -Math.round(s0) : 0) + 0, r1 = (pbc[1] ? -Math.round(s1) : 0) + 0, r2 = (pbc[2] ? -Math.round(s2) : 0) + 0;
    let bx = dx + r0 * h[0] + r1 * h[3] + r2 * h[6];
    let by = dy + r0 * h[1] + r1 * h[4] + r2 * h[7];
    let bz = dz + r0 * h[2] + r1 * h[5] + r2 * h[8];
    let best2 = bx * bx + by * by + bz * bz;
    let b0 = r0, b1 = r1, b2 = r2;
    const rmax = Math.sqrt(best2) * (1 + 1e-12);
    // Integer ranges |s_k + n_k| <= rmax / w_k.
    const lo0 = pbc[0] ? Math.ceil(-s0 - rmax / w[0]) : 0, hi0 = pbc[0] ? Math.floor(-s0 + rmax / w[0]) : 0;
    const lo1 = pbc[1] ? Math.ceil(-s1 - rmax / w[1]) : 0, hi1 = pbc[1] ? Math.floor(-s1 + rmax / w[1]) : 0;
    const lo2 = pbc[2] ? Math.ceil(-s2 - rmax / w[2]) : 0, hi2 = pbc[2] ? Math.floor(-s2 + rmax / w[2]) : 0;
    if (hi0 - lo0 + (hi1 - lo1) + (hi2 - lo2) > 0) {
      for (let n0 = lo0; n0 <= hi0; n0++) {
        for (let n1 = lo1; n1 <= hi1; n1++) {
          const px = dx + n0 * h[0] + n1 * h[3], py = dy + n0 * h[1] + n1 * h[4], pz = dz + n0 * h[2] + n1 * h[5];
          for (let n2 = lo2; n2 <= hi2; n2++) {
            const x = px + n2 * h[6], y = py + n2 * h[7], z = pz + n2 * h[8];
            const d2 = x * x + y * y + z * z;
            if (d2 < best2) {
              best2 = d2; bx = x; by = y; bz = z; b0 = n0; b1 = n1; b2 = n2;
            }
          }
        }
      }
    }
    last.dx = bx; last.dy = by; last.dz = bz; last.n0 = b0; last.n1 = b1; last.n2 = b2;
    return Math.sqrt(best2);
  }

  /** Minimum-image vector, distance and shift of a displacement. */
  image(dx: number, dy: number, dz: number): MinimumImage {
    const distance = this.distance(dx, dy, dz);
    const l = this.last;
    return { vector: [l.dx, l.dy, l.dz], distance, shift: [l.n0, l.n1, l.n2] };
  }

  /**
   * The shortest non-zero lattice vector along the periodic axes (the distance from an atom to its own
   * nearest periodic image); Infinity for a non-periodic system.
   */
  shortestLatticeVector(): MinimumImage {
    if (!this.periodic) return { vector: [0, 0, 0], distance: Infinity, shift: [0, 0, 0] };
    const h = this.cell, pbc = this.pbc, w = this.widths;
    // Start from the shortest periodic cell vector; any shorter lattice vector n H has |n_k| <= r / w_k.
    let best2 = Infinity;
    let best: MinimumImage = { vector: [0, 0, 0], distance: Infinity, shift: [0, 0, 0] };
    for (let k = 0; k < 3; k++) {
      if (!pbc[k]) continue;
      const l2 = h[3 * k] ** 2 + h[3 * k + 1] ** 2 + h[3 * k + 2] ** 2;
      if (l2 < best2) best2 = l2;
    }
    const r = Math.sqrt(best2) * (1 + 1e-12);
    const m0 = pbc[0] ? Math.floor(r / w[0]) : 0, m1 = pbc[1] ? Math.floor(r / w[1]) : 0, m2 = pbc[2] ? Math.floor(r / w[2]) : 0;
    best2 = Infinity;
    for (let n0 = -m0; n0 <= m0; n0++) {
      for (let n1 = -m1; n1 <= m1; n1++) {
        for (let n2 = -m2; n2 <= m2; n2++) {
          if (n0 === 0 && n1 === 0 && n2 === 0) continue;
          const x = n0 * h[0] + n1 * h[3] + n2 * h[6];
          const y = n0 * h[1] + n1 * h[4] + n2 * h[7];
          const z = n0 * h[2] + n1 * h[5] + n2 * h[8];
          const d2 = x * x + y * y + z * z;
          if (d2 < best2) {
            best2 = d2;
            best = { vector: [x, y, z], distance: Math.sqrt(d2), shift: [n0, n1, n2] };
          }
        }
      }
    }
    return best;
  }
}

/** Exact minimum-image vector of a displacement for any cell shape (convenience wrapper; prepare a MinimumImager for many calls). */
export function minimumImage(cell: ArrayLike<number> | null, pbc: Pbc, d: ArrayLike<number>): MinimumImage {
  return new MinimumImager(cell, pbc).image(d[0], d[1], d[2]);
}

/** Exact minimum-image distance between atoms i and j of a positions array (3N). */
export function minimumImageDistance(
  cell: ArrayLike<number> | null,
  pbc: Pbc,
  positions: ArrayLike<number>,
  i: number,
  j: number,
): number {
  const m = new MinimumImager(cell, pbc);
  return m.distance(positions[3 * j] - positions[3 * i], positions[3 * j + 1] - positions[3 * i + 1], positions[3 * j + 2] - positions[3 * i + 2]);
}
