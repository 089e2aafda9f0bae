/**
 * Reading extended XYZ: the features of the open specification (libAtoms/extxyz README: Lattice,
 * Properties with S/R/I/L columns and counts, pbc defaulting to T T T with a Lattice and F F F without,
 * plain XYZ fallback storing the comment line as `comment`), gzip detection by magic bytes, line endings,
 * frames larger than the read window, and the `columns` restriction.
 */
import { Readable } from 'node:stream';
import { gzipSync } from 'node:zlib';
import { describe, expect, it } from 'vitest';
import { readFrames, readFramesFromStream } from '../../../src/atoms/xyz/reader.js';
import { put, readAll, rng, tempDir } from './helpers.js';

const dir = tempDir();

const SI_CELL = `8
Lattice="5.44 0.0 0.0 0.0 5.44 0.0 0.0 0.0 5.44" Properties=species:S:1:pos:R:3 Time=0.0
Si        0.00000000      0.00000000      0.00000000
Si        1.36000000      1.36000000      1.36000000
Si        2.72000000      2.72000000      0.00000000
Si        4.08000000      4.08000000      1.36000000
Si        2.72000000      0.00000000      2.72000000
Si        4.08000000      1.36000000      4.08000000
Si        0.00000000      2.72000000      2.72000000
Si        1.36000000      4.08000000      4.08000000
`;

