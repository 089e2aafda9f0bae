/**
 * Starting structures of the argon demo: the LJ fcc crystal at its equilibrium spacing, and a
 * liquid-like configuration made by melting a crystal at liquid density with the reference potential.
 */
import { atomicMass, massesOf } from '../../../src/atoms/elements.js';
import type { Frame } from '../../../src/atoms/frame.js';
import { numberDensity } from '../../../src/atoms/units.js';
import { maxwellBoltzmann, runMd } from './dynamics.js';
import { realColumn } from './frames.js';
import { fccCrystal } from './lattice.js';
import { ljEnergyForces, type LjParams } from './lj.js';
import { createRandom } from './random.js';

export interface LiquidOptions {
  symbol: string;
  /** Conventional cells per axis (4 n^3 atoms). */
  cells: number;
  /** Mass density (g/cm^3). */
  density: number;
  meltTemperature: number;
  meltSteps: number;
  temperature: number;
  coolSteps: number;
  dt: number;
  seed: number;
  lj: LjParams;
}

/** fcc lattice constant (Å) that gives a mass density (g/cm^3) for an element. */
export function fccLatticeForDensity(symbol: string, density: number): number {
  if (!(density > 0)) throw new RangeError(`density must be positive, got ${density}`);
  return Math.cbrt(4 / numberDensity(density, atomicMass(symbol)));
}

/**
 * A liquid-like configuration: fcc at the given density, Langevin dynamics with the reference
 * potential at meltTemperature, then at temperature; returns the last configuration with velocities.
 */
export function meltedLiquid(o: LiquidOptions): Frame {
  const frame = fccCrystal(o.symbol, fccLatticeForDensity(o.symbol, o.density), o.cells);
  const rng = createRandom(o.seed);
  const masses = massesOf(frame.species);
  const sys = { positions: frame.positions, velocities: maxwellBoltzmann(masses, o.meltTemperature, rng), masses, cell: frame.cell, pbc: frame.pbc };
  const compute = (x: Float64Array) => ljEnergyForces({ positions: x, cell: frame.cell, pbc: frame.pbc }, o.lj);
  const common = { dt: o.dt, interval: 1_000_000, friction: 0.01, minDistance: 0, rng };
  const melt = runMd(sys, compute, { ...common, steps: o.meltSteps, temperature: o.meltTemperature }, () => {});
  if (melt.reason !== 'completed') throw new Error(`melting stopped early (${melt.reason})`);
  const cool = runMd(sys, compute, { ...common, steps: o.coolSteps, temperature: o.temperature }, () => {});
  if (cool.reason !== 'completed') throw new Error(`cooling stopped early (${cool.reason})`);
  frame.arrays.set('velocities', realColumn(Float64Array.from(sys.velocities)));
  return frame;
}
