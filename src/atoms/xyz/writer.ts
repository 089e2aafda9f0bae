/**
 * Extended XYZ writer. Numbers are written in the shortest text that reads back to the same double
 * (ECMAScript Number::toString), so a write/read round trip is bit-identical; -0 is written "-0",
 * non-finite values as nan, inf, -inf (as Python prints them). Files are readable by ASE's extxyz reader.
 *
 * Comment line: Lattice="ax ay az bx by bz cx cy cz" Properties=species:S:1:pos:R:3:... <info> pbc="T T T".
 * Info values: numbers bare; logicals T/F; strings bare when they hold no space or special character,
 * else double-quoted with \" \\ \n escapes; arrays of 2 or more numbers or logicals as "1 2 3" (old style,
 * read by every extended XYZ reader), shorter ones as [x] / [], string arrays as ["a", "b"].
 */
import { createWriteStream } from 'node:fs';
import { rename, rm } from 'node:fs/promises';
import { Readable } from 'node:stream';
import { pipeline } from 'node:stream/promises';
import { createGzip } from 'node:zlib';
import type { Frame, InfoValue } from '../frame.js';
import { XyzWriteError } from './errors.js';

/** Shortest round-trip text of a double. */
export function formatNumber(x: number): string {
  if (x === 0) return Object.is(x, -0) ? '-0' : '0';
  if (Number.isNaN(x)) return 'nan';
  if (x === Infinity) return 'inf';
  if (x === -Infinity) return '-inf';
  return String(x);
}

