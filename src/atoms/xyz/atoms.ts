/**
 * The per-atom lines of a frame, parsed byte by byte (no per-line strings): one pass over the bytes,
 * numbers through numbers.ts, unwanted columns skipped without being parsed.
 */
import type { AtomColumn } from '../frame.js';
import { XyzError, shown, type Where } from './errors.js';
import { cursor, parseIntAt, parseRealAt, tokenText } from './numbers.js';
import { parseAtomsFast } from './kernel.js';
import type { Layout } from './properties.js';

const SKIP = 0;
const REAL = 1;
const INT = 2;
const BOOL = 3;
const STR = 4;
const SPECIES = 5;

export interface AtomBlock {
  species: string[];
  positions: Float64Array;
  /** Per-atom columns other than species and pos that were asked for, in file order. */
  arrays: Map<string, AtomColumn>;
  /** The Z column when it was parsed (to name the atoms when there is no species column). */
  z: Float64Array | null;
  /** Offset after the last atom line. */
  end: number;
}

/** Species names are short: decoded once per distinct byte pattern. */
const speciesCache = new Map<number, string>();

function speciesAt(buf: Uint8Array, p: number, e: number): string {
  const len = e - p;
  if (len <= 3) {
    const key = len | (buf[p] << 2) | ((len > 1 ? buf[p + 1] : 0) << 10) | ((len > 2 ? buf[p + 2] : 0) << 18);
    let s = speciesCache.get(key);
    if (s === undefined) {
      s = Buffer.from(buf.buffer, buf.byteOffset + p, len).toString('utf8');
      speciesCache.set(key, s);
    }
    return s;
  }
  return Buffer.from(buf.buffer, buf.byteOffset + p, len).toString('utf8');
}

function isTrue(buf: Uint8Array, p: number, e: number): number {
  const len = e - p;
  const c = buf[p];
  if (len === 1) return c === 84 ? 1 : c === 70 ? 0 : -1; // T F
  const w = Buffer.from(buf.buffer, buf.byteOffset + p, len).toString('latin1');
  if (w === 'True' || w === 'true' || w === 'TRUE') return 1;
  if (w === 'False' || w === 'false' || w === 'FALSE') return 0;
  return -1;
}

/**
 * Parse `natoms` atom lines starting at buf[start]. Every line must end with '\n' (the scanner guarantees
 * it, adding one at the end of a file that lacks it). `wanted` = names of the columns to keep besides
 * species and pos (null: all). `lastLineTruncated` marks a file whose last line had no newline (for messages).
 * `end`: where the frame's lines end in buf (after the last '\n'), when known: the WebAssembly parser (kernel.ts)
 * is tried first; whenever it gives up, the lines are parsed here (same values, and the exact errors).
 */
