/**
 * Labels matched to the frames sent: a label task must return the frames it was given, the same number,
 * in the same order, each with the same species (same order), positions, cell and pbc. Otherwise the
 * labels would be attached to the wrong structures (a reversed order), or to a structure that is not the
 * one that was selected and whose held-out assignment (a hash of the structure) is therefore another.
 *
 * Tolerance: MATCH_TOLERANCE_A = 1e-4 Å on every position (the atom's displacement, by the minimum image
 * along periodic directions, so a labeler that wraps atoms into the cell is accepted) and on every cell
 * component. Extended XYZ writers of common programs print positions and lattice vectors with at least
 * 5 to 8 decimals (ASE 3.22's writer prints positions with 8, `%16.8f`, as test/select/label-match.test.ts
 * checks; ratchet's writer round-trips float64 exactly), so rewriting a frame moves nothing by more than
 * 5e-6 Å, while a real change of the structure (a relaxation step, a shifted atom) is orders of magnitude
 * above 1e-4 Å.
 *
 * Pure: frames in, the first difference found (or null) out.
 */
import { MinimumImager } from '../atoms/cell.js';
import type { Frame } from '../atoms/frame.js';

/** Å; positions and cell components (see the file comment for why). */
export const MATCH_TOLERANCE_A = 1e-4;

const CELL_NAMES = ['ax', 'ay', 'az', 'bx', 'by', 'bz', 'cx', 'cy', 'cz'];
const tf = (pbc: Frame['pbc']): string => pbc.map((p) => (p ? 'T' : 'F')).join(' ');

/**
 * How a returned frame differs from the frame sent, or null when it is the same structure within `tol`.
 * The message names the first difference: atom count, species, pbc, cell, or the atom that moved most.
 */
export function structureDifference(sent: Frame, got: Frame, tol = MATCH_TOLERANCE_A): string | null {
  const n = sent.species.length;
  if (got.species.length !== n) return `${got.species.length} atom(s), the frame sent has ${n}`;
  for (let a = 0; a < n; a++) {
    if (got.species[a] !== sent.species[a]) return `atom ${a} is ${got.species[a]}, in the frame sent it is ${sent.species[a]}`;
  }
  if (tf(got.pbc) !== tf(sent.pbc)) return `pbc "${tf(got.pbc)}", the frame sent has "${tf(sent.pbc)}"`;
  if (!sent.cell !== !got.cell) return got.cell ? 'a cell (Lattice), the frame sent has none' : 'no cell (Lattice), the frame sent has one';
  if (sent.cell && got.cell) {
    let worst = 0;
    let d = 0;
    for (let k = 0; k < 9; k++) {
      const dk = Math.abs(got.cell[k] - sent.cell[k]);
      if (!Number.isFinite(dk)) return `cell component ${CELL_NAMES[k]} is not a finite number`;
      if (dk > d) {
        d = dk;
        worst = k;
      }
    }
    if (d > tol) return `cell component ${CELL_NAMES[worst]} differs by ${fmtA(d)} Å from the frame sent (tolerance ${tol} Å)`;
  }
  const mi = new MinimumImager(sent.cell, sent.pbc);
  let far = 0;
  let dist = 0;
  for (let a = 0; a < n; a++) {
    const p = 3 * a;
    const dx = got.positions[p] - sent.positions[p], dy = got.positions[p + 1] - sent.positions[p + 1], dz = got.positions[p + 2] - sent.positions[p + 2];
    if (!Number.isFinite(dx + dy + dz)) return `atom ${a} has a position that is not a finite number`;
    const d = mi.distance(dx, dy, dz);
    if (d > dist) {
      dist = d;
      far = a;
    }
  }
  if (dist > tol) return `atom ${far} moved ${fmtA(dist)} Å from the frame sent (tolerance ${tol} Å)`;
  return null;
}

function fmtA(d: number): string {
  return Number.isFinite(d) ? d.toFixed(4) : String(d);
}

export interface MatchProblem {
  /** count: frames missing or extra; order: a returned frame is another sent frame; structure: a returned frame is no sent frame. */
  kind: 'count' | 'order' | 'structure';
  /** Index of the returned frame concerned (0-based, in the task's labeled file), or null for the file as a whole. */
  frame: number | null;
  reason: string;
}

/**
 * Whether a task returned exactly the frames it was sent, in order. Returns the first problem, or null.
 * Order problems name the sent frame a returned frame matches ("frames returned in another order: frame 0
 * matches sent frame 4"); a missing or extra frame is named by its index.
 */
export function matchFrames(sent: Frame[], got: Frame[], tol = MATCH_TOLERANCE_A): MatchProblem | null {
  const same = (i: number, j: number): boolean => structureDifference(sent[i], got[j], tol) === null;
  /** The first sent frame that returned frame j matches, or -1. */
  const whichSent = (j: number): number => {
    for (let i = 0; i < sent.length; i++) if (same(i, j)) return i;
    return -1;
  };
  if (got.length !== sent.length) {
    const head = `returned ${got.length} frame(s) for the ${sent.length} it was given`;
    if (got.length < sent.length) {
      const used = new Set<number>();
      for (let j = 0; j < got.length; j++) {
        const i = whichSent(j);
        if (i >= 0) used.add(i);
      }
      const missing = sent.findIndex((_, i) => !used.has(i));
      return { kind: 'count', frame: null, reason: missing >= 0 ? `${head}: sent frame ${missing} is missing` : head };
    }
    for (let j = 0; j < got.length; j++) {
      if (j >= sent.length || !same(j, j)) {
        const i = whichSent(j);
        return { kind: 'count', frame: j, reason: `${head}: frame ${j} ${i >= 0 ? `repeats sent frame ${i}` : 'matches no sent frame'}` };
      }
    }
    return { kind: 'count', frame: null, reason: head };
  }
  for (let j = 0; j < got.length; j++) {
    const diff = structureDifference(sent[j], got[j], tol);
    if (diff === null) continue;
    const i = whichSent(j);
    if (i >= 0) return { kind: 'order', frame: j, reason: `frames returned in another order: frame ${j} matches sent frame ${i}` };
    return { kind: 'structure', frame: j, reason: diff };
  }
  return null;
}
