/**
 * The WebAssembly fast path for the atom lines of a frame (source: kernels/xyz-lines.ts, built by
 * `npm run build:kernels` into kernels/build/xyz-lines.wasm).
 *
 * It parses species, real and integer columns and skips the others, with the same rules and the same values as the
 * TypeScript parser in atoms.ts; it gives up on anything else (logical or string columns asked for, nan/inf, long
 * significands, a species token longer than 8 bytes, a wrong column count, bad text, a truncated block). When it
 * gives up, parseAtoms parses the frame again in TypeScript, which returns the values or throws the exact error
 * (file, line, column). So results never depend on which path ran; test/atoms/xyz/kernel.test.ts compares both.
 *
 * Why: the module is compiled in about 2 ms, while the JavaScript parser needs a JIT warm-up of 0.1-0.25 s in every
 * thread that runs it, and the kernel counts the skipped columns 16 bytes at a time (WebAssembly SIMD). Measured
 * figures are in bench/RESULTS.md.
 *
 * RATCHET_KERNELS=off in the environment (or setKernels(false) in src/atoms/wasm.ts) uses the TypeScript parser only.
 */
import type { AtomBlock } from './atoms.js';
import { ensureMemory, kernelsEnabled, loadKernel, type WasmGlobal, type WasmMemory } from '../wasm.js';
import type { Layout } from './properties.js';

/** Operation kinds, as in kernels/xyz-lines.ts. */
const SKIP = 0;
const REAL = 1;
const INT = 2;
const SPECIES = 5;

/** Frames whose atom lines take more bytes than this are left to the TypeScript parser (bounds the module's memory). */
const MAX_TEXT = 64 << 20;

interface Exports {
  memory: WasmMemory;
  parseLines(text: number, limit: number, natoms: number, ops: number, nops: number, rest: number, speciesOut: number): number;
  heapBase(): number;
  speciesTable(): number;
  endOffset: WasmGlobal;
  speciesCount: WasmGlobal;
}

interface Kernel {
  x: Exports;
  heap: number;
  table: number;
  u8: Uint8Array;
}

/** undefined: not loaded yet; null: unavailable. */
let kernel: Kernel | null | undefined;

/** Frames parsed by the kernel and frames it handed back to the TypeScript parser, in this thread. */
const stats = { parsed: 0, handedBack: 0 };

/** How many frames the kernel parsed and handed back in this thread so far (a copy). */
export function xyzKernelStats(): { parsed: number; handedBack: number } {
  return { ...stats };
}

function load(): Kernel | null {
  if (kernel === undefined) {
    const k = loadKernel<Exports>('xyz-lines');
    kernel = 'error' in k ? null : { x: k.exports, heap: (k.exports.heapBase() + 15) & ~15, table: k.exports.speciesTable(), u8: new Uint8Array(k.exports.memory.buffer) };
  }
  return kernel;
}

interface Op {
  kind: number;
  width: number;
  /** The property's name (null for merged skips). */
  name: string | null;
  /** The positions. */
  pos: boolean;
  /** Kept as a column of the frame. */
  keep: boolean;
  /** The Z column, read to name the atoms (no species column). */
  z: boolean;
  type: 'R' | 'I';
}

/** The line program of a layout: operations, values per line parsed, tokens left to count (-1: not counted). */
interface Program {
  ops: Op[];
  rest: number;
}

/**
 * Programs per layout (layouts are cached by their Properties text) and columns wanted: weakly keyed on both, since
 * every reading of a file makes its own `wanted` set. Index 1 with positions parsed, 0 without.
 */
const programs = new WeakMap<Layout, { all: (Program | null)[]; some: WeakMap<Set<string>, (Program | null)[]> }>();

/** The line program (as atoms.ts builds it), or null when the layout needs the TypeScript parser. */
function programFor(layout: Layout, wanted: Set<string> | null, parsePositions: boolean): Program | null {
  let byLayout = programs.get(layout);
  if (byLayout === undefined) programs.set(layout, (byLayout = { all: [], some: new WeakMap() }));
  let pair = wanted === null ? byLayout.all : byLayout.some.get(wanted);
  if (pair === undefined) byLayout.some.set(wanted!, (pair = []));
  const slot = parsePositions ? 1 : 0;
  let prog = pair[slot];
  if (prog === undefined) pair[slot] = prog = makeProgram(layout, wanted, parsePositions);
  return prog;
}

