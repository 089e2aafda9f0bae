/**
 * CPU time of the argon demo's physics in one process (no start-up): reference labeling per frame,
 * fitting per member, committee MD per step (4 members), for 32 and 108 atoms.
 *
 *   node --import tsx examples/argon/bench/physics-cpu.ts
 */
import { massesOf } from '../../../src/atoms/elements.js';
import { gaussianBasis } from '../lib/basis.js';
import { committeeForces } from '../lib/committee.js';
import { maxwellBoltzmann, runMd } from '../lib/dynamics.js';
import { fitModel, type LabeledConfig } from '../lib/fit.js';
import { fccCrystal, ljFccLatticeConstant } from '../lib/lattice.js';
import { argonLj, ljEnergyForces } from '../lib/lj.js';
import { createRandom } from '../lib/random.js';

const cpu = () => {
  const u = process.cpuUsage();
  return (u.user + u.system) / 1000;
};
const lj = argonLj();
const a = ljFccLatticeConstant(lj.sigma);
for (const n of [2, 3]) {
  const rng = createRandom(n);
  const frames = Array.from({ length: 40 }, () => {
    const f = fccCrystal('Ar', a, n);
    for (let i = 0; i < f.positions.length; i++) f.positions[i] += 0.1 * rng.normal();
    return f;
  });
  frames.slice(0, 5).forEach((f) => ljEnergyForces(f, lj)); // warm-up
  let t = cpu();
  const data: LabeledConfig[] = frames.map((f) => ({ ...f, ...ljEnergyForces(f, lj) }));
  const label = (cpu() - t) / frames.length;
  fitModel(data.slice(0, 5), { basis: gaussianBasis(), seed: 9, bootstrap: true, basisJitter: 1 }); // warm-up
  t = cpu();
  const models = [0, 1, 2, 3].map((m) => fitModel(data, { basis: gaussianBasis(), seed: m, basisSeed: m, bootstrap: true, basisJitter: 1, anchorScale: 0.05, ridge: 1e-3 }).model);
  const train = (cpu() - t) / 4;
  const f = frames[0];
  const masses = massesOf(f.species);
  const sys = { positions: Float64Array.from(f.positions), velocities: maxwellBoltzmann(masses, 60, rng), masses, cell: f.cell, pbc: f.pbc };
  const compute = committeeForces(models, f.species, f.cell, f.pbc, 'mean');
  const md = { dt: 5, interval: 20, temperature: 60, friction: 0.01, minDistance: 2.5, rng };
  runMd(sys, compute, { ...md, steps: 200 }, () => {}); // warm-up
  t = cpu();
  runMd(sys, compute, { ...md, steps: 2000 }, () => {});
  const step = (cpu() - t) / 2000;
  console.log(
    `${String(f.species.length).padStart(3)} atoms: label ${label.toFixed(2)} ms/frame | train ${train.toFixed(0)} ms per member on 40 frames | ` +
      `md ${step.toFixed(2)} ms/step with 4 members (${(step * 2).toFixed(1)} s per 2000 steps)`,
  );
}