describe('readFrames', () => {
  it("reads ASE's docstring example: 8-atom silicon cell, Lattice implies pbc T T T", async () => {
    const [f] = await readAll(put(dir, 'si.xyz', SI_CELL));
    expect(f.species).toEqual(Array(8).fill('Si'));
    expect(Array.from(f.cell!)).toEqual([5.44, 0, 0, 0, 5.44, 0, 0, 0, 5.44]);
    expect(f.pbc).toEqual([true, true, true]);
    expect(Array.from(f.positions.slice(9, 12))).toEqual([4.08, 4.08, 1.36]);
    expect([...f.info]).toEqual([['Time', 0]]);
    expect(f.arrays.size).toBe(0);
  });

  it('reads every column type with counts, row-major', async () => {
    const text = `2
Properties=species:S:1:pos:R:3:label:S:2:tag:I:1:fixed:L:3:vel:R:2 pbc="F T F"
C 0 0 0 a b 7 T F True 0.5 -1
O 1 2 3 c d -2 false TRUE F 1e-3 2
`;
    const [f] = await readAll(put(dir, 'types.xyz', text));
    expect(f.cell).toBeNull();
    expect(f.pbc).toEqual([false, true, false]);
    expect([...f.arrays.keys()]).toEqual(['label', 'tag', 'fixed', 'vel']);
    expect(f.arrays.get('label')).toEqual({ type: 'S', width: 2, values: ['a', 'b', 'c', 'd'] });
    expect(f.arrays.get('tag')).toEqual({ type: 'I', width: 1, values: Float64Array.from([7, -2]) });
    expect(f.arrays.get('fixed')).toEqual({ type: 'L', width: 3, values: Uint8Array.from([1, 0, 1, 0, 1, 0]) });
    expect(f.arrays.get('vel')).toEqual({ type: 'R', width: 2, values: Float64Array.from([0.5, -1, 0.001, 2]) });
  });

  it('without Lattice and pbc, the frame is not periodic', async () => {
    const [f] = await readAll(put(dir, 'mol.xyz', '1\nProperties=species:S:1:pos:R:3 energy=-3\nH 0 0 0\n'));
    expect(f.cell).toBeNull();
    expect(f.pbc).toEqual([false, false, false]);
    expect(f.info.get('energy')).toBe(-3);
  });

  it('reads plain XYZ: the comment line is kept whole and columns after x y z are ignored', async () => {
    const text = '3\nwater, "optimised" at 300 K = fine\nO 0.0 0.0 0.117\nH 0.0 0.757 -0.469 extra\nH 0.0 -0.757 -0.469\n2\n\nAr 0 0 0\nAr 3.8 0 0\n';
    const frames = await readAll(put(dir, 'plain.xyz', text));
    expect(frames.map((f) => [...f.info])).toEqual([[['comment', 'water, "optimised" at 300 K = fine']], []]);
    expect(frames[0].species).toEqual(['O', 'H', 'H']);
    expect(Array.from(frames[0].positions)).toEqual([0, 0, 0.117, 0, 0.757, -0.469, 0, -0.757, -0.469]);
    expect(frames[1].pbc).toEqual([false, false, false]);
    expect(frames[0].arrays.size).toBe(0);
  });

  it('reads a Lattice line without Properties as species x y z (as ASE does)', async () => {
    const [f] = await readAll(put(dir, 'noprops.xyz', '1\nLattice="3 0 0 0 3 0 0 0 3" energy=2\nAr 1 1 1\n'));
    expect(Array.from(f.cell!)).toEqual([3, 0, 0, 0, 3, 0, 0, 0, 3]);
    expect([...f.info]).toEqual([['energy', 2]]);
  });

  it('names atoms from a Z column when there is no species column', async () => {
    const [f] = await readAll(put(dir, 'z.xyz', '3\nProperties=Z:I:1:pos:R:3\n8 0 0 0\n1 0 0 1\n26 1 1 1\n'));
    expect(f.species).toEqual(['O', 'H', 'Fe']);
    expect(f.arrays.get('Z')!.values).toEqual(Float64Array.from([8, 1, 26]));
    const [g] = await readAll(put(dir, 'z2.xyz', '1\nProperties=pos:R:3:Z:I:1:q:R:1\n0 0 0 6 0.5\n'), ['q']);
    expect(g.species).toEqual(['C']);
    expect([...g.arrays.keys()]).toEqual(['q']);
  });

  it('parses only the requested columns, with the same values', async () => {
    const text = '2\nProperties=species:S:1:pos:R:3:a:R:3:b:I:1:c:S:1:d:L:1\nH 1 2 3 4 5 6 7 x T\nHe 8 9 10 11 12 13 14 y F\n';
    const path = put(dir, 'cols.xyz', text);
    const [all] = await readAll(path);
    const [some] = await readAll(path, ['b', 'd', 'nonexistent']);
    expect([...some.arrays.keys()]).toEqual(['b', 'd']);
    expect(some.arrays.get('b')).toEqual(all.arrays.get('b'));
    expect(some.arrays.get('d')).toEqual(all.arrays.get('d'));
    expect(some.positions).toEqual(all.positions);
    expect(some.species).toEqual(all.species);
    const [none] = await readAll(path, []);
    expect(none.arrays.size).toBe(0);
    expect(none.positions).toEqual(all.positions);
  });

  it('still checks the column count of lines whose columns are skipped', async () => {
    const path = put(dir, 'skipcount.xyz', '1\nProperties=species:S:1:pos:R:3:a:R:3\nH 1 2 3 4 5\n');
    await expect(readAll(path, [])).rejects.toThrow('skipcount.xyz:3: atom 0 of frame 0: expected 7 columns (Properties=species:S:1:pos:R:3:a:R:3), found 6');
  });

  it('recognises gzip by its magic bytes, whatever the name; a plain file named .gz is read as text', async () => {
    const gzAsXyz = put(dir, 'really-gz.xyz', gzipSync(Buffer.from(SI_CELL + SI_CELL)));
    const textAsGz = put(dir, 'really-text.xyz.gz', SI_CELL);
    expect((await readAll(gzAsXyz)).length).toBe(2);
    const [f] = await readAll(textAsGz);
    expect(f.species.length).toBe(8);
    const multi = put(dir, 'members.xyz.gz', Buffer.concat([gzipSync(Buffer.from(SI_CELL)), gzipSync(Buffer.from(SI_CELL))]));
    expect((await readAll(multi)).length).toBe(2);
  });

  it('accepts CRLF line ends, tabs, padding, trailing blank lines and a missing final newline', async () => {
    const crlf = '  2  \r\nProperties=species:S:1:pos:R:3 note="a b"\r\n\tH\t1 2 3 \r\nH 4 5 6\r\n\r\n   \r\n';
    const [f] = await readAll(put(dir, 'crlf.xyz', crlf));
    expect(f.info.get('note')).toBe('a b');
    expect(Array.from(f.positions)).toEqual([1, 2, 3, 4, 5, 6]);
    const open = await readAll(put(dir, 'nonl.xyz', '1\n\nH 1 2 3'));
    expect(Array.from(open[0].positions)).toEqual([1, 2, 3]);
    expect(await readAll(put(dir, 'empty.xyz', ''))).toEqual([]);
  });

  it('reads frames with no atoms', async () => {
    const frames = await readAll(put(dir, 'zero.xyz', '0\nProperties=species:S:1:pos:R:3 e=1\n0\nhello\n1\n\nH 0 0 0\n'));
    expect(frames.map((f) => f.species.length)).toEqual([0, 0, 1]);
    expect(frames[1].info.get('comment')).toBe('hello');
  });

  it('reads UTF-8 text in comments and string columns', async () => {
    const [f] = await readAll(put(dir, 'utf8.xyz', '1\nProperties=species:S:1:pos:R:3:who:S:1 name="Ångström ≈ 0.1 nm"\nH 0 0 0 Émile\n'));
    expect(f.info.get('name')).toBe('Ångström ≈ 0.1 nm');
    expect(f.arrays.get('who')!.values).toEqual(['Émile']);
  });

  it('reads many frames across read-window boundaries and a frame larger than the window', async () => {
    const r = rng(3);
    const frames: { n: number; pos: number[] }[] = [];
    const parts: string[] = [];
    // about 9 MB in total: the 4 MiB read window is refilled several times, and one frame alone exceeds it
    for (let k = 0; k < 400; k++) {
      const n = k === 200 ? 160000 : 1 + Math.floor(r() * 300);
      const pos = Array.from({ length: 3 * n }, () => Math.round((r() - 0.5) * 2e6) / 1e4);
      frames.push({ n, pos });
      const lines = [`${n}`, `Properties=species:S:1:pos:R:3 k=${k}`];
      for (let a = 0; a < n; a++) lines.push(`X ${pos[3 * a]} ${pos[3 * a + 1]} ${pos[3 * a + 2]}`);
      parts.push(lines.join('\n'));
    }
    const path = put(dir, 'many.xyz', parts.join('\n') + '\n');
    let k = 0;
    for await (const f of readFrames(path)) {
      expect(f.info.get('k')).toBe(k);
      expect(f.species.length).toBe(frames[k].n);
      const want = frames[k].pos;
      let bad = -1;
      for (let i = 0; i < want.length && bad < 0; i++) if (f.positions[i] !== want[i]) bad = i;
      expect(bad, `frame ${k}`).toBe(-1);
      k++;
    }
    expect(k).toBe(400);
  });

  it('reads from a stream', async () => {
    const chunks = [SI_CELL.slice(0, 50), SI_CELL.slice(50, 51), SI_CELL.slice(51)];
    const out = [];
    for await (const f of readFramesFromStream(Readable.from(chunks.map((c) => Buffer.from(c))), 'stdin')) out.push(f);
    expect(out.length).toBe(1);
    expect(out[0].species.length).toBe(8);
  });
});
