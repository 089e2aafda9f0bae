/**
 * Reference labeler of the argon demo: Lennard-Jones energies and forces for every input frame.
 *
 *   npx tsx examples/argon/label.ts --in frames.xyz --out labeled.xyz
 * or, run by the engine, with RATCHET_TASK_JSON (inputs.frames -> outputs.labeled).
 *
 * Each output frame keeps the input's atoms, cell, pbc, info and per-atom arrays, except that info
 * `energy` (eV) and per-atom `forces` (eV/Å) are set to the reference values and anything a model
 * produced (committee arrays forces_<m>, info energy_<m>, total_energy) is dropped.
 */
import { writeFrames } from '../../src/atoms/xyz/writer.js';
import { atomCount, type Frame } from '../../src/atoms/frame.js';
import { labelFrame } from './lib/labeling.js';
import { num, optNum, runProgram, type ProgramSpec } from './lib/cli.js';
import { readAll, requirePeriodicOrFree } from './lib/frames.js';
import { ARGON_EPSILON_K, ARGON_SIGMA, argonLj } from './lib/lj.js';
import { KB_EV_PER_K } from '../../src/atoms/units.js';

const spec: ProgramSpec = {
  name: 'label',
  summary: 'label frames with the Lennard-Jones argon reference (energy in eV, forces in eV/Å)',
  inputs: [{ name: 'frames', aliases: ['structures', 'selected', 'unlabeled'], flag: 'in', multiple: true, help: 'extended XYZ frames to label (several files are concatenated)' }],
  outputs: [{ name: 'labeled', aliases: ['out', 'frames_out'], flag: 'out', help: 'extended XYZ with info energy and per-atom forces' }],
  params: [
    { name: 'epsilon_k', type: 'number', default: ARGON_EPSILON_K, help: 'well depth epsilon/k_B (K)' },
    { name: 'sigma', type: 'number', default: ARGON_SIGMA, help: 'LJ sigma (Å)' },
    { name: 'r_on', type: 'number', help: 'switching start (Å); default 2.5 sigma' },
    { name: 'r_cut', type: 'number', help: 'cutoff (Å); default 3 sigma' },
  ],
};

await runProgram(spec, async (r) => {
  const t0 = performance.now();
  const sigma = num(r, 'sigma');
  const params = argonLj({
    epsilon: num(r, 'epsilon_k') * KB_EV_PER_K,
    sigma,
    rOn: optNum(r, 'r_on') ?? 2.5 * sigma,
    rCut: optNum(r, 'r_cut') ?? 3 * sigma,
  });
  const items = await readAll(r.inputs.frames);
  const out: Frame[] = [];
  let atoms = 0;
  for (const { frame, file, index } of items) {
    requirePeriodicOrFree(frame, file, index);
    out.push(labelFrame(frame, params));
    atoms += atomCount(frame);
  }
  const path = r.outputs.labeled as string;
  await writeFrames(path, out);
  const s = ((performance.now() - t0) / 1000).toFixed(2);
  process.stdout.write(`label: ${out.length} frames (${atoms} atoms) labeled with LJ argon (r_cut ${params.rCut.toFixed(3)} Å) in ${s} s -> ${path}\n`);
});
