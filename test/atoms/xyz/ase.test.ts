/**
 * Cross-check with an independent reader and writer: ASE's extended XYZ module (Debian python3-ase,
 * ase/io/extxyz.py, run with /usr/bin/python3). Structures we make are written by our writer and read by
 * ASE; structures ASE makes are written by ASE and read by us. Skipped, with a message, only when
 * /usr/bin/python3 cannot import ase (CI installs it).
 */
import { spawnSync } from 'node:child_process';
import { join } from 'node:path';
import { describe, expect, it } from 'vitest';
import type { AtomColumn, Frame, InfoValue } from '../../../src/atoms/frame.js';
import { writeFrames } from '../../../src/atoms/xyz/writer.js';
import { readAll, rng, sameDouble, tempDir } from './helpers.js';

const PYTHON = '/usr/bin/python3';
const hasAse = spawnSync(PYTHON, ['-c', 'import ase'], { encoding: 'utf8' }).status === 0;
if (!hasAse) console.warn(`skipping the ASE cross-checks: ${PYTHON} cannot import ase (install python3-ase)`);

function python(code: string, ...args: string[]): unknown {
  const r = spawnSync(PYTHON, ['-c', code, ...args], { encoding: 'utf8', maxBuffer: 1 << 26 });
  if (r.status !== 0) throw new Error(`python failed: ${r.stderr}`);
  return JSON.parse(r.stdout);
}

/** ASE reads the file; we get per frame: symbols, positions, cell rows, pbc, energy, forces, some arrays and info. */
const ASE_READ = `
import sys, json
import ase.io
out = []
for a in ase.io.read(sys.argv[1], index=':', format='extxyz'):
    calc = a.calc
    out.append({
        'symbols': a.get_chemical_symbols(),
        'positions': a.get_positions().tolist(),
        'cell': a.cell.array.tolist(),
        'pbc': [bool(x) for x in a.pbc],
        'energy': calc.get_potential_energy() if calc is not None and 'energy' in calc.results else None,
        'forces': calc.results['forces'].tolist() if calc is not None and 'forces' in calc.results else None,
        'weight': a.arrays['weight'].tolist() if 'weight' in a.arrays else None,
        'info': {k: (v.tolist() if hasattr(v, 'tolist') else v) for k, v in a.info.items() if k in ('note', 'temperature', 'step', 'flag', 'tags')},
    })
print(json.dumps(out))
`;

interface AseFrame {
  symbols: string[];
  positions: number[][];
  cell: number[][];
  pbc: boolean[];
  energy: number | null;
  forces: number[][] | null;
  weight: number[] | null;
  info: Record<string, unknown>;
}

function expectBits(got: ArrayLike<number>, want: ArrayLike<number>, what: string) {
  expect(got.length, what).toBe(want.length);
  for (let i = 0; i < want.length; i++) if (!sameDouble(got[i], want[i])) expect.fail(`${what}[${i}]: ${got[i]} vs ${want[i]}`);
}

