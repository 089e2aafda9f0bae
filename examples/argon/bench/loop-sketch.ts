/**
 * An in-process sketch of the demo campaign, for sizing it (not the engine, not a test): round 0
 * perturbs the starting structures, then each round trains the committee, runs MD per condition,
 * sorts frames into bands by committee spread, and labels the highest-spread informative frames
 * (a stand-in for the engine's farthest-point selection). Prints per round and condition the
 * confident fraction, runaway count, spread and true error percentiles (meV/Å), and CPU times.
 *
 *   node --import tsx examples/argon/bench/loop-sketch.ts [--cells 2] [--rounds 6] [--steps 2000]
 *        [--write-every 20] [--pick 10] [--lower 0.012] [--upper 0.2] [--perturb 10] [--displacement 0.05]
 *        [--members 4] [--seed 0] [--bootstrap 1|0]
 */
import { parseArgs } from 'node:util';
import { massesOf } from '../../../src/atoms/elements.js';
import type { Frame } from '../../../src/atoms/frame.js';
import { atomSpreads } from '../../../src/gates/committee.js';
import { gaussianBasis } from '../lib/basis.js';
import { committeeForces } from '../lib/committee.js';
import { maxwellBoltzmann, runMd } from '../lib/dynamics.js';
import { fitModel, type LabeledConfig } from '../lib/fit.js';
import { fccCrystal, ljFccLatticeConstant } from '../lib/lattice.js';
import { argonLj, ljEnergyForces } from '../lib/lj.js';
import { createRandom } from '../lib/random.js';
import { meltedLiquid } from '../lib/start.js';

const { values: v } = parseArgs({
  options: Object.fromEntries(
    ['cells', 'rounds', 'steps', 'write-every', 'pick', 'lower', 'upper', 'perturb', 'displacement', 'members', 'seed', 'bootstrap'].map((k) => [k, { type: 'string' as const }]),
  ),
});
const opt = (k: string, d: number) => (v[k] !== undefined ? Number(v[k]) : d);
const cells = opt('cells', 2), rounds = opt('rounds', 6), steps = opt('steps', 2000), every = opt('write-every', 20);
const pick = opt('pick', 10), lower = opt('lower', 0.012), upper = opt('upper', 0.2), perturb = opt('perturb', 10);
const disp = opt('displacement', 0.05), members = opt('members', 4), seed0 = opt('seed', 0), bootstrap = opt('bootstrap', 1) !== 0;
const cpu = () => { const u = process.cpuUsage(); return (u.user + u.system) / 1e6; };

const lj = argonLj();
const label = (f: Frame): LabeledConfig => ({ ...f, ...ljEnergyForces(f, lj) });
const fcc = fccCrystal('Ar', ljFccLatticeConstant(lj.sigma), cells);
const liquid = meltedLiquid({ symbol: 'Ar', cells, density: 1.4, meltTemperature: 250, meltSteps: 2000, temperature: 100, coolSteps: 2000, dt: 5, seed: 1, lj });

/** Round 0: Gaussian displacements and a random symmetric strain (what the engine's sample stage does). */
function perturbed(f: Frame, s: number): Frame {
  const r = createRandom(s);
  const e = [0, 1, 2, 3, 4, 5].map(() => 0.02 * (2 * r.uniform() - 1));
  const m = [1 + e[0], e[5] / 2, e[4] / 2, e[5] / 2, 1 + e[1], e[3] / 2, e[4] / 2, e[3] / 2, 1 + e[2]];
  const apply = (x: Float64Array) => {
    const out = new Float64Array(x.length);
    for (let i = 0; i < x.length; i += 3) for (let c = 0; c < 3; c++) out[i + c] = x[i] * m[c] + x[i + 1] * m[3 + c] + x[i + 2] * m[6 + c];
    return out;
  };
  const g: Frame = { ...f, positions: apply(f.positions), cell: apply(f.cell as Float64Array), arrays: new Map(), info: new Map() };
  for (let i = 0; i < g.positions.length; i++) g.positions[i] += disp * r.normal();
  return g;
}