const BARE = /^[^\s=",{}[\]\\']+$/;
const NAME = /^[^\s=",{}[\]\\':]+$/;
const SPECIAL = new Set(['lattice', 'properties', 'pbc']);

function quote(s: string): string {
  return `"${s.replace(/\\/g, '\\\\').replace(/"/g, '\\"').replace(/\n/g, '\\n')}"`;
}

function stringValue(s: string): string {
  return BARE.test(s) ? s : quote(s);
}

function infoValue(key: string, v: InfoValue, where: string): string {
  if (typeof v === 'number') return formatNumber(v);
  if (typeof v === 'boolean') return v ? 'T' : 'F';
  if (typeof v === 'string') return stringValue(v);
  if (Array.isArray(v)) {
    const arr = v as unknown[];
    if (arr.every((x) => typeof x === 'number')) {
      const parts = (arr as number[]).map(formatNumber);
      return parts.length >= 2 ? `"${parts.join(' ')}"` : `[${parts.join('')}]`;
    }
    if (arr.every((x) => typeof x === 'boolean')) {
      const parts = (arr as boolean[]).map((b) => (b ? 'T' : 'F'));
      return parts.length >= 2 ? `"${parts.join(' ')}"` : `[${parts.join('')}]`;
    }
    if (arr.every((x) => typeof x === 'string')) return `[${(arr as string[]).map(quote).join(', ')}]`;
  }
  throw new XyzWriteError(`${where}: info '${key}' must be a number, logical, string or an array of one of those, found ${describe(v)}`);
}

function describe(v: unknown): string {
  if (Array.isArray(v)) return `an array of mixed types (${v.map((x) => typeof x).join(', ')})`;
  return v === null ? 'null' : typeof v;
}

/** The comment line of a frame (without newline). */
export function formatComment(frame: Frame, where = 'frame'): string {
  const parts: string[] = [];
  if (frame.cell !== null) {
    if (frame.cell.length !== 9) throw new XyzWriteError(`${where}: cell must hold 9 numbers, found ${frame.cell.length}`);
    parts.push(`Lattice="${Array.from(frame.cell, formatNumber).join(' ')}"`);
  }
  const props = ['species:S:1:pos:R:3'];
  for (const [name, col] of frame.arrays) props.push(`${name}:${col.type}:${col.width}`);
  parts.push(`Properties=${props.join(':')}`);
  for (const [key, value] of frame.info) {
    if (key === '' || key.includes('\n')) throw new XyzWriteError(`${where}: info key ${JSON.stringify(key)} cannot be written (empty or with a newline)`);
    if (SPECIAL.has(key.toLowerCase())) {
      throw new XyzWriteError(`${where}: info key '${key}' clashes with the extended XYZ key of that name (set frame.cell / frame.pbc / frame.arrays instead)`);
    }
    parts.push(`${BARE.test(key) ? key : quote(key)}=${infoValue(key, value, where)}`);
  }
  const pbc = frame.pbc;
  if (!Array.isArray(pbc) || pbc.length !== 3) throw new XyzWriteError(`${where}: pbc must be 3 logicals`);
  parts.push(`pbc="${pbc.map((b) => (b ? 'T' : 'F')).join(' ')}"`);
  return parts.join(' ');
}

function checkShapes(frame: Frame, where: string): number {
  const n = frame.species.length;
  if (frame.positions.length !== 3 * n) {
    throw new XyzWriteError(`${where}: positions hold ${frame.positions.length} numbers, expected 3 x ${n} atoms = ${3 * n}`);
  }
  for (let a = 0; a < n; a++) {
    const s = frame.species[a];
    if (typeof s !== 'string' || !NAME.test(s)) throw new XyzWriteError(`${where}: species of atom ${a} is ${JSON.stringify(s)}, expected a symbol without spaces`);
  }
  for (const [name, col] of frame.arrays) {
    if (!NAME.test(name) || name === 'species' || name === 'pos') {
      throw new XyzWriteError(`${where}: per-atom array name ${JSON.stringify(name)} cannot be written (reserved, or holds a space, ':' or quote)`);
    }
    if (!Number.isInteger(col.width) || col.width < 1) throw new XyzWriteError(`${where}: array '${name}' has width ${col.width}, expected a positive integer`);
    if (col.values.length !== n * col.width) {
      throw new XyzWriteError(`${where}: array '${name}' holds ${col.values.length} values, expected ${col.width} x ${n} atoms = ${n * col.width}`);
    }
    const v = col.values;
    const ok =
      col.type === 'R' ? v instanceof Float64Array || v instanceof Float32Array
        : col.type === 'I' ? (v instanceof Float64Array || ArrayBuffer.isView(v)) && Array.from(v as Float64Array).every(Number.isInteger)
          : col.type === 'L' ? v instanceof Uint8Array && (v as Uint8Array).every((b) => b === 0 || b === 1)
            : col.type === 'S' ? Array.isArray(v) && (v as string[]).every((s) => typeof s === 'string' && /^\S+$/.test(s))
              : false;
    if (!ok) {
      const what = { R: 'a Float64Array', I: 'whole numbers', L: 'a Uint8Array of 0/1', S: 'strings without spaces (not empty)' }[col.type] ?? 'one of S, R, I, L';
      throw new XyzWriteError(`${where}: array '${name}' of type ${col.type} must hold ${what}`);
    }
  }
  return n;
}

/** One frame as extended XYZ text (atom count line, comment line, one line per atom), ending with a newline. */
export function formatFrame(frame: Frame, where = 'frame'): string {
  const n = checkShapes(frame, where);
  const head = `${n}\n${formatComment(frame, where)}\n`;
  const cols = [...frame.arrays.values()];
  const pos = frame.positions;
  const lines: string[] = new Array(n);
  for (let a = 0; a < n; a++) {
    let line = `${frame.species[a]} ${formatNumber(pos[3 * a])} ${formatNumber(pos[3 * a + 1])} ${formatNumber(pos[3 * a + 2])}`;
    for (const col of cols) {
      const w = col.width;
      const v = col.values;
      for (let k = a * w; k < a * w + w; k++) {
        const x = v[k];
        line += ' ' + (col.type === 'S' ? (x as string) : col.type === 'L' ? (x ? 'T' : 'F') : formatNumber(x as number));
      }
    }
    lines[a] = line;
  }
  return n === 0 ? head : `${head}${lines.join('\n')}\n`;
}

/**
 * Write frames to `path` (gzip-compressed when it ends in .gz). The file is written under a temporary
 * name and renamed into place at the end, so a failed write never leaves a half-written file at `path`.
 */
export async function writeFrames(path: string, frames: Iterable<Frame> | AsyncIterable<Frame>): Promise<void> {
  const tmp = `${path}.tmp-${process.pid}-${Date.now().toString(36)}`;
  async function* text(): AsyncGenerator<string> {
    let i = 0;
    for await (const frame of frames as AsyncIterable<Frame>) {
      yield formatFrame(frame, `${path}: frame ${i}`);
      i++;
    }
  }
  try {
    const source = Readable.from(text());
    if (path.endsWith('.gz')) await pipeline(source, createGzip(), createWriteStream(tmp));
    else await pipeline(source, createWriteStream(tmp));
    await rename(tmp, path);
  } catch (err) {
    await rm(tmp, { force: true });
    throw err;
  }
}