/** One operation per property, neighbouring skips merged, trailing skips only counted. */
function makeProgram(layout: Layout, wanted: Set<string> | null, parsePositions: boolean): Program | null {
  const ops: Op[] = [];
  const skip = (width: number) => {
    const last = ops[ops.length - 1];
    if (last !== undefined && last.kind === SKIP) last.width += width;
    else ops.push({ kind: SKIP, width, name: null, pos: false, keep: false, z: false, type: 'R' });
  };
  for (let p = 0; p < layout.props.length; p++) {
    const prop = layout.props[p];
    const needZ = p === layout.z && layout.species < 0;
    if (p === layout.species) {
      ops.push({ kind: SPECIES, width: 1, name: prop.name, pos: false, keep: false, z: false, type: 'R' });
    } else if (p === layout.pos) {
      if (parsePositions) ops.push({ kind: REAL, width: 3, name: prop.name, pos: true, keep: false, z: false, type: 'R' });
      else skip(prop.width);
    } else {
      const keep = wanted === null || wanted.has(prop.name);
      if (!keep && !needZ) skip(prop.width);
      else if (prop.type === 'R' || prop.type === 'I') {
        ops.push({ kind: prop.type === 'R' ? REAL : INT, width: prop.width, name: prop.name, pos: false, keep, z: needZ, type: prop.type });
      } else return null; // logical and string columns: the TypeScript parser
    }
  }
  while (ops.length > 0 && ops[ops.length - 1].kind === SKIP) ops.pop();
  let parsed = 0;
  for (const op of ops) parsed += op.width;
  return { ops, rest: layout.plain ? -1 : layout.ncols - parsed };
}

/**
 * Parse `natoms` atom lines in buf[start, end) with the kernel, or return null (then the caller parses them itself):
 * same arguments and same result as parseAtoms in atoms.ts.
 */
export function parseAtomsFast(
  buf: Uint8Array,
  start: number,
  end: number,
  natoms: number,
  layout: Layout,
  wanted: Set<string> | null,
  parsePositions: boolean,
): AtomBlock | null {
  if (!kernelsEnabled() || end - start > MAX_TEXT || natoms <= 0) return null;
  const k = load();
  if (k === null) return null;
  const prog = programFor(layout, wanted, parsePositions);
  if (prog === null) return null;
  const ops = prog.ops;

  // Memory: program, text (+ '\n' sentinel and padding), species ids, outputs.
  const len = end - start;
  const opsAt = k.heap;
  const textAt = align(opsAt + 12 * ops.length, 16);
  const speciesAt = align(textAt + len + 64, 16);
  let cursor = align(speciesAt + natoms, 8);
  const dests: number[] = [];
  for (const op of ops) {
    dests.push(cursor);
    if (op.kind === REAL || op.kind === INT) cursor += 8 * natoms * op.width;
  }
  const mem = k.x.memory;
  if (ensureMemory(mem, cursor + 64)) k.u8 = new Uint8Array(mem.buffer);
  const u8 = k.u8;
  const code = new Int32Array(mem.buffer, opsAt, 3 * ops.length);
  for (let o = 0; o < ops.length; o++) {
    code[3 * o] = ops[o].kind;
    code[3 * o + 1] = ops[o].width;
    code[3 * o + 2] = dests[o];
  }
  u8.set(buf.subarray(start, end), textAt);
  u8.fill(10, textAt + len, textAt + len + 64);
  if (k.x.parseLines(textAt, textAt + len, natoms, opsAt, ops.length, prog.rest, speciesAt) !== 1) {
    stats.handedBack++;
    return null;
  }
  stats.parsed++;

  // (positions are zeros when asked for but absent, as in atoms.ts)
  const positions = new Float64Array(parsePositions && layout.pos < 0 ? 3 * natoms : 0);
  const block: AtomBlock = { species: new Array(natoms), positions, arrays: new Map(), z: null, end: start + (k.x.endOffset.value - textAt) };
  for (let o = 0; o < ops.length; o++) {
    const op = ops[o];
    if (op.kind === SPECIES) {
      nameAtoms(block.species, speciesNames(k), u8, speciesAt);
    } else if (op.kind !== SKIP) {
      const values = new Float64Array(mem.buffer, dests[o], natoms * op.width).slice();
      if (op.pos) block.positions = values;
      if (op.keep) block.arrays.set(op.name!, { type: op.type, width: op.width, values });
      if (op.z) block.z = values;
    }
  }
  return block;
}

/** The species tokens of the last parse, by id. */
function speciesNames(k: Kernel): string[] {
  const count = k.x.speciesCount.value;
  const names: string[] = [];
  for (let q = 0; q < count; q++) {
    const e = k.table + 16 * q;
    names.push(Buffer.from(k.x.memory.buffer, e, k.u8[e + 8]).toString('utf8'));
  }
  return names;
}

function nameAtoms(species: string[], names: string[], ids: Uint8Array, at: number): void {
  for (let a = 0; a < species.length; a++) species[a] = names[ids[at + a]];
}

function align(n: number, to: number): number {
  return Math.ceil(n / to) * to;
}
