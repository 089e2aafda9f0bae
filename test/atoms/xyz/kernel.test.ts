/**
 * The WebAssembly parser of atom lines (kernels/xyz-lines.ts, used through src/atoms/xyz/kernel.ts) against the
 * TypeScript parser and against JavaScript's own Number(): the same frames, bit for bit, for every kind of line the
 * TypeScript parser accepts, and the same errors (file, line, column) for the broken corpus.
 *
 * External reference: Number() (ECMA-262, "StringToNumber") on each number's text; the extended XYZ files are made
 * here (invented values).
 */
import { readdirSync } from 'node:fs';
import { fileURLToPath } from 'node:url';
import { afterEach, describe, expect, it } from 'vitest';
import type { Frame } from '../../../src/atoms/frame.js';
import { loadKernel, setKernels } from '../../../src/atoms/wasm.js';
import { xyzKernelStats } from '../../../src/atoms/xyz/kernel.js';
import { readFrames } from '../../../src/atoms/xyz/reader.js';
import { put, readAll, rng, tempDir } from './helpers.js';

const dir = tempDir('ratchet-kernel-');

afterEach(() => {
  setKernels(true);
});

async function both(path: string, columns?: string[], positions = true): Promise<{ fast: Frame[]; ts: Frame[] }> {
  const read = async () => {
    const out: Frame[] = [];
    for await (const f of readFrames(path, { columns, positions })) out.push(f);
    return out;
  };
  setKernels(true);
  const fast = await read();
  setKernels(false);
  const ts = await read();
  setKernels(true);
  return { fast, ts };
}

/** Deep equality with numbers compared bit for bit (-0 and NaN included). */
function sameFrames(a: Frame[], b: Frame[]): void {
  expect(a.length).toBe(b.length);
  for (let f = 0; f < a.length; f++) {
    expect(a[f].species).toEqual(b[f].species);
    expect(Buffer.from(a[f].positions.buffer, a[f].positions.byteOffset, a[f].positions.byteLength)).toEqual(
      Buffer.from(b[f].positions.buffer, b[f].positions.byteOffset, b[f].positions.byteLength),
    );
    expect([...a[f].arrays.keys()]).toEqual([...b[f].arrays.keys()]);
    for (const [name, col] of b[f].arrays) {
      const other = a[f].arrays.get(name)!;
      expect(other.type).toBe(col.type);
      expect(other.width).toBe(col.width);
      if (col.values instanceof Float64Array) {
        const x = other.values as Float64Array;
        for (let k = 0; k < col.values.length; k++) expect(Object.is(x[k], col.values[k]), `${name}[${k}]: ${x[k]} vs ${col.values[k]}`).toBe(true);
      } else {
        expect(other.values).toEqual(col.values);
      }
    }
  }
}

/** Number texts of many shapes: what Python's %f/%e/%g and Fortran write, and the odd ones. */
function numberText(r: () => number): string {
  const v = (r() - 0.5) * 10 ** Math.floor(r() * 12 - 6);
  switch (Math.floor(r() * 14)) {
    case 0: return v.toFixed(8);
    case 1: return v.toExponential(10);
    case 2: return v.toExponential(3).toUpperCase();
    case 3: return v.toExponential(15).replace('e', 'D'); // Fortran
    case 4: return String(v); // shortest round trip, up to 17 digits
    case 5: return `+${Math.abs(v).toFixed(4)}`;
    case 6: return `${Math.floor(r() * 100)}.`; // "5."
    case 7: return `.${Math.floor(r() * 1000)}`; // ".5"
    case 8: return `-0.${'0'.repeat(Math.floor(r() * 25))}${Math.floor(r() * 1e6)}`; // leading zeros
    case 9: return `${Math.floor(r() * 1e9)}${Math.floor(r() * 1e9)}${Math.floor(r() * 1e3)}`; // 19+ digits
    case 10: return `1e${Math.floor(r() * 60 - 30)}`; // exponents beyond 22
    case 11: return ['nan', 'NaN', 'inf', '-Infinity', '+inf'][Math.floor(r() * 5)];
    case 12: return '-0.000';
    default: return (v * 1e3).toFixed(Math.floor(r() * 12));
  }
}

