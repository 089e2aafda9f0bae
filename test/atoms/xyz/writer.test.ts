/**
 * Writing extended XYZ and reading it back: bit-identical numbers (ECMAScript Number::toString gives
 * the shortest text that reads back to the same double), awkward comment lines, gzip, and clear errors
 * for frames that cannot be written.
 */
import { existsSync, readdirSync, readFileSync } from 'node:fs';
import { join } from 'node:path';
import { describe, expect, it } from 'vitest';
import type { AtomColumn, Frame, InfoValue } from '../../../src/atoms/frame.js';
import { XyzWriteError } from '../../../src/atoms/xyz/errors.js';
import { formatFrame, formatNumber, writeFrames } from '../../../src/atoms/xyz/writer.js';
import { put, readAll, rng, sameDouble, tempDir } from './helpers.js';

const dir = tempDir();

function frame(partial: Partial<Frame> & { species: string[] }): Frame {
  return {
    positions: new Float64Array(3 * partial.species.length),
    cell: null,
    pbc: [false, false, false],
    arrays: new Map(),
    info: new Map(),
    ...partial,
  };
}

function randomDouble(r: () => number): number {
  const dv = new DataView(new ArrayBuffer(8));
  dv.setUint32(0, Math.floor(r() * 2 ** 32));
  dv.setUint32(4, Math.floor(r() * 2 ** 32));
  return dv.getFloat64(0);
}

function expectSameArrays(a: Map<string, AtomColumn>, b: Map<string, AtomColumn>) {
  expect([...a.keys()]).toEqual([...b.keys()]);
  for (const [name, col] of a) {
    const other = b.get(name)!;
    expect([other.type, other.width], name).toEqual([col.type, col.width]);
    const x = Array.from(col.values as ArrayLike<number | string>);
    const y = Array.from(other.values as ArrayLike<number | string>);
    expect(y.length).toBe(x.length);
    for (let i = 0; i < x.length; i++) {
      const same = typeof x[i] === 'number' ? sameDouble(x[i] as number, y[i] as number) : x[i] === y[i];
      if (!same) expect.fail(`${name}[${i}]: wrote ${x[i]}, read ${y[i]}`);
    }
  }
}

function expectSameFrame(got: Frame, want: Frame) {
  expect(got.species).toEqual(want.species);
  expect(got.positions.length).toBe(want.positions.length);
  for (let i = 0; i < want.positions.length; i++) {
    if (!sameDouble(got.positions[i], want.positions[i])) expect.fail(`positions[${i}]: wrote ${want.positions[i]}, read ${got.positions[i]}`);
  }
  if (want.cell === null) expect(got.cell).toBeNull();
  else expect(Array.from(got.cell!).every((x, i) => sameDouble(x, want.cell![i]))).toBe(true);
  expect(got.pbc).toEqual(want.pbc);
  expectSameArrays(want.arrays, got.arrays);
  expect([...got.info.keys()]).toEqual([...want.info.keys()]);
  for (const [k, v] of want.info) {
    const g = got.info.get(k);
    if (typeof v === 'number') expect(sameDouble(g as number, v), k).toBe(true);
    else expect(g, k).toEqual(v);
  }
}

describe('formatNumber', () => {
  it('gives text that Number() reads back to the same double, for 20000 random bit patterns and the edges', () => {
    const r = rng(11);
    const xs = [0, -0, 5e-324, -5e-324, 2.2250738585072014e-308, 1.7976931348623157e308, 0.1, 0.1 + 0.2, 1e21, 1e-7, 123456789012345680000, NaN, Infinity, -Infinity];
    for (let k = 0; k < 20000; k++) xs.push(randomDouble(r));
    for (const x of xs) {
      const t = formatNumber(x);
      const back = t === 'nan' ? NaN : t === 'inf' ? Infinity : t === '-inf' ? -Infinity : Number(t);
      if (!sameDouble(back, x)) expect.fail(`${x} written as ${t}`);
    }
    expect([formatNumber(-0), formatNumber(NaN), formatNumber(-Infinity), formatNumber(1e21)]).toEqual(['-0', 'nan', '-inf', '1e+21']);
  });
});

