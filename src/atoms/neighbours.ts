/**
 * Neighbour search: every pair of atoms closer than a cutoff, for any cell shape and periodicity.
 *
 * Method (cell list / "binning"):
 *  1. Positions are expressed in fractional coordinates of the effective cell (cell.ts: non-periodic axes get
 *     unit vectors orthogonal to the periodic ones; a non-periodic system uses Cartesian axes) and wrapped
 *     into [0, 1) along periodic axes.
 *  2. Each axis is cut into n_k slabs ("bins") whose perpendicular thickness h_k is at least the cutoff, or half of
 *     it in dense systems (periodic axes span one cell, non-periodic axes the bounding box of the atoms). Because the
 *     bins are parallelepipeds measured by perpendicular widths, the search is exact for any cell shape, however skewed.
 *  3. Periodic images of atoms that lie within reach of the cell ("ghosts") are materialised into padding bins
 *     around the interior; when the cutoff exceeds the cell width, several layers of images are made.
 *  4. For every interior bin, atoms are compared with atoms in the same bin (each pair once) and in a half stencil
 *     of neighbouring bins: bin offsets O that are lexicographically positive and whose parallelepipeds can hold
 *     two points closer than the cutoff (the exact box-to-box distance, so skewed cells do not waste work).
 *     A pair (i, j, shift S) seen from i's bin at offset O is seen from j's bin at offset -O, so the half stencil
 *     visits every pair, including every periodic image pair, exactly once.
 * Cost is linear in the number of atoms at fixed density and cutoff; storage is a handful of typed arrays;
 * no allocation per pair.
 */
import type { Pbc } from './frame.js';
import { CellError, cellInverse, effectiveCell, isPeriodic, MinimumImager, perpendicularWidths } from './cell.js';
import { kernelClosePairs, kernelPairs, type CloseList, type GroupMinima } from './neighbours-kernel.js';

export type { CloseList } from './neighbours-kernel.js';

/** What the neighbour search needs from a frame (a Frame is one). */
export interface AtomsGeometry {
  /** 3N Cartesian positions, Å. */
  positions: Float64Array;
  /** Rows a, b, c (Å) or null. */
  cell: Float64Array | null;
  pbc: Pbc;
}

/**
 * Called once per pair within the cutoff: i <= j (i === j for an atom and one of its own periodic images),
 * d the distance, (dx, dy, dz) = r_j + lattice shift - r_i.
 */
export type PairVisitor = (i: number, j: number, d: number, dx: number, dy: number, dz: number) => void;

export interface NeighbourOptions {
  /**
   * Bin thickness as a fraction of the cutoff. Smaller bins test fewer far pairs but cost more bookkeeping per bin.
   * Default: 1 (a 27-bin stencil) when a cutoff-sized bin would hold fewer than ~20 atoms, else 0.5 (dense systems or
   * long cutoffs), the faster choice in bench/neighbours.mjs.
   */
  binFraction?: number;
}

/** Thrown for unusable input (non-finite positions, bad cutoff, missing cell for pbc). */
export class NeighbourError extends Error {
  constructor(message: string) {
    super(message);
    this.name = 'NeighbourError';
  }
}

/** The binned and image-extended system, ready for pair loops. */
interface Grid {
  n: number;
  /** Cartesian coordinates of real atoms and ghosts, interleaved (x, y, z), sorted by extended bin. */
  xyz: Float64Array;
  /** Original atom index of each sorted entry. */
  atom: Int32Array;
  /** binStart[b] .. binStart[b+1] are the sorted entries in extended bin b. */
  binStart: Int32Array;
  /** Interior bin counts and extended dimensions. */
  nb: [number, number, number];
  g: [number, number, number];
  lo: [number, number, number];
  /** The half stencil as rows of consecutive bins (see StencilRows). */
  rows: StencilRows;
}

/**
 * The half stencil as runs ("rows") of bins that are consecutive along the last axis, hence consecutive in the sorted
 * entries: row r covers linear bin offsets lo[r] .. hi[r]. Row 0 starts at the bin itself (offset 0): its atoms are
 * compared with the atoms after them in the bin and with every atom of the following bins of the row. Fewer, longer
 * inner loops than one per stencil bin (13 bins make 5 rows for a cutoff-sized bin).
 */
export interface StencilRows {
  lo: Int32Array;
  hi: Int32Array;
}

function checkInput(system: AtomsGeometry, cutoff: number): number {
  if (!(cutoff > 0) || !Number.isFinite(cutoff)) {
    throw new NeighbourError(`cutoff must be a positive finite number of Å, got ${cutoff}`);
  }
  const pos = system.positions;
  if (pos.length % 3 !== 0) throw new NeighbourError(`positions must hold 3 numbers per atom, found ${pos.length} numbers`);
  for (let k = 0; k < pos.length; k++) {
    if (!Number.isFinite(pos[k])) {
      throw new NeighbourError(`position of atom ${Math.floor(k / 3)} is not finite (${'xyz'[k % 3]} = ${pos[k]})`);
    }
  }
  return pos.length / 3;
}

/** Largest number of bins (extended grid) allowed per atom before bins are coarsened (dilute systems). */
const MAX_BINS_PER_ATOM = 4;
const MIN_BIN_CAP = 4096;

/** Slots of GridScratch. */
const WRAPPED = 0, XYZ = 1;
const BIN = 0, BIN_START = 1, FILL = 2, ATOM = 3;

/**
 * Work arrays of fillGrid kept between calls: for frames of a few thousand atoms, allocating (and zero-filling, and
 * later collecting) fresh typed arrays on every search costs about as much as the search. One search uses a scratch at
 * a time; a search started from inside a visitor gets a fresh one.
 */
class GridScratch {
  private readonly f = [new Float64Array(0), new Float64Array(0)];
  private readonly n = [new Int32Array(0), new Int32Array(0), new Int32Array(0), new Int32Array(0)];
  f64(slot: number, length: number): Float64Array {
    let a = this.f[slot];
    if (a.length < length) a = this.f[slot] = new Float64Array(Math.max(length, Math.ceil(a.length * 1.5)));
    return a.length === length ? a : a.subarray(0, length);
  }
  /** Bytes held. */
  get bytes(): number {
    let b = 0;
    for (const a of this.f) b += a.byteLength;
    for (const a of this.n) b += a.byteLength;
    return b;
  }
  i32(slot: number, length: number): Int32Array {
    let a = this.n[slot];
    if (a.length < length) a = this.n[slot] = new Int32Array(Math.max(length, Math.ceil(a.length * 1.5)));
    return a.length === length ? a : a.subarray(0, length);
  }
}