describe('the WebAssembly atom-line parser', () => {
  it('is built and loads (npm run build:kernels)', () => {
    const k = loadKernel('xyz-lines');
    expect('error' in k ? k.error : null).toBeNull();
  });

  it('gives the same frames as the TypeScript parser, and each number equals Number() of its text', async () => {
    const r = rng(2026);
    const species = ['H', 'He', 'O', 'Si', 'Uuo', 'Ca2+', 'LongSpeciesName', 'Ü'];
    const lines: string[] = [];
    const texts: string[][] = [];
    for (let f = 0; f < 40; f++) {
      const n = 1 + Math.floor(r() * 30);
      const withTag = f % 3 === 0;
      const props = `species:S:1:pos:R:3:forces:R:3${withTag ? ':tag:I:1' : ''}:energies:R:1`;
      lines.push(String(n), `Lattice="8 0 0 0 8 0 0 0 8" Properties=${props} energy=${(r() * -100).toFixed(5)} pbc="T T T"`);
      for (let a = 0; a < n; a++) {
        const s = species[f % 5 === 4 ? Math.floor(r() * species.length) : Math.floor(r() * 4)];
        const nums = Array.from({ length: 6 }, () => numberText(r));
        const tag = withTag ? [String(Math.floor((r() - 0.5) * 2e6))] : [];
        const e = numberText(r);
        texts.push(nums.slice(0, 3));
        const sep = () => (r() < 0.1 ? '\t' : ' '.repeat(1 + Math.floor(r() * 6)));
        lines.push([s, ...nums, ...tag, e].map((t) => sep() + t).join('') + (r() < 0.05 ? '   \r' : ''));
      }
    }
    const path = put(dir, 'mixed.xyz', lines.join('\n') + '\n');
    const before = xyzKernelStats();
    const { fast, ts } = await both(path);
    sameFrames(fast, ts);
    // the kernel did parse frames (those without nan/inf, long significands or long names), and handed others back
    const after = xyzKernelStats();
    expect(after.parsed - before.parsed).toBeGreaterThan(0);
    expect(after.handedBack - before.handedBack).toBeGreaterThan(0);
    // every position equals Number() of its text (the reader maps Fortran's D exponent to E and nan/inf by name)
    let k = 0;
    for (const f of fast) {
      for (let a = 0; a < f.species.length; a++, k++) {
        for (let c = 0; c < 3; c++) {
          const t = texts[k][c];
          const expected = /^[+-]?inf/i.test(t) ? (t.startsWith('-') ? -Infinity : Infinity) : /nan/i.test(t) ? NaN : Number(t.replace('D', 'e'));
          expect(Object.is(f.positions[3 * a + c], expected), `${t} -> ${f.positions[3 * a + c]}`).toBe(true);
        }
      }
    }
    // subsets of columns, and positions skipped
    for (const [cols, pos] of [[[], true], [['forces'], false], [['energies', 'tag'], true]] as [string[], boolean][]) {
      const r2 = await both(path, cols, pos);
      sameFrames(r2.fast, r2.ts);
    }
  });

  it('handles plain XYZ (extra columns ignored), Z columns, logical and string columns like the TypeScript parser', async () => {
    const plain = put(dir, 'plain.xyz', '3\nwater\nO 0 0 0 extra text\nH 0.9572 0 0\nH -0.2399872 0.9266272 0 1 2 3\n');
    let r = await both(plain);
    sameFrames(r.fast, r.ts);
    const z = put(dir, 'z.xyz', '2\nProperties=Z:I:1:pos:R:3\n8 0 0 0\n1 0.96 0 0\n');
    r = await both(z);
    sameFrames(r.fast, r.ts);
    expect(r.fast[0].species).toEqual(['O', 'H']);
    const mixed = put(dir, 'lsmix.xyz', '2\nProperties=species:S:1:pos:R:3:fixed:L:1:label:S:1\nC 0 0 0 T a\nC 1.54 0 0 F b\n');
    r = await both(mixed);
    sameFrames(r.fast, r.ts);
    r = await both(mixed, []);
    sameFrames(r.fast, r.ts);
  });

  it('reports every broken file of the corpus exactly as the TypeScript parser does', async () => {
    const broken = fileURLToPath(new URL('./broken/', import.meta.url));
    const files = readdirSync(broken).filter((f) => f.endsWith('.xyz'));
    expect(files.length).toBeGreaterThan(20);
    const outcome = async (path: string) => {
      let frames = 0;
      try {
        for await (const _ of readFrames(path)) frames++;
        return `ok ${frames}`;
      } catch (err) {
        return `${frames}: ${(err as Error).message}`;
      }
    };
    for (const f of files) {
      setKernels(true);
      const fast = await outcome(broken + f);
      setKernels(false);
      const ts = await outcome(broken + f);
      expect(fast, f).toBe(ts);
      expect(fast, f).not.toMatch(/^ok/);
    }
  });

  it('parses ordinary frames itself: every frame of a file as written by ASE', async () => {
    const r = rng(11);
    const lines: string[] = [];
    for (let f = 0; f < 20; f++) {
      lines.push('64', 'Lattice="10.0 0.0 0.0 0.0 10.0 0.0 0.0 0.0 10.0" Properties=species:S:1:pos:R:3:forces:R:3 energy=-12.5 pbc="T T T"');
      for (let a = 0; a < 64; a++) {
        const v = Array.from({ length: 6 }, () => (r() * 20 - 5).toFixed(8).padStart(16));
        lines.push(`${a % 2 ? 'Si' : 'O '}${v.join('')}`);
      }
    }
    const path = put(dir, 'ase.xyz', lines.join('\n') + '\n');
    const before = xyzKernelStats();
    const { fast, ts } = await both(path);
    sameFrames(fast, ts);
    const after = xyzKernelStats();
    expect(after.parsed - before.parsed).toBe(20);
    expect(after.handedBack - before.handedBack).toBe(0);
  });

  it('reads a frame with more than 255 species names and a frame of 20,000 atoms', async () => {
    const many = ['300'];
    many.push('Properties=species:S:1:pos:R:3');
    for (let a = 0; a < 300; a++) many.push(`X${a} ${a} 0 0`);
    const big = ['20000', 'Properties=species:S:1:pos:R:3'];
    const r = rng(5);
    for (let a = 0; a < 20000; a++) big.push(`Ar ${(r() * 50).toFixed(6)} ${(r() * 50).toFixed(6)} ${(r() * 50).toFixed(6)}`);
    const path = put(dir, 'many.xyz', many.join('\n') + '\n' + big.join('\n') + '\n');
    const { fast, ts } = await both(path);
    sameFrames(fast, ts);
    expect(new Set(fast[0].species).size).toBe(300);
    expect((await readAll(path)).length).toBe(2);
  });
});