describe('formatFrame', () => {
  it('writes the comment line in the documented layout', () => {
    const f = frame({
      species: ['H', 'O'],
      positions: Float64Array.from([0, 0.5, -1, 1.25, 0, 3]),
      cell: Float64Array.from([4, 0, 0, 0, 5, 0, 0, 1, 6]),
      pbc: [true, true, false],
      arrays: new Map<string, AtomColumn>([
        ['forces', { type: 'R', width: 3, values: Float64Array.from([0.1, 0, 0, -0.1, 0, 0]) }],
        ['tag', { type: 'I', width: 1, values: Float64Array.from([1, 2]) }],
        ['fixed', { type: 'L', width: 1, values: Uint8Array.from([1, 0]) }],
        ['label', { type: 'S', width: 1, values: ['a', 'b'] }],
      ]),
      info: new Map<string, InfoValue>([['energy', -14.5], ['note', 'say "hi"'], ['flags', [true, false]], ['v', [1, 2, 3]]]),
    });
    expect(formatFrame(f)).toBe(
      '2\n' +
        'Lattice="4 0 0 0 5 0 0 1 6" Properties=species:S:1:pos:R:3:forces:R:3:tag:I:1:fixed:L:1:label:S:1 energy=-14.5 note="say \\"hi\\"" flags="T F" v="1 2 3" pbc="T T F"\n' +
        'H 0 0.5 -1 0.1 0 0 1 T a\n' +
        'O 1.25 0 3 -0.1 0 0 2 F b\n',
    );
  });
});