let idleScratch: GridScratch | null = new GridScratch();
/** A scratch grown beyond this (a very large system) is not kept after the search. */
const MAX_KEPT_SCRATCH = 16 << 20;

/**
 * Everything about the grid that does not depend on where the atoms are (for a fully periodic system): bins, padding,
 * stencil and image shifts. Frames of one trajectory share one cell, so this is computed once per cell (gridPlan).
 */
export interface GridPlan {
  h: Float64Array;
  inv: Float64Array;
  per: [boolean, boolean, boolean];
  origin: number[];
  range: number[];
  nb: [number, number, number];
  g: [number, number, number];
  lo: [number, number, number];
  rows: StencilRows;
  /** Per axis k and interior bin b: the image shifts S from shifts[k][2b] to shifts[k][2b + 1]. */
  shifts: [Int32Array, Int32Array, Int32Array];
}

const planCache = new Map<string, GridPlan>();
const PLAN_CACHE_SIZE = 16;

/** The last fully periodic plan looked up (consecutive frames of a trajectory share their cell): no key to build. */
let lastPlan: { cell: Float64Array; n: number; cutoff: number; binFraction: number | undefined; plan: GridPlan } | null = null;

/** The grid plan for a system (cached for fully periodic cells), after checking the input (unless `checked`). */
function planFor(system: AtomsGeometry, cutoff: number, binFractionOption: number | undefined, checked = false): { n: number; plan: GridPlan } {
  const n = checked ? system.positions.length / 3 : checkInput(system, cutoff);
  const cell = system.cell;
  const pbc = system.pbc;
  // A fully periodic plan depends only on the cell, the cutoff, the bin option and the atom count.
  let key: string | null = null;
  let plan: GridPlan | undefined;
  if (cell !== null && cell.length === 9 && pbc[0] && pbc[1] && pbc[2]) {
    const last = lastPlan;
    if (last !== null && last.n === n && last.cutoff === cutoff && last.binFraction === binFractionOption && sameCell(last.cell, cell)) return { n, plan: last.plan };
    key = `${n} ${cutoff} ${binFractionOption} ${cell[0]} ${cell[1]} ${cell[2]} ${cell[3]} ${cell[4]} ${cell[5]} ${cell[6]} ${cell[7]} ${cell[8]}`;
    plan = planCache.get(key);
  }
  if (plan === undefined) {
    plan = makePlan(system, n, cutoff, binFractionOption);
    if (key !== null && isPeriodic(cell, pbc)) {
      if (planCache.size >= PLAN_CACHE_SIZE) planCache.delete(planCache.keys().next().value as string);
      planCache.set(key, plan);
    }
  }
  if (key !== null && planCache.get(key) === plan) lastPlan = { cell: Float64Array.from(cell!), n, cutoff, binFraction: binFractionOption, plan };
  return { n, plan };
}

function sameCell(a: Float64Array, b: Float64Array): boolean {
  for (let k = 0; k < 9; k++) if (!Object.is(a[k], b[k])) return false;
  return true;
}

function makePlan(system: AtomsGeometry, n: number, cutoff: number, binFractionOption: number | undefined): GridPlan {
  const pbc = system.pbc;
  let h: Float64Array;
  try {
    h = effectiveCell(system.cell, pbc);
  } catch (e) {
    if (e instanceof CellError) throw new NeighbourError(e.message);
    throw e;
  }
  const per: [boolean, boolean, boolean] = isPeriodic(system.cell, pbc) ? [pbc[0], pbc[1], pbc[2]] : [false, false, false];
  const inv = cellInverse(h);
  const unitWidth = perpendicularWidths(h);
  const pos = system.positions;

  // Extent of the non-periodic axes in fractional coordinates (periodic axes are wrapped into [0, 1)).
  const smin = [Infinity, Infinity, Infinity];
  const smax = [-Infinity, -Infinity, -Infinity];
  if (!(per[0] && per[1] && per[2])) {
    for (let a = 0; a < n; a++) {
      const x = pos[3 * a], y = pos[3 * a + 1], z = pos[3 * a + 2];
      for (let k = 0; k < 3; k++) {
        if (per[k]) continue;
        const sk = x * inv[k] + y * inv[3 + k] + z * inv[6 + k];
        if (sk < smin[k]) smin[k] = sk;
        if (sk > smax[k]) smax[k] = sk;
      }
    }
  }

  // Occupancy of a cutoff-sized bin decides the default bin size (see NeighbourOptions.binFraction).
  let binFraction = binFractionOption ?? 1;
  if (binFractionOption === undefined) {
    let cells = 1;
    for (let k = 0; k < 3; k++) {
      const t = per[k] ? unitWidth[k] : n > 0 ? (smax[k] - smin[k]) * unitWidth[k] : 0;
      cells *= Math.max(t / cutoff, 1);
    }
    if (n / cells >= 20) binFraction = 0.5;
  }
  const binTarget = cutoff * binFraction;
  // Extent of each axis in fractional units and in perpendicular Å.
  const origin = [0, 0, 0];
  const range = [1, 1, 1];
  const thick = [0, 0, 0];
  for (let k = 0; k < 3; k++) {
    if (per[k]) {
      thick[k] = unitWidth[k];
    } else {
      origin[k] = n > 0 ? smin[k] : 0;
      const ext = n > 0 ? smax[k] - smin[k] : 0;
      // Give a flat (or empty) extent one bin of the target thickness.
      range[k] = Math.max(ext, binTarget / unitWidth[k]);
      thick[k] = range[k] * unitWidth[k];
    }
  }
  const nb: [number, number, number] = [0, 0, 0];
  // (bins a hair thicker than the target, so that a cell exactly k cutoffs wide does not need a wider stencil)
  for (let k = 0; k < 3; k++) nb[k] = Math.max(1, Math.floor(thick[k] / (binTarget * (1 + 1e-6))));
  const m: [number, number, number] = [0, 0, 0];
  const lo: [number, number, number] = [0, 0, 0];
  const hi: [number, number, number] = [0, 0, 0];
  const g: [number, number, number] = [0, 0, 0];
  const maxBins = Math.max(MIN_BIN_CAP, MAX_BINS_PER_ATOM * n);
  for (;;) {
    for (let k = 0; k < 3; k++) {
      const hk = thick[k] / nb[k];
      let mk = Math.ceil((cutoff * (1 + 1e-9)) / hk);
      if (!per[k]) mk = Math.min(mk, nb[k] - 1);
      m[k] = mk;
    }
    // Half stencil: offsets lexicographically > 0, so axis 0 only needs padding on the high side.
    lo[0] = 0; hi[0] = m[0];
    lo[1] = m[1]; hi[1] = m[1];
    lo[2] = m[2]; hi[2] = m[2];
    for (let k = 0; k < 3; k++) g[k] = nb[k] + lo[k] + hi[k];
    const total = g[0] * g[1] * g[2];
    if (total <= maxBins || (nb[0] === 1 && nb[1] === 1 && nb[2] === 1)) break;
    // Dilute system: coarsen the bins (larger bins stay exact, only slower per pair).
    const f = Math.cbrt(total / maxBins) * 1.05;
    for (let k = 0; k < 3; k++) nb[k] = Math.max(1, Math.floor(nb[k] / f));
  }

  // Bin edge vectors (Cartesian) for the exact stencil pruning.
  const edges = new Float64Array(9);
  for (let k = 0; k < 3; k++) {
    const f = range[k] / nb[k];
    edges[3 * k] = h[3 * k] * f;
    edges[3 * k + 1] = h[3 * k + 1] * f;
    edges[3 * k + 2] = h[3 * k + 2] * f;
  }
  const rows = halfStencil(edges, m, g, cutoff * (1 + 1e-9) + 1e-12);

  // Image shifts that land an atom of interior bin b into the extended grid, per axis and bin index: the integers S
  // with -lo <= b + S nb < nb + hi, from range[k][2b] to range[k][2b + 1] (only S = 0 along a non-periodic axis).
  const shifts: [Int32Array, Int32Array, Int32Array] = [new Int32Array(2 * nb[0]), new Int32Array(2 * nb[1]), new Int32Array(2 * nb[2])];
  for (let k = 0; k < 3; k++) {
    const r = shifts[k];
    for (let b = 0; b < nb[k]; b++) {
      let first = 0, last = 0;
      if (per[k]) {
        const q = Math.ceil(Math.max(lo[k], hi[k]) / nb[k]) + 1;
        first = q + 1;
        last = -q - 1;
        for (let S = -q; S <= q; S++) {
          const B = b + S * nb[k];
          if (B >= -lo[k] && B < nb[k] + hi[k]) {
            if (S < first) first = S;
            last = S;
          }
        }
      }
      r[2 * b] = first;
      r[2 * b + 1] = last;
    }
  }

  return { h, inv, per, origin, range, nb, g, lo, rows, shifts };
}