export function parseAtoms(
  buf: Uint8Array,
  start: number,
  natoms: number,
  layout: Layout,
  wanted: Set<string> | null,
  where: Where,
  lastLineOpen = -1,
  parsePositions = true,
  end = -1,
): AtomBlock {
  if (end >= 0) {
    const fast = parseAtomsFast(buf, start, end, natoms, layout, wanted, parsePositions);
    if (fast !== null) return fast;
  }
  const ncols = layout.ncols;
  const species: string[] = new Array(natoms);
  const positions = new Float64Array(parsePositions ? 3 * natoms : 0);
  const arrays = new Map<string, AtomColumn>();
  let z: Float64Array | null = null;
  // The line as a list of operations, one per property up to the last one parsed (neighbouring skipped
  // properties merged): few dispatches per line, and each destination array looked up once per property.
  const opKind: number[] = [];
  const opWidth: number[] = [];
  const opFirst: number[] = [];
  const opReal: (Float64Array | null)[] = [];
  const opBool: (Uint8Array | null)[] = [];
  const opStr: (string[] | null)[] = [];
  const push = (kind: number, width: number, first: number, r: Float64Array | null, b: Uint8Array | null, t: string[] | null) => {
    const last = opKind.length - 1;
    if (kind === SKIP && last >= 0 && opKind[last] === SKIP) {
      opWidth[last] += width;
      return;
    }
    opKind.push(kind);
    opWidth.push(width);
    opFirst.push(first);
    opReal.push(r);
    opBool.push(b);
    opStr.push(t);
  };
  for (let k = 0; k < layout.props.length; k++) {
    const prop = layout.props[k];
    const isSpecies = k === layout.species;
    const isPos = k === layout.pos;
    const needZ = k === layout.z && layout.species < 0;
    const keep = !isSpecies && !isPos && (wanted === null || wanted.has(prop.name));
    if (isSpecies) {
      push(SPECIES, 1, prop.first, null, null, null);
    } else if (isPos) {
      if (parsePositions) push(REAL, 3, prop.first, positions, null, null);
      else push(SKIP, prop.width, prop.first, null, null, null);
    } else if (!keep && !needZ) {
      push(SKIP, prop.width, prop.first, null, null, null);
    } else if (prop.type === 'R' || prop.type === 'I') {
      const values = new Float64Array(natoms * prop.width);
      push(prop.type === 'R' ? REAL : INT, prop.width, prop.first, values, null, null);
      if (keep) arrays.set(prop.name, { type: prop.type, width: prop.width, values });
      if (needZ) z = values;
    } else if (prop.type === 'L') {
      const values = new Uint8Array(natoms * prop.width);
      push(BOOL, prop.width, prop.first, null, values, null);
      arrays.set(prop.name, { type: 'L', width: prop.width, values });
    } else {
      const values: string[] = new Array(natoms * prop.width);
      push(STR, prop.width, prop.first, null, null, values);
      arrays.set(prop.name, { type: 'S', width: prop.width, values });
    }
  }
  // Trailing skipped columns are only counted (to check the line's column count).
  if (opKind[opKind.length - 1] === SKIP) {
    opKind.pop();
    opWidth.pop();
    opFirst.pop();
  }
  const nops = opKind.length;
  const parsed = nops === 0 ? 0 : opFirst[nops - 1] + opWidth[nops - 1];

  // A 32-bit view of the bytes (word k holds bytes shift + 4k .. shift + 4k + 3) for counting skipped columns.
  const shift = (4 - (buf.byteOffset & 3)) & 3;
  const words = LITTLE_ENDIAN && buf.length >= shift + 4 ? new Int32Array(buf.buffer, buf.byteOffset + shift, (buf.length - shift) >> 2) : null;

  let p = start;
  for (let a = 0; a < natoms; a++) {
    const lineStart = p;
    const e = indexOfNewline(buf, p);
    for (let o = 0; o < nops; o++) {
      const w = opWidth[o];
      switch (opKind[o]) {
        case SKIP:
          for (let k = 0; k < w; k++) {
            while (p < e && buf[p] <= 32) p++;
            if (p >= e) throw columnCountError(buf, lineStart, e, layout, where, a, lastLineOpen);
            while (p < e && buf[p] > 32) p++;
          }
          break;
        case REAL: {
          const arr = opReal[o]!;
          let idx = a * w;
          for (let k = 0; k < w; k++) {
            while (p < e && buf[p] <= 32) p++;
            if (p >= e) throw columnCountError(buf, lineStart, e, layout, where, a, lastLineOpen);
            const v = fastReal(buf, p);
            if (!cursor.ok) throw valueError(buf, p, layout, opFirst[o] + k, where, a, 'a real number');
            arr[idx++] = v;
            p = cursor.end;
          }
          break;
        }
        case INT: {
          const arr = opReal[o]!;
          for (let k = 0; k < w; k++) {
            while (p < e && buf[p] <= 32) p++;
            if (p >= e) throw columnCountError(buf, lineStart, e, layout, where, a, lastLineOpen);
            const v = parseIntAt(buf, p);
            if (!cursor.ok) throw valueError(buf, p, layout, opFirst[o] + k, where, a, 'an integer');
            arr[a * w + k] = v;
            p = cursor.end;
          }
          break;
        }
        case BOOL: {
          const arr = opBool[o]!;
          for (let k = 0; k < w; k++) {
            while (p < e && buf[p] <= 32) p++;
            if (p >= e) throw columnCountError(buf, lineStart, e, layout, where, a, lastLineOpen);
            const s = p;
            while (p < e && buf[p] > 32) p++;
            const b = isTrue(buf, s, p);
            if (b < 0) throw valueError(buf, s, layout, opFirst[o] + k, where, a, 'a logical (T, F, True, False, true, false)');
            arr[a * w + k] = b;
          }
          break;
        }
        case STR: {
          const arr = opStr[o]!;
          for (let k = 0; k < w; k++) {
            while (p < e && buf[p] <= 32) p++;
            if (p >= e) throw columnCountError(buf, lineStart, e, layout, where, a, lastLineOpen);
            const s = p;
            while (p < e && buf[p] > 32) p++;
            arr[a * w + k] = Buffer.from(buf.buffer, buf.byteOffset + s, p - s).toString('utf8');
          }
          break;
        }
        default: {
          while (p < e && buf[p] <= 32) p++;
          if (p >= e) throw columnCountError(buf, lineStart, e, layout, where, a, lastLineOpen);
          const s = p;
          while (p < e && buf[p] > 32) p++;
          species[a] = speciesAt(buf, s, p);
        }
      }
    }
    if (!layout.plain) {
      // Count the remaining columns without parsing them.
      const n = parsed + countTokens(buf, words, shift, p, e);
      if (n !== ncols) throw columnCountError(buf, lineStart, e, layout, where, a, lastLineOpen);
    }
    p = e + 1;
  }
  return { species, positions, arrays, z, end: p };
}