describe('round trip', () => {
  it('reads back random frames bit for bit (all column types, non-finite values, -0)', async () => {
    const r = rng(5);
    const frames: Frame[] = [];
    for (let k = 0; k < 20; k++) {
      const n = k === 3 ? 0 : 1 + Math.floor(r() * 40);
      const reals = (m: number) => Float64Array.from({ length: m }, () => (r() < 0.1 ? [0, -0, NaN, Infinity, -Infinity, 5e-324][Math.floor(r() * 6)] : r() < 0.5 ? randomDouble(r) : (r() - 0.5) * 100));
      const positions = Float64Array.from(reals(3 * n).map((x) => (Number.isFinite(x) ? x : 1)));
      frames.push({
        species: Array.from({ length: n }, () => ['H', 'He', 'C', 'Si', 'Uue'][Math.floor(r() * 5)]),
        positions,
        cell: k % 2 === 0 ? reals(9).map((x) => (Number.isFinite(x) ? x : 2)) : null,
        pbc: [k % 2 === 0, r() < 0.5, r() < 0.5],
        arrays: new Map<string, AtomColumn>([
          ['forces', { type: 'R', width: 3, values: reals(3 * n) }],
          ['charge', { type: 'R', width: 1, values: reals(n) }],
          ['id', { type: 'I', width: 2, values: Float64Array.from({ length: 2 * n }, () => Math.floor((r() - 0.5) * 2 ** 52)) }],
          ['mask', { type: 'L', width: 3, values: Uint8Array.from({ length: 3 * n }, () => (r() < 0.5 ? 1 : 0)) }],
          ['name', { type: 'S', width: 1, values: Array.from({ length: n }, (_, a) => `atom_${a}-x"y`) }],
        ]),
        info: new Map<string, InfoValue>([
          ['energy', randomDouble(r)],
          ['step', k],
          ['ok', r() < 0.5],
          ['stress', Array.from(reals(9))],
        ]),
      });
    }
    const path = join(dir, 'random.xyz');
    await writeFrames(path, frames);
    const back = await readAll(path);
    expect(back.length).toBe(frames.length);
    back.forEach((f, k) => expectSameFrame(f, frames[k]));
  });

  it('keeps awkward info values: quotes, escaped quotes, spaces, =, backslashes, newlines, arrays, flags, odd keys', async () => {
    const info = new Map<string, InfoValue>([
      ['plain', 'word'],
      ['spaced', 'two words'],
      ['quoted', 'she said "yes"'],
      ['escaped', 'a \\" b'],
      ['equals', 'x=1 y=2'],
      ['brackets', '[not an array] {nor this}'],
      ['comma', 'a,b'],
      ['apostrophe', "it's"],
      ['newline', 'line1\nline2'],
      ['backslash', 'C:\\path\\'],
      ['empty', ''],
      ['flag', true],
      ['off', false],
      ['ints', [1, -2, 3]],
      ['reals', [0.1, -2.5e-8, 1e300]],
      ['one', [42]],
      ['none', []],
      ['bools', [true, false, true]],
      ['bool1', [false]],
      ['strings', ['a', 'b c', 'd"e', '1']],
      ['with space', 1],
      ['odd"key', 'v'],
      ['unicode', 'Å ≈ 0.1 nm'],
    ]);
    const f = frame({ species: ['Ar'], info });
    const path = join(dir, 'awkward.xyz');
    await writeFrames(path, [f]);
    const [back] = await readAll(path);
    expectSameFrame(back, f);
  });

  it('cannot keep text that reads as a number or logical: it comes back typed (as in every extended XYZ reader)', async () => {
    const f = frame({ species: ['Ar'], info: new Map<string, InfoValue>([['a', '5'], ['b', 'T'], ['c', '1 2']]) });
    const path = join(dir, 'typed.xyz');
    await writeFrames(path, [f]);
    const [back] = await readAll(path);
    expect([...back.info]).toEqual([['a', 5], ['b', true], ['c', [1, 2]]]);
  });

  it('round-trips a plain XYZ comment as info "comment"', async () => {
    const src = put(dir, 'plain-src.xyz', '1\nrelaxed geometry, E = -1.5 eV\nHe 0 0 0\n');
    const [f] = await readAll(src);
    const path = join(dir, 'plain-out.xyz');
    await writeFrames(path, [f]);
    const [back] = await readAll(path);
    expect(back.info.get('comment')).toBe('relaxed geometry, E = -1.5 eV');
  });

  it('writes gzip for .gz paths and reads it back', async () => {
    const f = frame({ species: ['H', 'H'], positions: Float64Array.from([0, 0, 0, 0.74, 0, 0]), info: new Map([['energy', -31.7]]) });
    const path = join(dir, 'h2.xyz.gz');
    await writeFrames(path, (async function* () {
      yield f;
      yield f;
    })());
    const bytes = readFileSync(path);
    expect([bytes[0], bytes[1]]).toEqual([0x1f, 0x8b]);
    const back = await readAll(path);
    expect(back.length).toBe(2);
    expectSameFrame(back[1], f);
  });

  it('refuses frames it cannot write, naming the frame and what is wrong', () => {
    const ok = frame({ species: ['H'] });
    const cases: [Frame, string][] = [
      [{ ...ok, positions: new Float64Array(2) }, 'frame: positions hold 2 numbers, expected 3 x 1 atoms = 3'],
      [{ ...ok, cell: new Float64Array(6) }, 'frame: cell must hold 9 numbers, found 6'],
      [{ ...ok, species: ['H H'] }, 'frame: species of atom 0 is "H H", expected a symbol without spaces'],
      [{ ...ok, info: new Map([['Lattice', 1]]) }, "frame: info key 'Lattice' clashes with the extended XYZ key of that name (set frame.cell / frame.pbc / frame.arrays instead)"],
      [{ ...ok, info: new Map([['mixed', [1, 'a'] as unknown as InfoValue]]) }, "frame: info 'mixed' must be a number, logical, string or an array of one of those, found an array of mixed types (number, string)"],
      [{ ...ok, arrays: new Map([['f', { type: 'R', width: 3, values: new Float64Array(2) }]]) }, "frame: array 'f' holds 2 values, expected 3 x 1 atoms = 3"],
      [{ ...ok, arrays: new Map([['s', { type: 'S', width: 1, values: ['a b'] }]]) }, "frame: array 's' of type S must hold strings without spaces (not empty)"],
      [{ ...ok, arrays: new Map([['i', { type: 'I', width: 1, values: Float64Array.from([1.5]) }]]) }, "frame: array 'i' of type I must hold whole numbers"],
      [{ ...ok, arrays: new Map([['a:b', { type: 'R', width: 1, values: new Float64Array(1) }]]) }, 'frame: per-atom array name "a:b" cannot be written (reserved, or holds a space, \':\' or quote)'],
    ];
    for (const [f, message] of cases) {
      expect(() => formatFrame(f)).toThrow(XyzWriteError);
      expect(() => formatFrame(f)).toThrow(message);
    }
  });

  it('leaves no file behind when a frame cannot be written, and keeps an existing file intact', async () => {
    const path = join(dir, 'atomic.xyz');
    const good = frame({ species: ['H'] });
    await writeFrames(path, [good]);
    const before = readFileSync(path, 'utf8');
    await expect(writeFrames(path, [good, { ...good, positions: new Float64Array(1) }])).rejects.toThrow(`${path}: frame 1: positions hold 1 numbers`);
    expect(readFileSync(path, 'utf8')).toBe(before);
    await expect(writeFrames(join(dir, 'never.xyz'), [{ ...good, cell: new Float64Array(1) }])).rejects.toThrow(XyzWriteError);
    expect(existsSync(join(dir, 'never.xyz'))).toBe(false);
    expect(readdirSync(dir).filter((n) => n.includes('.tmp-'))).toEqual([]);
  });
});