/** Bin the atoms of one frame (wrapped positions, periodic images) by the plan, into the scratch arrays. */
function fillGrid(pos: Float64Array, n: number, plan: GridPlan, scratch: GridScratch): Grid {
  // (three small loops in their own functions: each is optimised on its own, quickly, in every thread that runs it)
  const p = scratch.f64(WRAPPED, 3 * n);
  const bin = scratch.i32(BIN, 3 * n);
  wrapAndBin(pos, n, plan, p, bin);
  const g = plan.g;
  const nbins = g[0] * g[1] * g[2];
  const binStart = scratch.i32(BIN_START, nbins + 1).fill(0);
  const total = countImages(bin, n, plan, binStart);
  for (let b = 0; b < nbins; b++) binStart[b + 1] += binStart[b];
  const fill = scratch.i32(FILL, nbins);
  fill.set(binStart.subarray(0, nbins));
  const xyz = scratch.f64(XYZ, 3 * total);
  const atom = scratch.i32(ATOM, total);
  placeImages(p, bin, n, plan, fill, xyz, atom);
  return { n, xyz, atom, binStart, nb: plan.nb, g, lo: plan.lo, rows: plan.rows };
}

/** Wrapped Cartesian position (p) and interior bin per axis (bin) of each real atom. */
function wrapAndBin(pos: Float64Array, n: number, plan: GridPlan, p: Float64Array, bin: Int32Array): void {
  const { h, inv, per, origin, range, nb } = plan;
  const sc0 = nb[0] / range[0], sc1 = nb[1] / range[1], sc2 = nb[2] / range[2];
  const nb0 = nb[0], nb1 = nb[1], nb2 = nb[2];
  const or0 = origin[0], or1 = origin[1], or2 = origin[2];
  const p0 = per[0], p1 = per[1], p2 = per[2];
  for (let a = 0; a < n; a++) {
    const x = pos[3 * a], y = pos[3 * a + 1], z = pos[3 * a + 2];
    let s0 = x * inv[0] + y * inv[3] + z * inv[6];
    let s1 = x * inv[1] + y * inv[4] + z * inv[7];
    let s2 = x * inv[2] + y * inv[5] + z * inv[8];
    let w0 = 0, w1 = 0, w2 = 0;
    if (p0) { w0 = Math.floor(s0); s0 -= w0; }
    if (p1) { w1 = Math.floor(s1); s1 -= w1; }
    if (p2) { w2 = Math.floor(s2); s2 -= w2; }
    p[3 * a] = x - (w0 * h[0] + w1 * h[3] + w2 * h[6]);
    p[3 * a + 1] = y - (w0 * h[1] + w1 * h[4] + w2 * h[7]);
    p[3 * a + 2] = z - (w0 * h[2] + w1 * h[5] + w2 * h[8]);
    // clamped: rounding can put a coordinate a hair outside its range
    let b0 = Math.floor((s0 - or0) * sc0), b1 = Math.floor((s1 - or1) * sc1), b2 = Math.floor((s2 - or2) * sc2);
    b0 = b0 < 0 ? 0 : b0 >= nb0 ? nb0 - 1 : b0;
    b1 = b1 < 0 ? 0 : b1 >= nb1 ? nb1 - 1 : b1;
    b2 = b2 < 0 ? 0 : b2 >= nb2 ? nb2 - 1 : b2;
    bin[3 * a] = b0; bin[3 * a + 1] = b1; bin[3 * a + 2] = b2;
  }
}

