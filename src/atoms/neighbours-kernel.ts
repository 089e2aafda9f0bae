/**
 * forEachPair's fast path: the WebAssembly port of its binning and pair loops (kernels/neighbours.ts). The plan (bins,
 * padding, stencil, image shifts) is made in neighbours.ts as for the TypeScript loops; the kernel lists the pairs
 * into its memory a chunk at a time and they are handed to the visitor here, in the TypeScript loops' order and with
 * the same numbers bit for bit (test/atoms/neighbours-kernel.test.ts). Switched off with RATCHET_KERNELS=off.
 */
import type { GridPlan, PairVisitor } from './neighbours.js';
import { ensureMemory, kernelsEnabled, loadKernel, type WasmGlobal, type WasmMemory } from './wasm.js';

interface Exports {
  memory: WasmMemory;
  heapBase(): number;
  bin(plan: number, shifts: number, pos: number, n: number, wrapped: number, binOf: number, binStart: number, fill: number): number;
  place(plan: number, shifts: number, n: number, wrapped: number, binOf: number, fill: number, xyz: number, atom: number): void;
  pairs(
    plan: number, rows: number, xyz: number, atom: number, binStart: number, cutoff: number, from: number, soft: number, hard: number,
    outI: number, outJ: number, outD: number, outV: number,
  ): number;
  pairCount: WasmGlobal;
  closePairs(
    plan: number, rows: number, xyz: number, atom: number, binStart: number, cutoff: number, group: number, G: number, limits: number,
    bestD: number, bestI: number, bestJ: number, closeI: number, closeJ: number, closeD: number, cap: number,
  ): void;
  closeCount: WasmGlobal;
}

/** undefined: not loaded yet; null: unavailable. */
let kernel: Exports | null | undefined;
/** A visitor that starts another search gets the TypeScript loops for it (the kernel's memory is in use). */
let busy = false;
/** Pairs listed per chunk (grows when one bin holds more). */
let chunk = 4096;

/** Searches run by the kernel in this thread. */
let searches = 0;

/** How many searches the kernel ran in this thread so far. */
export function neighbourKernelStats(): { searches: number } {
  return { searches };
}

/** Largest module memory used here; beyond it the TypeScript loops run (they allocate per search instead). */
const MAX_MEMORY = 1536 << 20;

function load(): Exports | null {
  if (kernel === undefined) {
    const k = loadKernel<Exports>('neighbours');
    kernel = 'error' in k ? null : k.exports;
  }
  return kernel;
}

const align = (n: number, to: number) => Math.ceil(n / to) * to;

/** Where prepare() put things in the kernel's memory. */
interface Prepared {
  k: Exports;
  planAt: number;
  rowsAt: number;
  binStartAt: number;
  xyzAt: number;
  atomAt: number;
  /** First free offset after the grid. */
  freeAt: number;
}

/** Lay out the plan and the positions, bin the atoms and their images; null when the grid would not fit. */
function prepare(k: Exports, positions: Float64Array, n: number, plan: GridPlan): Prepared | null {
  const { nb, g, lo, rows, shifts, h, inv, per, origin, range } = plan;
  const nr = rows.lo.length;
  const nbins = g[0] * g[1] * g[2];
  const planAt = align(k.heapBase(), 16);
  const rowsAt = planAt + 256;
  const shiftsAt = align(rowsAt + 8 * nr, 8);
  const posAt = align(shiftsAt + 8 * (nb[0] + nb[1] + nb[2]), 8);
  const wrappedAt = posAt + 24 * n;
  const binOfAt = wrappedAt + 24 * n;
  const binStartAt = align(binOfAt + 12 * n, 8);
  const fillAt = align(binStartAt + 4 * (nbins + 1), 8);
  const afterFill = align(fillAt + 4 * nbins, 8);
  if (afterFill > MAX_MEMORY) return null;
  ensureMemory(k.memory, afterFill);
  const buf = k.memory.buffer;
  const f64 = new Float64Array(buf, planAt, 24);
  f64.set(h, 0);
  f64.set(inv, 9);
  f64[18] = origin[0]; f64[19] = origin[1]; f64[20] = origin[2];
  f64[21] = nb[0] / range[0]; f64[22] = nb[1] / range[1]; f64[23] = nb[2] / range[2];
  const i32 = new Int32Array(buf, planAt + 192, 13);
  for (let a = 0; a < 3; a++) {
    i32[a] = per[a] ? 1 : 0;
    i32[3 + a] = nb[a];
    i32[6 + a] = g[a];
    i32[9 + a] = lo[a];
  }
  i32[12] = nr;
  const rw = new Int32Array(buf, rowsAt, 2 * nr);
  for (let r = 0; r < nr; r++) {
    rw[2 * r] = rows.lo[r];
    rw[2 * r + 1] = rows.hi[r];
  }
  const sh = new Int32Array(buf, shiftsAt, 2 * (nb[0] + nb[1] + nb[2]));
  sh.set(shifts[0], 0);
  sh.set(shifts[1], 2 * nb[0]);
  sh.set(shifts[2], 2 * (nb[0] + nb[1]));
  new Float64Array(buf, posAt, 3 * n).set(positions);

  const total = k.bin(planAt, shiftsAt, posAt, n, wrappedAt, binOfAt, binStartAt, fillAt);
  const xyzAt = afterFill;
  const atomAt = xyzAt + 24 * total;
  const freeAt = align(atomAt + 4 * total, 8);
  if (freeAt > MAX_MEMORY) return null;
  ensureMemory(k.memory, freeAt);
  k.place(planAt, shiftsAt, n, wrappedAt, binOfAt, fillAt, xyzAt, atomAt);
  return { k, planAt, rowsAt, binStartAt, xyzAt, atomAt, freeAt };
}

