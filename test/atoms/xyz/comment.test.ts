/**
 * The comment line's key=value pairs, against the extended XYZ specification
 * (libAtoms/extxyz, README "Extended XYZ specification": primitive types and their order int, real,
 * logical, string; quoted strings with backslash escapes; old-style "…"/{…} and new-style […] arrays;
 * a one-element old-style array is a scalar; spaces allowed around '=') and the examples of ASE's
 * read_xyz docstring (ase/io/extxyz.py, ASE 3.22).
 */
import { describe, expect, it } from 'vitest';
import type { InfoValue } from '../../../src/atoms/frame.js';
import { parseComment } from '../../../src/atoms/xyz/comment.js';

const where = { file: 'f.xyz', line: 1, frame: 0 };
const parse = (s: string) => parseComment(s, where);
const info = (s: string) => Object.fromEntries(parse(`Properties=species:S:1:pos:R:3 ${s}`).info) as Record<string, InfoValue>;

describe('comment line', () => {
  it("reads ASE's docstring example (Lattice as 9 numbers, Properties, Time)", () => {
    const c = parse('Lattice="5.44 0.0 0.0 0.0 5.44 0.0 0.0 0.0 5.44" Properties=species:S:1:pos:R:3 Time=0.0');
    expect(c.extended).toBe(true);
    expect(Array.from(c.lattice!)).toEqual([5.44, 0, 0, 0, 5.44, 0, 0, 0, 5.44]);
    expect(c.properties).toBe('species:S:1:pos:R:3');
    expect(c.pbc).toBeNull();
    expect([...c.info]).toEqual([['Time', 0]]);
  });

  it('a key without a value is a flag (ASE docstring: "cutoff=3.4 have_energy")', () => {
    expect(info('cutoff=3.4 have_energy')).toEqual({ cutoff: 3.4, have_energy: true });
  });

  it('types bare values in the order integer, real, logical, string', () => {
    expect(info('a=1 b=-7 c=1.0 d=1e3 e=.5 f=2.5D-1 g=T h=F i=True j=false k=TRUE l=FALSE m=Si n=1.2.3 o=007 p=12345678901234567890')).toEqual({
      a: 1, b: -7, c: 1, d: 1000, e: 0.5, f: 0.25, g: true, h: false, i: true, j: false, k: true, l: false, m: 'Si', n: '1.2.3',
      // the specification's integer and real patterns have no leading zeros; integers beyond 2^53 are
      // read as the nearest double
      o: '007', p: 12345678901234567000,
    });
  });

  it('reads non-finite reals as Python writes them', () => {
    const v = info('a=nan b=inf c=-inf d=Infinity');
    expect(Number.isNaN(v.a)).toBe(true);
    expect([v.b, v.c, v.d]).toEqual([Infinity, -Infinity, Infinity]);
  });

  it('reads double-quoted strings with escaped quotes, backslashes, newlines, = and spaces', () => {
    expect(info('s="hello world" t="say \\"hi\\"" u="a=b c=d" v="back\\\\slash" w="two\\nlines" x="" y="it\'s"')).toEqual({
      s: 'hello world', t: 'say "hi"', u: 'a=b c=d', v: 'back\\slash', w: 'two\nlines', x: '', y: "it's",
    });
  });

  it('allows spaces around = and quoted keys', () => {
    expect(info('a = 1 b= "x y"  c =T "my key"=2 "q\\"k"=z')).toEqual({ a: 1, b: 'x y', c: true, 'my key': 2, 'q"k': 'z' });
  });

  it('reads old-style arrays in quotes or braces (one element is a scalar)', () => {
    expect(info('a="1 2 3" b="1 2.5" c={1 2 3} d="T F T" e={T} f="7" g={a b c} h="1 a" i="  4  "')).toEqual({
      a: [1, 2, 3], b: [1, 2.5], c: [1, 2, 3], d: [true, false, true], e: true, f: 7, g: ['a', 'b', 'c'],
      // quoted text that is not all numbers or all logicals stays one string
      h: '1 a', i: 4,
    });
  });

  it('reads new-style [..] arrays, matrices row by row, and quoted elements as strings', () => {
    expect(info('a=[1, 2, 3] b=[1,2.5] c=[T, F] d=["x", "y z"] e=[1] f=[] g=[[1, 2], [3, 4]] h=[a, b] i=["1", "2"]')).toEqual({
      a: [1, 2, 3], b: [1, 2.5], c: [true, false], d: ['x', 'y z'], e: [1], f: [], g: [1, 2, 3, 4], h: ['a', 'b'], i: ['1', '2'],
    });
  });

  it('takes Lattice, Properties and pbc out of info, whatever their case; Lattice may be a 3x3 matrix', () => {
    const c = parse('lattice=[[2, 0, 0], [0, 3, 0], [0, 0, 4]] PROPERTIES="species:S:1:pos:R:3" PBC="T F T" energy=-1.5');
    expect(Array.from(c.lattice!)).toEqual([2, 0, 0, 0, 3, 0, 0, 0, 4]);
    expect(c.properties).toBe('species:S:1:pos:R:3');
    expect(c.pbc).toEqual([true, false, true]);
    expect([...c.info]).toEqual([['energy', -1.5]]);
    expect(parse('Lattice="1 0 0 0 1 0 0 0 1" pbc=F').pbc).toEqual([false, false, false]);
  });

  it('keeps the order of keys as written', () => {
    expect([...parse('Properties=species:S:1:pos:R:3 z=1 a=2 m=3').info.keys()]).toEqual(['z', 'a', 'm']);
  });

  it('treats a line without Properties= or Lattice= as a plain XYZ comment, kept whole', () => {
    for (const line of ['water molecule', 'energy=-5.0 step=3', 'an "unterminated quote', '  spaced  out  ', 'a=b=c']) {
      const c = parse(line);
      expect(c.extended).toBe(false);
      expect([...c.info]).toEqual([['comment', line.trim()]]);
    }
    expect([...parse('').info]).toEqual([]);
  });
});