/** Counting sort, first pass: entries (real atoms and images) per extended bin into binStart[bin + 1]; their total. */
function countImages(bin: Int32Array, n: number, plan: GridPlan, binStart: Int32Array): number {
  const { nb, g, lo } = plan;
  const range0 = plan.shifts[0], range1 = plan.shifts[1], range2 = plan.shifts[2];
  const nb0 = nb[0], nb1 = nb[1], nb2 = nb[2];
  const g12 = g[1] * g[2], g2 = g[2];
  const lo0 = lo[0], lo1 = lo[1], lo2 = lo[2];
  let total = 0;
  for (let a = 0; a < n; a++) {
    const b0 = bin[3 * a], b1 = bin[3 * a + 1], b2 = bin[3 * a + 2];
    const u1 = range0[2 * b0 + 1], v0 = range1[2 * b1], v1 = range1[2 * b1 + 1], w0 = range2[2 * b2], w1 = range2[2 * b2 + 1];
    for (let S0 = range0[2 * b0]; S0 <= u1; S0++) {
      const e0 = (b0 + S0 * nb0 + lo0) * g12;
      for (let S1 = v0; S1 <= v1; S1++) {
        const e1 = e0 + (b1 + S1 * nb1 + lo1) * g2 + b2 + lo2 + 1;
        for (let S2 = w0; S2 <= w1; S2++) {
          binStart[e1 + S2 * nb2]++;
          total++;
        }
      }
    }
  }
  return total;
}

/** Counting sort, second pass: coordinates and atom index of every entry, in extended-bin order. */
function placeImages(p: Float64Array, bin: Int32Array, n: number, plan: GridPlan, fill: Int32Array, xyz: Float64Array, atom: Int32Array): void {
  const { h, nb, g, lo } = plan;
  const range0 = plan.shifts[0], range1 = plan.shifts[1], range2 = plan.shifts[2];
  const nb0 = nb[0], nb1 = nb[1], nb2 = nb[2];
  const g12 = g[1] * g[2], g2 = g[2];
  const lo0 = lo[0], lo1 = lo[1], lo2 = lo[2];
  const h0 = h[0], h1 = h[1], h2 = h[2], h3 = h[3], h4 = h[4], h5 = h[5], h6 = h[6], h7 = h[7], h8 = h[8];
  for (let a = 0; a < n; a++) {
    const b0 = bin[3 * a], b1 = bin[3 * a + 1], b2 = bin[3 * a + 2];
    const px = p[3 * a], py = p[3 * a + 1], pz = p[3 * a + 2];
    const u1 = range0[2 * b0 + 1], v0 = range1[2 * b1], v1 = range1[2 * b1 + 1], w0 = range2[2 * b2], w1 = range2[2 * b2 + 1];
    for (let S0 = range0[2 * b0]; S0 <= u1; S0++) {
      const e0 = (b0 + S0 * nb0 + lo0) * g12;
      for (let S1 = v0; S1 <= v1; S1++) {
        const e1 = e0 + (b1 + S1 * nb1 + lo1) * g2 + b2 + lo2;
        for (let S2 = w0; S2 <= w1; S2++) {
          const slot = fill[e1 + S2 * nb2]++;
          xyz[3 * slot] = px + S0 * h0 + S1 * h3 + S2 * h6;
          xyz[3 * slot + 1] = py + S0 * h1 + S1 * h4 + S2 * h7;
          xyz[3 * slot + 2] = pz + S0 * h2 + S1 * h5 + S2 * h8;
          atom[slot] = a;
        }
      }
    }
  }
}

/**
 * The bin offsets O (|O_k| <= m_k, lexicographically positive) whose bins can hold two points closer than `reach`, as
 * rows (StencilRows): the distance between bin parallelepipeds at offset O is min |sum_k u_k e_k| over
 * u_k in [O_k - 1, O_k + 1], a convex quadratic over a box, minimised exactly by enumerating its faces. For fixed
 * (O_0, O_1) the kept O_2 form an interval (a sublevel set of a convex function along a line); runs are split anyway
 * should rounding ever break one, so no kept offset is lost.
 */
function halfStencil(edges: Float64Array, m: [number, number, number], g: [number, number, number], reach: number): StencilRows {
  const heights = perpendicularWidths(edges);
  const G = new Float64Array(9);
  for (let p = 0; p < 3; p++) {
    for (let q = 0; q < 3; q++) {
      G[3 * p + q] = edges[3 * p] * edges[3 * q] + edges[3 * p + 1] * edges[3 * q + 1] + edges[3 * p + 2] * edges[3 * q + 2];
    }
  }
  const reach2 = reach * reach;
  const lo: number[] = [];
  const hi: number[] = [];
  for (let o0 = 0; o0 <= m[0]; o0++) {
    for (let o1 = o0 === 0 ? 0 : -m[1]; o1 <= m[1]; o1++) {
      const base = (o0 * g[1] + o1) * g[2];
      // row 0 starts at the bin itself
      let open = o0 === 0 && o1 === 0 ? 0 : null;
      let last = 0;
      for (let o2 = o0 === 0 && o1 === 0 ? 1 : -m[2]; o2 <= m[2]; o2++) {
        // cheap decisions first: the box contains u = O (keep if that is within reach); perpendicular separation
        // of the two bins along any axis is a lower bound (drop if beyond reach); otherwise solve exactly
        const cx = o0 * edges[0] + o1 * edges[3] + o2 * edges[6];
        const cy = o0 * edges[1] + o1 * edges[4] + o2 * edges[7];
        const cz = o0 * edges[2] + o1 * edges[5] + o2 * edges[8];
        let keep = cx * cx + cy * cy + cz * cz < reach2;
        if (!keep) {
          const sep = Math.max((Math.abs(o0) - 1) * heights[0], (Math.abs(o1) - 1) * heights[1], (Math.abs(o2) - 1) * heights[2]);
          keep = !(sep * sep >= reach2) && boxMinNorm2(G, [o0, o1, o2]) < reach2;
        }
        if (keep && open !== null && o2 === last + 1) {
          last = o2;
        } else if (keep) {
          if (open !== null) {
            lo.push(base + open);
            hi.push(base + last);
          }
          open = o2;
          last = o2;
        } else if (open !== null) {
          lo.push(base + open);
          hi.push(base + last);
          open = null;
        }
      }
      if (open !== null) {
        lo.push(base + open);
        hi.push(base + last);
      }
    }
  }
  return { lo: Int32Array.from(lo), hi: Int32Array.from(hi) };
}