/** Run the search in the kernel and visit every pair; false when the kernel is not used (nothing was visited). */
export function kernelPairs(positions: Float64Array, n: number, plan: GridPlan, cutoff: number, visit: PairVisitor): boolean {
  if (busy || !kernelsEnabled()) return false;
  const k = load();
  if (k === null) return false;
  busy = true;
  try {
    const g = prepare(k, positions, n, plan);
    if (g === null) return false;
    const outAt = g.freeAt;
    if (outAt + 40 * chunk > MAX_MEMORY) return false;
    ensureMemory(k.memory, outAt + 40 * chunk);
    const { nb } = plan;
    const cells = nb[0] * nb[1] * nb[2];
    for (let from = 0; from < cells; ) {
      const outD = outAt, outV = outD + 8 * chunk, outI = outV + 24 * chunk, outJ = outI + 4 * chunk;
      const next = k.pairs(g.planAt, g.rowsAt, g.xyzAt, g.atomAt, g.binStartAt, cutoff, from, chunk >> 1, chunk, outI, outJ, outD, outV);
      if (next < 0) {
        // one bin holds more pairs than the chunk: a larger chunk, the same bin again
        if (outAt + 80 * chunk > MAX_MEMORY) throw new Error('neighbour search: too many pairs in one bin for the kernel');
        chunk *= 2;
        ensureMemory(k.memory, outAt + 40 * chunk);
        continue;
      }
      const buf = k.memory.buffer;
      visitAll(k.pairCount.value, new Int32Array(buf, outI, chunk), new Int32Array(buf, outJ, chunk), new Float64Array(buf, outD, chunk), new Float64Array(buf, outV, 3 * chunk), visit);
      from = next;
    }
    searches++;
    return true;
  } finally {
    busy = false;
  }
}

function visitAll(count: number, I: Int32Array, J: Int32Array, D: Float64Array, V: Float64Array, visit: PairVisitor): void {
  for (let q = 0; q < count; q++) visit(I[q], J[q], D[q], V[3 * q], V[3 * q + 1], V[3 * q + 2]);
}

/** Pairs closer than their limit: atoms i <= j and distance, in the search's order. */
export interface CloseList {
  i: Int32Array;
  j: Int32Array;
  d: Float64Array;
  count: number;
}

/** The state of minimumDistanceByGroup's first pass: groups, limits (G x G, Å) and the minima so far (G x G). */
export interface GroupMinima {
  group: ArrayLike<number>;
  G: number;
  limits: Float64Array;
  distance: Float64Array;
  bi: Int32Array;
  bj: Int32Array;
}

/** Close pairs listed by the kernel per search at most; beyond, the TypeScript pass runs (a blown-up frame). */
const CLOSE_CAP = 1 << 16;

/**
 * The first pass of minimumDistanceByGroup with contact limits, in the kernel: updates the group minima (distance, i, j;
 * G x G, only g <= h entries) and returns the close pairs; null when the kernel is not used (nothing was changed).
 */
export function kernelClosePairs(positions: Float64Array, n: number, plan: GridPlan, cutoff: number, m: GroupMinima): CloseList | null {
  const { group, G, limits, distance, bi, bj } = m;
  if (busy || !kernelsEnabled() || limits.length !== G * G) return null;
  const k = load();
  if (k === null) return null;
  busy = true;
  try {
    const g = prepare(k, positions, n, plan);
    if (g === null) return null;
    const GG = G * G;
    const groupAt = g.freeAt;
    const limitsAt = align(groupAt + 4 * n, 8);
    const bestDAt = limitsAt + 8 * GG;
    const bestIAt = bestDAt + 8 * GG;
    const bestJAt = align(bestIAt + 4 * GG, 8);
    const closeDAt = align(bestJAt + 4 * GG, 8);
    const closeIAt = closeDAt + 8 * CLOSE_CAP;
    const closeJAt = closeIAt + 4 * CLOSE_CAP;
    const end = closeJAt + 4 * CLOSE_CAP;
    if (end > MAX_MEMORY) return null;
    ensureMemory(k.memory, end);
    const buf = k.memory.buffer;
    const gr = new Int32Array(buf, groupAt, n);
    if (group instanceof Int32Array) gr.set(group);
    else for (let a = 0; a < n; a++) gr[a] = group[a];
    new Float64Array(buf, limitsAt, GG).set(limits);
    const bd = new Float64Array(buf, bestDAt, GG);
    const bI = new Int32Array(buf, bestIAt, GG);
    const bJ = new Int32Array(buf, bestJAt, GG);
    bd.set(distance);
    bI.set(bi);
    bJ.set(bj);
    k.closePairs(g.planAt, g.rowsAt, g.xyzAt, g.atomAt, g.binStartAt, cutoff, groupAt, G, limitsAt, bestDAt, bestIAt, bestJAt, closeIAt, closeJAt, closeDAt, CLOSE_CAP);
    const count = k.closeCount.value;
    if (count > CLOSE_CAP) return null;
    distance.set(bd);
    bi.set(bI);
    bj.set(bJ);
    searches++;
    return {
      i: new Int32Array(buf, closeIAt, count).slice(),
      j: new Int32Array(buf, closeJAt, count).slice(),
      d: new Float64Array(buf, closeDAt, count).slice(),
      count,
    };
  } finally {
    busy = false;
  }
}
