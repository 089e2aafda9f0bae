/** Shared helpers for the argon demo tests: invented configurations (random, seeded). */
import type { Frame } from '../../../src/atoms/frame.js';
import { cellFromParameters, wrapPositions } from '../../../src/atoms/cell.js';
import { fccCrystal } from '../../../examples/argon/lib/lattice.js';
import { createRandom } from '../../../examples/argon/lib/random.js';

/** Atoms placed at random in a cell with no two (or images) closer than dmin (random sequential addition). */
export function randomPacking(cell: Float64Array, count: number, dmin: number, seed: number): Frame {
  const rng = createRandom(seed);
  const pos: number[] = [];
  const lattice = [-1, 0, 1];
  let tries = 0;
  while (pos.length < 3 * count) {
    if (++tries > 100000) throw new Error('could not place atoms');
    const s = [rng.uniform(), rng.uniform(), rng.uniform()];
    const x = [0, 1, 2].map((c) => s[0] * cell[c] + s[1] * cell[3 + c] + s[2] * cell[6 + c]);
    let ok = true;
    for (let j = 0; j < pos.length && ok; j += 3) {
      for (const n0 of lattice) for (const n1 of lattice) for (const n2 of lattice) {
        const d = [0, 1, 2].map((c) => pos[j + c] + n0 * cell[c] + n1 * cell[3 + c] + n2 * cell[6 + c] - x[c]);
        if (Math.hypot(d[0], d[1], d[2]) < dmin) ok = false;
      }
    }
    if (ok) pos.push(...x);
  }
  return {
    species: new Array<string>(count).fill('Ar'),
    positions: Float64Array.from(pos),
    cell,
    pbc: [true, true, true],
    arrays: new Map(),
    info: new Map(),
  };
}

/** A skewed triclinic cell (angles down to 55 degrees). */
export function skewedCell(): Float64Array {
  return cellFromParameters(11.5, 12.5, 13.0, 75, 62, 55);
}

/** fcc argon with random displacements (Å, Gaussian per component) and a random cell strain. */
export function rattledFcc(a: number, n: number, displacement: number, strain: number, seed: number): Frame {
  const f = fccCrystal('Ar', a, n);
  const rng = createRandom(seed);
  const e = [0, 1, 2, 3, 4, 5].map(() => strain * rng.normal());
  // symmetric strain (Voigt order xx, yy, zz, yz, xz, xy)
  const m = [1 + e[0], e[5] / 2, e[4] / 2, e[5] / 2, 1 + e[1], e[3] / 2, e[4] / 2, e[3] / 2, 1 + e[2]];
  const apply = (v: Float64Array) => {
    for (let i = 0; i < v.length; i += 3) {
      const x = v[i], y = v[i + 1], z = v[i + 2];
      v[i] = x * m[0] + y * m[3] + z * m[6];
      v[i + 1] = x * m[1] + y * m[4] + z * m[7];
      v[i + 2] = x * m[2] + y * m[5] + z * m[8];
    }
  };
  apply(f.positions);
  apply(f.cell as Float64Array);
  for (let i = 0; i < f.positions.length; i++) f.positions[i] += displacement * rng.normal();
  f.positions = wrapPositions(f.cell, f.pbc, f.positions);
  return f;
}

/** Central finite-difference forces -dE/dx of an energy function. */
export function finiteDifferenceForces(positions: Float64Array, energy: (x: Float64Array) => number, h = 1e-5): Float64Array {
  const out = new Float64Array(positions.length);
  const x = Float64Array.from(positions);
  for (let i = 0; i < x.length; i++) {
    const x0 = x[i];
    x[i] = x0 + h;
    const ep = energy(x);
    x[i] = x0 - h;
    const em = energy(x);
    x[i] = x0;
    out[i] = -(ep - em) / (2 * h);
  }
  return out;
}

export function maxAbsDiff(a: ArrayLike<number>, b: ArrayLike<number>): number {
  let m = 0;
  for (let i = 0; i < a.length; i++) m = Math.max(m, Math.abs(a[i] - b[i]));
  return m;
}

export function maxAbs(a: ArrayLike<number>): number {
  let m = 0;
  for (let i = 0; i < a.length; i++) m = Math.max(m, Math.abs(a[i]));
  return m;
}

const scratch: string[] = [];

/** A fresh temporary directory, removed by removeScratch() (call it in afterAll). */
export async function scratchDir(prefix: string): Promise<string> {
  const { mkdtemp } = await import('node:fs/promises');
  const { tmpdir } = await import('node:os');
  const { join } = await import('node:path');
  const dir = await mkdtemp(join(tmpdir(), prefix));
  scratch.push(dir);
  return dir;
}

export async function removeScratch(): Promise<void> {
  const { rm } = await import('node:fs/promises');
  await Promise.all(scratch.splice(0).map((d) => rm(d, { recursive: true, force: true })));
}
