import { afterAll, describe, expect, it } from 'vitest';
import { execFileSync } from 'node:child_process';
import { join } from 'node:path';
import { minimumDistance } from '../../../src/atoms/neighbours.js';
import { writeFrames } from '../../../src/atoms/xyz/writer.js';
import { fccCrystal, ljFccLatticeConstant } from '../../../examples/argon/lib/lattice.js';
import { argonLj } from '../../../examples/argon/lib/lj.js';
import { fccLatticeForDensity, meltedLiquid } from '../../../examples/argon/lib/start.js';
import { removeScratch, scratchDir } from './helpers.js';

afterAll(removeScratch);

/** Runs a Python snippet with Debian's python3-ase (an independent cross-check of structures we make). */
function python(code: string, ...args: string[]): string {
  return execFileSync('/usr/bin/python3', ['-c', code, ...args], { encoding: 'utf8' });
}

describe('starting structures', () => {
  it('the fcc crystal matches ASE\'s bulk("Ar", "fcc", cubic=True) repeated 2x2x2, with 12 neighbours at a/sqrt2', async () => {
    // Cross-check with ASE (ase.build.bulk), an independent library, on the file we write.
    const dir = await scratchDir('argon-start-');
    const a = ljFccLatticeConstant(3.405);
    expect(a).toBeCloseTo(5.2497, 3); // sqrt(2) * 1.0902 * 3.405 Å (Kittel's r0, argon sigma)
    const file = join(dir, 'fcc.xyz');
    await writeFrames(file, [fccCrystal('Ar', a, 2)]);
    const out = python(
      `
import sys, numpy as np
from ase.io import read
from ase.build import bulk
from ase.neighborlist import neighbor_list
ours = read(sys.argv[1])
ref = bulk('Ar', 'fcc', a=float(sys.argv[2]), cubic=True).repeat((2, 2, 2))
assert len(ours) == len(ref) == 32
assert np.allclose(ours.cell[:], ref.cell[:], atol=1e-9)
key = lambda p: sorted(map(tuple, np.round(p % np.diag(ref.cell[:]), 6)))
assert key(ours.positions) == key(ref.positions)
i = neighbor_list('i', ours, 4.0)
print(np.bincount(i).min(), np.bincount(i).max())
`,
      file,
      String(a),
    );
    expect(out.trim()).toBe('12 12');
  });

  it('the liquid-like start has the requested density (checked by ASE) and no close contacts', async () => {
    const dir = await scratchDir('argon-start-');
    const frame = meltedLiquid({ symbol: 'Ar', cells: 2, density: 1.4, meltTemperature: 250, meltSteps: 300, temperature: 100, coolSteps: 100, dt: 5, seed: 2, lj: argonLj() });
    // 4 atoms per cubic cell of side a: rho = 4 m / a^3
    expect(fccLatticeForDensity('Ar', 1.4)).toBeGreaterThan(5.7);
    const closest = minimumDistance(frame);
    expect(closest.distance).toBeGreaterThan(2.8); // LJ argon at 250 K does not get closer (u(2.8 Å) is about 28 k_B * 119.8 K)
    const file = join(dir, 'liquid.xyz');
    await writeFrames(file, [frame]);
    // ASE: density = total mass / volume, in g/cm^3 (1 u = 1.66053906660e-24 g, 1 Å^3 = 1e-24 cm^3)
    const rho = python(
      `
import sys
from ase.io import read
at = read(sys.argv[1])
print(at.get_masses().sum() * 1.66053906660 / at.get_volume())
`,
      file,
    );
    // ASE's argon mass is 39.948 u, ratchet's standard atomic weight 39.95 u (IUPAC abridged): 5e-5 relative apart.
    expect(Math.abs(Number(rho) / 1.4 - 1)).toBeLessThan(1e-4);
  });
});