let data: LabeledConfig[] = [fcc, liquid].flatMap((f, k) => Array.from({ length: perturb }, (_, s) => label(perturbed(f, 1000 * k + s))));
const conditions = [
  { name: '30K', T: 30, start: fcc },
  { name: '60K', T: 60, start: fcc },
  { name: '90K', T: 90, start: liquid },
  { name: '120K', T: 120, start: liquid },
];
console.log(`sketch: ${fcc.species.length} atoms, ${steps} steps x 5 fs per condition, a frame every ${every} steps, <= ${pick} picks per condition, window [${lower}, ${upper}) eV/Å, ${members} members${bootstrap ? ' (bootstrap)' : ''}`);
for (let round = 0; round < rounds; round++) {
  let t = cpu();
  const models = Array.from({ length: members }, (_, m) =>
    fitModel(data, { basis: gaussianBasis(), basisJitter: 1, basisSeed: m, seed: seed0 + 100 * round + m, bootstrap, anchorScale: 0.05, ridge: 1e-3 }).model,
  );
  const trainCpu = cpu() - t;
  t = cpu();
  const picked: Frame[] = [];
  const lines: string[] = [];
  let converged = true;
  for (const c of conditions) {
    const masses = massesOf(c.start.species);
    const rng = createRandom(seed0 + 1000 * round + c.T);
    const sys = { positions: Float64Array.from(c.start.positions), velocities: maxwellBoltzmann(masses, c.T, rng), masses, cell: c.start.cell, pbc: c.start.pbc };
    const compute = committeeForces(models, c.start.species, c.start.cell, c.start.pbc, 'mean');
    const rec: { f: Frame; spread: number; err: number }[] = [];
    const sum = runMd(sys, compute, { dt: 5, steps, interval: every, temperature: c.T, friction: 0.01, minDistance: 2.5, rng }, (s) => {
      const spread = Math.max(...atomSpreads(s.result.extra!.forces, masses.length));
      const f: Frame = { ...c.start, positions: Float64Array.from(s.positions), arrays: new Map(), info: new Map() };
      const ref = ljEnergyForces(f, lj);
      let err = 0;
      for (let i = 0; i < ref.forces.length; i++) err = Math.max(err, Math.abs(ref.forces[i] - s.result.forces[i]));
      rec.push({ f, spread, err: s.stopped ? NaN : err });
    });
    const confident = rec.filter((r) => r.spread < lower).length / rec.length;
    const runaway = rec.filter((r) => r.spread >= upper).length + (sum.reason === 'completed' ? 0 : 1);
    if (confident < 0.99 || runaway > 0) converged = false;
    const informative = rec.filter((r) => r.spread >= lower && r.spread < upper && !Number.isNaN(r.err)).sort((a, b) => b.spread - a.spread);
    picked.push(...informative.slice(0, pick).map((r) => r.f));
    const q = (xs: number[], p: number) => (1000 * xs.sort((a, b) => a - b)[Math.floor(p * (xs.length - 1))]).toFixed(1);
    const errs = rec.map((r) => r.err).filter((e) => !Number.isNaN(e));
    lines.push(
      `  ${c.name.padEnd(5)} confident ${confident.toFixed(2)}  runaway ${runaway}${sum.reason === 'completed' ? '' : ` (stopped: ${sum.reason} at step ${sum.stopStep})`}` +
        `  spread p50/p99 ${q(rec.map((r) => r.spread), 0.5)}/${q(rec.map((r) => r.spread), 0.99)}  max force error p50/max ${errs.length ? `${q(errs, 0.5)}/${q(errs, 1)}` : '-'}  picked ${Math.min(pick, informative.length)}`,
    );
  }
  console.log(`round ${round}: ${data.length} labeled frames; train ${trainCpu.toFixed(1)} s CPU (all members), md ${(cpu() - t).toFixed(1)} s CPU (all conditions, incl. reference checks)${converged ? '  -> CONVERGED' : ''}`);
  console.log(lines.join('\n'));
  if (converged) break;
  data = data.concat(picked.map(label));
}