const POW10 = [1e0, 1e1, 1e2, 1e3, 1e4, 1e5, 1e6, 1e7, 1e8, 1e9, 1e10, 1e11, 1e12, 1e13, 1e14, 1e15];

/**
 * The common case of parseRealAt kept small enough to be inlined: [-]digits[.digits] with at most 15
 * digits, ended by a separator. Exact by the same argument (integer below 2^53 over an exact power of ten).
 */
function fastReal(buf: Uint8Array, p: number): number {
  const start = p;
  let c = buf[p];
  const neg = c === 45;
  if (neg) c = buf[++p];
  let m = 0;
  let nd = 0;
  let frac = 0;
  while (c >= 48 && c <= 57) {
    m = m * 10 + (c - 48);
    nd++;
    c = buf[++p];
  }
  if (c === 46) {
    c = buf[++p];
    while (c >= 48 && c <= 57) {
      m = m * 10 + (c - 48);
      frac++;
      c = buf[++p];
    }
  }
  if (c > 32 || nd + frac > 15 || nd + frac === 0) return parseRealAt(buf, start);
  cursor.end = p;
  cursor.ok = true;
  const v = m / POW10[frac];
  return neg ? -v : v;
}

const LITTLE_ENDIAN = new Uint8Array(Uint32Array.of(1).buffer)[0] === 1;

/**
 * Number of whitespace-separated tokens in buf[p, e), where buf[p - 1] is not the inside of a token that
 * continues at p (p is at a separator, a token start or e). Four bytes at a time: in each byte, the high
 * bit of ((b & 0x7f) + 0x5f) | b is set exactly when b > 32 (b is part of a token); a token starts where
 * that bit is set and the previous byte's is not. (SWAR, "SIMD within a register": H. S. Warren,
 * Hacker's Delight, 2nd ed., 2012, ch. 6 "Searching Words"; cited from memory.)
 */
export function countTokens(buf: Uint8Array, words: Int32Array | null, shift: number, p: number, e: number): number {
  let n = 0;
  let prev = 0;
  if (words === null || e - p < 16) {
    for (; p < e; p++) {
      const t = buf[p] > 32 ? 1 : 0;
      n += t & (prev ^ 1);
      prev = t;
    }
    return n;
  }
  // bytes up to the first word boundary
  for (; ((p - shift) & 3) !== 0; p++) {
    const t = buf[p] > 32 ? 1 : 0;
    n += t & (prev ^ 1);
    prev = t;
  }
  let carry = prev << 7;
  const w0 = (p - shift) >> 2;
  const w1 = (e - shift) >> 2;
  for (let w = w0; w < w1; w++) {
    const x = words[w];
    const m = (((x & 0x7f7f7f7f) + 0x5f5f5f5f) | x) & 0x80808080;
    const starts = m & ~((m << 8) | carry);
    n += Math.imul((starts >>> 7) & 0x01010101, 0x01010101) >>> 24;
    carry = (m >>> 24) & 0x80;
  }
  prev = carry >>> 7;
  for (p = shift + (w1 << 2); p < e; p++) {
    const t = buf[p] > 32 ? 1 : 0;
    n += t & (prev ^ 1);
    prev = t;
  }
  return n;
}

/** Offset of the '\n' ending the line that starts at p (the scanner guarantees there is one). */
function indexOfNewline(buf: Uint8Array, p: number): number {
  const e = buf.indexOf(10, p);
  return e < 0 ? buf.length : e;
}

function lineNo(where: Where, atom: number): number {
  return where.line + 2 + atom;
}

function columnCountError(buf: Uint8Array, lineStart: number, e: number, layout: Layout, where: Where, atom: number, lastLineOpen: number): XyzError {
  let count = 0;
  let inToken = false;
  for (let p = lineStart; p < e; p++) {
    const t = buf[p] > 32;
    if (t && !inToken) count++;
    inToken = t;
  }
  const expected = layout.plain
    ? `at least 4 columns (species x y z)`
    : `${layout.ncols} columns (Properties=${layout.text})`;
  const tail = lineStart === lastLineOpen ? ' (the file ends inside this line)' : '';
  return new XyzError(where.file, lineNo(where, atom), `atom ${atom} of frame ${where.frame}: expected ${expected}, found ${count}${tail}`);
}

function valueError(buf: Uint8Array, p: number, layout: Layout, j: number, where: Where, atom: number, expected: string): XyzError {
  const prop = layout.props.find((q) => j >= q.first && j < q.first + q.width)!;
  const which = prop.width > 1 ? `${prop.name}, component ${j - prop.first + 1} of ${prop.width}` : prop.name;
  return new XyzError(
    where.file,
    lineNo(where, atom),
    `atom ${atom} of frame ${where.frame}, column ${j + 1} (${which}): expected ${expected}, found ${shown(tokenText(buf, p))}`,
  );
}