describe.skipIf(!hasAse)('ASE cross-check', () => {
  const dir = tempDir();

  it('ASE reads what we write: positions, cell, pbc, energy, forces, arrays and info, bit for bit', async () => {
    const r = rng(99);
    const frames: Frame[] = [];
    const cells = [
      [5, 0, 0, 0, 5, 0, 0, 0, 5],
      // skewed triclinic cell
      [4.2, 0, 0, 2.1, 3.9, 0, 1.3, -0.7, 6.1],
      null,
    ];
    for (let k = 0; k < 3; k++) {
      const n = 5 + k;
      const rnd = (m: number, s: number) => Float64Array.from({ length: m }, () => (r() - 0.5) * s);
      frames.push({
        species: Array.from({ length: n }, (_, a) => ['Si', 'O', 'H', 'Fe'][a % 4]),
        positions: rnd(3 * n, 10),
        cell: cells[k] ? Float64Array.from(cells[k]!) : null,
        pbc: k === 1 ? [true, true, false] : cells[k] ? [true, true, true] : [false, false, false],
        arrays: new Map<string, AtomColumn>([
          ['forces', { type: 'R', width: 3, values: rnd(3 * n, 2) }],
          ['weight', { type: 'R', width: 1, values: rnd(n, 1) }],
        ]),
        info: new Map<string, InfoValue>([
          ['energy', -10 * n + r()],
          ['note', `frame "${k}" = test, a b`],
          ['temperature', 300.25],
          ['step', k],
          ['flag', true],
          ['tags', [1, 2, 3]],
        ]),
      });
    }
    const path = join(dir, 'ours.xyz');
    await writeFrames(path, frames);
    const ase = python(ASE_READ, path) as AseFrame[];
    expect(ase.length).toBe(3);
    ase.forEach((a, k) => {
      const f = frames[k];
      expect(a.symbols).toEqual(f.species);
      expectBits(a.positions.flat(), f.positions, `frame ${k} positions`);
      expectBits(a.cell.flat(), f.cell ?? new Float64Array(9), `frame ${k} cell`);
      expect(a.pbc).toEqual(f.pbc);
      expect(sameDouble(a.energy!, f.info.get('energy') as number)).toBe(true);
      expectBits(a.forces!.flat(), f.arrays.get('forces')!.values as Float64Array, `frame ${k} forces`);
      expectBits(a.weight!, f.arrays.get('weight')!.values as Float64Array, `frame ${k} weight`);
      expect(a.info).toEqual({ note: `frame "${k}" = test, a b`, temperature: 300.25, step: k, flag: true, tags: [1, 2, 3] });
    });
  });

  it('we read what ASE writes: a rattled silicon crystal, a slab and a molecule with energy and forces', async () => {
    const path = join(dir, 'ase.xyz');
    const made = python(
      `
import sys, json
import numpy as np
from ase.build import bulk, molecule, fcc111
from ase.calculators.singlepoint import SinglePointCalculator
import ase.io
rng = np.random.RandomState(42)
images = []
si = bulk('Si', 'diamond', a=5.431, cubic=True)
si.rattle(0.05, seed=1)
images.append(si)
slab = fcc111('Cu', size=(2, 2, 3), vacuum=6.0)
images.append(slab)
images.append(molecule('H2O'))
for k, a in enumerate(images):
    a.calc = SinglePointCalculator(a, energy=-3.5 * len(a) + 0.125 * k, forces=rng.normal(size=(len(a), 3)))
    a.info['note'] = 'made by ase %d' % k
ase.io.write(sys.argv[1], images, format='extxyz')
print(json.dumps([{'positions': a.get_positions().tolist(), 'cell': a.cell.array.tolist(), 'pbc': [bool(x) for x in a.pbc]} for a in images]))
`,
      path,
    ) as { positions: number[][]; cell: number[][]; pbc: boolean[] }[];
    const ase = python(ASE_READ, path) as AseFrame[];
    const ours = await readAll(path);
    expect(ours.length).toBe(3);
    ours.forEach((f, k) => {
      const a = ase[k];
      expect(f.species).toEqual(a.symbols);
      // the same decimal text, parsed by ASE (numpy) and by us: identical doubles
      expectBits(f.positions, a.positions.flat(), `frame ${k} positions`);
      expectBits(f.cell ?? new Float64Array(9), a.cell.flat(), `frame ${k} cell`);
      expect(f.pbc).toEqual(a.pbc);
      expect(f.info.get('energy')).toBe(a.energy);
      expectBits(f.arrays.get('forces')!.values as Float64Array, a.forces!.flat(), `frame ${k} forces`);
      expect(f.info.get('note')).toBe(`made by ase ${k}`);
      // and ASE wrote positions with 8 decimals: within 5e-9 of the structure it made
      const orig = made[k].positions.flat();
      for (let i = 0; i < orig.length; i++) expect(Math.abs(f.positions[i] - orig[i])).toBeLessThanOrEqual(5e-9);
      expect(f.pbc).toEqual(made[k].pbc);
    });
    expect(ours[2].cell).toBeNull();
    expect(ours[1].pbc).toEqual([true, true, false]);
  });
});
