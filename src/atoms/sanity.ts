/**
 * Can a structure be simulated at all? The checks a starting structure must pass before anything is
 * planned (pure; contacts are judged by the contacts gate, not here):
 * - at least one atom;
 * - finite positions and, when present, a finite cell;
 * - a cell of positive extent along its periodic directions: one periodic direction needs a non-zero
 *   lattice vector, two need vectors that span an area, three a cell of positive volume;
 * - more than one atom not all at one point.
 * Returns the first problem as words (without the file name), or null.
 */
import type { Frame } from './frame.js';
import { cellVolume } from './cell.js';

/** Relative size below which a length, area or volume counts as zero (of the vectors' own scale). */
const DEGENERATE = 1e-8;

export function structureIssue(frame: Frame): string | null {
  const n = frame.species.length;
  if (n === 0) return 'it has 0 atoms; expected at least one';
  for (let k = 0; k < frame.positions.length; k++) {
    if (!Number.isFinite(frame.positions[k])) return `atom ${Math.floor(k / 3)} has a non-finite coordinate (${frame.positions[k]})`;
  }
  const cell = frame.cell;
  const periodic = frame.pbc.map((p, k) => (p ? k : -1)).filter((k) => k >= 0);
  if (cell) {
    for (let k = 0; k < 9; k++) if (!Number.isFinite(cell[k])) return `its cell has a non-finite component (${cell[k]})`;
  }
  if (periodic.length > 0) {
    if (!cell) return `it is periodic (pbc ${frame.pbc.map((p) => (p ? 'T' : 'F')).join(' ')}) but has no Lattice`;
    const vec = (k: number): number[] => [cell[3 * k], cell[3 * k + 1], cell[3 * k + 2]];
    const len = (v: number[]): number => Math.hypot(v[0], v[1], v[2]);
    for (const k of periodic) {
      if (len(vec(k)) === 0) return `lattice vector ${'abc'[k]} is zero along a periodic direction (a cell of zero volume)`;
    }
    if (periodic.length === 2) {
      const [a, b] = periodic.map(vec);
      const c = [a[1] * b[2] - a[2] * b[1], a[2] * b[0] - a[0] * b[2], a[0] * b[1] - a[1] * b[0]];
      if (len(c) <= DEGENERATE * len(a) * len(b)) return `lattice vectors ${periodic.map((k) => 'abc'[k]).join(' and ')} are parallel along periodic directions (zero area)`;
    }
    if (periodic.length === 3) {
      const v = Math.abs(cellVolume(cell));
      const scale = len(vec(0)) * len(vec(1)) * len(vec(2));
      if (!(v > DEGENERATE * scale)) return `its periodic cell has zero volume (${v} Å^3)`;
    }
  }
  if (n > 1) {
    const p = frame.positions;
    let same = true;
    for (let a = 1; a < n && same; a++) {
      if (p[3 * a] !== p[0] || p[3 * a + 1] !== p[1] || p[3 * a + 2] !== p[2]) same = false;
    }
    if (same) return `all ${n} atoms are at one point`;
  }
  return null;
}