/**
 * min over u in prod_k [O_k - 1, O_k + 1] of u^T G u (G positive definite 3x3, row-major): the squared distance between
 * two bin parallelepipeds whose edge vectors have Gram matrix G, at bin offset O. Exact: the minimiser of a convex
 * quadratic over a box is the unconstrained minimiser on one of its 27 faces (interior, facets, edges, corners),
 * so every face's stationary point that lies in the box is a candidate.
 */
export function boxMinNorm2(G: ArrayLike<number>, O: readonly [number, number, number] | readonly number[]): number {
  const g00 = G[0], g01 = G[1], g02 = G[2], g11 = G[4], g12 = G[5], g22 = G[8];
  const o0 = O[0], o1 = O[1], o2 = O[2];
  const tol = 1e-12;
  let best = Infinity;
  for (let code = 0; code < 27; code++) {
    const s0 = code % 3, s1 = ((code / 3) | 0) % 3, s2 = (code / 9) | 0; // 0 lower, 1 upper, 2 free
    let u0 = s0 === 0 ? o0 - 1 : o0 + 1;
    let u1 = s1 === 0 ? o1 - 1 : o1 + 1;
    let u2 = s2 === 0 ? o2 - 1 : o2 + 1;
    const nfree = (s0 === 2 ? 1 : 0) + (s1 === 2 ? 1 : 0) + (s2 === 2 ? 1 : 0);
    if (nfree === 3) {
      u0 = 0; u1 = 0; u2 = 0;
      if (Math.abs(o0) > 1 || Math.abs(o1) > 1 || Math.abs(o2) > 1) continue;
    } else if (nfree === 1) {
      if (s0 === 2) u0 = -(g01 * u1 + g02 * u2) / g00;
      else if (s1 === 2) u1 = -(g01 * u0 + g12 * u2) / g11;
      else u2 = -(g02 * u0 + g12 * u1) / g22;
    } else if (nfree === 2) {
      if (s0 !== 2) {
        // free u1, u2
        const r1 = -g01 * u0, r2 = -g02 * u0, det = g11 * g22 - g12 * g12;
        u1 = (g22 * r1 - g12 * r2) / det;
        u2 = (g11 * r2 - g12 * r1) / det;
      } else if (s1 !== 2) {
        const r0 = -g01 * u1, r2 = -g12 * u1, det = g00 * g22 - g02 * g02;
        u0 = (g22 * r0 - g02 * r2) / det;
        u2 = (g00 * r2 - g02 * r0) / det;
      } else {
        const r0 = -g02 * u2, r1 = -g12 * u2, det = g00 * g11 - g01 * g01;
        u0 = (g11 * r0 - g01 * r1) / det;
        u1 = (g00 * r1 - g01 * r0) / det;
      }
    }
    if (u0 < o0 - 1 - tol || u0 > o0 + 1 + tol || u1 < o1 - 1 - tol || u1 > o1 + 1 + tol || u2 < o2 - 1 - tol || u2 > o2 + 1 + tol) continue;
    const v = g00 * u0 * u0 + g11 * u1 * u1 + g22 * u2 * u2 + 2 * (g01 * u0 * u1 + g02 * u0 * u2 + g12 * u1 * u2);
    if (v < best) best = v;
  }
  return Math.max(0, best);
}

/**
 * Visit every pair of atoms closer than `cutoff` (Å; strictly less) exactly once: i <= j; i === j for an atom and a
 * periodic image of itself; pairs with different lattice shifts are visited separately; (dx, dy, dz) = r_j + shift - r_i
 * with the original (unwrapped) positions. Works for any triclinic cell, mixed periodicity and non-periodic systems,
 * and for cutoffs larger than the cell. Throws NeighbourError for non-finite positions, a bad cutoff, or a pbc the cell
 * cannot support.
 */
export function forEachPair(system: AtomsGeometry, cutoff: number, visit: PairVisitor, options: NeighbourOptions = {}): void {
  const binFraction = options.binFraction;
  if (binFraction !== undefined && (!(binFraction > 0) || !Number.isFinite(binFraction))) {
    throw new NeighbourError(`binFraction must be a positive finite number, got ${binFraction}`);
  }
  const { n, plan } = planFor(system, cutoff, binFraction);
  // the WebAssembly port of the loops below (same pairs, same order, same numbers), when it is available
  if (kernelPairs(system.positions, n, plan, cutoff, visit)) return;
  const scratch = idleScratch ?? new GridScratch();
  idleScratch = null;
  try {
    pairLoop(fillGrid(system.positions, n, plan, scratch), cutoff, visit);
  } finally {
    idleScratch = scratch.bytes <= MAX_KEPT_SCRATCH ? scratch : new GridScratch();
  }
}

function pairLoop(grid: Grid, cutoff: number, visit: PairVisitor): void {
  const { xyz, atom, binStart, nb, g, lo, rows } = grid;
  const c2 = cutoff * cutoff;
  const rlo = rows.lo, rhi = rows.hi;
  const nr = rlo.length;
  for (let b0 = 0; b0 < nb[0]; b0++) {
    for (let b1 = 0; b1 < nb[1]; b1++) {
      const rowBase = ((b0 + lo[0]) * g[1] + (b1 + lo[1])) * g[2] + lo[2];
      for (let b2 = 0; b2 < nb[2]; b2++) {
        const bin = rowBase + b2;
        const start = binStart[bin], end = binStart[bin + 1];
        if (start === end) continue;
        for (let r = 0; r < nr; r++) {
          // row 0 begins with the bin itself: each atom against the atoms after it
          const s0 = r === 0 ? -1 : binStart[bin + rlo[r]];
          const e = binStart[bin + rhi[r] + 1];
          if (s0 === e) continue;
          for (let a = start; a < end; a++) {
            const xi = xyz[3 * a], yi = xyz[3 * a + 1], zi = xyz[3 * a + 2];
            for (let b = r === 0 ? a + 1 : s0; b < e; b++) {
              const dx = xyz[3 * b] - xi, dy = xyz[3 * b + 1] - yi, dz = xyz[3 * b + 2] - zi;
              const d2 = dx * dx + dy * dy + dz * dz;
              if (d2 < c2) {
                const i = atom[a], j = atom[b];
                if (i <= j) visit(i, j, Math.sqrt(d2), dx, dy, dz);
                else visit(j, i, Math.sqrt(d2), -dx, -dy, -dz);
              }
            }
          }
        }
      }
    }
  }
}

