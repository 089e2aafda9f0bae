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
    plan: number, stencil: number, xyz: number, atom: number, binStart: number, cutoff: number, from: number, soft: number, hard: number,
    outI: number, outJ: number, outD: number, outV: number,
  ): number;
  pairCount: WasmGlobal;
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

/** Run the search in the kernel and visit every pair; false when the kernel is not used (nothing was visited). */
export function kernelPairs(positions: Float64Array, n: number, plan: GridPlan, cutoff: number, visit: PairVisitor): boolean {
  if (busy || !kernelsEnabled()) return false;
  const k = load();
  if (k === null) return false;
  const { nb, g, lo, stencil, shifts, h, inv, per, origin, range } = plan;
  const nbins = g[0] * g[1] * g[2];
  const planAt = align(k.heapBase(), 16);
  const stencilAt = planAt + 256;
  const shiftsAt = align(stencilAt + 4 * stencil.length, 8);
  const posAt = align(shiftsAt + 8 * (nb[0] + nb[1] + nb[2]), 8);
  const wrappedAt = posAt + 24 * n;
  const binOfAt = wrappedAt + 24 * n;
  const binStartAt = align(binOfAt + 12 * n, 8);
  const fillAt = align(binStartAt + 4 * (nbins + 1), 8);
  const afterFill = align(fillAt + 4 * nbins, 8);
  if (afterFill > MAX_MEMORY) return false;
  busy = true;
  try {
    ensureMemory(k.memory, afterFill);
    let buf = k.memory.buffer;
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
    i32[12] = stencil.length;
    new Int32Array(buf, stencilAt, stencil.length).set(stencil);
    const sh = new Int32Array(buf, shiftsAt, 2 * (nb[0] + nb[1] + nb[2]));
    sh.set(shifts[0], 0);
    sh.set(shifts[1], 2 * nb[0]);
    sh.set(shifts[2], 2 * (nb[0] + nb[1]));
    new Float64Array(buf, posAt, 3 * n).set(positions);

    const total = k.bin(planAt, shiftsAt, posAt, n, wrappedAt, binOfAt, binStartAt, fillAt);
    const xyzAt = afterFill;
    const atomAt = xyzAt + 24 * total;
    const outAt = align(atomAt + 4 * total, 8);
    if (outAt + 40 * chunk > MAX_MEMORY) return false;
    ensureMemory(k.memory, outAt + 40 * chunk);
    k.place(planAt, shiftsAt, n, wrappedAt, binOfAt, fillAt, xyzAt, atomAt);

    const cells = nb[0] * nb[1] * nb[2];
    for (let from = 0; from < cells; ) {
      const outD = outAt, outV = outD + 8 * chunk, outI = outV + 24 * chunk, outJ = outI + 4 * chunk;
      const next = k.pairs(planAt, stencilAt, xyzAt, atomAt, binStartAt, cutoff, from, chunk >> 1, chunk, outI, outJ, outD, outV);
      if (next < 0) {
        // one bin holds more pairs than the chunk: a larger chunk, the same bin again
        if (outAt + 80 * chunk > MAX_MEMORY) throw new Error('neighbour search: too many pairs in one bin for the kernel');
        chunk *= 2;
        ensureMemory(k.memory, outAt + 40 * chunk);
        continue;
      }
      buf = k.memory.buffer;
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