/** Number of neighbours of each atom within the cutoff (each periodic image counts; an atom's own images count). */
export function countNeighbours(system: AtomsGeometry, cutoff: number): Int32Array {
  const n = system.positions.length / 3;
  const count = new Int32Array(n);
  forEachPair(system, cutoff, (i, j) => {
    count[i]++;
    count[j]++;
  });
  return count;
}

/**
 * Full neighbour list in compressed sparse row form: the neighbours of atom i are entries offsets[i] .. offsets[i+1]-1;
 * entry e holds the neighbour index, distance and vector (r_neighbour + shift - r_i) at vectors[3e..3e+2].
 * Each pair appears twice (once from each side; a self-image pair appears as two entries of atom i, S and -S).
 * Within an atom's row entries are in no particular order.
 */
export interface NeighbourList {
  offsets: Int32Array;
  neighbours: Int32Array;
  distances: Float64Array;
  vectors: Float64Array;
}

export function neighbourList(system: AtomsGeometry, cutoff: number): NeighbourList {
  const n = system.positions.length / 3;
  // Collect the half list in growable typed arrays, then scatter both directions.
  let cap = Math.max(16, 8 * n);
  let pi = new Int32Array(cap), pj = new Int32Array(cap);
  let pd = new Float64Array(cap), pv = new Float64Array(3 * cap);
  let np = 0;
  const count = new Int32Array(n + 1);
  forEachPair(system, cutoff, (i, j, d, dx, dy, dz) => {
    if (np === cap) {
      cap *= 2;
      const ni = new Int32Array(cap); ni.set(pi); pi = ni;
      const nj = new Int32Array(cap); nj.set(pj); pj = nj;
      const nd = new Float64Array(cap); nd.set(pd); pd = nd;
      const nv = new Float64Array(3 * cap); nv.set(pv); pv = nv;
    }
    pi[np] = i; pj[np] = j; pd[np] = d;
    pv[3 * np] = dx; pv[3 * np + 1] = dy; pv[3 * np + 2] = dz;
    np++;
    count[i + 1]++;
    count[j + 1]++;
  });
  for (let a = 0; a < n; a++) count[a + 1] += count[a];
  const offsets = count;
  const fill = offsets.slice(0, n);
  const neighbours = new Int32Array(2 * np);
  const distances = new Float64Array(2 * np);
  const vectors = new Float64Array(6 * np);
  for (let q = 0; q < np; q++) {
    const i = pi[q], j = pj[q];
    let e = fill[i]++;
    neighbours[e] = j; distances[e] = pd[q];
    vectors[3 * e] = pv[3 * q]; vectors[3 * e + 1] = pv[3 * q + 1]; vectors[3 * e + 2] = pv[3 * q + 2];
    e = fill[j]++;
    neighbours[e] = i; distances[e] = pd[q];
    vectors[3 * e] = -pv[3 * q]; vectors[3 * e + 1] = -pv[3 * q + 1]; vectors[3 * e + 2] = -pv[3 * q + 2];
  }
  return { offsets, neighbours, distances, vectors };
}

/** The closest pair of a system: distance and atoms (i <= j; i === j when the closest is an atom's own image). */
export interface ClosestPair {
  /** Infinity when there is no pair at all (fewer than two atoms and no periodicity). */
  distance: number;
  i: number;
  j: number;
  /** r_j + shift - r_i. */
  vector: [number, number, number];
}

/** Rough extent data used to pick starting cutoffs and an upper bound beyond which every pair has been seen. */
const imageCache = new Map<string, number>();

/** Distance from an atom to its nearest own periodic image (Infinity without periodicity), cached per cell. */
function shortestImage(cell: Float64Array | null, pbc: Pbc): number {
  const key = cell === null ? `${pbc}` : `${pbc} ${Array.prototype.join.call(cell, ' ')}`;
  let d = imageCache.get(key);
  if (d === undefined) {
    d = new MinimumImager(cell, pbc).shortestLatticeVector().distance;
    if (imageCache.size >= PLAN_CACHE_SIZE) imageCache.delete(imageCache.keys().next().value as string);
    imageCache.set(key, d);
  }
  return d;
}

/** The last searchScale result for a fully periodic cell (it depends on the cell and the atom count only). */
let lastScale: { cell: Float64Array; n: number; scale: { start: number; bound: number; selfImage: number } } | null = null;

function searchScale(system: AtomsGeometry): { start: number; bound: number; selfImage: number } {
  const n = system.positions.length / 3;
  const cell = system.cell;
  const fullyPeriodic = cell !== null && cell.length === 9 && system.pbc[0] && system.pbc[1] && system.pbc[2];
  if (fullyPeriodic && lastScale !== null && lastScale.n === n && sameCell(lastScale.cell, cell)) return lastScale.scale;
  const h = effectiveCell(system.cell, system.pbc);
  const periodic = isPeriodic(system.cell, system.pbc);
  const per = periodic ? system.pbc : ([false, false, false] as Pbc);
  const inv = cellInverse(h);
  const w = perpendicularWidths(h);
  // Fractional extents of the wrapped positions: [0, 1] bounds them along periodic axes, so a fully periodic system
  // needs no pass over its atoms (the bound below only has to be an upper bound).
  const smin = [0, 0, 0], smax = [1, 1, 1];
  if (!fullyPeriodic) {
    smin.fill(Infinity);
    smax.fill(-Infinity);
    const pos = system.positions;
    for (let a = 0; a < n; a++) {
      const xx = pos[3 * a], yy = pos[3 * a + 1], zz = pos[3 * a + 2];
      for (let k = 0; k < 3; k++) {
        let sk = xx * inv[k] + yy * inv[3 + k] + zz * inv[6 + k];
        if (per[k]) sk -= Math.floor(sk);
        if (sk < smin[k]) smin[k] = sk;
        if (sk > smax[k]) smax[k] = sk;
      }
    }
  }
  let volume = 1;
  let diag2 = 0;
  for (let k = 0; k < 3; k++) {
    const ext = n > 0 ? (smax[k] - smin[k]) * w[k] : 0;
    volume *= per[k] ? w[k] : Math.max(ext, 1);
    // Extent of the wrapped positions along axis k as a vector length (|row k| times fractional extent).
    const len = Math.hypot(h[3 * k], h[3 * k + 1], h[3 * k + 2]);
    diag2 += n > 0 ? ((smax[k] - smin[k]) * len) ** 2 : 0;
  }
  const selfImage = shortestImage(system.cell, system.pbc);
  // Two wrapped positions differ by at most sum_k extent_k |row k| <= sqrt(3 diag2); an atom's nearest own image is
  // selfImage away. So every pair that exists has its closest image within `bound`.
  const bound = Math.max(Math.sqrt(3 * diag2), selfImage < Infinity ? selfImage : 0) * (1 + 1e-9) + 1e-9;
  const start = Math.max(Math.cbrt(volume / Math.max(n, 1)), 1e-6);
  const scale = { start, bound, selfImage };
  if (fullyPeriodic) lastScale = { cell: Float64Array.from(cell), n, scale };
  return scale;
}

/**
 * The closest pair (exact, for any cell): including an atom and its own periodic image in small cells.
 * Runs the neighbour search with a cutoff near the mean spacing and doubles it until a pair is found.
 */
export function minimumDistance(system: AtomsGeometry): ClosestPair {
  const n = checkInput(system, 1);
  const none: ClosestPair = { distance: Infinity, i: -1, j: -1, vector: [NaN, NaN, NaN] };
  if (n === 0) return none;
  const { start, bound, selfImage } = searchScale(system);
  let cutoff = Math.min(start, selfImage * (1 + 1e-9) + 1e-12);
  for (;;) {
    let best = Infinity, bi = -1, bj = -1, vx = 0, vy = 0, vz = 0;
    forEachPair(system, cutoff, (i, j, d, dx, dy, dz) => {
      if (d < best || (d === best && (i < bi || (i === bi && j < bj)))) {
        best = d; bi = i; bj = j; vx = dx; vy = dy; vz = dz;
      }
    });
    if (bi >= 0) return { distance: best, i: bi, j: bj, vector: [vx, vy, vz] };
    if (cutoff >= bound) return none;
    cutoff = Math.min(cutoff * 2, Math.max(bound, cutoff));
  }
}

/**
 * Closest pair per group pair; distance[g*G+h] === distance[h*G+g], Infinity (and i = j = -1) where no such pair exists.
 * At [g*G+h], atom i is in group g and atom j in group h.
 */
export interface GroupClosest {
  groups: number;
  distance: Float64Array;
  i: Int32Array;
  j: Int32Array;
  /** With GroupSearchOptions.limits: every pair closer than its limit (i <= j), else null. */
  close: CloseList | null;
}

/**
 * The closest pair between every two groups of atoms (e.g. species), exact for any cell. `group[a]` in 0..G-1.
 * Grows the cutoff from the mean spacing; group pairs still unresolved after a few doublings (rare species far apart)
 * are finished by a direct minimum-image loop over their atoms when that is cheaper.
 */
export interface GroupSearchOptions {
  /**
   * Also visit every pair closer than `within` (Å), once each, from the same neighbour search: the first search
   * radius is raised to at least `within` (the minima stay exact). Pairs at `within` or beyond may be visited too.
   */
  within?: number;
  visit?: PairVisitor;
  /**
   * Contact limits by group pair (G x G, Å, limits[g G + h] for an atom of group g and one of group h): every pair
   * closer than its limit is listed in the result's `close`, from the same neighbour search (the first search radius
   * is raised to the largest limit; the minima stay exact).
   */
  limits?: Float64Array;
}

export function minimumDistanceByGroup(system: AtomsGeometry, group: ArrayLike<number>, groupCount: number, options: GroupSearchOptions = {}): GroupClosest {
  const n = checkInput(system, 1);
  if (group.length !== n) throw new NeighbourError(`group labels: expected ${n} (one per atom), found ${group.length}`);
  const G = groupCount;
  const size = new Float64Array(G);
  for (let a = 0; a < n; a++) {
    const q = group[a];
    if (!Number.isInteger(q) || q < 0 || q >= G) throw new NeighbourError(`group label of atom ${a} is ${q}: expected an integer from 0 to ${G - 1}`);
    size[q]++;
  }
  const distance = new Float64Array(G * G).fill(Infinity);
  const bi = new Int32Array(G * G).fill(-1), bj = new Int32Array(G * G).fill(-1);
  const limits = options.limits;
  if (limits !== undefined && limits.length !== G * G) throw new NeighbourError(`limits: expected ${G * G} values (groups x groups), found ${limits.length}`);
  let close: CloseList | null = limits === undefined ? null : { i: new Int32Array(0), j: new Int32Array(0), d: new Float64Array(0), count: 0 };
  if (n === 0) return { groups: G, distance, i: bi, j: bj, close };
  const periodic = isPeriodic(system.cell, system.pbc);
  // Which group pairs can have a pair at all.
  const wanted: number[] = [];
  for (let p = 0; p < G; p++) {
    for (let q = p; q < G; q++) {
      const exists = p === q ? size[p] >= 2 || (periodic && size[p] >= 1) : size[p] >= 1 && size[q] >= 1;
      if (exists) wanted.push(p * G + q);
    }
  }
  const { start, bound } = searchScale(system);
  let within = options.visit !== undefined && options.within !== undefined && options.within > 0 ? options.within : 0;
  if (within > 0 && !Number.isFinite(within)) throw new NeighbourError(`within must be a finite distance in Å, got ${within}`);
  if (limits !== undefined) {
    for (let k = 0; k < limits.length; k++) {
      if (!(limits[k] >= 0) || !Number.isFinite(limits[k])) throw new NeighbourError(`limits: expected finite distances in Å, found ${limits[k]} at ${k}`);
      if (limits[k] > within) within = limits[k];
    }
  }
  let cutoff = Math.max(start, within * (1 + 1e-9));
  const firstCutoff = start;
  const record = (i: number, j: number, d: number): void => {
    let p = group[i], q = group[j];
    let a = i, b = j;
    if (p > q) { const t = p; p = q; q = t; a = j; b = i; }
    const key = p * G + q;
    const cur = distance[key];
    if (d < cur || (d === cur && (a < bi[key] || (a === bi[key] && b < bj[key])))) {
      distance[key] = d; bi[key] = a; bj[key] = b;
    }
  };
  let open = wanted.slice();
  const extra = within > 0 && options.visit !== undefined ? options.visit : null;
  for (let pass = 0; ; pass++) {
    if (pass === 0 && limits !== undefined) {
      close = closePass(system, cutoff, { group, G, limits, distance, bi, bj }, record, extra);
    } else if (pass === 0 && extra !== null) {
      forEachPair(system, cutoff, (i, j, d, dx, dy, dz) => {
        record(i, j, d);
        extra(i, j, d, dx, dy, dz);
      });
    } else {
      forEachPair(system, cutoff, (i, j, d) => record(i, j, d));
    }
    open = open.filter((key) => !(distance[key] < Infinity));
    if (open.length === 0 || cutoff >= bound) break;
    // Direct finish for small remaining group pairs once the cutoff has grown well past the mean spacing.
    if (cutoff >= 8 * firstCutoff) {
      const cost = open.reduce((acc, key) => acc + size[Math.floor(key / G)] * size[key % G], 0);
      if (cost <= 2e7) {
        directGroups(system, group, G, open, record);
        open = [];
        break;
      }
    }
    cutoff = Math.min(cutoff * 2, Math.max(bound, cutoff));
  }
  for (let p = 0; p < G; p++) {
    for (let q = 0; q < p; q++) {
      distance[p * G + q] = distance[q * G + p];
      bi[p * G + q] = bj[q * G + p];
      bj[p * G + q] = bi[q * G + p];
    }
  }
  return { groups: G, distance, i: bi, j: bj, close };
}

/** The first pass with contact limits: minima recorded and close pairs listed (the kernel's, or in TypeScript). */
function closePass(system: AtomsGeometry, cutoff: number, m: GroupMinima, record: (i: number, j: number, d: number) => void, extra: PairVisitor | null): CloseList {
  const { group, G, limits } = m;
  if (extra === null) {
    const { n, plan } = planFor(system, cutoff, undefined, true);
    const fast = kernelClosePairs(system.positions, n, plan, cutoff, m);
    if (fast !== null) return fast;
  }
  let ci = new Int32Array(16), cj = new Int32Array(16), cd = new Float64Array(16);
  let count = 0;
  forEachPair(system, cutoff, (i, j, d, dx, dy, dz) => {
    record(i, j, d);
    if (d < limits[group[i] * G + group[j]]) {
      if (count === ci.length) {
        const grow = <T extends Int32Array | Float64Array>(a: T): T => {
          const b = new (a.constructor as new (n: number) => T)(2 * a.length);
          b.set(a);
          return b;
        };
        ci = grow(ci); cj = grow(cj); cd = grow(cd);
      }
      ci[count] = i; cj[count] = j; cd[count] = d;
      count++;
    }
    extra?.(i, j, d, dx, dy, dz);
  });
  return { i: ci.subarray(0, count), j: cj.subarray(0, count), d: cd.subarray(0, count), count };
}

function directGroups(
  system: AtomsGeometry,
  group: ArrayLike<number>,
  G: number,
  keys: number[],
  record: (i: number, j: number, d: number) => void,
): void {
  const n = system.positions.length / 3;
  const members: number[][] = Array.from({ length: G }, () => []);
  for (let a = 0; a < n; a++) members[group[a]].push(a);
  const imager = new MinimumImager(system.cell, system.pbc);
  const self = imager.shortestLatticeVector().distance;
  const pos = system.positions;
  for (const key of keys) {
    const p = Math.floor(key / G), q = key % G;
    const A = members[p], B = members[q];
    for (let u = 0; u < A.length; u++) {
      const i = A[u];
      if (p === q && self < Infinity) record(i, i, self);
      for (let v = p === q ? u + 1 : 0; v < B.length; v++) {
        const j = B[v];
        const d = imager.distance(pos[3 * j] - pos[3 * i], pos[3 * j + 1] - pos[3 * i + 1], pos[3 * j + 2] - pos[3 * i + 2]);
        record(i, j, d);
      }
    }
  }
}

/**
 * Closest pair per species pair, keyed "A-B" with the two symbols sorted alphabetically (as in the contacts gate JSON);
 * atom i has species A and atom j species B (i <= j when A = B). Only species pairs that can occur are present.
 */
export function minimumDistanceBySpecies(
  frame: AtomsGeometry & { species: readonly string[] },
): Map<string, { distance: number; i: number; j: number }> {
  const { names, group } = speciesGroups(frame.species);
  const res = minimumDistanceByGroup(frame, group, names.length);
  const out = new Map<string, { distance: number; i: number; j: number }>();
  const G = names.length;
  for (let p = 0; p < G; p++) {
    for (let q = p; q < G; q++) {
      const key = p * G + q;
      if (res.distance[key] < Infinity) out.set(`${names[p]}-${names[q]}`, { distance: res.distance[key], i: res.i[key], j: res.j[key] });
    }
  }
  return out;
}

/** The distinct species sorted (by code unit, as Array.prototype.sort does) and each atom's index into that list. */
export function speciesGroups(species: readonly string[]): { names: string[]; group: Int32Array } {
  const n = species.length;
  const group = new Int32Array(n);
  const seen = new Map<string, number>();
  const first: string[] = [];
  // species of neighbouring atoms are often the same string: one comparison instead of a lookup
  let last: string | undefined;
  let lastIndex = -1;
  for (let a = 0; a < n; a++) {
    const s = species[a];
    if (s !== last) {
      let k = seen.get(s);
      if (k === undefined) {
        k = first.length;
        seen.set(s, k);
        first.push(s);
      }
      last = s;
      lastIndex = k;
    }
    group[a] = lastIndex;
  }
  const names = first.slice().sort();
  if (names.some((s, k) => s !== first[k])) {
    const remap = new Int32Array(first.length);
    for (let k = 0; k < first.length; k++) remap[k] = names.indexOf(first[k]);
    for (let a = 0; a < n; a++) group[a] = remap[group[a]];
  }
  return { names, group };
}
